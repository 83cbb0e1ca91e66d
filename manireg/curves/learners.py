"""The learner registry of a campaign: what a learner is, how it is named and how it turns cells into rows.

A learner is described by a :class:`LearnerSpec` (kind, name, parameters). Its kind picks a class from the
registry (:data:`LEARNER_KINDS`; extend it with :func:`register_learner`):

``"net"``
    A ReLU network sized by :func:`manireg.theory.size_network` (with ``width_multiplier``) and trained by
    :class:`manireg.nets.training.BatchedTrainer` with the step budget and learning rate of
    :func:`manireg.theory.sizing.training_budget` for its n and width (``budget``: a dict of
    :class:`~manireg.theory.sizing.TrainingBudget` fields, or ``"fixed"`` for ``TrainConfig``'s values, which
    explicit ``max_steps`` / ``learning_rate`` also select; ``budget_multiplier`` scales the steps). Cells of one net learner and one n share one
    architecture, so all their repeats are trained in ONE ``BatchedTrainer.fit`` call. Width multipliers
    are distinct learners (default names ``"net"``, ``"net-w0.5"``, ``"net-w2"``), so one campaign holds a
    capacity sweep.
``"knn"``
    k-nearest-neighbour regression with ``k = ceil(c * n^(2s/(2s+d)))``
    (:func:`manireg.curves.baselines.knn_k`).
``"kernel_ridge"``
    Gaussian kernel ridge with bandwidth ``h = c_bandwidth * median distance * n^(-1/(2s+d))`` and penalty
    ``c_ridge * n^(-2s/(2s+d))``; Nyström above ``max_exact`` points (:mod:`manireg.curves.baselines`).

Classification learners (campaign task ``"classify"``; each learner class says its task in ``task``):

``"net_classifier"``
    The same sized ReLU network with K outputs, trained by the batched trainer with ``loss="cross_entropy"``
    (softmax probabilities; early stopping on the validation cross-entropy).
``"knn_classifier"``
    k-nearest-neighbour class frequencies with the rate rule ``k = ceil(c * n^(2s/(2s+d)))`` and add-
    ``smoothing`` (default 1/2) counts, so the cross-entropy is finite (:func:`baselines.knn_class_proba`).
``"logistic"``
    Multinomial logistic regression on the standardised raw input (the ambient baseline; L2 penalty ``1/C``).

Classification rows fill the columns of :data:`manireg.curves.metrics.CLASSIFICATION_COLUMNS` (the excess
risks only where the campaign knows the Bayes probabilities); the regression columns stay empty.

Every learner fits on the same points of a cell: the first ``n_fit = n - n_val`` of the cell's ``n``
(``n_val = round(validation_fraction * n)``), reports its validation MSE on the other ``n_val`` and its test MSE on
the campaign's fixed test set. Nets use the validation part for early stopping; the baselines only report it.

References
----------
.. [1] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
.. [2] L. Györfi, M. Kohler, A. Krzyżak, H. Walk, *A Distribution-Free Theory of Nonparametric
   Regression*, Springer (2002).
.. [3] S. Kpotufe, NIPS (2011).
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field

import numpy as np

from manireg.curves import baselines

__all__ = ["LearnerSpec", "Learner", "NetLearner", "KNNLearner", "KernelRidgeLearner", "NetClassifierLearner",
           "KNNClassifierLearner", "LogisticLearner", "ConvNetLearner", "ConvClassifierLearner", "LEARNER_KINDS",
           "register_learner", "make_learner"]


def _register_task_learners():
    """Import the modules that register learners of other tasks (policy learning registers on import; it
    cannot be imported at the top of this module without an import circle)."""
    import importlib

    for module in ("manireg.curves.policy",):
        importlib.import_module(module)


@dataclass
class LearnerSpec:
    """A learner of a campaign: its kind, its name (the ``learner`` column of the rows) and its parameters.

    Parameters
    ----------
    kind : str
        One of :data:`LEARNER_KINDS` (``"net"``, ``"knn"``, ``"kernel_ridge"``).
    name : str, optional
        Row label. Default: the kind, and for nets with ``width_multiplier != 1`` ``"net-w<m>"``
        (``"net-w0.5"``, ``"net-w2"``).
    params : dict
        ``"net"``: ``width_multiplier`` (default 1.0), ``constants`` (dict of
        :class:`manireg.theory.SizingConstants` fields), ``output_bound`` ("auto", the default: 1.1 x the
        largest |y| outside the test set; None: no clipping; or a number) and any
        :class:`manireg.nets.training.TrainConfig` field (``learning_rate``, ``max_steps``, ...).
        ``"knn"``: ``c`` (default 1.0) or a fixed ``k``. ``"kernel_ridge"``: ``c_bandwidth`` (1.0),
        ``c_ridge`` (1e-3), ``max_exact`` (3000).

    Raises
    ------
    ValueError
        For an unknown kind (the message lists the known ones) or an unknown parameter.

    Examples
    --------
    >>> LearnerSpec("net", params={"width_multiplier": 2}).name
    'net-w2'
    """

    kind: str
    name: str | None = None
    params: dict = field(default_factory=dict)

    def __post_init__(self):
        if isinstance(self.kind, str) and self.kind not in LEARNER_KINDS:
            _register_task_learners()
        if not isinstance(self.kind, str) or self.kind not in LEARNER_KINDS:
            raise ValueError(
                f"the 'kind' parameter of LearnerSpec must be one of {sorted(LEARNER_KINDS)}; got {self.kind!r}. "
                "Register a new kind with manireg.curves.learners.register_learner."
            )
        if self.params is None:
            self.params = {}
        if not isinstance(self.params, dict):
            raise ValueError(f"the 'params' parameter of LearnerSpec must be a dict; got {type(self.params).__name__}.")
        self.params = dict(self.params)
        LEARNER_KINDS[self.kind].check_params(self.params)
        if self.name is None:
            self.name = LEARNER_KINDS[self.kind].default_name(self.params)
        if not isinstance(self.name, str) or not self.name:
            raise ValueError(f"the 'name' parameter of LearnerSpec must be a non-empty str; got {self.name!r}.")

    @classmethod
    def coerce(cls, value) -> "LearnerSpec":
        """A LearnerSpec from a LearnerSpec, a kind string (``"knn"``) or a dict of its fields."""
        if isinstance(value, LearnerSpec):
            return value
        if isinstance(value, str):
            return cls(value)
        if isinstance(value, dict):
            return cls(**value)
        raise ValueError(
            f"a learner must be a LearnerSpec, a kind string or a dict; got {type(value).__name__}. "
            f"Known kinds: {sorted(LEARNER_KINDS)}."
        )

    def to_dict(self) -> dict:
        return {"kind": self.kind, "name": self.name, "params": dict(self.params)}


class Learner:
    """Base class of a registered learner kind.

    Subclasses set ``kind``, ``allowed`` (parameter names), ``batchable`` (whether cells of one n go to one
    call), ``task`` (``"regress"`` or ``"classify"``: the campaigns it can join) and implement
    :meth:`resolve` (the full configuration, defaults included, that goes into the cell key) and
    :meth:`run` (cells -> metric dicts).
    """

    kind = ""
    allowed: tuple = ()
    batchable = False
    task = "regress"

    def __init__(self, spec: LearnerSpec):
        self.spec = spec

    @classmethod
    def check_params(cls, params):
        unknown = sorted(set(params) - set(cls.allowed_params()))
        if unknown:
            raise ValueError(
                f"LearnerSpec(kind={cls.kind!r}) got unknown parameter(s) {unknown}; allowed: "
                f"{sorted(cls.allowed_params())}."
            )

    @classmethod
    def allowed_params(cls):
        return cls.allowed

    @classmethod
    def default_name(cls, params) -> str:
        return cls.kind

    def resolve(self, context) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError

    def cell_cost(self, n, data) -> float:
        """Rough floating-point operations of one cell of size ``n``; only used to balance work units
        over workers, so a factor of two does not matter. Default: a distance computation between the
        ``n`` training and the ``n + n_test`` evaluation points (what kNN does, brute force)."""
        return 2.0 * data.ambient_dim * n * (n + len(data.y_test))

    def run(self, cells, data) -> list:  # pragma: no cover - abstract
        raise NotImplementedError


def _cell_tasks(cells, data, labels=False):
    """One :class:`~manireg.nets.training.ReplicaTask` per cell, made as the trainer asks for it: a trainer
    that prepares tasks one at a time can then drop each cell's float64 rows before the next cell's are read.
    ``labels``: targets as int64 class labels."""
    from manireg.nets.training import ReplicaTask

    for c in cells:
        Xf, yf, Xv, yv = data.cell_split(c)
        if labels:
            yf, yv = yf.astype(np.int64), yv.astype(np.int64)
        yield ReplicaTask(Xf, yf, Xv, yv, seed=int(c.seed))
        del Xf, Xv


def _mse(a, b):
    return float(np.mean((np.asarray(a, float) - np.asarray(b, float)) ** 2))


def _test_errors(pred, data):
    clean = None if data.f_test is None else _mse(pred, data.f_test)
    return _mse(pred, data.y_test), clean


class NetLearner(Learner):
    """ReLU network sized by the theory and trained by the batched trainer (see module docstring)."""

    kind = "net"
    batchable = True
    _own = ("width_multiplier", "constants", "output_bound", "budget", "budget_multiplier")

    @classmethod
    def allowed_params(cls):
        from manireg.nets.training import TrainConfig

        return cls._own + tuple(f.name for f in dataclasses.fields(TrainConfig))

    @classmethod
    def check_params(cls, params):
        super().check_params(params)
        wm = params.get("width_multiplier", 1.0)
        if isinstance(wm, bool) or not isinstance(wm, (int, float)) or not (math.isfinite(wm) and wm > 0):
            raise ValueError(f"the 'width_multiplier' parameter of LearnerSpec('net') must be a real > 0; got {wm!r}.")
        ob = params.get("output_bound", "auto")
        if not (ob is None or ob == "auto" or (isinstance(ob, (int, float)) and not isinstance(ob, bool) and ob > 0)):
            raise ValueError(f"the 'output_bound' parameter of LearnerSpec('net') must be 'auto', None or a real > 0; got {ob!r}.")
        bm = params.get("budget_multiplier", 1.0)
        if isinstance(bm, bool) or not isinstance(bm, (int, float)) or not (math.isfinite(bm) and bm > 0):
            raise ValueError(f"the 'budget_multiplier' parameter of LearnerSpec('net') must be a real > 0; got {bm!r}.")
        b = params.get("budget")
        if not (b is None or b == "fixed" or isinstance(b, dict)):
            raise ValueError(f"the 'budget' parameter of LearnerSpec('net') must be None (the default step and "
                             f"learning-rate rules), 'fixed' (TrainConfig's max_steps and learning_rate as given) or a "
                             f"dict of TrainingBudget fields; got {b!r}.")

    @classmethod
    def default_name(cls, params) -> str:
        wm = float(params.get("width_multiplier", 1.0))
        return "net" if wm == 1.0 else f"net-w{wm:g}"

    def _configs(self):
        from manireg.nets.training import TrainConfig
        from manireg.theory.sizing import SizingConstants

        p = self.spec.params
        train = TrainConfig(**{k: v for k, v in p.items() if k not in self._own})
        constants = SizingConstants(**dict(p.get("constants") or {}))
        return train, constants

    def budget(self):
        """The :class:`~manireg.theory.sizing.TrainingBudget` of this learner, or None when the step budget and
        learning rate are fixed: ``budget="fixed"``, or ``max_steps`` / ``learning_rate`` given explicitly (those
        then keep their values at every n; ``budget_multiplier`` still multiplies the steps)."""
        from manireg.theory.sizing import TrainingBudget

        p = self.spec.params
        b = p.get("budget")
        if b == "fixed" or (b is None and ("max_steps" in p or "learning_rate" in p)):
            return None
        return TrainingBudget(**{**dict(b or {}), "multiplier": float(p.get("budget_multiplier", 1.0))})

    def train_config(self, n, data, arch=None):
        """The :class:`~manireg.nets.training.TrainConfig` of the cells of size ``n``: the step budget and the
        learning rate of :func:`~manireg.theory.sizing.training_budget` for this n and this net's width."""
        from manireg.theory.sizing import training_budget

        train, _ = self._configs()
        b = self.budget()
        if b is None:
            bm = float(self.spec.params.get("budget_multiplier", 1.0))
            if bm == 1.0:
                return train
            steps = max(1, int(math.ceil(bm * train.max_steps)))
            return dataclasses.replace(train, max_steps=steps)
        arch = self.architecture(n, data) if arch is None else arch
        r = training_budget(n - data.n_val(n), arch.width, batch_size=train.batch_size,
                            full_batch_threshold=train.full_batch_threshold, budget=b)
        return dataclasses.replace(train, max_steps=r["max_steps"], learning_rate=r["learning_rate"],
                                   patience_steps=max(train.patience_steps, r["patience_steps"]),
                                   min_steps=max(train.min_steps, r["min_steps"]))

    def resolve(self, context) -> dict:
        train, constants = self._configs()
        ob = self.spec.params.get("output_bound", "auto")
        out = {
            "width_multiplier": float(self.spec.params.get("width_multiplier", 1.0)),
            "output_bound": ob if ob in (None, "auto") else float(ob),
            "constants": dataclasses.asdict(constants),
            "train": dataclasses.asdict(train),
        }
        b = self.budget()
        if b is not None:  # the step and learning-rate rules replace train's max_steps and learning_rate
            out["budget"] = dataclasses.asdict(b)
        elif float(self.spec.params.get("budget_multiplier", 1.0)) != 1.0:
            out["budget_multiplier"] = float(self.spec.params["budget_multiplier"])
        return out

    def architecture(self, n, data):
        from manireg.theory.sizing import size_network

        train, constants = self._configs()
        return size_network(n, data.dimension, data.smoothness, data.ambient_dim, constants=constants,
                            width_multiplier=float(self.spec.params.get("width_multiplier", 1.0)),
                            output_bound=self._output_bound(data))

    def cell_cost(self, n, data) -> float:
        """Training steps (``6 * parameters * rows`` per step, ``max_steps`` steps), the validation passes
        and the final evaluation of one replica, in flops."""
        arch = self.architecture(n, data)
        train = self.train_config(n, data, arch)
        n_val = int(round(data.validation_fraction * n))
        n_fit = n - n_val
        rows = n_fit if n_fit <= train.full_batch_threshold else min(train.batch_size, n_fit)
        evals = train.max_steps // train.eval_every + 1
        P = arch.n_parameters
        return 6.0 * P * rows * train.max_steps + 2.0 * P * (n_val * evals + n + len(data.y_test))

    def _output_bound(self, data):
        """The clipping bound: ``"auto"`` (default) is 1.1 x the largest |y| outside the test set (the theory's
        estimator clips its output at a bound on the target; without it a small-n net can extrapolate far
        beyond the data); ``None`` means no clipping; a number is used as given."""
        ob = self.spec.params.get("output_bound", "auto")
        if ob is None:
            return None
        if ob == "auto":
            pool = np.setdiff1d(np.arange(len(data.y)), data.test_idx)
            top = float(np.abs(data.y[pool]).max()) if len(pool) else 0.0
            return 1.1 * top if top > 0 else 1.0
        return float(ob)

    def run(self, cells, data) -> list:
        from manireg.nets.training import BatchedTrainer

        ns = {c.n for c in cells}
        if len(ns) != 1:
            raise ValueError(f"NetLearner.run: cells of one call must share n; got sizes {sorted(ns)}.")
        arch = self.architecture(cells[0].n, data)
        train = self.train_config(cells[0].n, data, arch)
        trainer = BatchedTrainer(arch, train)
        results = trainer.fit(_cell_tasks(cells, data))
        out = []
        for i, r in enumerate(results):
            test, clean = _test_errors(trainer.predict(data.X_test, replica=i), data)
            out.append({
                "train_mse": float(r.train_mse), "val_mse": float(r.val_mse), "test_mse": test,
                "test_mse_clean": clean, "steps": int(r.steps), "best_step": int(r.best_step),
                "stop_reason": str(r.stop_reason), "late_best": bool(r.late_best), "seconds": float(r.seconds),
                "n_parameters": int(r.n_parameters), "width": int(arch.width), "depth": int(arch.depth),
                "width_multiplier": float(self.spec.params.get("width_multiplier", 1.0)),
                "precision": str(r.precision),
            })
        return out


