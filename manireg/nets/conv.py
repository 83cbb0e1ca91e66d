"""Batched training of many residual convolutional replicas at once, for image-shaped input.

:class:`BatchedConvTrainer` trains R replicas of one :class:`~manireg.theory.sizing.ConvArchitectureSpec`
together. The dense head, the losses, the gradients (autograd) and Adam [1]_ work on stacked (R, ...)
tensors; the convolutions run in one of two ways (``mode``). ``"grouped"``: the replicas are stacked along
the channel axis, a minibatch of replica r is an (B, C, H, W) tensor, the stack is (B, R*C, H, W), and every
convolution is ONE ``conv2d`` call with ``groups=R`` whose weight is the replicas' kernels stacked along the
output channels; a grouped convolution never mixes groups. ``"split"``: one ``conv2d`` per replica on its
slice. The loss is the sum over replicas of each replica's mean loss, so each replica's gradient is exactly
its own, and Adam is elementwise: training R replicas together gives the same networks as training each
alone with the same seed, bit for bit in ``"split"`` mode and up to float rounding in ``"grouped"`` mode
(the kernel may block the channel axis differently for different R); ``tests/test_conv.py`` checks both.

Each replica has its own data (its own n), its own initial weights (:func:`~manireg.nets.build_conv_network`
with the replica's seed, so a seed gives the same network here and there), its own minibatch stream and
its own early stopping on a validation split [2]_, as in :class:`manireg.nets.training.BatchedTrainer`,
whose :class:`~manireg.nets.training.TrainConfig` and losses (:mod:`manireg.nets.losses`: ``"mse"`` and
``"cross_entropy"``) it uses. Arithmetic is float32 (no mixed precision or pruning; ``project_weights`` clamps
the weights as in the dense trainer).

Which way is faster depends on the size of a step: stacking shares per-call overhead, which dominates small
convolutions, while on larger ones the grouped kernel was slower than separate calls; ``mode="auto"``
chooses by :data:`GROUPED_MAX_MACS`. ``torch.func.vmap`` over ``conv2d`` with batched weights is rewritten
into the same grouped call and was no faster. ``python tests/benchmarks/bench_conv.py --modes`` measures
the three (docs/classification.md).

References
----------
.. [1] D. P. Kingma, J. Ba, "Adam: a method for stochastic optimization", ICLR 2015.
.. [2] L. Prechelt, "Early stopping - but when?", in Neural Networks: Tricks of the Trade (1998).
.. [3] H. Liu, M. Chen, T. Zhao, W. Liao, "Besov function approximation and binary classification on
   low-dimensional manifolds using convolutional residual networks", ICML 2021.
"""

from __future__ import annotations

import math
import time

import numpy as np
import torch
import torch.nn.functional as F

from manireg._random import derive_seed
from manireg._threads import torch_threads
from manireg._validation import DataValidationError, check_choice, check_int, check_points
from manireg.nets.builders import ResidualConvNetwork, build_conv_network
from manireg.nets.losses import probabilities, row_loss, stopping_loss
from manireg.nets.training import (ReplicaResult, ReplicaTask, TrainConfig, _check_task_target, lr_at_step,
                                   stop_reasons, track_best)
from manireg.theory.sizing import ConvArchitectureSpec

__all__ = ["BatchedConvTrainer", "conv_forward", "check_image_shape", "CONV_LOSSES", "CONV_MODES", "GROUPED_MAX_MACS"]

CONV_LOSSES = ("mse", "cross_entropy")
CONV_MODES = ("auto", "grouped", "split")
#: ``mode="auto"`` stacks the convolutions of a group (one grouped ``conv2d``) when one replica's forward
#: pass over its step's rows costs fewer multiply-adds than this, and runs one ``conv2d`` per replica
#: otherwise: small convolutions are dominated by per-call overhead, which stacking shares, while on
#: larger ones the grouped kernel was slower than separate calls (tests/benchmarks/bench_conv.py --modes).
GROUPED_MAX_MACS = 5e6


