"""Network size for a sample size: depth ~ log n, width ~ n^(d/(2s+d)), nonzero weights ~ width * log n.

The orders come from the statistical theory of deep ReLU regression on manifolds [1]_ [2]_; the constants
in front of them are not given by the theory in a usable form, so they are explicit, documented and
adjustable in :class:`SizingConstants`. Every number is clipped into bounds that are themselves
constants, so a sizing rule never produces a network that cannot be trained on a CPU.

References
----------
.. [1] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022), arXiv:1908.01842.
.. [2] J. Schmidt-Hieber, Ann. Statist. 48 (2020).
.. [3] R. Nakada, M. Imaizumi, JMLR 21 (2020).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from manireg._params import check_params, integer, real
from manireg._results import ResultMixin
from manireg._validation import check_float, check_int
from manireg.theory.rates import regression_exponent

__all__ = ["SizingConstants", "ArchitectureSpec", "SizingTable", "size_network", "sizing_table", "dense_parameter_count",
           "ConvArchitectureSpec", "size_conv_network", "conv_parameter_count",
           "TrainingBudget", "training_budget", "width_capped"]


@dataclass(frozen=True)
class SizingConstants:
    """Constants of the sizing rules, with the bounds every rule is clipped into.

    The defaults were chosen so that sample sizes from 1e2 to 1e5 give networks that train on a CPU in
    seconds to minutes: with ``d=2, s=1`` the width runs from 20 (n=100) to 512 (clipped, n >= 65,536)
    and the depth from 3 to 6 hidden layers.

    Attributes
    ----------
    c_depth : float, default=0.5
        Hidden layers ``= ceil(c_depth * log n)``. log n runs from 4.6 to 11.5 for n in [1e2, 1e5], so
        the default gives 3 to 6 hidden layers: deep enough for the log n growth to show, shallow enough
        that plain Adam trains without normalisation layers.
    depth_min, depth_max : int, default=2, 8
        Bounds on the number of hidden layers.
    c_width : float, default=2.0
        Width ``= ceil(c_width * n^(d/(2s+d)))``. With d=2, s=1 this is ``2 sqrt(n)``: 20 at n=100,
        200 at n=1e4, close to the number of effective local pieces the theory asks for.
    width_min, width_max : int, default=16, 512
        Bounds on the width. Below 16 units ReLU nets often lose units to dead ReLUs; above 512 a
        dense layer costs more than a CPU step budget allows at n ~ 1e5.
    c_nonzero : float, default=16.0
        Nonzero-weight budget ``K = ceil(c_nonzero * n^(d/(2s+d)) * log n)``, clipped to
        [``nonzero_min``, dense weight count]. For d=2, s=1, n=1e4 this is ~14,700 nonzeros, about a
        tenth of the dense network: magnitude pruning to this budget removes most weights while
        keeping the fit.
    nonzero_min : int, default=256
        Lower bound on the budget.
    weight_bound : float, default=4.0
        Bound on the absolute value of every weight-matrix entry (entrywise max norm; the theory bounds
        all parameters by a constant [2]_). Trained nets on standardised inputs rarely exceed 2, so the
        default is only active when training drifts.
    output_bound : float, default=inf
        Output clipping bound used when :func:`size_network` is given none; ``inf`` means no clipping.
        :class:`manireg.nets.NetworkRegressor` sets it from the data.
    """

    c_depth: float = 0.5
    depth_min: int = 2
    depth_max: int = 8
    c_width: float = 2.0
    width_min: int = 16
    width_max: int = 512
    c_nonzero: float = 16.0
    nonzero_min: int = 256
    weight_bound: float = 4.0
    output_bound: float = math.inf

    def __post_init__(self):
        check_params(vars(self), SIZING_RULES, owner="SizingConstants")  # checks only: the values stay as given


#: What each :class:`SizingConstants` field may hold; the upper bounds of depth and width may not lie
#: below their lower bounds.
SIZING_RULES = {
    "c_depth": real(0.0, low_open=True),
    "depth_min": integer(1),
    "depth_max": integer("depth_min"),
    "c_width": real(0.0, low_open=True),
    "width_min": integer(1),
    "width_max": integer("width_min"),
    "c_nonzero": real(0.0, low_open=True),
    "nonzero_min": integer(1),
    "weight_bound": real(0.0, low_open=True),
    "output_bound": real(0, low_open=True, finite=False, note="inf for no clipping"),
}


@dataclass
class ArchitectureSpec(ResultMixin):
    """Shape and bounds of a ReLU network, with the rule that produced each number.

    Attributes
    ----------
    input_dim : int
        Number of input features D.
    depth : int
        Number of hidden layers.
    width : int
        Units per hidden layer.
    nonzero_budget : int
        Nonzero weight-matrix entries allowed when pruning (biases are not counted or pruned).
    weight_bound : float
        Entrywise bound on weight-matrix entries when projecting.
    output_bound : float
        Clipping bound on the output (``inf``: no clipping).
    n_parameters : int
        Exact number of parameters (weights and biases) of the dense network of this shape; equals
        ``sum(p.numel() for p in build_network(spec).parameters())``.
    rules : dict
        Which rule produced each number, in words.
    n, d, s : float or None
        The inputs the spec was sized from (None when built by hand).
    """

    input_dim: int
    depth: int
    width: int
    nonzero_budget: int
    weight_bound: float = 4.0
    output_bound: float = math.inf
    n_parameters: int = -1
    rules: dict = field(default_factory=dict)
    n: float | None = None
    d: float | None = None
    s: float | None = None

    def __post_init__(self):
        owner = "ArchitectureSpec"
        check_int(self.input_dim, "input_dim", owner=owner, low=1)
        check_int(self.depth, "depth", owner=owner, low=1)
        check_int(self.width, "width", owner=owner, low=1)
        check_int(self.nonzero_budget, "nonzero_budget", owner=owner, low=1)
        check_float(self.weight_bound, "weight_bound", owner=owner, low=0.0, low_open=True)
        if not (self.output_bound > 0):
            raise ValueError(
                f"the 'output_bound' parameter of ArchitectureSpec must be > 0 (inf for no clipping); "
                f"got {self.output_bound!r}."
            )
        exact = dense_parameter_count(self.input_dim, self.depth, self.width)
        if self.n_parameters == -1:
            self.n_parameters = exact
        elif self.n_parameters != exact:
            raise ValueError(
                f"the 'n_parameters' parameter of ArchitectureSpec must equal the dense count {exact} for "
                f"input_dim={self.input_dim}, depth={self.depth}, width={self.width}; got {self.n_parameters}. "
                "Leave it out and it is computed."
            )

    @property
    def hidden_sizes(self) -> tuple:
        """Hidden layer sizes as a tuple, e.g. for scikit-learn's ``MLPRegressor(hidden_layer_sizes=...)``."""
        return (self.width,) * self.depth

    @property
    def n_weights(self) -> int:
        """Number of weight-matrix entries (parameters without biases)."""
        return dense_weight_count(self.input_dim, self.depth, self.width)

    def replace(self, **changes) -> "ArchitectureSpec":
        """A copy with some fields changed (``n_parameters`` is recomputed)."""
        changes.setdefault("n_parameters", -1)
        return dataclasses.replace(self, **changes)


