"""A campaign as a plan of cells: which learner, at which training size, in which repeat, with which seed.

Design of the splits (all seeded from the campaign ``seed``):

* **Test set, fixed.** One permutation of all rows (seed ``(seed, 0)``) puts ``test_size`` rows aside; every
  cell of every learner is scored on the same test rows.
* **Nested training sets.** Repeat ``r`` has its own seed ``seed_r`` (from ``SeedSequence([seed, 1, r])``)
  and one permutation of the remaining pool; the cell of size ``n`` takes its first ``n`` rows. So within a
  repeat the size-256 set is contained in the size-512 set, and all learners of a repeat see the same rows.
  Differences between sizes are then differences in n, not in which points were drawn.
* **Validation inside n.** Of a cell's ``n`` rows the last ``n_val = round(validation_fraction * n)`` are the
  validation part (early stopping for nets, reported for every learner); the first ``n - n_val`` are fitted.

Each cell has a ``key``: the SHA-256 of the canonical JSON (sorted keys) of its full configuration, i.e. the
campaign name, learner kind and name, the learner's resolved parameters (the train config and sizing constants
with all defaults filled in), n, repeat, seed, the split settings, d, s, and the fingerprint of the data
(X, y and the noise-free target). Change any of these and the key changes, so a store never hands back a
row computed under another setting.

References
----------
.. [1] J. Hestness et al., "Deep learning scaling is predictable, empirically", arXiv:1712.00409 (2017).
.. [2] T. Viering, M. Loog, "The shape of learning curves: a review", IEEE TPAMI 45 (2023).
"""

from __future__ import annotations

import hashlib
import json
import numbers
from dataclasses import dataclass, field

import numpy as np

from manireg._random import derive_seed as _seed_int
from manireg._validation import check_float, check_int, check_points, check_target
from manireg.curves.learners import LearnerSpec, make_learner

__all__ = ["CampaignSpec", "CampaignData", "Cell", "expand", "prepare", "check_sizes", "default_sizes", "canonical_json",
           "ROW_COLUMNS", "TASKS", "DEFAULT_MIN_SIZE", "DEFAULT_N_SIZES", "MIN_SIZE"]

#: Smallest size of the default grid (and the default grid never starts below it).
DEFAULT_MIN_SIZE = 64
#: Number of sizes of the default geometric grid.
DEFAULT_N_SIZES = 6
#: Smallest size allowed at all: the cell needs >= 2 fitted rows and >= 1 validation row.
MIN_SIZE = 4

#: Columns of a campaign row, in order (one row per cell).
ROW_COLUMNS = (
    "key", "campaign", "learner", "n", "repeat", "seed", "train_mse", "val_mse", "test_mse", "test_mse_clean",
    "steps", "best_step", "stop_reason", "late_best", "seconds", "n_parameters", "width", "depth",
    "width_multiplier", "precision", "status", "error", "created_at", "config_json",
    # policy campaigns (manireg.curves.policy); empty for regression cells
    "regret", "policy_value", "value_estimate", "value_se", "ess", "clipped_share", "overlap_json",
    # classification cells (task "classify"; see manireg.curves.metrics)
    "test_cross_entropy", "excess_logistic_risk", "test_error_rate", "excess_error_rate", "calibration_error",
)

#: Campaign tasks: regression on a numeric target, classification of labels.
TASKS = ("regress", "classify")

_GENERATORS = ("sphere", "graph_manifold", "torus", "swiss_roll", "helix", "rendered_objects")


def canonical_json(obj) -> str:
    """JSON with sorted keys and no whitespace; non-finite floats become null. Equal config, equal text."""
    from manireg._results import to_jsonable

    return json.dumps(to_jsonable(obj), sort_keys=True, separators=(",", ":"), allow_nan=False)


def _hash(obj) -> str:
    return hashlib.sha256(canonical_json(obj).encode()).hexdigest()