def _baseline_row(pred_fit, yf, pred_val, yv, pred_test, data, seconds):
    test, clean = _test_errors(pred_test, data)
    return {
        "train_mse": _mse(pred_fit, yf), "val_mse": _mse(pred_val, yv) if len(yv) else None,
        "test_mse": test, "test_mse_clean": clean, "steps": None, "best_step": None,
        "stop_reason": None, "late_best": None, "seconds": seconds, "n_parameters": None,
        "width": None, "depth": None, "width_multiplier": None, "precision": None,
    }


class KNNLearner(Learner):
    """k-nearest-neighbour regression with the rate-optimal k rule (see :func:`baselines.knn_k`)."""

    kind = "knn"
    allowed = ("c", "k")

    @classmethod
    def check_params(cls, params):
        super().check_params(params)
        if "k" in params and params["k"] is not None:
            k = params["k"]
            if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
                raise ValueError(f"the 'k' parameter of LearnerSpec('knn') must be an int >= 1; got {k!r}.")

    def resolve(self, context) -> dict:
        k = self.spec.params.get("k")
        return {"c": float(self.spec.params.get("c", baselines.DEFAULT_KNN_C)), "k": None if k is None else int(k)}

    def k_for(self, n_fit, data):
        k = self.spec.params.get("k")
        if k is not None:
            return int(min(k, n_fit))
        return baselines.knn_k(n_fit, data.dimension, data.smoothness, c=float(self.spec.params.get("c", baselines.DEFAULT_KNN_C)))

    def run(self, cells, data) -> list:
        from manireg.geometry.neighbors import QUERY_APPROXIMATE_ABOVE

        out = []
        for c in cells:
            t0 = time.perf_counter()
            fit, val = data.cell_rows(c)
            yf, yv = data.y[fit], data.y[val]
            k = self.k_for(len(fit), data)
            # the fitted, validation and test rows in one array read once, the fitted rows a view of it (at 2.5e5
            # rows a separate copy of each part was another 0.5 GB of the worker's memory); above the exact
            # search's limit in float32, the approximate search's own type (the array becomes its stack)
            dtype = np.float32 if len(fit) > QUERY_APPROXIMATE_ABOVE else np.float64
            Q = data.take(np.concatenate([fit, val, data.test_idx]), dtype=dtype)
            a, b = len(fit), len(fit) + len(val)
            pred = baselines.knn_regress(Q[:a], yf, Q, k)
            out.append(_baseline_row(pred[:a], yf, pred[a:b], yv, pred[b:], data, time.perf_counter() - t0))
        return out


