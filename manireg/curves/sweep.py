"""A study as a plan of cells: which learner, at which training size, in which repeat, with which seed.

Design of the splits (all seeded from the study ``seed``):

* **Test set, fixed.** One permutation of all rows (seed ``(seed, 0)``) puts ``test_size`` rows aside; every
  cell of every learner is scored on the same test rows.
* **Nested training sets.** Repeat ``r`` has its own seed ``seed_r`` (from ``SeedSequence([seed, 1, r])``)
  and one permutation of the remaining pool; the cell of size ``n`` takes its first ``n`` rows. So within a
  repeat the size-256 set is contained in the size-512 set, and all learners of a repeat see the same rows.
  Differences between sizes are then differences in n, not in which points were drawn.
* **Validation inside n.** Of a cell's ``n`` rows the last ``n_val = round(val_fraction * n)`` are the
  validation part (early stopping for nets, reported for every learner); the first ``n - n_val`` are fitted.

Each cell has a ``key``: the SHA-256 of the canonical JSON (sorted keys) of its full configuration, i.e. the
study label, learner kind and name, the learner's resolved parameters (the train config and sizing constants
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

__all__ = ["StudySpec", "StudyData", "Cell", "expand", "prepare", "default_sizes", "canonical_json",
           "ROW_COLUMNS", "DEFAULT_MIN_SIZE", "DEFAULT_N_SIZES", "MIN_SIZE"]

#: Smallest size of the default grid (and the default grid never starts below it).
DEFAULT_MIN_SIZE = 64
#: Number of sizes of the default geometric grid.
DEFAULT_N_SIZES = 6
#: Smallest size allowed at all: the cell needs >= 2 fitted rows and >= 1 validation row.
MIN_SIZE = 4

#: Columns of a study row, in order (one row per cell).
ROW_COLUMNS = (
    "key", "study", "learner", "n", "repeat", "seed", "train_mse", "val_mse", "test_mse", "test_mse_clean",
    "steps", "best_step", "stop_reason", "late_best", "seconds", "n_parameters", "width", "depth",
    "width_multiplier", "precision", "status", "error", "created_at", "config_json",
)

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
class StudySpec:
    """Definition of a learning-curve study.

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
    val_fraction : float, default=0.2
        Share of each cell's n used for validation.
    seed : int, default=0
        Seed of the test split, the nested permutations and every learner's randomness.
    d : float, optional
        Intrinsic dimension for sizing nets and the baseline rules; estimated from X when None
        (:func:`manireg.geometry.dimension.estimate_dimension`).
    s : float, optional
        Smoothness; 1.0 (Lipschitz) when None and not known from the generator.
    label : str, default="study"
        Name of the study in the store (several studies can share one store).

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
    val_fraction: float = 0.2
    seed: int = 0
    d: float | None = None
    s: float | None = None
    label: str = "study"

    def to_dict(self) -> dict:
        """JSON-ready settings (arrays left out; the data is identified by its fingerprint elsewhere)."""
        learners = None if self.learners is None else [LearnerSpec.coerce(l).to_dict() for l in self.learners]
        return {
            "generator": self.generator, "sizes": None if self.sizes is None else [int(v) for v in self.sizes],
            "repeats": self.repeats, "learners": learners, "test_fraction": self.test_fraction,
            "test_size": self.test_size, "val_fraction": self.val_fraction, "seed": self.seed,
            "d": self.d, "s": self.s, "label": self.label,
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
    study: str
    config: dict = field(repr=False)

    @property
    def unit_key(self):
        """Cells with equal unit keys may be trained together (same learner and n)."""
        return (self.learner.name, self.n)


@dataclass
class StudyData:
    """Validated data of a study with its fixed test split and nested per-repeat permutations.

    Built by :func:`prepare`; it is what workers receive (it pickles compactly: arrays plus a few ints).
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
    val_fraction: float
    d: float
    s: float
    D: int
    fingerprint: str
    label: str
    noise_variance: float | None = None
    d_source: str = "given"

    @property
    def X_test(self):
        return self.X[self.test_idx]

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
        return max(1, int(round(self.val_fraction * n)))

    def cell_rows(self, cell):
        """Row indices (into X) of the cell's fitted part and validation part."""
        perm = np.random.default_rng(cell.seed).permutation(len(self.pool_idx))
        rows = self.pool_idx[perm[: cell.n]]
        nv = self.n_val(cell.n)
        return rows[: cell.n - nv], rows[cell.n - nv:]

    def cell_split(self, cell):
        """``(X_fit, y_fit, X_val, y_val)`` of a cell."""
        fit, val = self.cell_rows(cell)
        return self.X[fit], self.y[fit], self.X[val], self.y[val]

    def metadata(self, spec: StudySpec | None = None) -> dict:
        import sys

        versions = {"python": sys.version.split()[0]}
        for mod in ("manireg", "numpy", "torch", "sklearn"):
            try:
                versions[mod] = __import__(mod).__version__
            except Exception:  # noqa: BLE001 - a missing version is not an error
                pass
        return {
            "study": self.label, "spec": spec.to_dict() if spec is not None else None,
            "fingerprint": self.fingerprint, "d": self.d, "s": self.s, "D": self.D,
            "d_source": self.d_source, "noise_variance": self.noise_variance,
            "n_total": int(len(self.X)), "test_size": int(len(self.test_idx)), "sizes": list(self.sizes),
            "repeats": self.repeats, "learners": [l.to_dict() for l in self.learners], "versions": versions,
        }


def _generate(gen: dict):
    from manireg.data import manifolds
    from manireg.data.targets import make_regression

    owner = "StudySpec.generator"
    if not isinstance(gen, dict) or "manifold" not in gen:
        raise ValueError(
            f"{owner} must be a dict with a 'manifold' key (one of {list(_GENERATORS)}); got {gen!r}."
        )
    g = dict(gen)
    name = g.pop("manifold")
    if name not in _GENERATORS:
        raise ValueError(f"{owner}: unknown manifold {name!r}; known: {list(_GENERATORS)}.")
    reg = {k: g.pop(k) for k in ("smoothness", "noise_std", "kind") if k in g}
    seed = g.get("seed", 0)
    g["seed"] = seed
    sample = getattr(manifolds, name)(**g)
    return make_regression(sample, seed=_seed_int(seed, 7), **reg)


def prepare(spec: StudySpec) -> StudyData:
    """Validate a :class:`StudySpec` and build its :class:`StudyData` (splits, sizes, d, s, fingerprint).

    Raises
    ------
    ValueError
        With what is wrong, what is allowed, what was received and the fix: no data, sizes larger than
        the rows left after the test split, fewer than 2 sizes, ``repeats < 1``, duplicate learner names,
        an unknown learner kind, bad fractions.
    """
    from manireg.geometry.neighbors import data_fingerprint

    owner = "StudySpec"
    if not isinstance(spec, StudySpec):
        raise ValueError(f"expected a StudySpec; got {type(spec).__name__}. Build one with StudySpec(X=..., y=...).")
    noise_variance = None
    d, s, d_source = spec.d, spec.s, "given"
    if spec.generator is not None:
        if spec.X is not None:
            raise ValueError(f"{owner}: give either X/y or generator, not both.")
        sample = _generate(spec.generator)
        X, y, f_clean = sample.X, sample.y, sample.f_clean
        noise_variance = float(sample.noise_variance)
        d = float(sample.dimension) if d is None else d
        s = float(sample.smoothness) if s is None else s
        d_source = "generator" if spec.d is None else "given"
    else:
        if spec.X is None or spec.y is None:
            raise ValueError(f"{owner}: no data; pass X and y (arrays), or generator={{'manifold': ...}}.")
        X, y, f_clean = spec.X, spec.y, spec.f_clean
    X = check_points(X, owner=owner, min_samples=2 * MIN_SIZE)
    y = check_target(y, X.shape[0], owner=owner)
    if f_clean is not None:
        f_clean = check_target(f_clean, X.shape[0], name="f_clean", owner=owner)
    N, D = X.shape
    repeats = check_int(spec.repeats, "repeats", owner=owner, low=1)
    seed = check_int(spec.seed, "seed", owner=owner, low=0)
    val_fraction = check_float(spec.val_fraction, "val_fraction", owner=owner, low=0.0, high=0.5,
                               low_open=True)
    if spec.test_size is not None:
        test_size = check_int(spec.test_size, "test_size", owner=owner, low=1, high=N - MIN_SIZE)
    else:
        tf = check_float(spec.test_fraction, "test_fraction", owner=owner, low=0.0, high=0.9, low_open=True)
        test_size = max(1, int(round(tf * N)))
    n_pool = N - test_size
    if spec.sizes is None:
        sizes = default_sizes(n_pool)
    else:
        raw = list(np.atleast_1d(np.asarray(spec.sizes, dtype=object)))
        if any(isinstance(v, bool) or not isinstance(v, numbers.Integral) for v in raw):
            raise ValueError(f"the 'sizes' parameter of {owner} must be a list of ints; got {spec.sizes!r}.")
        sizes = sorted({int(v) for v in raw})
        if len(sizes) < 2:
            raise ValueError(
                f"the 'sizes' parameter of {owner} needs at least 2 distinct sizes for a learning curve; got "
                f"{spec.sizes!r}. Pass e.g. sizes=[{max(MIN_SIZE, n_pool // 8)}, {max(MIN_SIZE, n_pool // 4)}, "
                f"{n_pool}] or leave sizes=None for the default grid."
            )
        if sizes[0] < MIN_SIZE:
            raise ValueError(f"the 'sizes' parameter of {owner} must hold sizes >= {MIN_SIZE}; got {sizes[0]}.")
        if sizes[-1] > n_pool:
            raise ValueError(
                f"the 'sizes' parameter of {owner} has size {sizes[-1]} but only {n_pool} rows are left for "
                f"training after the test split ({N} rows - {test_size} test rows). Use sizes <= {n_pool}, "
                "pass more data, or lower test_fraction/test_size."
            )
    learners = [LearnerSpec("net")] if spec.learners is None else [LearnerSpec.coerce(l) for l in spec.learners]
    if not learners:
        raise ValueError(f"the 'learners' parameter of {owner} is empty; pass at least one learner, e.g. ['net'].")
    names = [l.name for l in learners]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ValueError(
            f"the 'learners' parameter of {owner} has duplicate name(s) {dup}; each learner needs its own name, "
            "e.g. LearnerSpec('net', name='net-lr1e-3', params={'learning_rate': 1e-3})."
        )
    if d is None:
        from manireg.geometry.dimension import estimate_dimension

        d = float(estimate_dimension(X).consensus)
        d_source = "estimated"
    d = check_float(d, "d", owner=owner, low=1.0, high=float(D))
    s = 1.0 if s is None else check_float(s, "s", owner=owner, low=0.0, low_open=True)
    label = spec.label
    if not isinstance(label, str) or not label:
        raise ValueError(f"the 'label' parameter of {owner} must be a non-empty str; got {label!r}.")
    parts = [X, y] + ([] if f_clean is None else [f_clean])
    fingerprint = hashlib.sha256("".join(data_fingerprint(a) for a in parts).encode()).hexdigest()[:32]
    perm = np.random.default_rng(_seed_int(seed, 0)).permutation(N)
    return StudyData(X=X, y=y, f_clean=f_clean, test_idx=np.sort(perm[:test_size]), pool_idx=perm[test_size:],
                     sizes=sizes, repeats=repeats, learners=learners, seed=seed, val_fraction=val_fraction,
                     d=d, s=s, D=D, fingerprint=fingerprint, label=label, noise_variance=noise_variance,
                     d_source=d_source)


def expand(spec_or_data) -> list:
    """All cells of a study, ordered by learner, n, repeat.

    Parameters
    ----------
    spec_or_data : StudySpec or StudyData

    Returns
    -------
    list of Cell
    """
    data = prepare(spec_or_data) if isinstance(spec_or_data, StudySpec) else spec_or_data
    split = {"test_size": int(len(data.test_idx)), "n_total": int(len(data.X)), "split_seed": data.seed,
             "val_fraction": data.val_fraction}
    cells = []
    for spec in data.learners:
        resolved = make_learner(spec).resolve(data)
        for n in data.sizes:
            for r in range(data.repeats):
                seed = data.repeat_seed(r)
                config = {"study": data.label, "learner": {"kind": spec.kind, "name": spec.name, "params": resolved},
                          "n": int(n), "repeat": int(r), "seed": int(seed), "split": split,
                          "d": float(data.d), "s": float(data.s), "data": data.fingerprint}
                cells.append(Cell(spec, int(n), int(r), int(seed), _hash(config), data.label, config))
    return cells