def dense_weight_count(input_dim: int, depth: int, width: int) -> int:
    """Weight-matrix entries of a dense net: ``D*w + (depth-1)*w*w + w``."""
    return input_dim * width + (depth - 1) * width * width + width


def dense_parameter_count(input_dim: int, depth: int, width: int) -> int:
    """Weights plus biases of a dense ReLU net with ``depth`` hidden layers of ``width`` units and one output.

    ``(D+1)*w + (depth-1)*(w+1)*w + (w+1)``.
    """
    return dense_weight_count(input_dim, depth, width) + depth * width + 1


def size_network(n, d, s, ambient_dim, constants=None, width_multiplier=1.0, output_bound=None) -> ArchitectureSpec:
    """Size a ReLU network for ``n`` samples of an ``s``-smooth target on a ``d``-dimensional manifold.

    Rules (``a = d / (2s + d)``; all clipped into the bounds of ``constants``):

    - depth ``= ceil(c_depth * log n)`` in [depth_min, depth_max];
    - width ``= ceil(width_multiplier * c_width * n^a)`` in [width_min, width_max];
    - nonzero budget ``= ceil(c_nonzero * n^a * log n)`` in [nonzero_min, dense weight count];
    - weight bound ``= constants.weight_bound``; output bound as given, else ``constants.output_bound``.

    These are the orders of the estimator analysed by Chen, Jiang, Liao and Zhao [1]_ (and, for sparse
    nets in R^d, Schmidt-Hieber [2]_), which attains the rate ``n^(-2s/(2s+d))`` up to log factors.

    Parameters
    ----------
    n : int
        Number of training samples, >= 2.
    d : float
        Intrinsic dimension, >= 1 and <= ``ambient_dim``.
    s : float
        Hölder smoothness of the target, > 0.
    ambient_dim : int
        Ambient dimension D (columns of X).
    constants : SizingConstants, optional
        Constants and bounds; the documented defaults when None.
    width_multiplier : float, default=1.0
        Extra factor on the width (before clipping), for over-parameterisation campaigns.
    output_bound : float, optional
        Output clipping bound; ``constants.output_bound`` (default ``inf``) when None.

    Returns
    -------
    ArchitectureSpec

    Raises
    ------
    ValueError
        For ``n < 2``, ``d < 1``, ``s <= 0``, ``d > ambient_dim`` or a bad constant.

    References
    ----------
    .. [1] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
    .. [2] J. Schmidt-Hieber, Ann. Statist. 48 (2020).

    Examples
    --------
    >>> spec = size_network(10_000, d=2, s=1, ambient_dim=10)
    >>> spec.depth, spec.width
    (5, 200)
    """
    owner = "size_network"
    c = SizingConstants() if constants is None else constants
    if not isinstance(c, SizingConstants):
        raise ValueError(
            f"the 'constants' parameter of {owner} must be a SizingConstants or None; got {type(c).__name__}. "
            "Build one with SizingConstants(c_width=...)."
        )
    if isinstance(n, (bool, np.bool_)) or not isinstance(n, (int, float, np.integer, np.floating)) or not (
        np.isfinite(n) and n >= 2
    ):
        raise ValueError(
            f"the 'n' parameter of {owner} must be a number of samples >= 2; got {n!r}. "
            "Pass the training-set size."
        )
    ambient_dim = check_int(ambient_dim, "ambient_dim", owner=owner, low=1)
    b = regression_exponent(d, s)  # validates d >= 1 and s > 0
    if d > ambient_dim:
        raise ValueError(
            f"the 'd' parameter of {owner} must be <= ambient_dim={ambient_dim} (an intrinsic dimension cannot "
            f"exceed the ambient one); got d={d!r}. Check that d and ambient_dim are not swapped."
        )
    width_multiplier = check_float(width_multiplier, "width_multiplier", owner=owner, low=0.0, low_open=True)
    given = output_bound is not None
    if output_bound is None:
        output_bound = c.output_bound
    elif not (isinstance(output_bound, (int, float, np.integer, np.floating)) and output_bound > 0):
        raise ValueError(
            f"the 'output_bound' parameter of {owner} must be a real > 0 (inf for no clipping) or None; "
            f"got {output_bound!r}."
        )
    a = 1.0 - b  # d / (2s + d)
    n = float(n)
    logn = math.log(n)
    depth = int(np.clip(math.ceil(c.c_depth * logn), c.depth_min, c.depth_max))
    width = int(np.clip(math.ceil(width_multiplier * c.c_width * n**a), c.width_min, c.width_max))
    dense_w = dense_weight_count(ambient_dim, depth, width)
    budget = int(np.clip(math.ceil(c.c_nonzero * n**a * logn), min(c.nonzero_min, dense_w), dense_w))
    wm = "" if width_multiplier == 1.0 else f"{width_multiplier:g} * "
    rules = {
        "depth": f"depth = ceil({c.c_depth:g} * log n) clipped to [{c.depth_min}, {c.depth_max}]",
        "width": (
            f"width = ceil({wm}{c.c_width:g} * n^(d/(2s+d))) clipped to [{c.width_min}, {c.width_max}]"
        ),
        "nonzero_budget": (
            f"nonzero_budget = ceil({c.c_nonzero:g} * n^(d/(2s+d)) * log n) clipped to "
            f"[{min(c.nonzero_min, dense_w)}, {dense_w}] (dense weight count)"
        ),
        "weight_bound": f"weight_bound = SizingConstants.weight_bound = {c.weight_bound:g} (entrywise)",
        "output_bound": f"output_bound = {float(output_bound):g}"
        + (" (given)" if given else " (SizingConstants.output_bound)"),
        "n_parameters": "n_parameters = (D+1)*w + (depth-1)*(w+1)*w + (w+1) (dense count)",
    }
    return ArchitectureSpec(
        input_dim=ambient_dim,
        depth=depth,
        width=width,
        nonzero_budget=budget,
        weight_bound=float(c.weight_bound),
        output_bound=float(output_bound),
        rules=rules,
        n=n,
        d=float(d),
        s=float(s),
    )