class KernelRidgeLearner(Learner):
    """Gaussian kernel ridge with rate-driven bandwidth and penalty (see :mod:`baselines`)."""

    kind = "kernel_ridge"
    allowed = ("c_bandwidth", "c_ridge", "max_exact")

    def resolve(self, context) -> dict:
        p = self.spec.params
        return {
            "c_bandwidth": float(p.get("c_bandwidth", baselines.DEFAULT_BANDWIDTH_C)),
            "c_ridge": float(p.get("c_ridge", baselines.DEFAULT_RIDGE_C)),
            "max_exact": int(p.get("max_exact", baselines.DEFAULT_MAX_EXACT)),
        }

    def cell_cost(self, n, data) -> float:
        """Kernel matrix and its factorisation (exact), or the Nyström factor with ``max_exact`` centres."""
        m = min(n, int(self.resolve(None)["max_exact"]))
        return 2.0 * data.ambient_dim * m * (n + len(data.y_test)) + n * m * m + m ** 3 / 3.0

    def run(self, cells, data) -> list:
        r = self.resolve(None)
        out = []
        for c in cells:
            t0 = time.perf_counter()
            Xf, yf, Xv, yv = data.cell_split(c)
            h = baselines.kernel_bandwidth(Xf, data.dimension, data.smoothness, c=r["c_bandwidth"], seed=int(c.seed))
            lam = baselines.kernel_ridge_penalty(len(Xf), data.dimension, data.smoothness, c=r["c_ridge"])
            Q = np.vstack([Xf, Xv, data.X_test])
            pred = baselines.kernel_ridge_regress(Xf, yf, Q, bandwidth=h, penalty=lam, max_exact=r["max_exact"],
                                                  seed=int(c.seed))
            a, b = len(Xf), len(Xf) + len(Xv)
            out.append(_baseline_row(pred[:a], yf, pred[a:b], yv, pred[b:], data, time.perf_counter() - t0))
        return out


