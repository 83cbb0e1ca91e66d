"""Batched training of many ReLU-network replicas at once (the scikit-learn style regressor built on it is
:class:`manireg.nets.regressor.NetworkRegressor`).

:class:`BatchedTrainer` trains R replicas of one architecture together: the weights of layer l are one
tensor of shape (R, fan_in, fan_out) and every layer is a single ``torch.baddbmm``. Each replica has its
own data (its own n), its own initial weights and minibatch stream (private ``torch.Generator`` per
replica), and its own early stopping. The loss is the sum over replicas of each replica's mean squared
error, so the gradient a replica receives is exactly its own; Adam is elementwise, so stacking leaves the
replicas independent. Training R replicas together therefore gives the same networks as training each
alone with the same seed, up to float rounding.

References
----------
.. [1] D. P. Kingma, J. Ba, "Adam: a method for stochastic optimization", ICLR 2015.
.. [2] I. Loshchilov, F. Hutter, "SGDR: stochastic gradient descent with warm restarts", ICLR 2017
   (cosine schedule).
.. [3] L. Prechelt, "Early stopping - but when?", in Neural Networks: Tricks of the Trade (1998).
.. [4] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
.. [5] J. Schmidt-Hieber, Ann. Statist. 48 (2020).
.. [6] P. Micikevicius et al., "Mixed precision training", ICLR 2018.
.. [7] D. Kalamkar et al., "A campaign of BFLOAT16 for deep learning training", arXiv:1905.12322 (2019).
"""

from __future__ import annotations

import math
import numbers
import time
from dataclasses import dataclass, field

import numpy as np
import torch
from torch.optim.adam import adam as _functional_adam

from manireg._params import check_params, choice, integer, real
from manireg._random import derive_seed
from manireg._threads import torch_threads

from manireg._results import ResultMixin
from manireg._validation import (
    DataValidationError,
    check_choice,
    check_int,
    check_points,
    check_target,
)
from manireg.nets.builders import ReLUNetwork, build_network, clamp_weights, init_parameters, magnitude_masks
from manireg.nets.losses import LOSSES, output_gradient, probabilities, row_loss, stopping_loss
from manireg.theory.sizing import ArchitectureSpec

__all__ = ["TrainConfig", "ReplicaTask", "ReplicaResult", "BatchedTrainer", "lr_at_step", "auto_threads",
           "resolve_precision", "native_bfloat16", "adam_update"]

STOP_REASONS = ("patience", "step_cap", "time_cap")
PRECISIONS = ("auto", "float32", "bfloat16")
BF16_MIN_FLOPS = 8e6


@dataclass(frozen=True)
class TrainConfig:
    """Settings of :class:`BatchedTrainer`. Every count is in optimiser steps, never in epochs.

    Attributes
    ----------
    learning_rate : float, default=3e-3
        Peak Adam learning rate [1]_.
    schedule : {"cosine", "step", "constant"}, default="cosine"
        ``"cosine"``: ``lr_t = lr_min + (lr - lr_min) (1 + cos(pi t / max_steps)) / 2`` with
        ``lr_min = final_lr_fraction * lr`` [2]_. ``"step"``: ``lr`` until 50% of ``max_steps``, then
        ``lr/10``, then ``lr/100`` from 75%. ``"constant"``: ``lr`` throughout. The schedule is tied to
        ``max_steps`` so every replica sees the same learning rate at the same step.
    final_lr_fraction : float, default=0.02
        End point of the cosine schedule as a fraction of ``learning_rate``.
    beta1, beta2, adam_eps : float, default=0.9, 0.999, 1e-8
        Adam constants (PyTorch's defaults).
    batch_size : int, default=128
        Minibatch size for replicas with more than ``full_batch_threshold`` training samples.
    full_batch_threshold : int, default=256
        Replicas with ``n_train <= full_batch_threshold`` take full-batch steps (no sampling noise; a
        step on up to 256 rows costs about as much as on 128). Above it a full-batch step costs
        ``n_train / 128`` minibatch steps and was not more accurate per second.
    max_steps : int, default=500
        Step cap; also the length of the learning-rate schedule. A short cosine schedule that ends at a
        small learning rate reached lower test error than 3000 steps with patience 600 on the benchmark
        problems (docs/theory.md), at a sixth of the steps.
    max_seconds : float, default=600.0
        Wall-clock cap for each group of replicas trained together.
    min_steps : int, default=200
        No replica stops for patience before this step. Counted in steps, not epochs, so a small data
        set (two minibatch steps per epoch at n = 256) still gets a real training run.
    patience_steps : int, default=150
        Stop a replica when its validation MSE has not improved for this many steps.
    tol : float, default=1e-4
        A validation MSE counts as an improvement (new best weights, patience reset) only when it is below
        ``(1 - tol) * best``; tiny gains of a converged fit do not keep it running.
    eval_every : int, default=25
        Validation MSE is computed every this many steps (and at step 0); it sets the resolution of
        ``best_step`` and of the patience test.
    validation_fraction : float, default=0.2
        Share of the data held out for early stopping when a task has no validation set (and in
        :class:`NetworkRegressor`).
    project_weights : bool, default=False
        Clamp every weight entry into ``[-spec.weight_bound, spec.weight_bound]`` after each step
        (entrywise max norm, the bounded-parameter class of [5]_).
    prune : bool, default=False
        At step ``prune_at * max_steps`` keep each replica's ``spec.nonzero_budget`` largest weight entries
        (global magnitude ranking), zero the rest and keep them at zero; best-weight tracking restarts
        then, so the returned network respects the budget.
    prune_at : float, default=0.5
        When pruning happens, as a fraction of ``max_steps``.
    standardize_target : bool, default=True
        Train on ``(y - mean) / std`` of each replica's training targets (predictions are mapped back).
    precision : {"auto", "float32", "bfloat16"}, default="auto"
        Arithmetic of the training steps. ``"float32"``: everything in float32. ``"bfloat16"``: mixed
        precision [6]_ [7]_: the hidden-to-hidden matrix products (forward, backward and the validation
        passes during training) take bfloat16 copies of float32 master weights and keep their activations
        in bfloat16; the first and last layers, the loss, the gradients handed to Adam, Adam itself and
        the returned weights are float32. bfloat16 has float32's exponent range, so no loss scaling is
        needed [7]_. The returned network is the float32 master weights, and ``train_mse``/``val_mse``
        and every prediction are computed in float32. ``"auto"``: ``"bfloat16"`` for a group whose step
        costs at least ``BF16_MIN_FLOPS`` when the CPU multiplies bfloat16 natively (AVX512-BF16 or AMX;
        emulated bfloat16 is slower than float32), else ``"float32"``; see :func:`resolve_precision`.
        Each :class:`ReplicaResult` records the precision used. bfloat16 stalls near a test MSE of 1e-6
        of the target's variance (measured on an easy noise-free target; float32 went 20x lower): for a
        noise-free campaign whose errors go below about 1e-5 of the target variance use ``"float32"``.
    n_threads : int or None, default=None
        torch intra-op threads during ``fit``/``predict`` (restored afterwards). None chooses per group:
        one thread when a training step costs under 2e8 flops (thread start-up then costs more than it
        saves, and on a shared machine it costs much more), otherwise torch's current setting.
    """

    learning_rate: float = 3e-3
    schedule: str = "cosine"
    final_lr_fraction: float = 0.02
    beta1: float = 0.9
    beta2: float = 0.999
    adam_eps: float = 1e-8
    batch_size: int = 128
    full_batch_threshold: int = 256
    max_steps: int = 500
    max_seconds: float = 600.0
    min_steps: int = 200
    patience_steps: int = 150
    tol: float = 1e-4
    eval_every: int = 25
    validation_fraction: float = 0.2
    project_weights: bool = False
    prune: bool = False
    prune_at: float = 0.5
    standardize_target: bool = True
    precision: str = "auto"
    n_threads: int | None = None

    def __post_init__(self):
        check_params(vars(self), TRAIN_RULES, owner="TrainConfig")  # checks only: the values stay as given