@dataclass
class SizingTable(ResultMixin):
    """The sizing rule evaluated over a grid of n, with the predicted errors beside it.

    ``predicted_error`` is ``n^(-2s/(2s+d))`` and ``predicted_error_ambient`` is ``n^(-2s/(2s+D))``, both
    without constants or log factors (reference lines, not forecasts).
    """

    d: float
    s: float
    ambient_dim: int
    exponent: float
    ambient_exponent: float
    specs: list

    def to_frame(self):
        import pandas as pd

        rows = []
        for spec in self.specs:
            rows.append({
                "n": spec.n, "depth": spec.depth, "width": spec.width, "nonzero_budget": spec.nonzero_budget,
                "n_parameters": spec.n_parameters,
                "predicted_error": spec.n ** (-self.exponent),
                "predicted_error_ambient": spec.n ** (-self.ambient_exponent),
            })
        return pd.DataFrame(rows)


def sizing_table(n_grid, d, s, ambient_dim, constants=None, width_multiplier=1.0) -> SizingTable:
    """:func:`size_network` at every n of ``n_grid`` (e.g. ``np.geomspace(1e2, 1e5, 13)``)."""
    from manireg.theory.rates import ambient_exponent

    grid = np.atleast_1d(np.asarray(n_grid, dtype=float))
    if grid.size == 0:
        raise ValueError("the 'n_grid' parameter of sizing_table must hold at least one sample size; got an empty grid.")
    specs = [size_network(float(n), d, s, ambient_dim, constants=constants, width_multiplier=width_multiplier) for n in grid]
    return SizingTable(float(d), float(s), int(ambient_dim), float(regression_exponent(d, s)),
                       float(ambient_exponent(ambient_dim, s)), specs)


