"""ReLU networks built from an :class:`~manireg.theory.ArchitectureSpec`.

Every builder takes a seed and draws its initial weights from its own ``torch.Generator``: the global
torch random state is never read or advanced. Layers are named (``hidden1`` ... ``hiddenL``, ``output``)
so state dicts are readable and stable.

References
----------
.. [1] J. Schmidt-Hieber, "Nonparametric regression using deep neural networks with ReLU activation
   function", Ann. Statist. 48 (2020).
.. [2] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
.. [3] H. Liu, M. Chen, T. Zhao, W. Liao, "Besov function approximation and binary classification on
   low-dimensional manifolds using convolutional residual networks", ICML 2021.
.. [4] K. He, X. Zhang, S. Ren, J. Sun, "Delving deep into rectifiers", ICCV 2015 (initialisation).
"""

from __future__ import annotations

import math
import numbers
from collections import OrderedDict

import numpy as np
import torch
from torch import nn

from manireg.theory.sizing import ArchitectureSpec

__all__ = [
    "Standardize",
    "ClipOutput",
    "OutputScale",
    "ReLUNetwork",
    "ResidualConvNetwork",
    "build_network",
    "build_conv_network",
    "init_parameters",
    "project_weights",
    "prune_to_budget",
    "magnitude_masks",
    "clamp_weights",
    "apply_masks",
    "count_parameters",
    "count_nonzero_weights",
]


def _generator(seed, owner: str) -> torch.Generator:
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or seed < 0:
        raise ValueError(
            f"the 'seed' parameter of {owner} must be a non-negative int or None; got {seed!r}. Pass e.g. seed=0."
        )
    g = torch.Generator()
    g.manual_seed(int(seed))
    return g


def _check_spec(spec, owner: str) -> ArchitectureSpec:
    if not isinstance(spec, ArchitectureSpec):
        raise ValueError(
            f"the 'spec' parameter of {owner} must be an ArchitectureSpec; got {type(spec).__name__}. "
            "Build one with manireg.theory.size_network(n, d, s, input_dim)."
        )
    return spec


def init_parameters(spec: ArchitectureSpec, seed=None):
    """Initial weights for the dense network of ``spec``, as float32 ``(W, b)`` pairs with ``W`` (in, out).

    Every weight matrix is Glorot-uniform, ``U(-sqrt(6/(fan_in+fan_out)), sqrt(6/(fan_in+fan_out)))`` [4]_
    (scikit-learn's MLP initialisation); biases start at zero. On the benchmark problems it gave lower
    test error than He-uniform hidden layers (``sqrt(6/fan_in)``) with the short cosine schedule of
    :class:`~manireg.nets.training.TrainConfig`: the smaller start keeps the first, large Adam steps from
    fitting noise. Draws come from a
    private ``torch.Generator`` seeded with ``seed``, in layer order. The batched trainer and
    :func:`build_network` both use this function, so a seed gives the same network in both.

    Parameters
    ----------
    spec : ArchitectureSpec
    seed : int or None

    Returns
    -------
    list of (torch.Tensor, torch.Tensor)
        ``depth + 1`` pairs ``(W (fan_in, fan_out), b (fan_out,))``.

    References
    ----------
    .. [4] X. Glorot, Y. Bengio, AISTATS 2010.
    """
    spec = _check_spec(spec, "init_parameters")
    g = _generator(seed, "init_parameters")
    sizes = [spec.input_dim] + [spec.width] * spec.depth + [1]
    out = []
    for i in range(len(sizes) - 1):
        fan_in, fan_out = sizes[i], sizes[i + 1]
        bound = math.sqrt(6.0 / (fan_in + fan_out))
        W = (torch.rand(fan_in, fan_out, generator=g, dtype=torch.float32) * 2.0 - 1.0) * bound
        b = torch.zeros(fan_out, dtype=torch.float32)
        out.append((W, b))
    return out


class Standardize(nn.Module):
    """``(x - mean) / std`` with ``mean`` and ``std`` stored as buffers (saved, not trained)."""

    def __init__(self, mean, std):
        super().__init__()
        mean = torch.as_tensor(np.asarray(mean, dtype=np.float32))
        std = torch.as_tensor(np.asarray(std, dtype=np.float32))
        if torch.any(std <= 0) or not torch.all(torch.isfinite(std)):
            raise ValueError(
                "the 'std' of Standardize must be finite and > 0 everywhere; got a zero, negative or "
                "non-finite entry. Replace the std of constant columns by 1."
            )
        self.register_buffer("mean", mean.clone())
        self.register_buffer("std", std.clone())

    def forward(self, x):
        return (x - self.mean) / self.std