def check_image_shape(image_shape, n_features, owner="BatchedConvTrainer"):
    """``(C, H, W)`` from ``(H, W)`` or ``(C, H, W)``, checked against the data's ``n_features`` columns.

    Raises
    ------
    ValueError
        A shape that is not 2 or 3 positive ints, or whose product is not ``n_features`` (the message names
        both and how to fix it).
    """
    try:
        shape = tuple(int(v) for v in image_shape)
        if any(float(v) != int(v) for v in image_shape):
            raise ValueError
    except (TypeError, ValueError):
        raise ValueError(f"the 'image_shape' of {owner} must be (H, W) or (C, H, W) ints; got {image_shape!r}. "
                         "For grey 16x16 images pass (16, 16).") from None
    if len(shape) == 2:
        shape = (1,) + shape
    if len(shape) != 3 or min(shape) < 1:
        raise ValueError(f"the 'image_shape' of {owner} must be (H, W) or (C, H, W) with positive sizes; got "
                         f"{image_shape!r}. For grey 16x16 images pass (16, 16).")
    prod = int(np.prod(shape))
    if n_features is not None and prod != int(n_features):
        raise DataValidationError(
            f"{owner}: the images do not match the declared image_shape {shape} (C x H x W = {prod} values per "
            f"image); the data has {int(n_features)} columns per row. Declare the shape the rows were "
            "flattened from (e.g. (16, 16) for 256 columns of 16x16 grey images)."
        )
    return shape