# ---------------------------------------------------------------------------- convolutional nets
@dataclass
class ConvArchitectureSpec(ResultMixin):
    """Shape of a residual convolutional net for image input (:func:`size_conv_network`).

    Attributes
    ----------
    input_shape : (C, H, W)
    channels : int
        Channels of the stem and of every residual block.
    n_blocks : int
        Residual blocks (each: two 3x3 convolutions; stride 2 while the spatial size is >= 4).
    head : ArchitectureSpec
        The dense part's spec: ``head.width`` units in the hidden layer of the head,
        ``head.input_dim = C*H*W``, ``head.output_bound`` the output clipping (regression) and
        ``head.weight_bound`` the entrywise weight bound. :func:`manireg.nets.build_conv_network` takes it
        with ``channels`` and ``n_blocks``.
    n_outputs : int
        1 for regression, K for K classes.
    n_parameters : int
        Weights and biases of the network (equals ``count_parameters(build_conv_network(...))``).
    rules : dict
        Which rule produced each number, in words.
    """

    input_shape: tuple
    channels: int
    n_blocks: int
    head: ArchitectureSpec
    n_outputs: int = 1
    n_parameters: int = -1
    rules: dict = field(default_factory=dict)

    def __post_init__(self):
        self.input_shape = tuple(int(v) for v in self.input_shape)
        self.n_parameters = conv_parameter_count(self.input_shape, self.channels, self.n_blocks, self.head.width,
                                                 self.n_outputs)

    @property
    def strides(self) -> tuple:
        """Stride of each residual block: 2 while the smaller spatial side is >= 4, then 1."""
        out, spatial = [], min(self.input_shape[1:])
        for _ in range(self.n_blocks):
            stride = 2 if spatial >= 4 else 1
            spatial = (spatial + 1) // 2 if stride == 2 else spatial
            out.append(stride)
        return tuple(out)


