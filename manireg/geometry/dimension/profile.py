"""The multiscale dimension profile: MLE, local PCA and the generalised ratio (TwoNN at scale 2) against
neighbourhood scale, with intervals over blocks of neighbourhoods, and the window between the noise scale
and the curvature scale."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..._results import ResultMixin
from ..._validation import DataValidationError, check_choice, check_float, check_int, check_points, make_rng
from ..neighbors import collapse_duplicates, kneighbors
from .gride import gride_dimension, gride_log_ratios
from .local_pca import local_pca_profile
from .mle import _log_sums

__all__ = ["DEFAULT_PROFILE_SCALES", "LPCA_MAX_SCALE", "DimensionProfile", "dimension_profile", "find_window",
           "neighbourhood_blocks"]


#: Neighbour counts of the default profile (doublings; only those up to a tenth of the distinct points).
DEFAULT_PROFILE_SCALES = (4, 8, 16, 32, 64, 128, 256)
#: Local PCA is profiled up to this neighbour count (its cost grows like k^3 per point).
LPCA_MAX_SCALE = 64
#: Relative change per doubling of the scale that counts as "not flat" when the window is searched.
WINDOW_TOLERANCE = 0.1
#: Number of blocks of neighbourhoods of the interval (delete-one-block jackknife).
DEFAULT_BLOCKS = 20


@dataclass
class DimensionProfile(ResultMixin):
    """Dimension estimates against neighbourhood scale, with intervals over blocks of neighbourhoods.

    One row per (estimator, scale). ``scale`` is a neighbour count k: the k of the MLE and local PCA, and
    for "twonn" the k of the generalised ratio T_k / T_(k/2) (scale 2 is TwoNN itself). ``radius`` is the
    median neighbour distance at that scale, a common length axis for all estimators. ``calibrated`` is the
    row's value mapped through the calibration table (NaN when the profile was not calibrated or the
    estimator is not calibrated). ``window`` (alias ``plateau``) is the range of scales between the noise
    scale and the curvature scale (see :func:`find_window`).
    """

    estimator: list
    scale: np.ndarray
    radius: np.ndarray
    dimension: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    n_used: np.ndarray
    level: float
    n_boot: int
    seed: int
    n_samples: int
    n_duplicates: int
    plateau: tuple
    plateau_estimator: str
    notes: list = field(default_factory=list)
    calibrated: np.ndarray | None = None
    noise_scale: float = math.nan
    curvature_scale: float = math.nan
    window_note: str = ""
    interval_kind: str = "none"

    @property
    def window(self) -> tuple:
        return self.plateau

    def to_frame(self):
        import pandas as pd

        frame = pd.DataFrame({"estimator": self.estimator, "scale": self.scale, "radius": self.radius,
                              "dimension": self.dimension, "lower": self.lower, "upper": self.upper,
                              "n_used": self.n_used})
        if self.calibrated is not None:
            frame["calibrated"] = self.calibrated
        return frame

    def rows(self, estimator: str):
        """Boolean mask of the rows of one estimator."""
        return np.asarray([e == estimator for e in self.estimator])


def _check_estimators(estimators, owner, allowed):
    if isinstance(estimators, str):
        estimators = (estimators,)
    estimators = tuple(estimators)
    bad = [e for e in estimators if e not in allowed]
    if bad or not estimators:
        raise ValueError(
            f"the 'estimators' parameter of {owner} must be a non-empty subset of {allowed}; got {estimators!r}."
        )
    return estimators


def _profile_scales(scales, m, owner):
    if scales is None:
        ks = [k for k in DEFAULT_PROFILE_SCALES if k <= max(m // 10, 8) and k < m]
        if not ks:
            ks = [max(3, m - 1)] if m > 3 else [m - 1]
    else:
        ks = sorted({check_int(k, "scales", owner=owner, low=3) for k in np.atleast_1d(scales).tolist()})
        if ks[-1] >= m:
            raise DataValidationError(
                f"{owner}: the largest scale k={ks[-1]} needs more than {ks[-1]} distinct points; X has {m}. "
                "Lower the scales or pass more points."
            )
    return [k for k in ks if k >= 3] or [min(3, m - 1)]


# ---------------------------------------------------------------------------------------------------------
# per-point quantities and the value of one (estimator, scale) from a subset of points
# ---------------------------------------------------------------------------------------------------------
def _point_values(graph, ks, estimators, lpca_rule="variance", variance=0.95) -> dict:
    """{(estimator, k): per-point array} from one neighbour graph.

    mle: S_k(x) = sum_{j<k} log(T_k/T_j); twonn: log(T_k / T_(k//2)) (k = 2 and every profile scale);
    lpca: the local PCA count with k neighbours (scales up to :data:`LPCA_MAX_SCALE`).
    """
    out = {}
    if "mle" in estimators:
        sums = _log_sums(graph.distances, np.asarray(ks))
        for c, k in enumerate(ks):
            out[("mle", k)] = sums[:, c]
    if "twonn" in estimators:
        for k in sorted({2, *ks}):
            if k <= graph.k:
                out[("twonn", k)] = gride_log_ratios(graph.distances, k)
    if "lpca" in estimators:
        lk = [k for k in ks if k <= LPCA_MAX_SCALE] or ks[:1]
        for k, local in local_pca_profile(graph, lk, rule=lpca_rule, variance=variance).items():
            out[("lpca", k)] = local.astype(float)
    return out


def _value(estimator: str, k: int, arr: np.ndarray) -> float:
    """The estimate of one estimator at scale k from per-point quantities (any subset of the points)."""
    if estimator == "mle":
        return float((k - 1) / arr.mean())
    if estimator == "twonn":
        return gride_dimension(arr, k)
    return float(arr.mean())


def neighbourhood_blocks(points: np.ndarray, n_blocks: int = DEFAULT_BLOCKS, seed: int = 0) -> np.ndarray:
    """Block label of every point: k-means cells of the points (seeded), so that one block is a region.

    Neighbourhoods overlap only with those of nearby points, so the per-point quantities of two blocks are
    nearly independent (only points near a cell border share neighbours); deleting a block at a time
    resamples in units that do not overlap. Returns labels 0..B-1 (B <= n_blocks; empty cells dropped).
    """
    from sklearn.cluster import KMeans, MiniBatchKMeans

    m = points.shape[0]
    B = int(max(2, min(n_blocks, m // 10)))
    cls = MiniBatchKMeans if m > 20000 else KMeans
    labels = cls(n_clusters=B, n_init=1, random_state=int(seed)).fit_predict(points)
    _, labels = np.unique(labels, return_inverse=True)
    return labels


#: A block holds at least this many neighbourhoods of the largest scale it serves (fewer blocks at large k).
POINTS_PER_BLOCK = 3


class _Blocks:
    """Block labels for a given largest neighbour count k: B = clip(m // (POINTS_PER_BLOCK * k), 4, n_blocks)
    k-means cells, so that a block is wider than the neighbourhoods it holds (cached per B)."""

    def __init__(self, points, n_blocks, seed):
        self.points, self.n_blocks, self.seed, self._by_b = points, n_blocks, seed, {}

    def for_scale(self, k: int) -> np.ndarray:
        m = self.points.shape[0]
        B = int(np.clip(m // (POINTS_PER_BLOCK * max(int(k), 1)), 4, self.n_blocks))
        if B not in self._by_b:
            self._by_b[B] = neighbourhood_blocks(self.points, B, self.seed)
        return self._by_b[B]


def _jackknife(stat, labels: np.ndarray, level: float):
    """Delete-one-block jackknife: (estimate on all points, lower, upper, se, t quantile), t_(B-1) interval.

    se^2 = (B-1)/B sum_b (t_(-b) - mean t_(-b))^2 (Kuensch 1989 for blocks of dependent data); the interval
    is t_all +- t_(B-1, (1+level)/2) se (Student quantile from scipy.stats).
    """
    from scipy.stats import t as student

    B = int(labels.max()) + 1
    full = stat(np.ones(labels.size, dtype=bool))
    reps = np.array([stat(labels != b) for b in range(B)])
    reps = reps[np.isfinite(reps)]
    if reps.size < 2 or not np.isfinite(full):
        return full, math.nan, math.nan, math.nan, math.nan
    se = math.sqrt((reps.size - 1) / reps.size * float(np.sum((reps - reps.mean()) ** 2)))
    q = float(student.ppf(0.5 + level / 2.0, reps.size - 1))
    return full, full - q * se, full + q * se, se, q


# ---------------------------------------------------------------------------------------------------------
# the window between the noise scale and the curvature scale
# ---------------------------------------------------------------------------------------------------------
def find_window(scales, values, tol: float = WINDOW_TOLERANCE):
    """The scales where a (calibrated) profile is read: ``(k_lo, k_hi, noise_scale, curvature_scale, note)``.

    Ambient noise makes estimates rise toward D at small scales, so a profile falls with scale until the
    neighbourhoods are larger than the noise; curvature (and the sample's edges) makes it drift again at
    large scales. With c_i the relative change per doubling between scales i and i+1,
    c_i = (v_(i+1)/v_i)^(1/log2(k_(i+1)/k_i)) - 1:

    * the window starts at the first scale whose next step no longer falls by more than ``tol``
      (c_i > -tol); the scale before it is the noise scale (NaN when the profile never fell);
    * it ends at the last scale before the first later step that changes by more than ``tol`` either way;
      the scale after it is the curvature scale (NaN when the profile stays flat to the largest scale);
    * if the profile falls by more than ``tol`` at every step, noise dominates at every scale: the window is
      the largest scale alone and ``note`` says the value is an upper estimate.
    """
    k = np.asarray(scales, dtype=float)
    v = np.asarray(values, dtype=float)
    ok = np.isfinite(v) & (v > 0)
    k, v = k[ok], v[ok]
    if k.size == 0:
        return math.nan, math.nan, math.nan, math.nan, "no finite profile values"
    if k.size == 1:
        return k[0], k[0], math.nan, math.nan, ""
    c = (v[1:] / v[:-1]) ** (1.0 / np.log2(k[1:] / k[:-1])) - 1.0
    start = next((i for i in range(c.size) if c[i] > -tol), None)
    if start is None:
        return (k[-1], k[-1], k[-2], math.nan,
                f"the profile falls by more than {tol:.0%} per doubling up to the largest scale k = {k[-1]:.0f}: "
                "noise dominates at every scale, so the value is an upper estimate; pass more points or larger "
                "scales")
    noise = k[start - 1] if start > 0 else math.nan
    end = next((j for j in range(start, c.size) if abs(c[j]) > tol), None)
    if end is None:
        return k[start], k[-1], noise, math.nan, ""
    return k[start], k[end], noise, k[end + 1], ""


def _profile_from_graph(graph, ks, estimators, n_boot, level, seed, *, lpca_rule="variance", variance=0.95,
                        n_blocks=DEFAULT_BLOCKS):
    values = _point_values(graph, ks, estimators, lpca_rule, variance)
    labels = _Blocks(graph.points, n_blocks, seed) if n_boot else None
    rows = {key: [] for key in ("estimator", "scale", "radius", "dimension", "lower", "upper", "n_used")}
    for (name, k), arr in values.items():
        if labels is not None:
            d, lo, hi, _, _ = _jackknife(lambda mask: _value(name, k, arr[mask]), labels.for_scale(k), level)
        else:
            d, lo, hi = _value(name, k, arr), math.nan, math.nan
        for key, v in zip(rows, (name, k, float(np.median(graph.distances[:, k - 1])), d, lo, hi, arr.size)):
            rows[key].append(v)
    prof = {key: (np.asarray(v) if key != "estimator" else list(v)) for key, v in rows.items()}
    return prof, values, labels


def dimension_profile(
    X,
    scales=None,
    estimators=("mle", "twonn", "lpca"),
    n_boot: int = 200,
    level: float = 0.95,
    seed: int = 0,
    *,
    neighbor_method: str = "auto",
    lpca_rule: str = "variance",
    variance: float = 0.95,
    n_blocks: int = DEFAULT_BLOCKS,
) -> DimensionProfile:
    """Intrinsic dimension against neighbourhood scale, with intervals over blocks of neighbourhoods.

    One neighbour query with the largest k needed (:func:`~manireg.geometry.neighbors.kneighbors`); every
    scale slices that graph.

    * MLE at scale k: (k - 1) / mean_x S_k(x), S_k(x) = sum_{j<k} log(T_k/T_j) (the harmonic aggregation
      at a single k).
    * Local PCA at scale k: mean of the local PCA counts with k neighbours (k <= :data:`LPCA_MAX_SCALE`).
    * "twonn" at scale k: the generalised ratio estimate from mu = T_k / T_(k/2)
      (:func:`~manireg.geometry.dimension.gride.gride_dimension`); at k = 2 it is TwoNN. It is the
      profile's guide: it uses no distance below the (k/2)-th neighbour, so noise at the scale of the first
      neighbours does not reach its large-scale rows, and it has a value at every scale of the window.

    Intervals (``n_boot`` > 0): delete-one-block jackknife over k-means cells of the points with a Student
    t_(B-1) quantile (:func:`neighbourhood_blocks`); at scale k there are B = m // (3 k) cells, between 4 and
    ``n_blocks``, so that a cell holds several neighbourhoods: blocks of neighbourhoods then do not overlap
    (except at their borders), so the interval carries the correlation of overlapping neighbourhoods that a
    bootstrap over points leaves out. ``n_boot`` is kept for compatibility: 0 switches intervals off, any
    other value asks for them. They carry no estimator bias: calibration (see :func:`estimate_dimension`)
    handles that.

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
    scales : sequence of int >= 3 or None
        Neighbour counts; default the doublings of :data:`DEFAULT_PROFILE_SCALES` up to a tenth of the
        distinct points.
    estimators : subset of ("mle", "twonn", "lpca")
    n_boot : int >= 0
        0: no intervals.
    level : float in (0, 1)
    seed : int
        Seeds the blocks and the approximate neighbour index.
    neighbor_method : {"auto", "exact", "approximate"}
    lpca_rule, variance : see :class:`LocalPCADimension`.
    n_blocks : int >= 2

    Returns
    -------
    DimensionProfile
        ``plateau`` (= ``window``) is :func:`find_window` on the raw profile of the guide ("twonn", else
        "mle", else "lpca"); :func:`estimate_dimension` finds it on the calibrated profile instead.

    References
    ----------
    .. [1] E. Levina and P. J. Bickel, NIPS 17 (2004).
    .. [2] F. Denti, D. Doimo, A. Laio and A. Mira, Sci. Rep. 12, 20005 (2022) (generalised ratios, scale
       selection under noise).
    .. [3] H. R. Kuensch, "The jackknife and the bootstrap for general stationary observations", Ann. Statist.
       17 (1989).
    """
    owner = "dimension_profile"
    estimators = _check_estimators(estimators, owner, ("mle", "twonn", "lpca"))
    n_boot = check_int(n_boot, "n_boot", owner=owner, low=0)
    n_blocks = check_int(n_blocks, "n_blocks", owner=owner, low=2)
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    check_choice(lpca_rule, "lpca_rule", owner=owner, choices=("variance", "gap"))
    variance = check_float(variance, "variance", owner=owner, low=0.0, high=1.0, low_open=True)
    make_rng(seed)
    X = check_points(X, owner=owner, min_samples=4)
    m = _n_distinct(X)
    ks = _profile_scales(scales, m, owner)
    graph = kneighbors(X, ks[-1], method=neighbor_method, random_state=seed, owner=owner)
    prof, _, _ = _profile_from_graph(graph, ks, estimators, n_boot, level, seed, lpca_rule=lpca_rule,
                                     variance=variance, n_blocks=n_blocks)
    guide = _guide(estimators)
    mask = np.asarray([e == guide for e in prof["estimator"]])
    lo, hi, noise, curv, note = find_window(prof["scale"][mask], prof["dimension"][mask])
    return _build(prof, level, n_boot, seed, X.shape[0], graph.n_duplicates, (lo, hi), guide, [], None, noise, curv,
                  note)


def _guide(estimators):
    return next(e for e in ("twonn", "mle", "lpca") if e in estimators)


def _build(prof, level, n_boot, seed, n_samples, n_dup, window, guide, notes, calibrated, noise, curv, note):
    lo, hi = window
    window = (int(lo) if np.isfinite(lo) else math.nan, int(hi) if np.isfinite(hi) else math.nan)
    return DimensionProfile(prof["estimator"], prof["scale"], prof["radius"], prof["dimension"], prof["lower"],
                            prof["upper"], prof["n_used"], level, n_boot, int(seed), int(n_samples), int(n_dup),
                            window, guide, list(notes), calibrated, float(noise), float(curv), note,
                            "jackknife over blocks of neighbourhoods" if n_boot else "none")


def _n_distinct(X):
    return collapse_duplicates(X)[0].shape[0] if X.shape[0] < 200_000 else X.shape[0]
