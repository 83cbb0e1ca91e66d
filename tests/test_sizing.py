"""Sizing rules against hand-computed values and monotonicity properties."""

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from manireg.nets import build_network, count_parameters
from manireg.theory import ArchitectureSpec, SizingConstants, dense_parameter_count, size_network


def test_hand_computed_defaults():
    # d=2, s=1: n^(d/(2s+d)) = sqrt(n). n=1e4: depth ceil(0.5 log 1e4)=ceil(4.605)=5, width ceil(2*100)=200,
    # budget ceil(16*100*log 1e4)=ceil(14736.3)=14737 (derived by hand from the documented rules).
    spec = size_network(10_000, 2, 1, ambient_dim=10)
    assert (spec.depth, spec.width, spec.nonzero_budget) == (5, 200, 14737)
    assert spec.n_parameters == (10 + 1) * 200 + 4 * 201 * 200 + 201
    assert "clipped to [16, 512]" in spec.rules["width"]
    assert set(spec.rules) >= {"depth", "width", "nonzero_budget", "weight_bound", "output_bound", "n_parameters"}


def test_clipping_bounds():
    small = size_network(2, 1, 5, ambient_dim=3)
    assert small.depth == 2 and small.width == 16
    big = size_network(10**7, 20, 0.5, ambient_dim=64)
    assert big.depth == 8 and big.width == 512


def test_cpu_sane_range():
    # Documented promise: n in [1e2, 1e5] gives width in [16, 512] and depth in [2, 8].
    for n in (100, 1000, 10_000, 100_000):
        for d, s in ((1, 1), (2, 1), (4, 2), (8, 1)):
            spec = size_network(n, d, s, ambient_dim=64)
            assert 16 <= spec.width <= 512 and 2 <= spec.depth <= 8


def test_width_multiplier_and_constants():
    base = size_network(1000, 2, 1, ambient_dim=10)
    wide = size_network(1000, 2, 1, ambient_dim=10, width_multiplier=2.0)
    assert wide.width == min(512, math.ceil(2 * 2 * 1000**0.5))
    assert wide.width > base.width
    c = SizingConstants(c_width=1.0, width_min=4)
    assert size_network(100, 2, 1, ambient_dim=10, constants=c).width == 10


@pytest.mark.parametrize("n,d,s,D", [(100, 1, 1, 3), (5000, 2, 1, 64), (50_000, 3, 2, 20)])
def test_parameter_count_equals_torch(n, d, s, D):
    spec = size_network(n, d, s, ambient_dim=D)
    net = build_network(spec, seed=0)
    assert spec.n_parameters == count_parameters(net) == sum(p.numel() for p in net.parameters())


@settings(max_examples=40, deadline=None)
@given(n=st.integers(2, 10**6), factor=st.floats(1.0, 100.0), d=st.integers(1, 10), s=st.floats(0.1, 5))
def test_width_nondecreasing_in_n(n, factor, d, s):
    a = size_network(n, d, s, ambient_dim=16)
    b = size_network(n * factor, d, s, ambient_dim=16)
    assert b.width >= a.width and b.depth >= a.depth


@settings(max_examples=40, deadline=None)
@given(n=st.integers(2, 10**6), d=st.integers(1, 10), s=st.floats(0.1, 5), ds=st.floats(0.0, 5))
def test_width_nonincreasing_in_s(n, d, s, ds):
    assert size_network(n, d, s + ds, ambient_dim=16).width <= size_network(n, d, s, ambient_dim=16).width


def test_spec_dict_and_frame():
    spec = size_network(1000, 2, 1, ambient_dim=10)
    dct = spec.to_dict()
    assert dct["width"] == spec.width and isinstance(dct["rules"], dict)
    assert spec.to_frame().shape[0] == 1


def test_bad_inputs():
    with pytest.raises(ValueError, match=r"'d' parameter of size_network must be <= ambient_dim=3"):
        size_network(1000, 5, 1, ambient_dim=3)
    with pytest.raises(ValueError, match=r"'s' parameter of regression_exponent must be a finite real > 0"):
        size_network(1000, 2, 0, ambient_dim=3)
    with pytest.raises(ValueError, match=r"'n' parameter of size_network must be a number of samples >= 2; got 1"):
        size_network(1, 2, 1, ambient_dim=3)
    with pytest.raises(ValueError, match=r"'c_width' parameter of SizingConstants must be a finite real > 0"):
        SizingConstants(c_width=-1.0)
    with pytest.raises(ValueError, match=r"'width_max' parameter of SizingConstants must be an int >= 16"):
        SizingConstants(width_max=8)
    with pytest.raises(ValueError, match=r"'n_parameters' parameter of ArchitectureSpec must equal the dense count"):
        ArchitectureSpec(input_dim=3, depth=2, width=4, nonzero_budget=10, n_parameters=5)
    with pytest.raises(ValueError, match=r"'constants' parameter of size_network must be a SizingConstants"):
        size_network(100, 1, 1, ambient_dim=3, constants={"c_width": 1})
    assert dense_parameter_count(3, 2, 4) == 4 * 4 + 5 * 4 + 5


def test_sizing_table_matches_size_network_and_rates():
    import numpy as np

    from manireg.plots import plot_sizing
    from manireg.theory import size_network, sizing_table

    t = sizing_table(np.geomspace(100, 1e5, 4), d=2, s=1, ambient_dim=64)
    f = t.to_frame()
    assert list(f["width"]) == [size_network(n, 2, 1, 64).width for n in f["n"]]
    # predicted error n^(-2s/(2s+d)) with 2s/(2s+d) = 0.5 for s=1, d=2 (REFERENCES.md exponent table)
    np.testing.assert_allclose(f["predicted_error"], f["n"] ** -0.5)
    np.testing.assert_allclose(f["predicted_error_ambient"], f["n"] ** (-2 / 66))
    assert plot_sizing(t).axes


def test_sizing_table_rejects_empty_grid():
    import pytest

    from manireg.theory import sizing_table

    with pytest.raises(ValueError, match="at least one sample size"):
        sizing_table([], 2, 1, 10)