def conv_parameter_count(input_shape, channels, n_blocks, head_width, n_outputs=1) -> int:
    """Weights plus biases of the residual conv net: stem ``9 C c + c``, each block ``2 (9 c^2 + c)`` plus a
    ``c^2`` 1x1 skip when it strides, head ``(c + 1) w + (w + 1) K``."""
    C, c, w = int(input_shape[0]), int(channels), int(head_width)
    spatial, total = min(int(v) for v in input_shape[1:]), 9 * C * c + c
    for _ in range(int(n_blocks)):
        stride = 2 if spatial >= 4 else 1
        spatial = (spatial + 1) // 2 if stride == 2 else spatial
        total += 2 * (9 * c * c + c) + (c * c if stride == 2 else 0)
    return total + (c + 1) * w + (w + 1) * int(n_outputs)


def size_conv_network(n, d, s, input_shape, constants=None, *, c_channels=1.0, channels_min=8, channels_max=32,
                      n_outputs=1, output_bound=None) -> ConvArchitectureSpec:
    """Size a residual convolutional net for ``n`` images on a ``d``-dimensional manifold, ``s``-smooth target.

    The orders are those of :func:`size_network` (``a = d / (2s + d)``), with explicit constants:

    - residual blocks ``= depth - 1`` with ``depth = ceil(c_depth * log n)`` in [depth_min, depth_max] of
      ``constants`` (so the net grows like log n, as the dense net does);
    - channels ``= ceil(c_channels * n^a)`` clipped to [``channels_min``, ``channels_max``]. With the
      defaults (1.0, 8, 32) and d = 2, s = 1 this is ``sqrt(n)``: 10 channels at n = 100, 32 from
      n = 1024 on. The cap keeps a training step of a 16 x 16 image on a CPU at a few milliseconds;
    - the head's hidden width is the dense rule's width (``size_network``);
    - the entrywise weight bound and the output bound as in :func:`size_network`.

    Residual convolutional nets of depth ~ log n and width ~ n^a reach the manifold rates for regression
    and classification [1]_; the constants in front are ours.

    Parameters
    ----------
    n, d, s : as in :func:`size_network`.
    input_shape : (H, W) or (C, H, W)
        Image shape; ``C*H*W`` is the ambient dimension.
    constants : SizingConstants, optional
    c_channels, channels_min, channels_max : float, int, int
        The channel rule's constant and bounds.
    n_outputs : int, default=1
        K for K classes.
    output_bound : float, optional
        Output clipping (regression); as in :func:`size_network`.

    Returns
    -------
    ConvArchitectureSpec

    References
    ----------
    .. [1] H. Liu, M. Chen, T. Zhao, W. Liao, "Besov function approximation and binary classification on
       low-dimensional manifolds using convolutional residual networks", ICML 2021.

    Examples
    --------
    >>> spec = size_conv_network(1000, 2, 1, (16, 16))
    >>> spec.input_shape, spec.channels, spec.n_blocks, spec.strides
    ((1, 16, 16), 32, 3, (2, 2, 2))
    """
    owner = "size_conv_network"
    try:
        shape = tuple(int(v) for v in input_shape)
    except (TypeError, ValueError):
        raise ValueError(f"the 'input_shape' parameter of {owner} must be (H, W) or (C, H, W) ints; "
                         f"got {input_shape!r}.") from None
    if len(shape) == 2:
        shape = (1,) + shape
    if len(shape) != 3 or min(shape) < 1:
        raise ValueError(f"the 'input_shape' parameter of {owner} must be (H, W) or (C, H, W) with positive sizes; "
                         f"got {input_shape!r}. For grey 16x16 images pass (16, 16).")
    c_channels = check_float(c_channels, "c_channels", owner=owner, low=0.0, low_open=True)
    channels_min = check_int(channels_min, "channels_min", owner=owner, low=1)
    channels_max = check_int(channels_max, "channels_max", owner=owner, low=channels_min)
    n_outputs = check_int(n_outputs, "n_outputs", owner=owner, low=1)
    head = size_network(n, d, s, int(np.prod(shape)), constants=constants, output_bound=output_bound)
    a = 1.0 - regression_exponent(d, s)
    channels = int(np.clip(math.ceil(c_channels * float(n) ** a), channels_min, channels_max))
    n_blocks = max(1, head.depth - 1)
    rules = {
        "n_blocks": f"n_blocks = depth - 1 with {head.rules['depth']}",
        "channels": f"channels = ceil({c_channels:g} * n^(d/(2s+d))) clipped to [{channels_min}, {channels_max}]",
        "head_width": head.rules["width"],
        "n_parameters": "stem 9*C*c + c, per block 2*(9*c^2 + c) (+ c^2 skip when strided), head (c+1)*w + (w+1)*K",
    }
    return ConvArchitectureSpec(shape, channels, n_blocks, head, n_outputs, rules=rules)