class OutputScale(nn.Module):
    """Map the network's (m, 1) output to target units: ``mean + scale * out``, shape (m,)."""

    def __init__(self, mean=0.0, scale=1.0):
        super().__init__()
        if not (float(scale) > 0 and math.isfinite(float(scale))):
            raise ValueError(f"the 'scale' parameter of OutputScale must be a finite real > 0; got {scale!r}.")
        self.register_buffer("mean", torch.tensor(float(mean), dtype=torch.float32))
        self.register_buffer("scale", torch.tensor(float(scale), dtype=torch.float32))

    def forward(self, x):
        return self.mean + self.scale * x.squeeze(-1)

    def extra_repr(self):
        return f"mean={float(self.mean):.4g}, scale={float(self.scale):.4g}"


class ClipOutput(nn.Module):
    """Clip the output into ``[-bound, bound]`` (no-op for ``bound = inf``).

    The estimators analysed in [1]_ [2]_ are truncated at a known bound on the regression function;
    clipping can only lower the squared error of a target that respects the bound.
    """

    def __init__(self, bound=math.inf):
        super().__init__()
        bound = float(bound)
        if not bound > 0:
            raise ValueError(
                f"the 'bound' parameter of ClipOutput must be > 0 (inf for no clipping); got {bound!r}."
            )
        self.bound = bound

    def forward(self, x):
        if math.isinf(self.bound):
            return x
        return torch.clamp(x, -self.bound, self.bound)

    def extra_repr(self):
        return f"bound={self.bound:g}"


class ReLUNetwork(nn.Sequential):
    """Dense ReLU network: ``standardize -> (hidden_i -> relu_i) x depth -> output -> rescale -> clip``.

    Input (m, D), output (m,). Build it with :func:`build_network`.
    """

    def hidden_layers(self):
        """The hidden ``nn.Linear`` layers, in order."""
        return [m for name, m in self.named_children() if name.startswith("hidden")]

    def linear_layers(self):
        """Hidden layers followed by the output layer."""
        return self.hidden_layers() + [self.output]


def _standardize_module(standardize, dim: int, owner: str) -> Standardize:
    if standardize is None:
        return Standardize(np.zeros(dim), np.ones(dim))
    try:
        mean, std = standardize
    except (TypeError, ValueError):
        raise ValueError(
            f"the 'standardize' parameter of {owner} must be a (mean, std) pair or None; got {standardize!r}."
        ) from None
    mean = np.broadcast_to(np.asarray(mean, dtype=np.float64), (dim,))
    std = np.broadcast_to(np.asarray(std, dtype=np.float64), (dim,))
    return Standardize(mean, std)


def build_network(spec, seed=None, standardize=None, target_scale=None) -> ReLUNetwork:
    """A dense ReLU network of the shape in ``spec``, with input standardisation and output clipping.

    Parameters
    ----------
    spec : ArchitectureSpec
        Shape (``input_dim``, ``depth`` hidden layers of ``width`` units) and ``output_bound``.
    seed : int or None
        Seed of the private generator used for the initial weights (see :func:`init_parameters`).
    standardize : (mean, std) or None
        Per-feature (or scalar) input mean and std, stored as buffers; None means identity.
    target_scale : (mean, scale) or None
        Output affine map to target units; None means identity.

    Returns
    -------
    ReLUNetwork
        Modules ``standardize``, ``hidden1``/``relu1`` ... , ``output``, ``rescale``, ``clip``.
        ``count_parameters(net) == spec.n_parameters``.

    References
    ----------
    .. [1] J. Schmidt-Hieber, Ann. Statist. 48 (2020).
    .. [2] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).

    Examples
    --------
    >>> from manireg.theory import size_network
    >>> net = build_network(size_network(1000, 2, 1, ambient_dim=10), seed=0)
    >>> net(torch.zeros(3, 10)).shape
    torch.Size([3])
    """
    spec = _check_spec(spec, "build_network")
    params = init_parameters(spec, seed)
    layers = OrderedDict()
    layers["standardize"] = _standardize_module(standardize, spec.input_dim, "build_network")
    for i, (W, b) in enumerate(params):
        lin = nn.utils.skip_init(nn.Linear, W.shape[0], W.shape[1])
        with torch.no_grad():
            lin.weight.copy_(W.T)
            lin.bias.copy_(b)
        if i < spec.depth:
            layers[f"hidden{i + 1}"] = lin
            layers[f"relu{i + 1}"] = nn.ReLU()
        else:
            layers["output"] = lin
    mean, scale = (0.0, 1.0) if target_scale is None else target_scale
    layers["rescale"] = OutputScale(mean, scale)
    layers["clip"] = ClipOutput(spec.output_bound)
    return ReLUNetwork(layers)