def _classification_row(proba_test, data, seconds, **extra):
    from manireg.curves.metrics import classification_metrics

    row = {"seconds": float(seconds)}
    row.update(classification_metrics(proba_test, data.y_test.astype(np.int64), data.bayes_test))
    row.update(extra)
    return row


class NetClassifierLearner(NetLearner):
    """ReLU network with one output per class, trained with the cross-entropy loss (module docstring)."""

    kind = "net_classifier"
    task = "classify"

    @classmethod
    def allowed_params(cls):
        return tuple(p for p in super().allowed_params() if p != "output_bound")

    @classmethod
    def default_name(cls, params) -> str:
        wm = float(params.get("width_multiplier", 1.0))
        return "net_classifier" if wm == 1.0 else f"net_classifier-w{wm:g}"

    def _output_bound(self, data):
        return None  # probabilities are not clipped

    def budget(self):
        """Classification nets keep ``TrainConfig``'s step cap and learning rate unless a ``budget`` dict is given:
        the training-budget rule was measured on regression only (docs/theory.md, Training budget)."""
        if self.spec.params.get("budget") is None:
            return None
        return super().budget()

    def resolve(self, context) -> dict:
        out = super().resolve(context)
        out.pop("output_bound")
        out["loss"] = "cross_entropy"
        return out

    def cell_cost(self, n, data) -> float:
        return super().cell_cost(n, data) * max(1.0, 0.5 * data.n_classes)

    def run(self, cells, data) -> list:
        from manireg.nets.training import BatchedTrainer

        ns = {c.n for c in cells}
        if len(ns) != 1:
            raise ValueError(f"NetClassifierLearner.run: cells of one call must share n; got sizes {sorted(ns)}.")
        arch = self.architecture(cells[0].n, data)
        train = self.train_config(cells[0].n, data, arch)
        trainer = BatchedTrainer(arch, train, loss="cross_entropy", n_outputs=data.n_classes)
        results = trainer.fit(_cell_tasks(cells, data, labels=True))
        out = []
        for i, r in enumerate(results):
            out.append(_classification_row(
                trainer.predict(data.X_test, replica=i), data, r.seconds, steps=int(r.steps),
                best_step=int(r.best_step), stop_reason=str(r.stop_reason), late_best=bool(r.late_best),
                n_parameters=int(r.n_parameters), width=int(arch.width), depth=int(arch.depth),
                width_multiplier=float(self.spec.params.get("width_multiplier", 1.0)), precision=str(r.precision)))
        return out


