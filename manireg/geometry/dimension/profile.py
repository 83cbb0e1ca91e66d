"""The multiscale dimension profile: MLE, local PCA and TwoNN against neighbourhood scale, with intervals."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..._results import ResultMixin
from ..._validation import DataValidationError, check_choice, check_float, check_int, check_points, make_rng
from ..neighbors import collapse_duplicates, kneighbors
from ._base import _bootstrap_mean_ratio, _percentile
from .mle import _log_sums
from .local_pca import local_pca_profile

__all__ = ["DEFAULT_PROFILE_SCALES", "DimensionProfile", "dimension_profile"]


#: Neighbour counts of the default profile (clipped to the number of distinct points).
DEFAULT_PROFILE_SCALES = (5, 10, 20, 40, 80)


@dataclass
class DimensionProfile(ResultMixin):
    """Dimension estimates against neighbourhood scale, with bootstrap intervals over points.

    One row per (estimator, scale). ``scale`` is a neighbour count k: the k of the MLE and local PCA, and
    for TwoNN the rank 2 * 2^j of the second neighbour in the full data when the ratios are taken inside
    one of 2^j random groups (see :func:`dimension_profile`). ``radius`` is the median neighbour distance at
    that scale, a common length axis for all estimators.
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

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame({"estimator": self.estimator, "scale": self.scale, "radius": self.radius,
                             "dimension": self.dimension, "lower": self.lower, "upper": self.upper,
                             "n_used": self.n_used})

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
        ks = [k for k in DEFAULT_PROFILE_SCALES if k < m]
        if not ks:
            ks = [m - 1]
    else:
        ks = sorted({check_int(k, "scales", owner=owner, low=3) for k in np.atleast_1d(scales).tolist()})
        if ks[-1] >= m:
            raise DataValidationError(
                f"{owner}: the largest scale k={ks[-1]} needs more than {ks[-1]} distinct points; X has {m}. "
                "Lower the scales or pass more points."
            )
    return [k for k in ks if k >= 3] or [min(3, m - 1)]


def _twonn_group_ratios(graph, n_groups: int, rng):
    """log(r2/r1) of every point, with r1, r2 its first two neighbours inside its own random group.

    Points whose group holds fewer than 2 of their ``graph.k`` nearest neighbours are dropped (returned
    count). Taking neighbours inside one of ``n_groups`` groups is exact TwoNN on a subsample of size
    n / n_groups, and pooling all groups uses every point once.
    """
    m = graph.n_points
    group = rng.permutation(m) % n_groups
    if n_groups == 1:
        d1, d2 = graph.distances[:, 0], graph.distances[:, 1]
        return np.log(d2 / d1), np.median(d2), 0
    same = group[graph.indices] == group[:, None]
    cs = np.cumsum(same, axis=1)
    ok = cs[:, -1] >= 2
    first = np.argmax(cs >= 1, axis=1)
    second = np.argmax(cs >= 2, axis=1)
    rows = np.nonzero(ok)[0]
    d1 = graph.distances[rows, first[rows]]
    d2 = graph.distances[rows, second[rows]]
    return np.log(d2 / d1), np.median(d2), int(m - rows.size)


def _plateau(scale, dimension, width: int = 3):
    """Window of ``width`` consecutive scales where the profile is flattest (smallest relative range)."""
    n = len(scale)
    if n == 0:
        return (math.nan, math.nan)
    w = min(width, n)
    best, arg = math.inf, 0
    for i in range(n - w + 1):
        seg = dimension[i:i + w]
        if not np.all(np.isfinite(seg)):
            continue
        spread = (seg.max() - seg.min()) / max(abs(seg.mean()), 1e-12)
        if spread < best - 1e-12:
            best, arg = spread, i
    return (int(scale[arg]), int(scale[arg + w - 1]))