class _Prepared:
    """One replica's validated data: images standardised per channel (one mean and std per channel over
    the training rows and pixels, common practice for convolutional nets: per-pixel scaling would blow up
    nearly constant background pixels), targets as in the dense trainer (standardised MSE targets, one-hot
    labels), a validation split drawn with the replica's seed when the task has none."""

    def __init__(self, task, index, config, shape, owner, loss, n_outputs):
        if not isinstance(task, ReplicaTask):
            raise ValueError(f"{owner}: tasks[{index}] must be a ReplicaTask; got {type(task).__name__}.")
        seed = task.seed
        if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
            raise ValueError(f"{owner}: tasks[{index}].seed must be a non-negative int; got {seed!r}.")
        D = int(np.prod(shape))
        X = check_points(task.X_train, name=f"tasks[{index}].X_train", min_samples=2, owner=owner)
        check_image_shape(shape, X.shape[1], owner=f"{owner} (tasks[{index}].X_train)")
        y = _check_task_target(task.y_train, len(X), f"tasks[{index}].y_train", owner, loss, n_outputs)
        if task.X_val is None:
            perm = np.random.default_rng(derive_seed(seed, 2)).permutation(len(X))
            n_val = max(1, int(round(config.validation_fraction * len(X))))
            if len(X) - n_val < 2:
                raise DataValidationError(f"{owner}: tasks[{index}] has {len(X)} rows, too few to hold out a "
                                          "validation set; pass at least 3 rows or an explicit X_val.")
            Xv, yv, X, y = X[perm[:n_val]], y[perm[:n_val]], X[perm[n_val:]], y[perm[n_val:]]
        else:
            Xv = check_points(task.X_val, name=f"tasks[{index}].X_val", min_samples=1, owner=owner)
            check_image_shape(shape, Xv.shape[1], owner=f"{owner} (tasks[{index}].X_val)")
            yv = _check_task_target(task.y_val, len(Xv), f"tasks[{index}].y_val", owner, loss, n_outputs)
        C = shape[0]
        per_channel = X.reshape(len(X), C, -1)
        mean = per_channel.mean(axis=(0, 2))
        std = per_channel.std(axis=(0, 2))
        std = np.where(std > 1e-12 * max(1.0, float(np.abs(X).max())), std, 1.0)
        self.x_mean, self.x_std = np.repeat(mean, D // C), np.repeat(std, D // C)  # per column
        self.seed, self.n, self.n_val = int(seed), len(X), len(Xv)
        if config.standardize_target and loss == "mse":
            ys = float(y.std())
            self.y_mean, self.y_scale = float(y.mean()), (ys if ys > 1e-12 * max(1.0, float(np.abs(y).max())) else 1.0)
        else:
            self.y_mean, self.y_scale = 0.0, 1.0
        self.X = torch.from_numpy(self.standardize(X))
        self.Xv = torch.from_numpy(self.standardize(Xv))
        self.y = torch.from_numpy(((y - self.y_mean) / self.y_scale).astype(np.float32))
        self.yv = torch.from_numpy(yv.astype(np.float32))  # validation targets stay in target units
        self.y_raw = torch.from_numpy(y.astype(np.float32))
        self.full = self.n <= config.full_batch_threshold
        self.batch = self.n if self.full else min(config.batch_size, self.n)

    def standardize(self, X):
        return ((X - self.x_mean) / self.x_std).astype(np.float32)


def _param_names(spec):
    """Parameter names of the builder's module, in ``named_parameters`` order."""
    names = ["stem.weight", "stem.bias"]
    for i, stride in enumerate(spec.strides):
        b = f"blocks.block{i + 1}"
        names += [f"{b}.conv1.weight", f"{b}.conv1.bias", f"{b}.conv2.weight", f"{b}.conv2.bias"]
        if stride != 1:
            names.append(f"{b}.skip.weight")
    return names + ["head.hidden.weight", "head.hidden.bias", "head.output.weight", "head.output.bias"]


def _build(spec, seed):
    return build_conv_network(spec.head, spec.input_shape, seed=seed, channels=spec.channels,
                              n_blocks=spec.n_blocks, n_outputs=spec.n_outputs)


def _stacked_init(spec, seeds):
    """Initial parameters of one replica per seed, stacked (R, ...), in :func:`_param_names` order."""
    nets = [dict(_build(spec, s).named_parameters()) for s in seeds]
    return [torch.stack([net[name].detach() for net in nets]).contiguous() for name in _param_names(spec)]


def _gconv(h, W, b, R, stride, padding):
    """Grouped convolution of R stacked replicas: h (B, R*ci, H, W), W (R, co, ci, k, k), b (R, co) or None."""
    Wg = W.reshape(-1, *W.shape[2:])
    bg = None if b is None else b.reshape(-1)
    return F.conv2d(h, Wg, bg, stride=stride, padding=padding, groups=R)


def conv_forward(spec, params, x, mode="grouped"):
    """Stacked forward pass of the residual conv net: x (R, B, C, H, W) standardised images -> (R, B, K)
    scores (K = ``spec.n_outputs``; for regression K = 1 in standardised target units).

    ``params`` are stacked (R, ...) tensors in the builder's parameter order. ``mode="grouped"``: each
    convolution is one ``conv2d`` with ``groups=R`` (module docstring); ``"split"``: one ``conv2d`` per
    replica on its slice of the stack (the same numbers as the replica alone, bit for bit). Either way
    replica r's numbers are those of ``build_conv_network(...)`` with its weights, up to float rounding;
    the dense head is one ``baddbmm`` per layer.
    """
    R, B = x.shape[:2]
    if mode == "split":
        pooled = torch.stack([_trunk(spec, [p[r] for p in params], x[r], 1) for r in range(R)])
    else:
        h = x.transpose(0, 1).reshape(B, R * x.shape[2], *x.shape[3:])
        pooled = _trunk(spec, params, h, R).reshape(B, R, -1).transpose(0, 1)  # (R, B, c)
    wh, bh, wo, bo = params[-4:]
    z = torch.relu(torch.baddbmm(bh[:, None, :], pooled, wh.transpose(1, 2)))
    return torch.baddbmm(bo[:, None, :], z, wo.transpose(1, 2))


def _trunk(spec, params, h, R):
    """Stem, residual blocks and average pooling of R replicas stacked along channels, h (B, R*C, H, W)
    -> (B, R*c); with R = 1, ``params`` are one replica's (unstacked) tensors."""
    def conv(h, W, b, stride, padding):
        if R == 1 and W.ndim == 4:
            return F.conv2d(h, W, b, stride=stride, padding=padding)
        return _gconv(h, W, b, R, stride, padding)

    it = iter(params)
    h = torch.relu(conv(h, next(it), next(it), 1, 1))
    for stride in spec.strides:
        w1, b1, w2, b2 = next(it), next(it), next(it), next(it)
        skip = conv(h, next(it), None, stride, 0) if stride != 1 else h
        inner = torch.relu(conv(h, w1, b1, stride, 1))
        h = torch.relu(skip + conv(inner, w2, b2, 1, 1))
    return h.mean(dim=(2, 3))


class _Group:
    """Stacked state of the replicas of one group that are still training."""

    def __init__(self, params, reps, full):
        self.active = list(range(len(reps)))
        self.params = [p.clone().requires_grad_(True) for p in params]
        self.m1 = [torch.zeros_like(p) for p in params]
        self.m2 = [torch.zeros_like(p) for p in params]
        self.best = [p.detach().clone() for p in params]
        self.best_val = torch.full((len(reps),), math.inf)
        self.best_step = torch.zeros(len(reps), dtype=torch.int64)
        self.full = full

    def keep(self, rows):
        ki = torch.tensor(rows, dtype=torch.int64)
        self.active = [self.active[i] for i in rows]
        self.params = [p.detach()[ki].contiguous().requires_grad_(True) for p in self.params]
        self.m1 = [m[ki].contiguous() for m in self.m1]
        self.m2 = [m[ki].contiguous() for m in self.m2]
        self.best = [b[ki].contiguous() for b in self.best]
        self.best_val, self.best_step = self.best_val[ki], self.best_step[ki]


class BatchedConvTrainer:
    """Train R replicas of the residual conv net of ``spec`` at once (grouped convolution, module docstring).

    Parameters
    ----------
    spec : ConvArchitectureSpec
        From :func:`manireg.theory.sizing.size_conv_network`; ``spec.input_shape`` is the declared image
        shape (C, H, W), ``spec.n_outputs`` the number of classes (1 for regression),
        ``spec.head.output_bound`` clips regression predictions (in target units).
    config : TrainConfig, optional
        The dense trainer's settings (learning-rate schedule, Adam constants, batch size, full-batch
        threshold, step cap, patience, ``eval_every``, ``validation_fraction``, ``standardize_target``,
        ``n_threads``). ``prune=True`` and ``precision="bfloat16"`` are not supported (a clear error);
        ``project_weights`` clamps every weight entry into ``[-spec.head.weight_bound, spec.head.weight_bound]``.
    loss : {"mse", "cross_entropy"}, default="mse"
        Regression (``spec.n_outputs = 1``, float targets) or classification (``spec.n_outputs = K >= 2``,
        integer labels in [0, K)).
    mode : {"auto", "grouped", "split"}, default="auto"
        How the convolutions of a training step run (:func:`conv_forward`): ``"grouped"`` one ``conv2d``
        with ``groups=R``, ``"split"`` one per replica, ``"auto"`` grouped for small steps
        (:data:`GROUPED_MAX_MACS`). The Adam update, data handling and the dense head are stacked in every
        mode. Predictions always run per replica.

    Notes
    -----
    Task rows are flattened images, (n, C*H*W) in C order; rows of another length stop ``fit`` with an
    error naming the declared shape. Replicas are grouped as in the dense trainer: full-batch replicas
    (``n <= full_batch_threshold``) with others of the same n, minibatch replicas together; a replica that
    stops leaves the stack. One thread by default (``n_threads=None``) when one replica's step costs under 2e8
flops (torch's setting above).

    Examples
    --------
    >>> import numpy as np
    >>> from manireg.theory.sizing import size_conv_network
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(120, 64)); y = (X[:, :32].mean(axis=1) > 0).astype(int)
    >>> spec = size_conv_network(100, 2, 1, (8, 8), n_outputs=2)
    >>> trainer = BatchedConvTrainer(spec, TrainConfig(max_steps=20, min_steps=0), loss="cross_entropy")
    >>> res = trainer.fit([ReplicaTask(X[:100], y[:100], X[100:], y[100:], seed=s) for s in range(2)])
    >>> trainer.predict(X[:5]).shape
    (2, 5, 2)
    """

    def __init__(self, spec, config=None, *, loss="mse", mode="auto"):
        owner = "BatchedConvTrainer"
        if not isinstance(spec, ConvArchitectureSpec):
            raise ValueError(f"the 'spec' parameter of {owner} must be a ConvArchitectureSpec; got "
                             f"{type(spec).__name__}. Build one with manireg.theory.sizing.size_conv_network.")
        config = TrainConfig() if config is None else config
        if not isinstance(config, TrainConfig):
            raise ValueError(f"the 'config' parameter of {owner} must be a TrainConfig or None; got "
                             f"{type(config).__name__}.")
        if config.prune:
            raise ValueError(f"{owner} does not prune; pass a TrainConfig with prune=False.")
        if config.precision == "bfloat16":
            raise ValueError(f"{owner} trains in float32 only; pass precision='float32' or 'auto'.")
        loss = check_choice(loss, "loss", owner=owner, choices=CONV_LOSSES)
        if loss == "mse" and spec.n_outputs != 1:
            raise ValueError(f"{owner}: loss='mse' needs spec.n_outputs = 1; got {spec.n_outputs}.")
        if loss == "cross_entropy" and spec.n_outputs < 2:
            raise ValueError(f"{owner}: loss='cross_entropy' needs spec.n_outputs = K >= 2 (the number of "
                             f"classes); got {spec.n_outputs}. Size it with size_conv_network(..., n_outputs=K).")
        self.mode = check_choice(mode, "mode", owner=owner, choices=CONV_MODES)
        self.spec, self.config, self.loss = spec, config, loss

    # ------------------------------------------------------------------ public
    def fit(self, tasks):
        """Train one replica per :class:`~manireg.nets.training.ReplicaTask`; a ReplicaResult per task, in order."""
        owner = "BatchedConvTrainer.fit"
        tasks = list(tasks)
        if not tasks:
            raise ValueError(f"the 'tasks' parameter of {owner} must hold at least one ReplicaTask; got none.")
        prepared = [_Prepared(t, i, self.config, self.spec.input_shape, owner, self.loss, self.spec.n_outputs)
                    for i, t in enumerate(tasks)]
        groups = {}
        for i, p in enumerate(prepared):
            groups.setdefault(("full", p.n) if p.full else ("mini", p.batch), []).append(i)
        results = [None] * len(tasks)
        for key in sorted(groups, key=str):
            idx = groups[key]
            reps = [prepared[i] for i in idx]
            threads = self.config.n_threads
            if threads is None:
                # from one replica's step, never the stack height: a replica's threads (and so its
                # rounding) do not depend on which replicas share its stack
                threads = 1 if 6.0 * self._flops_per_row() * reps[0].batch < 2e8 else None
            with torch_threads(threads):
                for i, res in zip(idx, self._fit_group(reps)):
                    results[i] = res
        self.results_ = results
        return results

    def predict(self, X, replica=None, chunk=512):
        """Clipped predictions in target units (``"mse"``), (R, m) or (m,); class probabilities
        (``"cross_entropy"``), (R, m, K) or (m, K). ``X`` holds flattened images (m, C*H*W)."""
        owner = "BatchedConvTrainer.predict"
        if not hasattr(self, "results_"):
            raise RuntimeError(f"{owner} needs a fitted trainer; call fit(tasks) first.")
        X = check_points(X, name="X", min_samples=1, owner=owner)
        check_image_shape(self.spec.input_shape, X.shape[1], owner=owner)
        R = len(self.results_)
        if replica is not None:
            replica = check_int(replica, "replica", owner=owner, low=0, high=R - 1)
        chosen = self.results_ if replica is None else [self.results_[replica]]
        with torch_threads(self.config.n_threads or 1), torch.no_grad():
            out = self._predict_states([r.state for r in chosen], X, chunk)
        return out[0] if replica is not None else out

    def to_module(self, replica) -> ResidualConvNetwork:
        """Replica ``replica`` as a :class:`~manireg.nets.builders.ResidualConvNetwork` (eval mode): input
        standardisation, the trained weights, and for regression the target scaling and clipping."""
        st = self.results_[check_int(replica, "replica", owner="BatchedConvTrainer.to_module", low=0,
                                     high=len(self.results_) - 1)].state
        net = build_conv_network(self.spec.head, self.spec.input_shape, seed=0, standardize=(st["x_mean"], st["x_std"]),
                                 target_scale=(st["y_mean"], st["y_scale"]), channels=self.spec.channels,
                                 n_blocks=self.spec.n_blocks, n_outputs=self.spec.n_outputs)
        named = dict(net.named_parameters())
        with torch.no_grad():
            for name, value in zip(_param_names(self.spec), st["params"]):
                named[name].copy_(torch.as_tensor(value))
        return net.eval()

    # ------------------------------------------------------------------ internals
    def _flops_per_row(self):
        """Multiply-adds of one image through the net (forward), a rough cost for the thread rule."""
        sp = self.spec
        C, H, W = sp.input_shape
        c = sp.channels
        total, hh, ww = 9 * C * c * H * W, H, W
        for stride in sp.strides:
            hh, ww = (hh + 1) // 2 if stride == 2 else hh, (ww + 1) // 2 if stride == 2 else ww
            total += 2 * 9 * c * c * hh * ww + (c * c * hh * ww if stride == 2 else 0)
        return total + c * sp.head.width + sp.head.width * sp.n_outputs

    def _group_mode(self, batch):
        """``"grouped"`` or ``"split"`` for a group whose replicas take ``batch`` rows per step (``mode``)."""
        if self.mode != "auto":
            return self.mode
        return "grouped" if self._flops_per_row() * batch < GROUPED_MAX_MACS else "split"

    def _images(self, flat):
        """(R, n, D) standardised rows -> (R, n, C, H, W)."""
        return flat.reshape(flat.shape[0], flat.shape[1], *self.spec.input_shape)

    def _scores(self, params, x, mode="split"):
        z = conv_forward(self.spec, params, x, mode)
        return z[..., 0] if self.loss == "mse" else z

    def _predict_states(self, states, X, chunk):
        params = [torch.from_numpy(np.stack([s["params"][j] for s in states])) for j in range(len(states[0]["params"]))]
        outs = []
        for a in range(0, len(X), chunk):
            rows = X[a:a + chunk]
            x = torch.from_numpy(np.stack([((rows - s["x_mean"]) / s["x_std"]).astype(np.float32) for s in states]))
            outs.append(self._scores(params, self._images(x)))
        z = torch.cat(outs, dim=1)
        if self.loss != "mse":
            P = probabilities(z).numpy().astype(np.float64)
            return P / P.sum(axis=-1, keepdims=True)
        ym = torch.tensor([s["y_mean"] for s in states], dtype=torch.float32)[:, None]
        ysc = torch.tensor([s["y_scale"] for s in states], dtype=torch.float32)[:, None]
        pred = ym + ysc * z
        b = self.spec.head.output_bound
        if math.isfinite(b):
            pred = pred.clamp(-b, b)
        return pred.numpy().astype(np.float64)

    def _fit_group(self, reps):
        cfg, spec, loss = self.config, self.spec, self.loss
        t0 = time.perf_counter()
        R = len(reps)
        full = reps[0].full
        bound = spec.head.output_bound
        clip = math.isfinite(bound) and loss == "mse"
        mode = self._group_mode(reps[0].batch)
        g = _Group(_stacked_init(spec, [derive_seed(p.seed, 0) for p in reps]), reps, full)
        X = [p.X for p in reps]
        Y = [p.y for p in reps]
        nv_max = max(p.n_val for p in reps)
        Xv = torch.zeros((R, nv_max) + tuple(reps[0].Xv.shape[1:]))
        Yv = torch.zeros((R, nv_max) + tuple(reps[0].yv.shape[1:]))
        wv = torch.zeros(R, nv_max)
        for i, p in enumerate(reps):
            Xv[i, :p.n_val], Yv[i, :p.n_val], wv[i, :p.n_val] = p.Xv, p.yv, 1.0 / p.n_val
        ym = torch.tensor([p.y_mean for p in reps], dtype=torch.float32)[:, None]
        ysc = torch.tensor([p.y_scale for p in reps], dtype=torch.float32)[:, None]
        if full:
            Xs, Ys = torch.stack(X), torch.stack(Y)  # one n per full-batch group: no padding
        else:
            B = reps[0].batch
            gens, bufs = [], []
            for p in reps:
                gen = torch.Generator()
                gen.manual_seed(derive_seed(p.seed, 1))
                gens.append(gen)
                bufs.append(torch.empty(0, dtype=torch.int64))
        results = [None] * R
        b1, b2, eps = cfg.beta1, cfg.beta2, cfg.adam_eps
        wb = spec.head.weight_bound
        act = lambda: g.active  # noqa: E731

        def val_loss():
            a = torch.tensor(act(), dtype=torch.int64)
            with torch.no_grad():
                z = self._scores([p.detach() for p in g.params], self._images(Xv[a]), mode)
                if loss != "mse":
                    return (stopping_loss(loss, z, Yv[a]) * wv[a]).sum(dim=1)
                pred = ym[a] + ysc[a] * z
                if clip:
                    pred = pred.clamp(-bound, bound)
                return ((pred - Yv[a]) ** 2 * wv[a]).sum(dim=1)

        def finish(local, reason, step):
            r = g.active[local]
            p = reps[r]
            best = [b[local:local + 1] for b in g.best]

            def restored(Xr, yr):
                with torch.no_grad():
                    z = self._scores(best, self._images(Xr[None]))[0]
                    if loss != "mse":
                        return float(row_loss(loss, z, yr).mean())
                    pred = p.y_mean + p.y_scale * z
                    if clip:
                        pred = pred.clamp(-bound, bound)
                    return float(((pred - yr) ** 2).mean())

            tr, va = restored(p.X, p.y_raw), restored(p.Xv, p.yv)
            bst = int(g.best_step[local])
            state = {"spec": spec, "params": [b[0].numpy().copy() for b in best],
                     "x_mean": p.x_mean, "x_std": p.x_std,
                     "y_mean": p.y_mean, "y_scale": p.y_scale}
            weights = [b for name, b in zip(_param_names(spec), best) if name.endswith("weight")]
            results[r] = ReplicaResult(
                train_mse=tr if loss == "mse" else math.nan, val_mse=va if loss == "mse" else math.nan,
                steps=int(step), best_step=bst, stop_reason=reason, seconds=time.perf_counter() - t0,
                n_parameters=spec.n_parameters, late_best=bool(bst >= 0.8 * cfg.max_steps), n_train=p.n,
                n_val=p.n_val, seed=p.seed, nonzero_weights=int(sum(int(torch.count_nonzero(w)) for w in weights)),
                precision="float32", loss=loss, train_loss=tr, val_loss=va, state=state)

        step = 0
        while True:
            if step % cfg.eval_every == 0 or step == cfg.max_steps:
                improved, g.best_val, g.best_step = track_best(cfg, val_loss(), g.best_val, g.best_step, step)
                if improved is not None:
                    for bp, p in zip(g.best, g.params):
                        bp.copy_(torch.where(improved.view(-1, *([1] * (p.ndim - 1))), p.detach(), bp))
                reasons = stop_reasons(cfg, step, time.perf_counter() - t0, g.best_step, len(g.active))
                if any(reasons):
                    for local, reason in enumerate(reasons):
                        if reason is not None:
                            finish(local, reason, step)
                    keep = [i for i, rs in enumerate(reasons) if rs is None]
                    if not keep:
                        break
                    if not full:
                        gens = [gens[i] for i in keep]
                        bufs = [bufs[i] for i in keep]
                    g.keep(keep)
            # ---- one minibatch (or the full batch) per active replica
            a = g.active
            if full:
                ai = torch.tensor(a, dtype=torch.int64)
                xb, yb = Xs[ai], Ys[ai]
            else:
                rows = []
                for local, r in enumerate(a):
                    while bufs[local].numel() < B:
                        bufs[local] = torch.cat([bufs[local], torch.randperm(reps[r].n, generator=gens[local])])
                    rows.append(bufs[local][:B])
                    bufs[local] = bufs[local][B:]
                xb = torch.stack([X[r][ix] for r, ix in zip(a, rows)])
                yb = torch.stack([Y[r][ix] for r, ix in zip(a, rows)])
            z = self._scores(g.params, self._images(xb), mode)
            total = row_loss(loss, z, yb).mean(dim=1).sum()  # sum over replicas of each one's mean loss
            grads = torch.autograd.grad(total, g.params)
            step += 1
            lr = lr_at_step(cfg, step - 1)
            bc1, bc2 = 1.0 - b1 ** step, 1.0 - b2 ** step
            with torch.no_grad():
                # Adam [1]_ in torch.optim.Adam's form: p -= lr/bc1 * m / (sqrt(v)/sqrt(bc2) + eps), elementwise
                for p, gr, m, v in zip(g.params, grads, g.m1, g.m2):
                    m.mul_(b1).add_(gr, alpha=1.0 - b1)
                    v.mul_(b2).addcmul_(gr, gr, value=1.0 - b2)
                    p.addcdiv_(m, v.sqrt().div_(math.sqrt(bc2)).add_(eps), value=-lr / bc1)
                    if cfg.project_weights and p.ndim >= 3:
                        p.clamp_(-wb, wb)
        return results