class KNNClassifierLearner(KNNLearner):
    """k-nearest-neighbour classification with the rate rule for k and smoothed class frequencies."""

    kind = "knn_classifier"
    task = "classify"
    allowed = ("c", "k", "smoothing")

    def resolve(self, context) -> dict:
        out = super().resolve(context)
        out["smoothing"] = float(self.spec.params.get("smoothing", 0.5))
        return out

    def run(self, cells, data) -> list:
        smoothing = float(self.spec.params.get("smoothing", 0.5))
        out = []
        for c in cells:
            t0 = time.perf_counter()
            Xf, yf, _, _ = data.cell_split(c)
            k = self.k_for(len(Xf), data)
            P = baselines.knn_class_proba(Xf, yf, data.X_test, k, data.n_classes, smoothing=smoothing)
            out.append(_classification_row(P, data, time.perf_counter() - t0))
        return out


class LogisticLearner(Learner):
    """Multinomial logistic regression on the raw (standardised) input: the ambient baseline."""

    kind = "logistic"
    task = "classify"
    allowed = ("C",)

    def resolve(self, context) -> dict:
        return {"C": float(self.spec.params.get("C", 1.0))}

    def cell_cost(self, n, data) -> float:
        return 200.0 * data.ambient_dim * max(2, data.n_classes) * n

    def run(self, cells, data) -> list:
        C = self.resolve(None)["C"]
        out = []
        for c in cells:
            t0 = time.perf_counter()
            Xf, yf, _, _ = data.cell_split(c)
            P = baselines.logistic_proba(Xf, yf, data.X_test, data.n_classes, C=C, seed=int(c.seed) % (2**32))
            out.append(_classification_row(P, data, time.perf_counter() - t0))
        return out