def _profile_from_graph(graph, ks, estimators, n_boot, level, seed, *, lpca_rule="variance", variance=0.95):
    rng = make_rng(seed)
    rows = {k: [] for k in ("estimator", "scale", "radius", "dimension", "lower", "upper", "n_used")}
    notes = []

    def add(name, k, radius, d, interval, n_used):
        for key, v in zip(rows, (name, k, radius, d, interval[0], interval[1], n_used)):
            rows[key].append(v)

    if "mle" in estimators:
        ks_arr = np.asarray(ks)
        sums = _log_sums(graph.distances, ks_arr)
        for c, k in enumerate(ks):
            s = sums[:, c]
            d = (k - 1) / s.mean()
            if n_boot:
                iv = _percentile((k - 1) / _bootstrap_mean_ratio(s, n_boot, rng), level)
            else:
                iv = (math.nan, math.nan)
            add("mle", k, float(np.median(graph.distances[:, k - 1])), float(d), iv, graph.n_points)
    if "lpca" in estimators:
        by_k = local_pca_profile(graph, ks, rule=lpca_rule, variance=variance)
        for k in ks:
            local = by_k[k].astype(float)
            iv = _percentile(_bootstrap_mean_ratio(local, n_boot, rng), level) if n_boot else (math.nan, math.nan)
            add("lpca", k, float(np.median(graph.distances[:, k - 1])), float(local.mean()), iv, graph.n_points)
    if "twonn" in estimators:
        j = 0
        while True:
            n_groups = 2 ** j
            k_equiv = 2 * n_groups
            # keep the expected number of same-group neighbours in the graph >= 8, and >= 20 points per group
            if j > 0 and (graph.k / n_groups < 8 or graph.n_points / n_groups < 20):
                break
            log_mu, radius, dropped = _twonn_group_ratios(graph, n_groups, rng)
            N = log_mu.size
            if N < 3:
                break
            d = (N - 1) / log_mu.sum()
            if n_boot:
                iv = _percentile((N - 1) / (N * _bootstrap_mean_ratio(log_mu, n_boot, rng)), level)
            else:
                iv = (math.nan, math.nan)
            if dropped:
                notes.append(f"twonn at {n_groups} groups: {dropped} point(s) had fewer than 2 same-group "
                             f"neighbours among their {graph.k} nearest and were left out.")
            add("twonn", k_equiv, float(radius), float(d), iv, N)
            j += 1
    prof = {k: (np.asarray(v) if k != "estimator" else list(v)) for k, v in rows.items()}
    plateau_est = next((e for e in ("mle", "lpca", "twonn") if e in estimators), estimators[0])
    mask = np.asarray([e == plateau_est for e in prof["estimator"]])
    plateau = _plateau(prof["scale"][mask], prof["dimension"][mask].astype(float))
    return prof, plateau, plateau_est, notes


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
) -> DimensionProfile:
    """Intrinsic dimension against neighbourhood scale, with bootstrap intervals.

    One neighbour query with the largest k needed (:func:`~manireg.geometry.neighbors.kneighbors`); every
    scale slices that graph.

    * MLE at scale k: (k - 1) / mean_x S_k(x), S_k(x) = sum_{j<k} log(T_k/T_j) (the harmonic aggregation
      at a single k).
    * Local PCA at scale k: mean of the local PCA counts with k neighbours.
    * TwoNN at scale 2^j: the points are split into 2^j random groups and each point's ratio r2/r1 is taken
      among the members of its own group, found in its full neighbour list. That is exact TwoNN on
      subsamples of size n/2^j (the neighbour scale grows like 2^(j/d)), pooled over groups so every point
      is used once; the estimate is (N - 1) / sum log mu (no discarding). Its ``scale`` is the rank 2 * 2^j
      of the second neighbour in the full data. Levels stop when fewer than 8 same-group neighbours are
      expected in the graph (points with fewer than 2 are left out and counted in ``notes``).

    Intervals are percentile bootstraps over points of the per-point quantities (S_k(x), local counts,
    log mu): no new neighbour queries. They treat points as independent and carry no estimator bias, so at
    scales where curvature or noise bias the estimate they need not cover the true d.

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
    scales : sequence of int >= 3 or None
        Neighbour counts; default :data:`DEFAULT_PROFILE_SCALES` below the number of distinct points.
    estimators : subset of ("mle", "twonn", "lpca")
    n_boot : int >= 0
        Bootstrap replicates (0: no intervals).
    level : float in (0, 1)
    seed : int
        Seeds the TwoNN groups, the bootstrap and the approximate neighbour index.
    neighbor_method : {"auto", "exact", "approximate"}
    lpca_rule, variance : see :class:`LocalPCADimension`.

    Returns
    -------
    DimensionProfile
        ``plateau`` is the window of three consecutive scales of the MLE profile (local PCA or TwoNN if the
        MLE is not asked for) with the smallest relative range.

    References
    ----------
    .. [1] E. Levina and P. J. Bickel, NIPS 17 (2004).
    .. [2] E. Facco, M. d'Errico, A. Rodriguez and A. Laio, Sci. Rep. 7, 12140 (2017) (decimation across
       scales).
    .. [3] B. Efron, "Bootstrap methods: another look at the jackknife", Ann. Statist. 7 (1979).
    """
    owner = "dimension_profile"
    estimators = _check_estimators(estimators, owner, ("mle", "twonn", "lpca"))
    n_boot = check_int(n_boot, "n_boot", owner=owner, low=0)
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    check_choice(lpca_rule, "lpca_rule", owner=owner, choices=("variance", "gap"))
    variance = check_float(variance, "variance", owner=owner, low=0.0, high=1.0, low_open=True)
    make_rng(seed)
    X = check_points(X, owner=owner, min_samples=4)
    m = _n_distinct(X)
    ks = _profile_scales(scales, m, owner)
    need = max(ks[-1], 16) if ("twonn" in estimators and m > 16) else ks[-1]
    graph = kneighbors(X, need, method=neighbor_method, random_state=seed, owner=owner)
    return _make_profile(graph, X.shape[0], ks, estimators, n_boot, level, seed, lpca_rule, variance)


def _n_distinct(X):
    return collapse_duplicates(X)[0].shape[0] if X.shape[0] < 200_000 else X.shape[0]


def _make_profile(graph, n_samples, ks, estimators, n_boot, level, seed, lpca_rule, variance):
    prof, plateau, plateau_est, notes = _profile_from_graph(graph, ks, estimators, n_boot, level, seed,
                                                            lpca_rule=lpca_rule, variance=variance)
    return DimensionProfile(prof["estimator"], prof["scale"], prof["radius"], prof["dimension"], prof["lower"],
                            prof["upper"], prof["n_used"], level, n_boot, int(seed), int(n_samples),
                            graph.n_duplicates, plateau, plateau_est, notes)