#: What each checked :class:`TrainConfig` field may hold (``NetworkRegressor`` checks its copies of the
#: fields with the same rules). ``project_weights``, ``prune`` and ``standardize_target`` are used as truth
#: values and have no rule.
TRAIN_RULES = {
    "learning_rate": real(0.0, low_open=True),
    "schedule": choice("cosine", "step", "constant"),
    "final_lr_fraction": real(0.0, 1.0),
    "beta1": real(0.0, 1.0, high_open=True),
    "beta2": real(0.0, 1.0, high_open=True),
    "adam_eps": real(0.0, low_open=True),
    "batch_size": integer(1),
    "full_batch_threshold": integer(1),
    "max_steps": integer(1),
    "max_seconds": real(0.0, low_open=True),
    "min_steps": integer(0),
    "patience_steps": integer(1),
    "eval_every": integer(1),
    "tol": real(0.0, 1.0, high_open=True),
    "validation_fraction": real(0.0, 1.0, low_open=True, high_open=True),
    "prune_at": real(0.0, 1.0, high_open=True),
    "precision": choice(*PRECISIONS),
    "n_threads": integer(1, none=True),
}


def stop_reasons(config: TrainConfig, step: int, elapsed: float, best_step, n_active: int, min_steps=None) -> list:
    """Why each of ``n_active`` replicas stops at ``step`` (None: it goes on): the step cap, the time cap, or
    ``patience_steps`` without improvement once ``min_steps`` (default ``config.min_steps``) have passed.
    ``best_step`` holds each active replica's best step (a tensor). One rule for every batched trainer."""
    if step >= config.max_steps:
        return ["step_cap"] * n_active
    if elapsed >= config.max_seconds:
        return ["time_cap"] * n_active
    if step >= (config.min_steps if min_steps is None else min_steps):
        stale = (step - best_step) >= config.patience_steps
        return ["patience" if s else None for s in stale.tolist()]
    return [None] * n_active


def track_best(config: TrainConfig, v, best_val, best_step, step: int):
    """The validation losses ``v`` against the best so far: a value counts as better only below
    ``(1 - config.tol) * best``. Returns ``(improved, best_val, best_step)`` with the bests updated;
    ``improved`` (a bool tensor) is None when no replica improved. One rule for every batched trainer."""
    improved = v < best_val * (1.0 - config.tol)
    if not bool(improved.any()):
        return None, best_val, best_step
    return (improved, torch.where(improved, v, best_val),
            torch.where(improved, torch.full_like(best_step, step), best_step))


def lr_at_step(config: TrainConfig, step: int) -> float:
    """Learning rate of ``config``'s schedule at optimiser step ``step`` (0-based)."""
    lr = config.learning_rate
    frac = min(step / config.max_steps, 1.0)
    if config.schedule == "cosine":
        lo = config.final_lr_fraction * lr
        return lo + (lr - lo) * 0.5 * (1.0 + math.cos(math.pi * frac))
    elif config.schedule == "step":
        return lr if frac < 0.5 else (lr * 0.1 if frac < 0.75 else lr * 0.01)
    elif config.schedule == "constant":
        return lr
    else:  # pragma: no cover - TrainConfig checks the choice
        raise ValueError(f"unknown schedule {config.schedule!r}")


@dataclass
class ReplicaTask:
    """Data and seed of one replica. ``X_val``/``y_val`` may be None: the trainer then holds out
    ``config.validation_fraction`` of the training data, chosen with ``seed``.

    ``y`` depends on the trainer's loss: ``"mse"`` float targets (n,); ``"cross_entropy"`` integer class
    labels (n,) in ``[0, n_outputs)``; ``"policy"`` float scores (n, n_outputs), one per action."""

    X_train: np.ndarray
    y_train: np.ndarray
    X_val: np.ndarray | None = None
    y_val: np.ndarray | None = None
    seed: int = 0


@dataclass
class ReplicaResult(ResultMixin):
    """Outcome of training one replica (MSEs in target units, with the output clipping applied).

    Attributes
    ----------
    train_mse, val_mse : float
        MSE of the restored (best-validation) network on the training and validation data (loss
        ``"mse"``; NaN for the other losses).
    steps : int
        Optimiser steps taken.
    best_step : int
        Step of the best validation MSE (the restored weights).
    stop_reason : {"patience", "step_cap", "time_cap"}
    seconds : float
        Wall time from the start of the replica's group to its stop.
    n_parameters : int
        Parameters of the dense network.
    late_best : bool
        ``best_step >= 0.8 * max_steps``: validation error was still improving late in the budget, so the
        fit is probably optimisation-limited.
    n_train, n_val : int
    seed : int
    nonzero_weights : int
        Nonzero weight entries of the restored network.
    precision : {"float32", "bfloat16"}
        Arithmetic of the training steps (see ``TrainConfig.precision``); the MSEs are float32 either way.
    loss : {"mse", "cross_entropy", "policy"}
        The trainer's loss (:mod:`manireg.nets.losses`).
    train_loss, val_loss : float
        Mean loss of the restored network on the training and validation rows, in float32: the MSE for
        ``"mse"`` (equal to ``train_mse``/``val_mse``), the cross-entropy in nats for ``"cross_entropy"``,
        minus the mean policy value for ``"policy"``.
    state : dict
        Trained weights and scalings (not in ``to_dict``); see :meth:`to_module`.
    """

    train_mse: float
    val_mse: float
    steps: int
    best_step: int
    stop_reason: str
    seconds: float
    n_parameters: int
    late_best: bool
    n_train: int
    n_val: int
    seed: int
    nonzero_weights: int
    precision: str = "float32"
    loss: str = "mse"
    train_loss: float = math.nan
    val_loss: float = math.nan
    state: dict = field(default_factory=dict, repr=False)

    _skip_in_dict = ("state",)

    def to_module(self) -> ReLUNetwork:
        """The trained replica as a :class:`~manireg.nets.builders.ReLUNetwork` (eval mode; loss ``"mse"``)."""
        if self.loss != "mse":
            raise ValueError(
                f"ReplicaResult.to_module builds the one-output regression network; this replica was trained "
                f"with loss={self.loss!r}. Use BatchedTrainer.predict for its probabilities."
            )
        st = self.state
        net = build_network(
            st["spec"], seed=0, standardize=(st["x_mean"], st["x_std"]), target_scale=(st["y_mean"], st["y_scale"])
        )
        with torch.no_grad():
            for lin, W, b in zip(net.linear_layers(), st["weights"], st["biases"]):
                lin.weight.copy_(torch.as_tensor(W).T)
                lin.bias.copy_(torch.as_tensor(b))
        return net.eval()