class _ResidualBlock(nn.Module):
    def __init__(self, conv, channels, stride, generator):
        super().__init__()
        self.conv1 = conv(channels, channels, 3, stride=stride, padding=1)
        self.conv2 = conv(channels, channels, 3, stride=1, padding=1)
        self.skip = conv(channels, channels, 1, stride=stride, bias=False) if stride != 1 else nn.Identity()
        for m in (self.conv1, self.conv2):
            fan_in = m.weight[0].numel()
            with torch.no_grad():
                m.weight.copy_((torch.rand(m.weight.shape, generator=generator) * 2 - 1) * math.sqrt(6.0 / fan_in))
                m.bias.zero_()
        with torch.no_grad():
            self.conv2.weight.mul_(0.5)  # residual branch starts small: a near-identity block
        if isinstance(self.skip, nn.Module) and hasattr(self.skip, "weight"):
            fan_in = self.skip.weight[0].numel()
            with torch.no_grad():
                self.skip.weight.copy_(
                    (torch.rand(self.skip.weight.shape, generator=generator) * 2 - 1) * math.sqrt(3.0 / fan_in)
                )

    def forward(self, x):
        return torch.relu(self.skip(x) + self.conv2(torch.relu(self.conv1(x))))


class ResidualConvNetwork(nn.Module):
    """Small residual convolutional ReLU network for 1-D ``(C, L)`` or 2-D ``(C, H, W)`` inputs.

    Accepts input of shape (m, D) with ``D = prod(input_shape)`` or (m, *input_shape); output (m,), or
    (m, K) class scores (no rescaling or clipping) when built with ``n_outputs = K > 1``.
    Layers: ``standardize`` (on the flattened input), ``stem`` conv, ``block1`` ... residual blocks
    (stride 2 while the spatial size is >= 4), global average ``pool``, ``head`` (linear, ReLU, linear),
    ``rescale``, ``clip``.
    """

    def __init__(self, spec, input_shape, channels, n_blocks, generator, standardize=None, target_scale=None,
                 n_outputs=1):
        super().__init__()
        self.n_outputs = int(n_outputs)
        self.input_shape = tuple(int(v) for v in input_shape)
        two_d = len(self.input_shape) == 3
        conv = nn.Conv2d if two_d else nn.Conv1d
        pool = nn.AdaptiveAvgPool2d(1) if two_d else nn.AdaptiveAvgPool1d(1)
        self.standardize = _standardize_module(standardize, spec.input_dim, "build_conv_network")
        c_in = self.input_shape[0]
        self.stem = nn.utils.skip_init(conv, c_in, channels, 3, padding=1)
        with torch.no_grad():
            fan_in = self.stem.weight[0].numel()
            self.stem.weight.copy_((torch.rand(self.stem.weight.shape, generator=generator) * 2 - 1) * math.sqrt(6.0 / fan_in))
            self.stem.bias.zero_()
        blocks = []
        spatial = min(self.input_shape[1:])
        for _ in range(n_blocks):
            stride = 2 if spatial >= 4 else 1
            spatial = (spatial + 1) // 2 if stride == 2 else spatial
            blocks.append(_ResidualBlock(lambda *a, **k: nn.utils.skip_init(conv, *a, **k), channels, stride, generator))
        self.blocks = nn.Sequential(OrderedDict((f"block{i + 1}", b) for i, b in enumerate(blocks)))
        self.pool = pool
        hidden = nn.utils.skip_init(nn.Linear, channels, spec.width)
        out = nn.utils.skip_init(nn.Linear, spec.width, self.n_outputs)
        with torch.no_grad():
            hidden.weight.copy_((torch.rand(hidden.weight.shape, generator=generator) * 2 - 1) * math.sqrt(6.0 / channels))
            hidden.bias.zero_()
            out.weight.copy_((torch.rand(out.weight.shape, generator=generator) * 2 - 1) / math.sqrt(spec.width))
            out.bias.zero_()
        self.head = nn.Sequential(OrderedDict([("hidden", hidden), ("relu", nn.ReLU()), ("output", out)]))
        mean, scale = (0.0, 1.0) if target_scale is None else target_scale
        self.rescale = OutputScale(mean, scale)
        self.clip = ClipOutput(spec.output_bound)

    def forward(self, x):
        m = x.shape[0]
        x = self.standardize(x.reshape(m, -1)).reshape(m, *self.input_shape)
        x = self.blocks(torch.relu(self.stem(x)))
        x = self.pool(x).reshape(m, -1)
        if self.n_outputs > 1:
            return self.head(x)  # (m, K) class scores: no rescaling or clipping
        return self.clip(self.rescale(self.head(x)))