#: Registered learner kinds: kind -> Learner subclass.
LEARNER_KINDS: dict = {"net": NetLearner, "knn": KNNLearner, "kernel_ridge": KernelRidgeLearner,
                       "net_classifier": NetClassifierLearner, "knn_classifier": KNNClassifierLearner,
                       "logistic": LogisticLearner}


def register_learner(cls) -> type:
    """Register a :class:`Learner` subclass under ``cls.kind`` (usable as a class decorator)."""
    if not (isinstance(cls, type) and issubclass(cls, Learner) and isinstance(cls.kind, str) and cls.kind):
        raise ValueError("register_learner needs a Learner subclass with a non-empty 'kind' attribute.")
    LEARNER_KINDS[cls.kind] = cls
    return cls


def make_learner(spec) -> Learner:
    """The Learner object for a :class:`LearnerSpec` (or anything :meth:`LearnerSpec.coerce` accepts)."""
    spec = LearnerSpec.coerce(spec)
    return LEARNER_KINDS[spec.kind](spec)


# ---------------------------------------------------------------------------- convolutional learners
class ConvNetLearner(NetLearner):
    """Residual convolutional net on image rows, sized by :func:`manireg.theory.sizing.size_conv_network`
    and trained by :class:`manireg.nets.conv.BatchedConvTrainer` (all repeats of one n in one call).

    Parameters (``LearnerSpec.params``): ``image_shape`` ((H, W) or (C, H, W); default: square grey images
    when the number of columns is a square, e.g. (16, 16) for 256 columns); ``c_channels``, ``channels_max``
    (the channel rule's constant and cap); ``mode`` ("auto", "grouped", "split"); ``constants``
    (SizingConstants fields: depth and head width rules); ``output_bound`` (regression, as for ``"net"``);
    and any TrainConfig field. Rows put the channels in ``width`` and the residual blocks in ``depth``.
    """

    kind = "conv_net"
    _own = ("image_shape", "constants", "output_bound", "c_channels", "channels_max", "mode")
    _loss = "mse"

    @classmethod
    def check_params(cls, params):
        Learner.check_params.__func__(cls, params)
        if params.get("image_shape") is not None:
            from manireg.nets.conv import check_image_shape

            check_image_shape(params["image_shape"], None, owner=f"LearnerSpec({cls.kind!r})")

    @classmethod
    def default_name(cls, params) -> str:
        return cls.kind

    def image_shape(self, data):
        """The declared (C, H, W), checked against the data's columns (a clear error when they differ)."""
        from manireg.nets.conv import check_image_shape

        D = int(data.ambient_dim)
        shape = self.spec.params.get("image_shape")
        if shape is None:
            side = int(round(math.sqrt(D)))
            if side * side != D:
                raise ValueError(
                    f"LearnerSpec({self.kind!r}): the data has {D} columns, not a square number of pixels; declare "
                    "the image shape with params={'image_shape': (C, H, W)} (C*H*W must equal the columns).")
            shape = (side, side)
        return check_image_shape(shape, D, owner=f"LearnerSpec({self.kind!r})")

    def _train_config(self):
        from manireg.nets.training import TrainConfig

        return TrainConfig(**{k: v for k, v in self.spec.params.items() if k not in self._own})

    def resolve(self, context) -> dict:
        from manireg.theory.sizing import SizingConstants

        p = self.spec.params
        out = {"image_shape": None if context is None else list(self.image_shape(context)),
               "c_channels": float(p.get("c_channels", 1.0)), "channels_max": int(p.get("channels_max", 32)),
               "mode": str(p.get("mode", "auto")),
               "constants": dataclasses.asdict(SizingConstants(**dict(p.get("constants") or {}))),
               "train": dataclasses.asdict(self._train_config()), "loss": self._loss}
        if self._loss == "mse":
            ob = p.get("output_bound", "auto")
            out["output_bound"] = ob if ob in (None, "auto") else float(ob)
        return out

    def architecture(self, n, data):
        from manireg.theory.sizing import SizingConstants, size_conv_network

        p = self.spec.params
        ob = self._output_bound(data) if self._loss == "mse" else None
        return size_conv_network(n, data.dimension, data.smoothness, self.image_shape(data),
                                 constants=SizingConstants(**dict(p.get("constants") or {})),
                                 c_channels=float(p.get("c_channels", 1.0)), channels_max=int(p.get("channels_max", 32)),
                                 n_outputs=max(1, data.n_classes) if self._loss != "mse" else 1, output_bound=ob)

    def cell_cost(self, n, data) -> float:
        """Training steps of one replica: ``6 *`` (multiply-adds of one image) ``*`` rows ``*`` steps."""
        from manireg.nets.conv import BatchedConvTrainer

        train = self._train_config()
        arch = self.architecture(n, data)
        n_fit = n - int(round(data.validation_fraction * n))
        rows = n_fit if n_fit <= train.full_batch_threshold else min(train.batch_size, n_fit)
        per_row = BatchedConvTrainer(arch, train, loss=self._loss)._flops_per_row()
        return 6.0 * per_row * rows * train.max_steps + 2.0 * per_row * (n + len(data.y_test))

    def _fit(self, cells, data):
        from manireg.nets.conv import BatchedConvTrainer

        ns = {c.n for c in cells}
        if len(ns) != 1:
            raise ValueError(f"{type(self).__name__}.run: cells of one call must share n; got sizes {sorted(ns)}.")
        arch = self.architecture(cells[0].n, data)
        trainer = BatchedConvTrainer(arch, self._train_config(), loss=self._loss,
                                     mode=str(self.spec.params.get("mode", "auto")))
        return arch, trainer, trainer.fit(_cell_tasks(cells, data, labels=self._loss != "mse"))

    def _extra(self, arch, r):
        return {"steps": int(r.steps), "best_step": int(r.best_step), "stop_reason": str(r.stop_reason),
                "late_best": bool(r.late_best), "n_parameters": int(r.n_parameters), "width": int(arch.channels),
                "depth": int(arch.n_blocks), "width_multiplier": None, "precision": str(r.precision)}

    def run(self, cells, data) -> list:
        arch, trainer, results = self._fit(cells, data)
        out = []
        for i, r in enumerate(results):
            test, clean = _test_errors(trainer.predict(data.X_test, replica=i), data)
            row = {"train_mse": float(r.train_mse), "val_mse": float(r.val_mse), "test_mse": test,
                   "test_mse_clean": clean, "seconds": float(r.seconds)}
            row.update(self._extra(arch, r))
            out.append(row)
        return out


class ConvClassifierLearner(ConvNetLearner):
    """The residual convolutional net with one output per class, trained with the cross-entropy loss."""

    kind = "conv_classifier"
    task = "classify"
    _own = ("image_shape", "constants", "c_channels", "channels_max", "mode")
    _loss = "cross_entropy"

    def run(self, cells, data) -> list:
        arch, trainer, results = self._fit(cells, data)
        return [_classification_row(trainer.predict(data.X_test, replica=i), data, r.seconds, **self._extra(arch, r))
                for i, r in enumerate(results)]


register_learner(ConvNetLearner)
register_learner(ConvClassifierLearner)