def auto_threads(spec, rows):
    """torch threads the trainer picks when ``TrainConfig.n_threads`` is None: 1 for a step under 2e8 flops.

    ``rows`` is the number of rows in one optimiser step summed over the replicas trained together; a
    step costs about ``6 * spec.n_parameters * rows`` flops. Below 2e8 flops thread start-up and
    synchronisation cost more than a second thread saves (and much more on a shared machine), so one
    thread is used; otherwise None (torch's current setting). Benchmarks give one-at-a-time loops the
    same policy through this function.
    """
    return 1 if 6.0 * spec.n_parameters * rows < 2e8 else None


def _cpu_flags() -> frozenset:
    """The CPU feature flags the operating system reports (Linux ``/proc/cpuinfo``; empty elsewhere)."""
    try:
        with open("/proc/cpuinfo", encoding="ascii", errors="replace") as f:
            for line in f:
                if line.startswith("flags"):
                    return frozenset(line.split(":", 1)[1].split())
    except OSError:
        pass
    return frozenset()


#: CPU flags that mean bfloat16 matrix products run in hardware (AVX512-BF16 dot products, AMX tiles).
BF16_FLAGS = frozenset({"avx512_bf16", "amx_bf16"})


def native_bfloat16() -> bool:
    """True when this CPU multiplies bfloat16 matrices in hardware (AVX512-BF16 or AMX tiles).

    Other CPUs run bfloat16 products through a slower emulation, so ``precision="auto"`` keeps float32
    there. Public checks only: torch's vector instruction level
    (``torch.backends.cpu.get_cpu_capability()`` must be an AVX512 level, the kernels that have the
    bfloat16 dot products) and the CPU flags the operating system reports (:data:`BF16_FLAGS`; Linux's
    ``/proc/cpuinfo``; other systems report none, so they train in float32 unless asked).
    """
    try:
        capability = str(torch.backends.cpu.get_cpu_capability())
    except Exception:  # pragma: no cover - an unknown capability means "not known to be native"
        return False
    if not capability.upper().startswith("AVX512"):
        return False
    return bool(_cpu_flags() & BF16_FLAGS)


def _private_fused_adam():
    """torch's fused Adam kernel ``torch._fused_adam_`` (private), or None when this torch lacks it or a
    call failed before (then :func:`adam_update` uses the public path for the rest of the process)."""
    return None if _PRIVATE["disabled"] else getattr(torch, "_fused_adam_", None)


_PRIVATE = {"disabled": False}


def adam_update(params, grads, exp_avgs, exp_avg_sqs, step, *, lr, beta1, beta2, eps, private=None):
    """Adam step number ``step`` (1-based) [1]_ on lists of tensors, in place, with torch's fused CPU kernel.

    The one place the trainer may call a private torch function. The public path is torch.optim's
    functional Adam (``torch.optim.adam.adam(..., fused=True)``, the path of
    ``torch.optim.Adam(fused=True)``): it keeps one step-count tensor per parameter and increments them
    with a separate kernel, a fixed cost per call of about 0.15 ms (measured on 5 tensors) that a small
    net's step feels (``python tests/benchmarks/bench_training.py --adam``: 7-29 % of a step at
    n <= 512 on a loaded machine). So when ``torch._fused_adam_`` exists it is called directly with one
    shared step count -- the same kernel and arithmetic -- and a call it refuses (a future torch with
    another signature) switches this process to the public path. ``private``: None (that choice), True
    or False (force one path; the tests compare both).

    The kernel's vector loop starts at each tensor's first entry, so a tensor's update does not depend
    on the other tensors in the lists.
    """
    if private is not False:
        kernel = _private_fused_adam()
        if kernel is not None:
            count = torch.tensor(float(step))
            try:
                kernel(params, grads, exp_avgs, exp_avg_sqs, [], [count] * len(params), lr=lr, beta1=beta1,
                       beta2=beta2, weight_decay=0.0, eps=eps, amsgrad=False, maximize=False)
                return
            except TypeError:  # the private signature changed: argument parsing failed, nothing was updated
                _PRIVATE["disabled"] = True
        elif private:
            raise RuntimeError(f"torch {torch.__version__} has no torch._fused_adam_ (private=True).")
    steps = [torch.tensor(float(step - 1)) for _ in params]  # the public path increments each count itself
    _functional_adam(params, grads, exp_avgs, exp_avg_sqs, [], steps, fused=True, amsgrad=False,
                     beta1=beta1, beta2=beta2, lr=lr, weight_decay=0.0, eps=eps, maximize=False)


def resolve_precision(config, spec, rows) -> str:
    """The arithmetic (``"float32"`` or ``"bfloat16"``) of a group of replicas under ``config.precision``.

    ``rows`` is the number of rows in one replica's optimiser step (its batch). An explicit
    ``"float32"``/``"bfloat16"`` is returned as is. ``"auto"`` gives ``"bfloat16"`` when the CPU
    multiplies bfloat16 natively (:func:`native_bfloat16`), the net has at least one hidden-to-hidden
    layer (the only layers that change precision) and one replica's step costs at least
    ``BF16_MIN_FLOPS`` (``6 * n_parameters * rows``); below that the casts cost more than the faster
    products save (``python tests/benchmarks/bench_training.py --precision`` measures the crossover). The
    choice depends on one replica, never on how many share the stack, so a replica's numbers do not
    depend on how its cells were grouped.
    """
    if config.precision != "auto":
        return config.precision
    if spec.depth < 2 or 6.0 * spec.n_parameters * rows < BF16_MIN_FLOPS:
        return "float32"
    return "bfloat16" if native_bfloat16() else "float32"


def _stacked_init(spec, seeds, n_outputs=1):
    """Initial weights (R, in, out) and biases (R, 1, out) of one replica per seed, layer by layer.

    With ``n_outputs > 1`` the hidden layers are :func:`init_parameters`'s and the output layer (width,
    n_outputs) is drawn Glorot-uniform from a generator of its own (derived from the seed)."""
    inits = [init_parameters(spec, seed=s) for s in seeds]
    if n_outputs > 1:
        inits = [ini[:-1] + [_output_init(spec.width, n_outputs, s)] for ini, s in zip(inits, seeds)]
    L = len(inits[0])
    Ws = [torch.stack([ini[l][0] for ini in inits]).contiguous() for l in range(L)]
    bs = [torch.stack([ini[l][1] for ini in inits])[:, None, :].contiguous() for l in range(L)]
    return Ws, bs


def _output_init(width, n_outputs, seed):
    """Glorot-uniform (width, n_outputs) output weights and zero biases, from the replica's stream 3."""
    g = torch.Generator()
    g.manual_seed(derive_seed(seed, 3))
    bound = math.sqrt(6.0 / (width + n_outputs))
    W = (torch.rand(width, n_outputs, generator=g, dtype=torch.float32) * 2.0 - 1.0) * bound
    return W, torch.zeros(n_outputs, dtype=torch.float32)


