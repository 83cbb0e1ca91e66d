"""Builders: shapes, named layers, clipping, projection, pruning, counts, private RNG."""

import math

import numpy as np
import pytest
import torch

from manireg.nets import (
    ClipOutput,
    apply_masks,
    build_conv_network,
    build_network,
    count_nonzero_weights,
    count_parameters,
    project_weights,
    prune_to_budget,
)
from manireg.theory import size_network


@pytest.fixture
def spec():
    return size_network(1000, 2, 1, ambient_dim=8, output_bound=0.5)


def test_named_layers_and_count(spec):
    net = build_network(spec, seed=0)
    names = [n for n, _ in net.named_children()]
    assert names[0] == "standardize" and names[-1] == "clip" and "hidden1" in names and "output" in names
    assert count_parameters(net) == spec.n_parameters == sum(p.numel() for p in net.parameters())


def test_global_rng_untouched_and_seeded(spec):
    state = torch.random.get_rng_state()
    a, b = build_network(spec, seed=3), build_network(spec, seed=3)
    assert torch.equal(state, torch.random.get_rng_state())
    for p, q in zip(a.parameters(), b.parameters()):
        assert torch.equal(p, q)
    c = build_network(spec, seed=4)
    assert not torch.equal(a.hidden1.weight, c.hidden1.weight)


def test_clipping(spec):
    net = build_network(spec, seed=0, target_scale=(0.0, 100.0))
    with torch.no_grad():
        out = net(torch.randn(256, 8) * 10)
    assert out.shape == (256,)
    assert float(out.abs().max()) <= 0.5 + 1e-7
    assert float(ClipOutput(math.inf)(torch.tensor([1e9]))) == 1e9


def test_standardize_buffers(spec):
    mean, std = np.arange(8.0), np.full(8, 2.0)
    net = build_network(spec, seed=0, standardize=(mean, std))
    plain = build_network(spec, seed=0)
    x = torch.randn(5, 8)
    torch.testing.assert_close(net(x * 2 + torch.arange(8.0)), plain(x))
    assert "standardize.mean" in net.state_dict()


def test_projection(spec):
    net = build_network(spec, seed=0)
    with torch.no_grad():
        net.hidden1.weight.mul_(50)
    largest = project_weights(net, 0.05)
    assert largest <= 0.05 * (1 + 1e-6)  # float32 rounding of the bound
    assert max(float(p.detach().abs().max()) for n, p in net.named_parameters() if n.endswith("weight")) <= 0.05 * (1 + 1e-6)


def test_pruning(spec):
    net = build_network(spec, seed=0)
    masks = prune_to_budget(net, 300)
    assert count_nonzero_weights(net) <= 300
    with torch.no_grad():
        for p in net.parameters():
            p.add_(1.0)  # an "optimiser step" that would revive pruned weights
    apply_masks(net, masks)
    assert count_nonzero_weights(net) <= 300
    # a budget above the dense count keeps everything
    net2 = build_network(spec, seed=0)
    prune_to_budget(net2, 10**9)
    assert count_nonzero_weights(net2) == spec.n_weights


@pytest.mark.parametrize("shape", [(64,), (2, 32), (1, 8, 8), (3, 4, 4)])
def test_conv_network(shape):
    D = int(np.prod(shape))
    spec = size_network(2000, 2, 1, ambient_dim=D, output_bound=1.0)
    state = torch.random.get_rng_state()
    net = build_conv_network(spec, shape, seed=1)
    assert torch.equal(state, torch.random.get_rng_state())
    x = torch.randn(7, D)
    y = net(x).detach()
    assert y.shape == (7,) and float(y.abs().max()) <= 1.0
    assert torch.equal(y, net(x.reshape(7, *shape)))
    again = build_conv_network(spec, shape, seed=1)
    assert torch.equal(y, again(x))
    assert count_parameters(net) == sum(p.numel() for p in net.parameters())
    prune_to_budget(net, 100)
    assert count_nonzero_weights(net) <= 100


def test_bad_inputs(spec):
    with pytest.raises(ValueError, match=r"'spec' parameter of build_network must be an ArchitectureSpec"):
        build_network({"width": 3})
    with pytest.raises(ValueError, match=r"'seed' parameter of init_parameters must be a non-negative int"):
        build_network(spec, seed=-1)
    with pytest.raises(ValueError, match=r"'input_shape' parameter of build_conv_network must have prod"):
        build_conv_network(spec, (3, 3))
    with pytest.raises(ValueError, match=r"'bound' parameter of project_weights must be a finite real > 0"):
        project_weights(build_network(spec, seed=0), 0)
    with pytest.raises(ValueError, match=r"'k' parameter of prune_to_budget must be an int >= 1"):
        prune_to_budget(build_network(spec, seed=0), 0)
    with pytest.raises(ValueError, match=r"'std' of Standardize must be finite and > 0"):
        build_network(spec, seed=0, standardize=(0.0, 0.0))