def width_capped(n, d, s, constants=None, width_multiplier=1.0) -> bool:
    """True when the width rule ``ceil(width_multiplier * c_width * n^(d/(2s+d)))`` exceeds ``width_max``, i.e.
    :func:`size_network` clipped the width at its upper bound (the net is narrower than the rule asks)."""
    c = SizingConstants() if constants is None else constants
    a = 1.0 - regression_exponent(d, s)
    return bool(math.ceil(float(width_multiplier) * c.c_width * float(n) ** a) > c.width_max)


@dataclass(frozen=True)
class TrainingBudget:
    """How many optimiser steps and which learning rate a campaign net gets, from its data and its size.

    Rules (documented with the measured search behind them in docs/theory.md):

    - steps per epoch ``= ceil(n_fit / rows)`` with ``rows = n_fit`` (full batch, ``n_fit <=
      full_batch_threshold``) or ``batch_size``;
    - ``max_steps = multiplier * clip(ceil(epochs * steps per epoch), steps_min, steps_max)``: a small data set
      gets at least ``steps_min`` steps (a full-batch net is not cut off after a few dozen epochs), a large one
      sees its data ``epochs`` times up to ``steps_max``;
    - learning rate ``= lr_base * min(1, lr_width_ref / width) ** lr_width_power``: nets wider than
      ``lr_width_ref`` take smaller steps, narrower ones keep ``lr_base`` (``lr_width_power = 0``: one rate for
      every width);
    - ``patience_steps`` and ``min_steps`` are at least ``patience_fraction * max_steps``, so a long cosine
      schedule is not stopped while its learning rate is still high.

    Attributes
    ----------
    epochs : float, default=20
        Passes over the fitted rows.
    steps_min, steps_max : int, default=500, 4000
        Floor and ceiling of the step budget (before ``multiplier``).
    lr_base : float, default=1e-2
        Peak Adam learning rate at width ``lr_width_ref``.
    lr_width_ref : int, default=64
    lr_width_power : float, default=1
    patience_fraction : float, default=0.2
    multiplier : float, default=1
        Factor on the whole step budget (the budget check trains with 2 and 4).
    """

    epochs: float = 20.0
    steps_min: int = 500
    steps_max: int = 4000
    lr_base: float = 1e-2
    lr_width_ref: int = 64
    lr_width_power: float = 1.0
    patience_fraction: float = 0.2
    multiplier: float = 1.0

    def __post_init__(self):
        check_params(vars(self), BUDGET_RULES, owner="TrainingBudget")