def _check_task_target(y, n_rows, name, owner, loss, n_outputs):
    """A replica's targets as float64: (n,) for "mse", one-hot (n, K) rows for "cross_entropy" (from
    integer labels in [0, K)), (n, K) scores for "policy"."""
    if loss == "mse":
        return check_target(y, n_rows, name=name, owner=owner)
    K = n_outputs
    if loss == "cross_entropy":
        try:
            arr = np.asarray(y)
            lab = arr.astype(np.float64)
        except (TypeError, ValueError):
            raise DataValidationError(
                f"{owner}: {name} must hold integer class labels in [0, {K}); got values that are not "
                "numbers. Encode the classes as 0..K-1 first."
            ) from None
        if lab.ndim != 1 or lab.shape[0] != n_rows:
            raise DataValidationError(
                f"{owner}: {name} must be a 1-D vector of {n_rows} class labels (one per row of X); "
                f"got shape {lab.shape}."
            )
        bad = ~np.isfinite(lab) | (lab != np.round(lab)) | (lab < 0) | (lab >= K)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise DataValidationError(
                f"{owner}: {name} must hold integer class labels in [0, {K}) for n_outputs={K}; "
                f"row {i} holds {arr[i]!r} ({int(bad.sum())} such rows). Encode the classes as 0..K-1, "
                "or raise n_outputs to the number of classes."
            )
        onehot = np.zeros((n_rows, K))
        onehot[np.arange(n_rows), lab.astype(np.int64)] = 1.0
        return onehot
    try:
        arr = np.asarray(y, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise DataValidationError(f"{owner}: {name} must be numeric action scores ({exc}).") from None
    if arr.shape != (n_rows, K):
        raise DataValidationError(
            f"{owner}: {name} must be an (n, n_outputs) array of action scores, here ({n_rows}, {K}); "
            f"got shape {arr.shape}."
        )
    if not np.all(np.isfinite(arr)):
        raise DataValidationError(f"{owner}: {name} has non-finite action scores. Remove those rows first.")
    return np.ascontiguousarray(arr)


def _standardised32(A, mean, std, block_bytes=1 << 25):
    """``((A - mean) / std).astype(float32)`` a block of rows at a time: the same numbers, bit for bit (the same
    float64 operations per element, then the same rounding), without two float64 temporaries of A's size
    (at 2.5e5 x 256 rows they were 1 GB of a campaign worker's peak)."""
    out = np.empty(A.shape, dtype=np.float32)
    step = max(1, block_bytes // (8 * max(1, A.shape[1])))
    for i in range(0, A.shape[0], step):
        out[i:i + step] = (A[i:i + step] - mean) / std
    return out


class _Prepared:
    """One replica's validated, standardised float32 data."""

    def __init__(self, task, index, config, input_dim, owner, loss="mse", n_outputs=1):
        if not isinstance(task, ReplicaTask):
            raise ValueError(f"{owner}: tasks[{index}] must be a ReplicaTask; got {type(task).__name__}.")
        seed = task.seed
        if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or seed < 0:
            raise ValueError(f"{owner}: tasks[{index}].seed must be a non-negative int; got {seed!r}.")
        X = check_points(task.X_train, name=f"tasks[{index}].X_train", min_samples=2, owner=owner)
        y = _check_task_target(task.y_train, len(X), f"tasks[{index}].y_train", owner, loss, n_outputs)
        if X.shape[1] != input_dim:
            raise DataValidationError(
                f"{owner}: tasks[{index}].X_train has {X.shape[1]} columns but spec.input_dim is {input_dim}. "
                "Size the spec with ambient_dim=X.shape[1] (size_network(n, d, s, X.shape[1]))."
            )
        if task.X_val is None:
            rng = np.random.default_rng(derive_seed(seed, 2))
            perm = rng.permutation(len(X))
            n_val = max(1, int(round(config.validation_fraction * len(X))))
            if len(X) - n_val < 2:
                raise DataValidationError(
                    f"{owner}: tasks[{index}] has {len(X)} rows, too few to hold out a validation set; "
                    "pass at least 3 rows or an explicit X_val."
                )
            Xv, yv = X[perm[:n_val]], y[perm[:n_val]]
            X, y = X[perm[n_val:]], y[perm[n_val:]]
        else:
            Xv = check_points(task.X_val, name=f"tasks[{index}].X_val", min_samples=1, owner=owner)
            yv = _check_task_target(task.y_val, len(Xv), f"tasks[{index}].y_val", owner, loss, n_outputs)
            if Xv.shape[1] != input_dim:
                raise DataValidationError(
                    f"{owner}: tasks[{index}].X_val has {Xv.shape[1]} columns; expected {input_dim}."
                )
        self.seed = int(seed)
        self.n = len(X)
        self.n_val = len(Xv)
        self.x_mean = X.mean(axis=0)
        std = X.std(axis=0)
        self.x_std = np.where(std > 1e-12 * max(1.0, float(np.abs(X).max())), std, 1.0)
        if config.standardize_target and loss == "mse":
            self.y_mean = float(y.mean())
            ys = float(y.std())
            self.y_scale = ys if ys > 1e-12 * max(1.0, float(np.abs(y).max())) else 1.0
        else:
            self.y_mean, self.y_scale = 0.0, 1.0
        self.X = torch.from_numpy(_standardised32(X, self.x_mean, self.x_std))
        self.y = torch.from_numpy(((y - self.y_mean) / self.y_scale).astype(np.float32))
        self.Xv = torch.from_numpy(_standardised32(Xv, self.x_mean, self.x_std))
        self.yv = torch.from_numpy(yv.astype(np.float32))  # validation targets stay in target units
        self.y_raw = torch.from_numpy(y.astype(np.float32))
        self.batch = self.n if self.n <= config.full_batch_threshold else min(config.batch_size, self.n)
        self.full = self.n <= config.full_batch_threshold


#: Rows per block when the trainer evaluates a restored network on a replica's training or validation rows.
_EVAL_ROWS = 8192


def _pad_stack(tensors, length):
    """Stack along a new first axis, zero-padding axis 0 of each tensor to ``length`` (one tensor of that
    length: a view of it, no copy)."""
    if len(tensors) == 1 and tensors[0].shape[0] == length:
        return tensors[0].unsqueeze(0)
    shape = (len(tensors), length) + tuple(tensors[0].shape[1:])
    out = torch.zeros(shape, dtype=torch.float32)
    for i, t in enumerate(tensors):
        out[i, : t.shape[0]] = t
    return out


def _row_weights(counts, length):
    """(R, length) weights 1/count on the first ``count`` rows, 0 on padding."""
    w = torch.zeros(len(counts), length, dtype=torch.float32)
    for i, c in enumerate(counts):
        w[i, :c] = 1.0 / c
    return w


def _loss_grads(Ws, bs, x, y, w, low=None, loss="mse", out=None):
    """Gradients of ``sum_r sum_i w_ri loss(z_ri, y_ri)`` for the stacked net, by hand (no autograd).

    ``loss`` is one of :data:`manireg.nets.losses.LOSSES` (default ``"mse"``, ``(z - y)^2``); the output
    gradient comes from :func:`manireg.nets.losses.output_gradient`. ``y``: (R, B) for ``"mse"``,
    (R, B, K) one-hot labels or action scores otherwise.

    ``w`` is a (R, B) tensor of row weights or a float (the same weight for every row). Returns the weight
    gradients (R, in, out) followed by the bias gradients (R, 1, out), in the order of ``Ws + bs``, all in
    float32. Writing the backward pass out saves autograd's graph bookkeeping, which dominates a step of a
    small net.

    ``low`` (a torch dtype, e.g. ``torch.bfloat16``) runs the hidden-to-hidden layers in that dtype (mixed
    precision): their weights are cast from the float32 masters for the step, activations and the
    gradients flowing between hidden layers are kept in ``low`` (the matrix products accumulate in
    float32 inside the kernel), and the first and last layers, the loss, the bias-gradient sums and every
    returned gradient stay float32. ``None``: everything float32.

    ``out``: None, or float32 tensors shaped like ``Ws + bs`` (the trainer passes views of one preallocated
    (R, P) buffer): the gradients are written into them (``bmm(..., out=)``, ``sum(..., out=)``) and they
    are returned, so a step allocates no gradient tensors and needs no concatenation before Adam. torch
    computes a product into such a strided view one replica at a time (one GEMM per replica) instead of
    with its batched GEMM, so a weight gradient may differ from the ``out=None`` one in the last bit
    (tested: within float32 rounding); each replica's numbers stay independent of its stack either way.
    """
    last = len(Ws) - 1
    dt = _layer_dtypes(len(Ws), low)
    if low is None:  # float32 throughout: no casts (each is a Python call per layer and step)
        Wc, bc = Ws, bs
    else:
        Wc = [W.to(d) for W, d in zip(Ws, dt)]
        bc = [b.to(d) for b, d in zip(bs, dt)]
    hs = [x]
    for i in range(last):
        h = torch.baddbmm(bc[i], hs[-1], Wc[i]).clamp_min_(0.0)
        hs.append(h if low is None else h.to(dt[i + 1]))
    z = _output_layer(hs[last], Ws[last], bs[last])
    g = output_gradient(loss, z, y, w)
    gW, gb = [None] * len(Ws), [None] * len(Ws)
    # The output layer's products as elementwise products and row sums, one output column at a time (the
    # stack-independent form of _output_layer): its weight gradient is a matrix-vector product per column and
    # the gradient flowing back an outer product, shapes on which bmm is slow (docs/theory.md, "Trainer
    # speed") and, for the matrix-vector one, takes a kernel whose rounding may depend on the stack height or
    # on where its result is written.
    h = hs[last]
    K = g.shape[-1]
    cols = [g[:, :, k:k + 1] for k in range(K)]
    if K == 1:
        gW[last] = (h * g).sum(dim=1).unsqueeze(-1)
    else:
        gW[last] = torch.stack([(h * c).sum(dim=1) for c in cols], dim=-1)
    gb[last] = g.sum(dim=1, keepdim=True, dtype=torch.float32)
    if out is not None:
        gW[last] = out[last].copy_(gW[last])
        gb[last] = out[last + len(Ws)].copy_(gb[last])
    if last > 0:
        # (R, B, 1) x (R, 1, w) products: one rounding per entry, as in the outer-product bmm they replace
        back = cols[0] * Wc[last][:, None, :, 0]
        for k in range(1, K):
            back.add_(cols[k] * Wc[last][:, None, :, k])
        g = _RELU_BACKWARD(back, h, 0.0, grad_input=back)
        if low is not None:
            g = g.to(dt[last - 1])
    top = last - 1
    for i in range(top, -1, -1):
        if out is None:
            gW[i] = torch.bmm(hs[i].transpose(1, 2), g)
            if low is not None:
                gW[i] = gW[i].float()
            gb[i] = g.sum(dim=1, keepdim=True, dtype=torch.float32)
        else:
            if low is None:
                gW[i] = torch.bmm(hs[i].transpose(1, 2), g, out=out[i])
            else:  # bfloat16 products: a fresh tensor, copied into the float32 buffer
                gW[i] = out[i].copy_(torch.bmm(hs[i].transpose(1, 2), g))
            gb[i] = torch.sum(g, dim=1, keepdim=True, dtype=torch.float32, out=out[last + 1 + i])
        if i > 0:
            back = torch.bmm(g, Wc[i].transpose(1, 2))
            # the ReLU mask applied in place (threshold_backward into its own input: no new tensor)
            g = _RELU_BACKWARD(back, hs[i], 0.0, grad_input=back)
            if low is not None:
                g = g.to(dt[i - 1])
    return gW + gb


#: ``threshold_backward`` with an output argument: the ReLU's backward mask written into a given tensor.
_RELU_BACKWARD = torch.ops.aten.threshold_backward.grad_input


def _flatten(tensors, multiple=1):
    """Stacked (R, ...) tensors as one (R, P) tensor: each replica's entries in one contiguous row, followed
    by zeros up to a row length that is a multiple of ``multiple``."""
    R = tensors[0].shape[0]
    parts = [t.reshape(R, -1) for t in tensors]
    P = sum(p.shape[1] for p in parts)
    if P % multiple:
        parts.append(torch.zeros(R, multiple - P % multiple, dtype=parts[0].dtype))
    return torch.cat(parts, dim=1)


#: Row length of the trainer's flat (R, P) buffers is padded to a multiple of this many float32 entries
#: (64 bytes): every replica's row, and so each of its weight and gradient views, then starts at the same
#: alignment wherever the replica sits in the stack. MKL documents that its results may depend on the
#: alignment of the arrays it is given; a one-column gradient product written into a view did change with
#: the replica's row when the rows were not padded. The padding holds zeros, gets zero gradients and stays
#: zero under Adam.
_ROW_ALIGN = 16


def _unflatten(flat, shapes):
    """Views of the (R, P) tensor ``flat`` as stacked (R, *shape) tensors (the inverse of :func:`_flatten`)."""
    out, start = [], 0
    for shape in shapes:
        size = math.prod(shape)
        out.append(flat[:, start:start + size].view(flat.shape[0], *shape))
        start += size
    return out


def _replica_slabs(*stacks):
    """For each list of stacked (R, ...) tensors, the list of its per-replica views (tensor-major)."""
    return [[v for t in stack for v in t.unbind(0)] for stack in stacks]


def _layer_dtypes(n_layers, low):
    """The dtype of each layer's input and weights: ``low`` for the hidden-to-hidden layers (all but the
    first and the last), float32 for the rest; all float32 when ``low`` is None. A layer's output is cast
    to the next layer's dtype (a no-op when they agree)."""
    return [torch.float32 if (low is None or i == 0 or i == n_layers - 1) else low for i in range(n_layers)]


def _forward(Ws, bs, x, low=None):
    """Stacked forward pass: x (R, B, D) -> (R, B) in standardised target units for a one-output net, or
    (R, B, K) scores for K > 1 outputs (``low`` as in :func:`_loss_grads`)."""
    last = len(Ws) - 1
    dt = _layer_dtypes(len(Ws), low)
    h = x
    for i in range(last):
        h = torch.baddbmm(bs[i].to(dt[i]), h, Ws[i].to(dt[i])).clamp_min_(0.0).to(dt[i + 1])
    return _output_layer(h, Ws[last], bs[last]).squeeze(-1)


def _output_layer(h, W, b):
    """The output layer, ``h @ W + b`` for h (R, B, w), W (R, w, K), b (R, 1, K).

    Written as a product and a row sum, not ``baddbmm``: a one-column matrix product takes a
    matrix-vector kernel when the stack holds a single replica and a batched one otherwise, and the two
    round differently, so a replica's numbers would change when the others stop or sit in another stack.
    K > 1 outputs use the same form, one row sum per output (an (R, B, K, w) product), for the same reason.
    """
    if W.shape[-1] == 1:
        return (h * W.transpose(1, 2)).sum(dim=-1, keepdim=True).add_(b)
    return torch.stack([(h * W[:, None, :, k]).sum(dim=-1) for k in range(W.shape[-1])], dim=-1).add_(b)


@dataclass
class _ReplicaState:
    """What the trainer keeps per active replica, stacked along the first axis of every tensor.

    When replicas stop, :meth:`keep` drops them from every entry at once. Fields that a training mode does
    not use are None (``wtrain`` in minibatch mode; ``gens``, ``buffers``, ``idx_chunk`` and the flat views
    in full-batch mode; ``masks`` before pruning).
    """

    active: list  # position in the group of each active replica
    shapes: list  # per-replica shape of each parameter tensor: weights (in, out) then biases (1, out)
    flat: torch.Tensor  # (R, P) every replica's parameters, one contiguous row each
    m1: torch.Tensor  # (R, P) Adam first moments
    m2: torch.Tensor  # (R, P) Adam second moments
    best: torch.Tensor  # (R, P) best-validation copy of flat
    best_val: torch.Tensor  # (R,)
    best_step: torch.Tensor  # (R,)
    X: torch.Tensor  # (R, n_max, D) padded training rows
    Y: torch.Tensor
    Xv: torch.Tensor  # (R, nv_max, D) padded validation rows
    Yv: torch.Tensor
    wv: torch.Tensor  # validation row weights (1 / n_val on real rows, 0 on padding)
    ym: torch.Tensor  # (R, 1) target mean and scale
    ysc: torch.Tensor
    wtrain: torch.Tensor | None = None  # full batch: training row weights
    gens: list | None = None  # minibatch: one generator per replica
    buffers: list | None = None  # minibatch: rows of the current permutation not yet used
    idx_chunk: torch.Tensor | None = None  # minibatch: drawn rows of the current chunk of steps
    masks: list | None = None  # after pruning: 0/1 masks of the weights
    params: list = field(init=False)  # views of flat: weights (R, in, out) then biases (R, 1, out)
    grad: torch.Tensor = field(init=False)  # (R, P) gradient buffer, laid out like flat
    grads: list = field(init=False)  # views of grad, shaped like params (what _loss_grads writes into)
    slabs: list = field(init=False)  # per-replica rows of flat, m1, m2 and grad (Adam's tensor lists)
    step_rows: torch.Tensor | None = None  # minibatch: (chunk, Ra * B) rows of flat_X of each step of the chunk
    y_chunk: torch.Tensor | None = None  # minibatch: (chunk, Ra, B, ...) targets of each step of the chunk
    flat_X: torch.Tensor | None = field(init=False)
    flat_Y: torch.Tensor | None = field(init=False)

    def __post_init__(self):
        self._derive()

    def _derive(self):
        self.params = _unflatten(self.flat, self.shapes)
        self.grad = torch.zeros_like(self.flat)  # the padding of each row stays zero
        self.grads = _unflatten(self.grad, self.shapes)
        self.slabs = [list(t.unbind(0)) for t in (self.flat, self.m1, self.m2, self.grad)]
        if self.gens is None:
            self.flat_X = self.flat_Y = None
        else:
            R, n_max = self.Y.shape[:2]
            self.flat_X, self.flat_Y = self.X.reshape(R * n_max, -1), self.Y.reshape(R * n_max, *self.Y.shape[2:])

    def keep(self, rows: list) -> None:
        """Keep the replicas at local positions ``rows`` (in this order) and drop the others."""
        ki = torch.tensor(rows, dtype=torch.int64)
        self.active = [self.active[i] for i in rows]
        self.flat, self.m1, self.m2, self.best = (t[ki].contiguous() for t in (self.flat, self.m1, self.m2, self.best))
        self.best_val, self.best_step = self.best_val[ki], self.best_step[ki]
        self.Xv, self.Yv, self.wv, self.ym, self.ysc = self.Xv[ki], self.Yv[ki], self.wv[ki], self.ym[ki], self.ysc[ki]
        if self.masks is not None:
            self.masks = [mk[ki].contiguous() for mk in self.masks]
        if self.gens is None:
            self.X, self.Y, self.wtrain = self.X[ki], self.Y[ki], self.wtrain[ki]
        else:
            self.X, self.Y = self.X[ki].contiguous(), self.Y[ki].contiguous()
            self.gens = [self.gens[i] for i in rows]
            self.buffers = [self.buffers[i] for i in rows]
        self._derive()
        if self.idx_chunk is not None:  # a chunk drawn earlier still serves the next steps
            self.set_chunk(self.idx_chunk[ki])

    def set_chunk(self, idx_chunk) -> None:
        """Take ``idx_chunk`` (Ra, chunk, B), each active replica's rows for the next ``chunk`` minibatch
        steps, and derive once per chunk what the steps read: the rows of ``flat_X`` of each step (one
        contiguous index vector per step) and the targets of every step (one gather for the chunk; a
        minibatch's targets are then a view). The same rows as one gather per step, so the same numbers."""
        self.idx_chunk = idx_chunk
        Ra, chunk, B = idx_chunk.shape
        offsets = torch.arange(Ra, dtype=torch.int64)[:, None, None] * self.Y.shape[1]
        self.step_rows = (idx_chunk + offsets).transpose(0, 1).reshape(chunk, Ra * B)
        self.y_chunk = self.flat_Y.index_select(0, self.step_rows.reshape(-1)).view(chunk, Ra, B, *self.Y.shape[2:])


class BatchedTrainer:
    """Train R replicas of the network in ``spec`` at once (stacked weights, ``torch.baddbmm``).

    Parameters
    ----------
    spec : ArchitectureSpec
        Shared architecture; ``spec.output_bound`` clips predictions (in target units),
        ``spec.weight_bound`` and ``spec.nonzero_budget`` are used when ``config`` asks for projection or
        pruning.
    config : TrainConfig, optional
        Defaults when None.
    loss : {"mse", "cross_entropy", "policy"}, default="mse"
        ``"mse"``: regression (one output). ``"cross_entropy"``: multinomial logistic regression on
        ``n_outputs = K >= 2`` classes (binary is K = 2); task targets are integer labels in ``[0, K)``.
        ``"policy"``: maximise the mean over rows of ``sum_a softmax(z)_a Gamma_a`` over ``n_outputs = K``
        actions; task targets are (n, K) scores ``Gamma``. See :mod:`manireg.nets.losses`. Not a
        :class:`TrainConfig` field: the loss is a property of the task, not a training setting.
        ``config.standardize_target`` and ``spec.output_bound`` apply to ``"mse"`` only.
    n_outputs : int, default=1
        Width of the output layer: 1 for ``"mse"``, the number of classes or actions otherwise.

    Notes
    -----
    Replicas are grouped by effective batch size: all minibatch replicas form one stack; full-batch
    replicas (``n <= full_batch_threshold``) are stacked with others of the same n (no padding of the
    training rows, so their reductions do not depend on the other replicas). Groups are trained one after
    another. A step is a hand-written forward/backward pass (``baddbmm``/``bmm``) and one
    fused Adam call (:func:`adam_update`) on the stacked tensors. A replica that stops leaves the stack (its rows are
    removed from the weights and Adam moments), so finished replicas cost nothing. Validation MSE is
    computed on the clipped prediction in target units; the training loss is not clipped (clamping has zero
    gradient outside the bound, which would freeze samples there).

    References
    ----------
    .. [1] D. P. Kingma, J. Ba, ICLR 2015.
    .. [3] L. Prechelt, Early stopping - but when? (1998).
    .. [4] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).

    Examples
    --------
    >>> import numpy as np
    >>> from manireg.theory import size_network
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(200, 3)); y = np.sin(X[:, 0])
    >>> trainer = BatchedTrainer(size_network(160, 1, 1, 3), TrainConfig(max_steps=100))
    >>> results = trainer.fit([ReplicaTask(X[:160], y[:160], X[160:], y[160:], seed=s) for s in range(2)])
    >>> trainer.predict(X[:5]).shape
    (2, 5)
    """

    def __init__(self, spec, config=None, *, loss="mse", n_outputs=1):
        if not isinstance(spec, ArchitectureSpec):
            raise ValueError(
                f"the 'spec' parameter of BatchedTrainer must be an ArchitectureSpec; got {type(spec).__name__}. "
                "Build one with manireg.theory.size_network."
            )
        if config is None:
            config = TrainConfig()
        if not isinstance(config, TrainConfig):
            raise ValueError(
                f"the 'config' parameter of BatchedTrainer must be a TrainConfig or None; got {type(config).__name__}."
            )
        loss = check_choice(loss, "loss", owner="BatchedTrainer", choices=LOSSES)
        n_outputs = check_int(n_outputs, "n_outputs", owner="BatchedTrainer", low=1)
        if loss == "mse" and n_outputs != 1:
            raise ValueError(
                f"the 'n_outputs' parameter of BatchedTrainer must be 1 for loss='mse' (one target); got "
                f"{n_outputs}. Use loss='cross_entropy' or 'policy' for K outputs."
            )
        if loss != "mse" and n_outputs < 2:
            raise ValueError(
                f"the 'n_outputs' parameter of BatchedTrainer must be >= 2 for loss={loss!r} (the number of "
                f"classes or actions; binary classification is 2); got {n_outputs}."
            )
        self.spec = spec
        self.config = config
        self.loss = loss
        self.n_outputs = n_outputs

    # ------------------------------------------------------------------ public
    def fit(self, tasks):
        """Train one replica per task; returns a ReplicaResult per task, in task order.

        Parameters
        ----------
        tasks : sequence of ReplicaTask

        Returns
        -------
        list of ReplicaResult
        """
        owner = "BatchedTrainer.fit"
        # Prepared one at a time and not kept: given an iterator, each task's float64 rows can be freed once
        # its standardised float32 copy exists (a 2.5e5-row campaign cell held both through training).
        prepared = []
        for i, t in enumerate(tasks):
            prepared.append(_Prepared(t, i, self.config, self.spec.input_dim, owner, self.loss, self.n_outputs))
            del t
        if not prepared:
            raise ValueError(f"the 'tasks' parameter of {owner} must hold at least one ReplicaTask; got none.")
        groups = {}
        for i, p in enumerate(prepared):
            key = ("full", p.n) if p.full else ("mini", p.batch)
            groups.setdefault(key, []).append(i)
        results = [None] * len(prepared)
        with torch.no_grad():
            for key in sorted(groups, key=str):
                idx = groups[key]
                reps = [prepared[i] for i in idx]
                threads = self.config.n_threads
                if threads is None:
                    threads = auto_threads(self.spec, sum(p.batch for p in reps))
                precision = resolve_precision(self.config, self.spec, reps[0].batch)
                with torch_threads(threads):
                    for i, res in zip(idx, self._fit_group(reps, precision)):
                        results[i] = res
        self.results_ = results
        return results

    def predict(self, X, replica=None):
        """Predictions of the trained replicas: clipped values in target units (loss ``"mse"``), or class /
        action probabilities (the softmax of the output layer) for the other losses.

        Parameters
        ----------
        X : array_like of shape (m, D)
        replica : int or None
            One replica's index, or None for all.

        Returns
        -------
        ndarray of shape (R, m), or (m,) when ``replica`` is given; (R, m, K) or (m, K) for the
        ``"cross_entropy"`` and ``"policy"`` losses.
        """
        if not hasattr(self, "results_"):
            raise RuntimeError("BatchedTrainer.predict needs a fitted trainer; call fit(tasks) first.")
        X = check_points(X, name="X", min_samples=1, owner="BatchedTrainer.predict")
        if X.shape[1] != self.spec.input_dim:
            raise DataValidationError(
                f"BatchedTrainer.predict: X has {X.shape[1]} columns; the trainer was built for "
                f"input_dim={self.spec.input_dim}."
            )
        R = len(self.results_)
        if replica is not None:
            replica = check_int(replica, "replica", owner="BatchedTrainer.predict", low=0, high=R - 1)
            chosen = [self.results_[replica]]
        else:
            chosen = self.results_
        with torch_threads(self.config.n_threads), torch.no_grad():
            out = self._predict_states([r.state for r in chosen], X)
        return out[0] if replica is not None else out

    # ------------------------------------------------------------------ internals
    def _predict_states(self, states, X):
        Xt = torch.from_numpy(X.astype(np.float32))
        mean = torch.from_numpy(np.stack([s["x_mean"] for s in states]).astype(np.float32))[:, None, :]
        std = torch.from_numpy(np.stack([s["x_std"] for s in states]).astype(np.float32))[:, None, :]
        x = (Xt[None] - mean) / std
        L = len(states[0]["weights"])
        Ws = [torch.from_numpy(np.stack([s["weights"][l] for s in states])) for l in range(L)]
        bs = [torch.from_numpy(np.stack([s["biases"][l] for s in states]))[:, None, :] for l in range(L)]
        z = _forward(Ws, bs, x)
        if self.loss != "mse":
            P = probabilities(z).numpy().astype(np.float64)
            return P / P.sum(axis=-1, keepdims=True)  # rows sum to 1 in float64, not only in float32
        ym = torch.tensor([s["y_mean"] for s in states], dtype=torch.float32)[:, None]
        ysc = torch.tensor([s["y_scale"] for s in states], dtype=torch.float32)[:, None]
        pred = ym + ysc * z
        b = self.spec.output_bound
        if math.isfinite(b):
            pred = pred.clamp(-b, b)
        return pred.numpy().astype(np.float64)

    def _fit_group(self, reps, precision="float32"):
        cfg, spec = self.config, self.spec
        low = torch.bfloat16 if precision == "bfloat16" else None
        R = len(reps)
        t0 = time.perf_counter()
        full = reps[0].full
        bound = spec.output_bound
        loss = self.loss
        clip = math.isfinite(bound) and loss == "mse"
        # ---- parameters: (R, in, out) weights, (R, 1, out) biases, one init generator per replica
        Ws, bs = _stacked_init(spec, [derive_seed(p.seed, 0) for p in reps], self.n_outputs)
        L = len(Ws)
        shapes = [tuple(t.shape[1:]) for t in Ws + bs]
        flat = _flatten(Ws + bs, _ROW_ALIGN)  # (R, P): each replica's parameters in one contiguous row
        # ---- data
        n_max = max(p.n for p in reps)
        nv_max = max(p.n_val for p in reps)
        if full:
            stream = {"wtrain": _row_weights([p.n for p in reps], n_max)}
        else:
            B = reps[0].batch
            gens = []
            for p in reps:
                g = torch.Generator()
                g.manual_seed(derive_seed(p.seed, 1))
                gens.append(g)
            # idx_chunk is drawn at step 0 (step % chunk == 0), before any use
            stream = {"gens": gens, "buffers": [torch.empty(0, dtype=torch.int64) for _ in reps]}
            chunk = 64
            w_mb = 1.0 / B
        # ---- everything kept per active replica
        st = _ReplicaState(
            active=list(range(R)),
            shapes=shapes,
            flat=flat,
            m1=torch.zeros_like(flat),
            m2=torch.zeros_like(flat),
            best=flat.clone(),
            best_val=torch.full((R,), float("inf")),
            best_step=torch.zeros(R, dtype=torch.int64),
            X=_pad_stack([p.X for p in reps], n_max),
            Y=_pad_stack([p.y for p in reps], n_max),
            Xv=_pad_stack([p.Xv for p in reps], nv_max),
            Yv=_pad_stack([p.yv for p in reps], nv_max),
            wv=_row_weights([p.n_val for p in reps], nv_max),
            ym=torch.tensor([p.y_mean for p in reps], dtype=torch.float32)[:, None],
            ysc=torch.tensor([p.y_scale for p in reps], dtype=torch.float32)[:, None],
            **stream,
        )
        for p in reps:  # the stack holds the rows now (a view of them for a lone replica)
            p.X = p.Xv = None
        results = [None] * R
        prune_step = int(cfg.prune_at * cfg.max_steps) if cfg.prune else -1
        min_steps = max(cfg.min_steps, prune_step + cfg.eval_every) if cfg.prune else cfg.min_steps
        b1, b2, eps = cfg.beta1, cfg.beta2, cfg.adam_eps
        wb = spec.weight_bound

        def val_mse():
            """The validation loss early stopping tracks (the MSE for "mse"; see losses.stopping_loss)."""
            z = _forward(st.params[:L], st.params[L:], st.Xv, low)
            if loss != "mse":
                return (stopping_loss(loss, z, st.Yv) * st.wv).sum(dim=1)
            pred = st.ym + st.ysc * z
            if clip:
                pred = pred.clamp(-bound, bound)
            return ((pred - st.Yv) ** 2 * st.wv).sum(dim=1)

        def finish(local, reason, step):
            r = st.active[local]
            p = reps[r]
            best = _unflatten(st.best[local:local + 1].clone(), st.shapes)
            Wb = [w[0] for w in best[:L]]
            bb = [b[0, 0] for b in best[L:]]
            def restored_mse(X, y):
                """MSE (target units, clipped) of the restored float32 network on one replica's rows, a block
                of rows at a time (a forward pass over 2e5 rows of width 512 is 0.4 GB per layer), the
                blocks' sums added in float64."""
                total = 0.0
                for a in range(0, len(X), _EVAL_ROWS):
                    z = _forward([w[None] for w in Wb], [b[None, None] for b in bb], X[None, a:a + _EVAL_ROWS])[0]
                    yb = y[a:a + _EVAL_ROWS]
                    if loss != "mse":
                        total += float(row_loss(loss, z, yb).double().sum())
                        continue
                    pred = p.y_mean + p.y_scale * z
                    if clip:
                        pred = pred.clamp(-bound, bound)
                    total += float(((pred - yb) ** 2).double().sum())
                return total / len(X)

            # the replica's rows as stacked (its own copies were dropped once the stack held them)
            train_mse = restored_mse(st.X[local, :p.n], p.y_raw)
            # in mixed precision the tracked validation MSE came from bfloat16 passes: report the restored
            # float32 network's own, like train_mse
            val = (float(st.best_val[local]) if low is None and loss == "mse"
                   else restored_mse(st.Xv[local, :p.n_val], p.yv))
            state = {
                "spec": spec,
                "weights": [w.numpy() for w in Wb],
                "biases": [b.numpy() for b in bb],
                "x_mean": p.x_mean.astype(np.float32),
                "x_std": p.x_std.astype(np.float32),
                "y_mean": p.y_mean,
                "y_scale": p.y_scale,
            }
            bst = int(st.best_step[local])
            results[r] = ReplicaResult(
                train_mse=train_mse if loss == "mse" else math.nan,
                val_mse=val if loss == "mse" else math.nan,
                steps=int(step),
                best_step=bst,
                stop_reason=reason,
                seconds=time.perf_counter() - t0,
                n_parameters=spec.n_parameters,
                late_best=bool(bst >= 0.8 * cfg.max_steps),
                n_train=p.n,
                n_val=p.n_val,
                seed=p.seed,
                nonzero_weights=int(sum(int(torch.count_nonzero(w)) for w in Wb)),
                precision=precision,
                loss=loss,
                train_loss=train_mse,
                val_loss=val,
                state=state,
            )

        step = 0
        while True:
            # ---- evaluation, early stopping, caps
            if step % cfg.eval_every == 0 or step == cfg.max_steps:
                improved, st.best_val, st.best_step = track_best(cfg, val_mse(), st.best_val, st.best_step, step)
                if improved is not None:
                    st.best.copy_(torch.where(improved[:, None], st.flat, st.best))
                reasons = stop_reasons(cfg, step, time.perf_counter() - t0, st.best_step, len(st.active), min_steps)
                if any(reasons):
                    for local, reason in enumerate(reasons):
                        if reason is not None:
                            finish(local, reason, step)
                    keep = [i for i, rs in enumerate(reasons) if rs is None]
                    if not keep:
                        break
                    st.keep(keep)
            params = st.params
            # ---- pruning to the nonzero budget
            if step == prune_step:
                st.masks = self._prune_masks(params[:L])
                for W, mk in zip(params[:L], st.masks):
                    W.mul_(mk)
                st.best_val = torch.full_like(st.best_val, float("inf"))
            # ---- one Adam step on every active replica
            Ra = len(st.active)
            if full:
                xb, yb, wb_rows = st.X, st.Y, st.wtrain
            else:
                if step % chunk == 0:
                    st.set_chunk(self._draw_chunk(reps, st.active, st.gens, st.buffers, chunk, B, n_max))
                xb = st.flat_X.index_select(0, st.step_rows[step % chunk]).view(Ra, B, -1)
                yb = st.y_chunk[step % chunk]
                wb_rows = None
            # the gradients land in st.grad, one contiguous (R, P) buffer laid out like st.flat (no
            # per-step allocation or concatenation)
            _loss_grads(params[:L], params[L:], xb, yb, w_mb if wb_rows is None else wb_rows, low, loss,
                        out=st.grads)
            step += 1
            # One fused kernel call for the whole Adam update [1]_ (adam_update), given each replica's row of
            # the flat parameters (and of the gradient buffer) as its own tensor: the kernel's vector loop then
            # starts at every replica's first entry, so a replica's arithmetic does not depend on which other
            # replicas share the stack; one tensor per replica (not per replica and layer) keeps the per-call
            # overhead of the optimiser's bookkeeping small.
            adam_update(st.slabs[0], st.slabs[3], st.slabs[1], st.slabs[2], step, lr=lr_at_step(cfg, step - 1),
                        beta1=b1, beta2=b2, eps=eps)
            if cfg.project_weights:
                clamp_weights(params[:L], wb)
            if st.masks is not None:
                for W, mk in zip(params[:L], st.masks):
                    W.mul_(mk)
        return results

    @staticmethod
    def _draw_chunk(reps, active, gens, buffers, chunk, B, n_max):
        """Next ``chunk`` minibatches of every active replica, as row indices (Ra, chunk, B).

        Each replica walks through its own random permutations of its rows (sampling without replacement
        within an epoch), drawn from its own generator, so its stream does not depend on the others.
        """
        need = chunk * B
        rows = []
        for local, r in enumerate(active):
            n = reps[r].n
            buf = buffers[local]
            while buf.numel() < need:
                buf = torch.cat([buf, torch.randperm(n, generator=gens[local])])
            rows.append(buf[:need].view(chunk, B))
            buffers[local] = buf[need:]
        return torch.stack(rows)

    def _prune_masks(self, Ws):
        """Per-replica global magnitude masks keeping exactly ``spec.nonzero_budget`` weight entries."""
        return magnitude_masks(Ws, self.spec.nonzero_budget)