def build_conv_network(spec, input_shape, seed=None, standardize=None, target_scale=None, *, channels=None,
                       n_blocks=None, n_outputs=1) -> ResidualConvNetwork:
    """A residual convolutional ReLU network for image-shaped input, sized from the same spec.

    Channels ``= clip(spec.width // 4, 8, 64)``; residual blocks ``= max(1, spec.depth - 1)``; the head is a
    hidden layer of ``spec.width`` units. Residual convolutional nets attain manifold rates too [3]_.
    ``channels`` and ``n_blocks`` replace the two rules when given (the conv sizing rule of
    :func:`manireg.theory.sizing.size_conv_network` gives both); ``n_outputs = K > 1`` gives K class scores.
    Weights are drawn in module order (stem, blocks, head) from one generator seeded with ``seed``, so a
    seed gives the same network in :class:`manireg.nets.conv.BatchedConvTrainer`.

    Parameters
    ----------
    spec : ArchitectureSpec
        ``spec.input_dim`` must equal ``prod(input_shape)``.
    input_shape : tuple of int
        ``(L,)`` or ``(C, L)`` for 1-D signals, ``(C, H, W)`` for images.
    seed : int or None
        Seed of the private generator for the initial weights.
    standardize, target_scale : pairs or None
        As in :func:`build_network`.

    Returns
    -------
    ResidualConvNetwork

    References
    ----------
    .. [3] H. Liu, M. Chen, T. Zhao, W. Liao, ICML 2021.
    """
    owner = "build_conv_network"
    spec = _check_spec(spec, owner)
    try:
        shape = tuple(int(v) for v in input_shape)
    except (TypeError, ValueError):
        raise ValueError(
            f"the 'input_shape' parameter of {owner} must be a tuple of ints (L,), (C, L) or (C, H, W); "
            f"got {input_shape!r}."
        ) from None
    if len(shape) == 1:
        shape = (1,) + shape
    if len(shape) not in (2, 3) or min(shape) < 1:
        raise ValueError(
            f"the 'input_shape' parameter of {owner} must be (L,), (C, L) or (C, H, W) with positive sizes; "
            f"got {input_shape!r}. For a grey image of 32x32 pixels pass (1, 32, 32)."
        )
    if int(np.prod(shape)) != spec.input_dim:
        raise ValueError(
            f"the 'input_shape' parameter of {owner} must have prod(input_shape) == spec.input_dim = "
            f"{spec.input_dim}; got {input_shape!r} (product {int(np.prod(shape))}). Size the spec with "
            "input_dim equal to the number of pixels times channels."
        )
    for name, v in (("channels", channels), ("n_blocks", n_blocks), ("n_outputs", n_outputs)):
        if v is not None and (isinstance(v, bool) or not isinstance(v, numbers.Integral) or v < 1):
            raise ValueError(f"the '{name}' parameter of {owner} must be an int >= 1 or None; got {v!r}.")
    g = _generator(seed, owner)
    channels = int(np.clip(spec.width // 4, 8, 64)) if channels is None else int(channels)
    n_blocks = max(1, spec.depth - 1) if n_blocks is None else int(n_blocks)
    return ResidualConvNetwork(spec, shape, channels, n_blocks, g, standardize, target_scale, int(n_outputs or 1))


def _weight_params(model: nn.Module):
    return [(name, p) for name, p in model.named_parameters() if p.ndim >= 2 and name.endswith("weight")]


@torch.no_grad()
def clamp_weights(weights, bound: float) -> None:
    """Clamp every entry of each tensor in ``weights`` into ``[-bound, bound]``, in place (no checks).

    The one projection both :func:`project_weights` (a module's weights) and the batched trainer (stacked
    replica weights, after every step) apply.
    """
    for W in weights:
        W.clamp_(-bound, bound)


@torch.no_grad()
def magnitude_masks(weights, k: int) -> list:
    """Keep-masks of global magnitude pruning, one replica per row of stacked weights (no checks).

    ``weights`` is a list of tensors whose first axis runs over replicas, (R, ...). For each replica the
    ``min(k, entries)`` largest absolute entries over all its tensors are kept (ties broken by ``topk``, so
    exactly that many). Returns one mask per tensor, with its shape and dtype: 1 where kept, 0 where pruned.
    This is the one ranking both :func:`prune_to_budget` (R = 1) and the batched trainer use.
    """
    R = weights[0].shape[0]
    flat = torch.cat([W.detach().abs().reshape(R, -1) for W in weights], dim=1)
    k = min(k, flat.shape[1])
    keep = torch.zeros_like(flat, dtype=torch.bool)
    keep.scatter_(1, torch.topk(flat, k, dim=1, sorted=False).indices, True)
    masks, start = [], 0
    for W in weights:
        size = W[0].numel()
        masks.append(keep[:, start:start + size].reshape(W.shape).to(W.dtype))
        start += size
    return masks


@torch.no_grad()
def project_weights(model: nn.Module, bound: float) -> float:
    """Project every weight-matrix (and conv kernel) entry into ``[-bound, bound]``, in place.

    This is the entrywise max norm (each entry is clamped; biases are left alone), the parameter bound
    used for the network classes of [1]_ [2]_. Clamping entrywise is the Euclidean projection onto that
    set, so it can be applied after every optimiser step.

    Parameters
    ----------
    model : nn.Module
    bound : float
        > 0.

    Returns
    -------
    float
        The largest absolute weight entry after projection (<= bound).

    References
    ----------
    .. [1] J. Schmidt-Hieber, Ann. Statist. 48 (2020).
    """
    if not (isinstance(bound, numbers.Real) and bound > 0 and math.isfinite(bound)):
        raise ValueError(f"the 'bound' parameter of project_weights must be a finite real > 0; got {bound!r}.")
    weights = [p for _, p in _weight_params(model)]
    clamp_weights(weights, bound)
    return max(float(p.abs().max()) for p in weights)


@torch.no_grad()
def prune_to_budget(model: nn.Module, k: int) -> dict:
    """Magnitude pruning: keep the ``k`` largest-magnitude weight-matrix entries, zero the rest, in place.

    The ranking is global over all weight matrices and conv kernels (biases are not pruned or counted).
    Sparse networks with ``~ n^(d/(2s+d)) log n`` nonzero weights are the class of [1]_.

    Parameters
    ----------
    model : nn.Module
    k : int
        Number of nonzero weights to keep, >= 1.

    Returns
    -------
    dict of str to torch.Tensor
        Boolean keep-masks by parameter name; pass them to :func:`apply_masks` after each optimiser step
        to keep pruned weights at zero.

    Raises
    ------
    RuntimeError
        If the count check after pruning fails (more than ``k`` nonzeros remain).

    References
    ----------
    .. [1] J. Schmidt-Hieber, Ann. Statist. 48 (2020).
    """
    if isinstance(k, bool) or not isinstance(k, numbers.Integral) or k < 1:
        raise ValueError(f"the 'k' parameter of prune_to_budget must be an int >= 1; got {k!r}.")
    params = _weight_params(model)
    if k >= sum(p.numel() for _, p in params):
        return {name: p != 0 for name, p in params}
    masks = {}
    for (name, p), m in zip(params, magnitude_masks([p[None] for _, p in params], k)):
        m = m[0] != 0
        p.mul_(m)
        masks[name] = m
    nnz = count_nonzero_weights(model)
    if nnz > k:  # pragma: no cover - a guard, topk keeps exactly k
        raise RuntimeError(f"prune_to_budget left {nnz} nonzero weights, more than the budget k={k}.")
    return masks


@torch.no_grad()
def apply_masks(model: nn.Module, masks: dict) -> None:
    """Zero the pruned entries again (after an optimiser step)."""
    named = dict(model.named_parameters())
    for name, m in masks.items():
        named[name].mul_(m)


def count_parameters(model: nn.Module, trainable_only: bool = False) -> int:
    """``sum(p.numel())`` over the model's parameters (buffers excluded)."""
    return int(sum(p.numel() for p in model.parameters() if p.requires_grad or not trainable_only))


def count_nonzero_weights(model: nn.Module) -> int:
    """Nonzero weight-matrix and kernel entries (biases excluded)."""
    return int(sum(int(torch.count_nonzero(p)) for _, p in _weight_params(model)))