#: What each :class:`TrainingBudget` field may hold.
BUDGET_RULES = {
    "epochs": real(0.0, low_open=True),
    "steps_min": integer(1),
    "steps_max": integer("steps_min"),
    "lr_base": real(0.0, low_open=True),
    "lr_width_ref": integer(1),
    "lr_width_power": real(0.0, 2.0),
    "patience_fraction": real(0.0, 1.0),
    "multiplier": real(0.0, low_open=True),
}


def training_budget(n_fit, width, *, batch_size=128, full_batch_threshold=256, budget=None) -> dict:
    """Steps, learning rate and patience of one net by the rules of :class:`TrainingBudget`.

    Parameters
    ----------
    n_fit : int
        Rows the net is fitted on (a cell's n minus its validation part).
    width : int
        Hidden width of the net.
    batch_size, full_batch_threshold : int
        The trainer's settings (:class:`manireg.nets.training.TrainConfig`).
    budget : TrainingBudget, optional

    Returns
    -------
    dict
        ``max_steps``, ``learning_rate``, ``patience_steps``, ``min_steps`` (for ``TrainConfig``), and
        ``epochs`` (passes over the fitted rows the step budget allows) and ``rule`` (in words).

    Examples
    --------
    >>> training_budget(200, 32)["max_steps"]     # full batch: 20 epochs are 20 steps, the floor wins
    500
    >>> training_budget(12800, 200)["max_steps"]  # 100 minibatch steps per epoch, 20 epochs
    2000
    """
    b = TrainingBudget() if budget is None else budget
    if not isinstance(b, TrainingBudget):
        raise ValueError(f"the 'budget' parameter of training_budget must be a TrainingBudget or None; got "
                         f"{type(b).__name__}. Build one with TrainingBudget(epochs=...).")
    n_fit = check_int(n_fit, "n_fit", owner="training_budget", low=1)
    width = check_int(width, "width", owner="training_budget", low=1)
    rows = n_fit if n_fit <= full_batch_threshold else min(int(batch_size), n_fit)
    per_epoch = math.ceil(n_fit / rows)
    base = int(np.clip(math.ceil(b.epochs * per_epoch), b.steps_min, b.steps_max))
    steps = max(1, int(math.ceil(b.multiplier * base)))
    lr = float(b.lr_base * min(1.0, b.lr_width_ref / width) ** b.lr_width_power)
    patience = int(math.ceil(b.patience_fraction * steps))
    x = "" if b.multiplier == 1 else f"{b.multiplier:g} x "
    rule = (f"max_steps = {x}clip(ceil({b.epochs:g} epochs x {per_epoch} step(s) per epoch), {b.steps_min}, "
            f"{b.steps_max}) = {steps}; learning_rate = {b.lr_base:g} x min(1, {b.lr_width_ref}/{width})^"
            f"{b.lr_width_power:g} = {lr:.3g}")
    return {"max_steps": steps, "learning_rate": lr, "patience_steps": patience, "min_steps": patience,
            "epochs": steps * rows / n_fit, "rule": rule}