def default_sizes(n_pool: int, min_size: int = DEFAULT_MIN_SIZE, n_sizes: int = DEFAULT_N_SIZES) -> list:
    """Geometric grid of ``n_sizes`` integers from ``min(min_size, n_pool // 2)`` to ``n_pool``.

    ``n_pool`` is the number of rows left after the test split, so the largest size uses every one.
    """
    lo = max(MIN_SIZE, min(min_size, n_pool // 2))
    grid = np.unique(np.round(np.geomspace(lo, n_pool, n_sizes)).astype(int))
    return [int(v) for v in grid]


@dataclass
class CampaignSpec:
    """Definition of a learning-curve campaign.

    Parameters
    ----------
    X : array of shape (N, D), optional
        Inputs. Give ``X`` and ``y``, or ``generator``.
    y : array of shape (N,), optional
        Targets.
    f_clean : array of shape (N,), optional
        Noise-free target values (synthetic data); rows then carry ``test_mse_clean``.
    generator : dict, optional
        Synthetic data instead of X/y: ``{"manifold": "graph_manifold", "n": 4000, "d": 3,
        "ambient_dim": 64, "smoothness": 1.0, "noise_std": 0.1, "seed": 0, ...}``; the manifold is one
        of the generators of :mod:`manireg.data.manifolds`, extra keys go to it, ``smoothness``,
        ``noise_std`` and ``kind`` go to :func:`manireg.data.make_regression`. d and s default to the known
        ones.
    sizes : sequence of int, optional
        Training sizes (each includes the validation part). Default: :func:`default_sizes`, a geometric
        grid of 6 sizes from 64 to every row left after the test split. At least 2 distinct sizes.
    repeats : int, default=5
        Independent repeats (each with its own nested training sets and seeds), >= 1.
    learners : sequence, optional
        :class:`LearnerSpec` objects, kind strings or dicts; default ``[LearnerSpec("net")]``.
        Learner names must be distinct.
    test_fraction : float, default=0.2
        Share of rows held out as the fixed test set (ignored when ``test_size`` is given).
    test_size : int, optional
        Number of test rows.
    validation_fraction : float, default=0.2
        Share of each cell's n used for validation.
    seed : int, default=0
        Seed of the test split, the nested permutations and every learner's randomness.
    dimension : float, optional
        Intrinsic dimension d for sizing nets and the baseline rules; estimated from X when None
        (:func:`manireg.geometry.dimension.estimate_dimension`).
    smoothness : float, optional
        Hölder smoothness s; 1.0 (Lipschitz) when None and not known from the generator.
    dimension_source : str, optional
        Where a given ``dimension`` came from, in words (e.g. "geometry read-out"); default "given".
    dimension_interval : (low, high), optional
        The range the dimension is read in (e.g. :func:`manireg.geometry.dimension_range`); the theory
        comparison carries it into each predicted exponent. Not part of the cell keys.
    name : str, default="campaign"
        Name of the campaign in the store (several campaigns can share one store).
    task : {"regress", "classify"}, default="regress"
        ``"classify"``: ``y`` holds class labels (integers or strings; coded ``0..K-1`` in sorted order,
        :func:`manireg.data.labels.encode_labels`), the learners are classifiers (``"net_classifier"``,
        ``"knn_classifier"``, ``"logistic"``) and rows carry the classification columns
        (:mod:`manireg.curves.metrics`). Every class needs at least as many rows as the smallest size. A
        ``generator`` then takes ``n_classes``, ``temperature`` and ``label_noise``
        (:func:`manireg.data.labels.make_classification`).
    bayes_proba : array of shape (N, K), optional
        Exact class probabilities (synthetic data, task ``"classify"``); rows then carry the excess risks.

    References
    ----------
    .. [1] J. Hestness et al., arXiv:1712.00409 (2017).
    """

    X: np.ndarray | None = field(default=None, repr=False)
    y: np.ndarray | None = field(default=None, repr=False)
    f_clean: np.ndarray | None = field(default=None, repr=False)
    generator: dict | None = None
    sizes: list | None = None
    repeats: int = 5
    learners: list | None = None
    test_fraction: float = 0.2
    test_size: int | None = None
    validation_fraction: float = 0.2
    seed: int = 0
    dimension: float | None = None
    smoothness: float | None = None
    name: str = "campaign"
    dimension_source: str | None = None
    dimension_interval: tuple | None = None
    task: str = "regress"
    bayes_proba: np.ndarray | None = field(default=None, repr=False)

    def to_dict(self) -> dict:
        """JSON-ready settings (arrays left out; the data is identified by its fingerprint elsewhere)."""
        learners = None if self.learners is None else [LearnerSpec.coerce(l).to_dict() for l in self.learners]
        return {
            "generator": self.generator, "sizes": None if self.sizes is None else [int(v) for v in self.sizes],
            "repeats": self.repeats, "learners": learners, "test_fraction": self.test_fraction,
            "test_size": self.test_size, "validation_fraction": self.validation_fraction, "seed": self.seed,
            "dimension": self.dimension, "smoothness": self.smoothness, "name": self.name, "task": self.task,
            "dimension_source": self.dimension_source,
            "dimension_interval": None if self.dimension_interval is None else [float(v) for v in self.dimension_interval],
        }


@dataclass
class Cell:
    """One training run: a learner at size ``n`` in repeat ``repeat`` with seed ``seed``.

    ``key`` is the content hash of ``config`` (see the module docstring); ``config`` is stored with the row.
    """

    learner: LearnerSpec
    n: int
    repeat: int
    seed: int
    key: str
    campaign: str
    config: dict = field(repr=False)

    @property
    def unit_key(self):
        """Cells with equal unit keys may be trained together (same learner and n)."""
        return (self.learner.name, self.n)


@dataclass
class CampaignData:
    """Validated data of a campaign with its fixed test split and nested per-repeat permutations.

    Built by :func:`prepare`; it is what workers receive (it pickles compactly: arrays plus a few ints).
    ``X`` may be a :class:`manireg.data.LazyTable` (a file on disk): it pickles as its path, and a worker
    reads only the rows of its cells and the test rows (once per worker process), by index. The rows
    are the same float64 values either way, so results do not depend on where X lives.
    """

    X: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    f_clean: np.ndarray | None = field(repr=False)
    test_idx: np.ndarray = field(repr=False)
    pool_idx: np.ndarray = field(repr=False)
    sizes: list
    repeats: int
    learners: list
    seed: int
    validation_fraction: float
    dimension: float
    smoothness: float
    ambient_dim: int
    fingerprint: str
    name: str
    noise_variance: float | None = None
    dimension_source: str = "given"
    task: str = "regress"
    classes: list | None = None
    bayes_proba: np.ndarray | None = field(default=None, repr=False)

    @property
    def n_classes(self) -> int:
        """Number of classes (0 for regression)."""
        return 0 if self.classes is None else len(self.classes)

    @property
    def bayes_test(self):
        """Exact class probabilities at the test points, or None."""
        return None if self.bayes_proba is None else self.bayes_proba[self.test_idx]

    @property
    def on_disk(self) -> bool:
        """True when ``X`` is a table on disk read by rows."""
        return hasattr(self.X, "rows") and hasattr(self.X, "chunks")

    def take(self, rows, dtype=np.float64):
        """Rows of X by index, as float64 or ``dtype`` (read from the file when X is on disk)."""
        return self.X.rows(rows, dtype=dtype) if self.on_disk else self.X[rows].astype(dtype, copy=False)

    def __getstate__(self):
        state = dict(self.__dict__)
        state.pop("_X_test", None)  # the test rows are read again where they are used, never shipped
        return state

    @property
    def X_test(self):
        cached = self.__dict__.get("_X_test")
        if cached is None:
            cached = self.take(self.test_idx)
            if self.on_disk:
                self.__dict__["_X_test"] = cached  # one read per worker process
        return cached

    @property
    def y_test(self):
        return self.y[self.test_idx]

    @property
    def f_test(self):
        return None if self.f_clean is None else self.f_clean[self.test_idx]

    def repeat_seed(self, repeat: int) -> int:
        """Seed of a repeat, shared by all learners and sizes of that repeat."""
        return _seed_int(self.seed, 1, repeat)

    def n_val(self, n: int) -> int:
        return max(1, int(round(self.validation_fraction * n)))

    def cell_rows(self, cell):
        """Row indices (into X) of the cell's fitted part and validation part."""
        perm = np.random.default_rng(cell.seed).permutation(len(self.pool_idx))
        rows = self.pool_idx[perm[: cell.n]]
        nv = self.n_val(cell.n)
        return rows[: cell.n - nv], rows[cell.n - nv:]

    def cell_split(self, cell):
        """``(X_fit, y_fit, X_val, y_val)`` of a cell."""
        fit, val = self.cell_rows(cell)
        return self.take(fit), self.y[fit], self.take(val), self.y[val]

    def metadata(self, spec: CampaignSpec | None = None) -> dict:
        import sys

        versions = {"python": sys.version.split()[0]}
        for mod in ("manireg", "numpy", "torch", "sklearn"):
            try:
                versions[mod] = __import__(mod).__version__
            except Exception:  # noqa: BLE001 - a missing version is not an error
                pass
        return {
            "campaign": self.name, "spec": spec.to_dict() if spec is not None else None,
            "fingerprint": self.fingerprint, "dimension": self.dimension, "smoothness": self.smoothness,
            "ambient_dim": self.ambient_dim, "dimension_source": self.dimension_source, "noise_variance": self.noise_variance,
            "n_total": int(len(self.X)), "test_size": int(len(self.test_idx)), "sizes": list(self.sizes),
            "repeats": self.repeats, "learners": [l.to_dict() for l in self.learners], "versions": versions,
            "task": self.task, "classes": self.classes,
        }


def _generate(gen: dict, task: str = "regress"):
    from manireg.data import manifolds
    from manireg.data.targets import make_regression

    owner = "CampaignSpec.generator"
    if not isinstance(gen, dict) or "manifold" not in gen:
        raise ValueError(
            f"{owner} must be a dict with a 'manifold' key (one of {list(_GENERATORS)}); got {gen!r}."
        )
    g = dict(gen)
    name = g.pop("manifold")
    if name not in _GENERATORS:
        raise ValueError(f"{owner}: unknown manifold {name!r}; known: {list(_GENERATORS)}.")
    classify = task == "classify"
    own = ("smoothness", "n_classes", "temperature", "label_noise", "kind") if classify else ("smoothness", "noise_std", "kind")
    reg = {k: g.pop(k) for k in own if k in g}
    seed = g.get("seed", 0)
    g["seed"] = seed
    sample = getattr(manifolds, name)(**g)
    if classify:
        from manireg.data.labels import make_classification

        return make_classification(sample, seed=_seed_int(seed, 7), **reg)
    return make_regression(sample, seed=_seed_int(seed, 7), **reg)


def check_sizes(sizes, n_rows: int, *, test_fraction: float = 0.2, test_size=None, owner: str = "CampaignSpec"):
    """``(test_size, sizes)`` for a table of ``n_rows`` rows: the test split's size and the sorted training sizes
    (the default grid when ``sizes`` is None). Cheap, so callers can check sizes before any work or file.

    Raises
    ------
    ValueError
        Fewer than 2 distinct sizes, a size below :data:`MIN_SIZE`, a size above the rows left for training
        after the test split (naming both numbers and the fix), bad test settings.
    """
    N = int(n_rows)
    if test_size is not None:
        test_size = check_int(test_size, "test_size", owner=owner, low=1, high=N - MIN_SIZE)
    else:
        tf = check_float(test_fraction, "test_fraction", owner=owner, low=0.0, high=0.9, low_open=True)
        test_size = max(1, int(round(tf * N)))
    n_pool = N - test_size
    if sizes is None:
        return test_size, default_sizes(n_pool)
    raw = list(np.atleast_1d(np.asarray(sizes, dtype=object)))
    if any(isinstance(v, bool) or not isinstance(v, numbers.Integral) for v in raw):
        raise ValueError(f"the 'sizes' parameter of {owner} must be a list of ints; got {sizes!r}.")
    out = sorted({int(v) for v in raw})
    if len(out) < 2:
        raise ValueError(
            f"the 'sizes' parameter of {owner} needs at least 2 distinct sizes for a learning curve; got "
            f"{sizes!r}. Pass e.g. sizes=[{max(MIN_SIZE, n_pool // 8)}, {max(MIN_SIZE, n_pool // 4)}, "
            f"{n_pool}] or leave sizes=None for the default grid."
        )
    if out[0] < MIN_SIZE:
        raise ValueError(f"the 'sizes' parameter of {owner} must hold sizes >= {MIN_SIZE}; got {out[0]}.")
    if out[-1] > n_pool:
        raise ValueError(
            f"the 'sizes' parameter of {owner} has size {out[-1]} but only {n_pool} rows are left for "
            f"training after the test split ({N} rows - {test_size} test rows). Use sizes <= {n_pool}, "
            + ("pass more data, or a smaller --test-size." if owner.startswith("--")
               else "pass more data, or lower test_fraction/test_size.")
        )
    return test_size, out


def prepare(spec: CampaignSpec) -> CampaignData:
    """Validate a :class:`CampaignSpec` and build its :class:`CampaignData` (splits, sizes, d, s, fingerprint).

    Raises
    ------
    ValueError
        With what is wrong, what is allowed, what was received and the fix: no data, sizes larger than
        the rows left after the test split, fewer than 2 sizes, ``repeats < 1``, duplicate learner names,
        an unknown learner kind, bad fractions.
    """
    from manireg.geometry.neighbors import data_fingerprint

    owner = "CampaignSpec"
    if not isinstance(spec, CampaignSpec):
        raise ValueError(f"expected a CampaignSpec; got {type(spec).__name__}. Build one with CampaignSpec(X=..., y=...).")
    noise_variance = None
    d, s, d_source = spec.dimension, spec.smoothness, spec.dimension_source or "given"
    task = spec.task
    if task not in TASKS:
        raise ValueError(f"the 'task' parameter of {owner} must be one of {list(TASKS)}; got {task!r}.")
    bayes = spec.bayes_proba
    if spec.generator is not None:
        if spec.X is not None:
            raise ValueError(f"{owner}: give either X/y or generator, not both.")
        sample = _generate(spec.generator, task)
        if task == "classify":
            X, y, f_clean, bayes = sample.X, sample.y, None, sample.bayes_proba
        else:
            X, y, f_clean = sample.X, sample.y, sample.f_clean
            noise_variance = float(sample.noise_variance)
        d = float(sample.dimension) if d is None else d
        s = float(sample.smoothness) if s is None else s
        d_source = "generator" if spec.dimension is None else d_source
    else:
        lazy_target = spec.y is None and hasattr(spec.X, "rows") and getattr(spec.X, "target_name", None) is not None
        if spec.X is None or (spec.y is None and not lazy_target):
            raise ValueError(f"{owner}: no data; pass X and y (arrays), or generator={{'manifold': ...}}.")
        X, y, f_clean = spec.X, (spec.X.target() if lazy_target else spec.y), spec.f_clean
    on_disk = hasattr(X, "rows") and hasattr(X, "chunks")
    if on_disk:
        if X.shape[0] < 2 * MIN_SIZE:
            raise ValueError(f"{owner}: X has {X.shape[0]} row(s); at least {2 * MIN_SIZE} are needed. Pass more samples.")
        x_print = X.fingerprint()  # one pass over the file: also the NaN/inf check, chunk by chunk
    else:
        X = check_points(X, owner=owner, min_samples=2 * MIN_SIZE)
        x_print = None
    classes = None
    if task == "classify":
        from manireg.data.labels import encode_labels

        codes, classes = encode_labels(y, name="y", owner=owner)
        if len(codes) != X.shape[0]:
            raise ValueError(f"{owner}: y has {len(codes)} labels but X has {X.shape[0]} rows; they must match.")
        if len(classes) < 2:
            raise ValueError(
                f"{owner}: task 'classify' needs at least 2 classes; y holds one ({classes[0]!r}). "
                "Check the target column."
            )
        y = codes.astype(np.float64)
        if bayes is not None:
            bayes = np.asarray(bayes, dtype=np.float64)
            if bayes.shape != (X.shape[0], len(classes)) or not np.all(np.isfinite(bayes)) or \
                    np.abs(bayes.sum(axis=1) - 1.0).max() > 1e-6 or bayes.min() < 0:
                raise ValueError(
                    f"the 'bayes_proba' parameter of {owner} must be an ({X.shape[0]}, {len(classes)}) array of "
                    f"class probabilities (rows >= 0 summing to 1, columns in class order); got shape {bayes.shape}."
                )
    elif bayes is not None:
        raise ValueError(f"the 'bayes_proba' parameter of {owner} applies to task='classify' only; got task={task!r}.")
    y = check_target(y, X.shape[0], owner=owner)
    if f_clean is not None:
        f_clean = check_target(f_clean, X.shape[0], name="f_clean", owner=owner)
    N, D = X.shape
    repeats = check_int(spec.repeats, "repeats", owner=owner, low=1)
    seed = check_int(spec.seed, "seed", owner=owner, low=0)
    validation_fraction = check_float(spec.validation_fraction, "validation_fraction", owner=owner, low=0.0, high=0.5,
                               low_open=True)
    test_size, sizes = check_sizes(spec.sizes, N, test_fraction=spec.test_fraction, test_size=spec.test_size,
                                   owner=owner)
    default = "net_classifier" if task == "classify" else "net"
    learners = [LearnerSpec(default)] if spec.learners is None else [LearnerSpec.coerce(l) for l in spec.learners]
    if not learners:
        raise ValueError(f"the 'learners' parameter of {owner} is empty; pass at least one learner, e.g. ['net'].")
    from manireg.curves.learners import LEARNER_KINDS

    wrong = [l.name for l in learners if getattr(LEARNER_KINDS[l.kind], "task", "regress") != task]
    if wrong:
        fits = sorted(k for k, c in LEARNER_KINDS.items() if getattr(c, "task", "regress") == task)
        raise ValueError(
            f"the 'learners' parameter of {owner} has learner(s) {wrong} that do not do task {task!r}; "
            f"learners for {task!r}: {fits}."
        )
    if task == "classify":
        counts = np.bincount(y.astype(np.int64), minlength=len(classes))
        rare = [(classes[i], int(c)) for i, c in enumerate(counts) if c < sizes[0]]
        if rare:
            cls, cnt = rare[0]
            raise ValueError(
                f"{owner}: class {cls!r} has {cnt} rows, fewer than the smallest size {sizes[0]}"
                f"{f' ({len(rare)} such classes)' if len(rare) > 1 else ''}; every class needs at least as many rows "
                "as the smallest training size. Merge or drop rare classes, or start the sizes lower."
            )
    names = [l.name for l in learners]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ValueError(
            f"the 'learners' parameter of {owner} has duplicate name(s) {dup}; each learner needs its own name, "
            "e.g. LearnerSpec('net', name='net-lr1e-3', params={'learning_rate': 1e-3})."
        )
    if d is None and on_disk:
        from manireg.geometry.ondisk import describe_geometry_on_disk

        d = float(describe_geometry_on_disk(X, charts=False, seed=seed).consensus)
        d_source = "estimated (query subsample of the file)"
    elif d is None:
        from manireg.geometry.dimension import estimate_dimension

        d = float(estimate_dimension(X).consensus)
        d_source = "estimated"
    d = check_float(d, "dimension", owner=owner, low=1.0, high=float(D))
    s = 1.0 if s is None else check_float(s, "smoothness", owner=owner, low=0.0, low_open=True)
    name = spec.name
    if not isinstance(name, str) or not name:
        raise ValueError(f"the 'name' parameter of {owner} must be a non-empty str; got {name!r}.")
    parts = [y] + ([] if f_clean is None else [f_clean]) + ([] if bayes is None else [bayes])
    x_print = x_print or data_fingerprint(X)  # equal for the same values on disk and in memory
    fingerprint = hashlib.sha256((x_print + "".join(data_fingerprint(a) for a in parts)).encode()).hexdigest()[:32]
    perm = np.random.default_rng(_seed_int(seed, 0)).permutation(N)
    return CampaignData(X=X, y=y, f_clean=f_clean, test_idx=np.sort(perm[:test_size]), pool_idx=perm[test_size:],
                     sizes=sizes, repeats=repeats, learners=learners, seed=seed, validation_fraction=validation_fraction,
                     dimension=d, smoothness=s, ambient_dim=D, fingerprint=fingerprint, name=name,
                     noise_variance=noise_variance, dimension_source=d_source, task=task, classes=classes,
                     bayes_proba=bayes)


def expand(spec_or_data) -> list:
    """All cells of a campaign, ordered by learner, n, repeat.

    Parameters
    ----------
    spec_or_data : CampaignSpec or CampaignData

    Returns
    -------
    list of Cell
    """
    data = prepare(spec_or_data) if isinstance(spec_or_data, CampaignSpec) else spec_or_data
    split = {"test_size": int(len(data.test_idx)), "n_total": int(len(data.X)), "split_seed": data.seed,
             "validation_fraction": data.validation_fraction}
    cells = []
    for spec in data.learners:
        resolved = make_learner(spec).resolve(data)
        for n in data.sizes:
            for r in range(data.repeats):
                seed = data.repeat_seed(r)
                config = {"campaign": data.name, "learner": {"kind": spec.kind, "name": spec.name, "params": resolved},
                          "n": int(n), "repeat": int(r), "seed": int(seed), "split": split,
                          "dimension": float(data.dimension), "smoothness": float(data.smoothness), "data": data.fingerprint}
                if data.task != "regress":  # regression keys stay as they were before tasks existed
                    config["task"] = data.task
                cells.append(Cell(spec, int(n), int(r), int(seed), _hash(config), data.name, config))
    return cells
