"""Intrinsic-dimension estimators, the multiscale dimension profile and a one-call dimension report.

Every estimator gets its neighbours from :func:`manireg.geometry.neighbors.kneighbors` (one query, cached by
a fingerprint of the data, duplicates collapsed). The algorithms are plain functions of a
:class:`~manireg.geometry.neighbors.NeighborGraph` (``mle_dimension``, ``twonn_dimension``,
``local_pca_dimension``); the estimator classes only check their parameters, ask for the graph and call
them. The correlation dimension needs pair distances at larger scales than a k-NN graph holds: it uses
pairwise distances (BLAS, as scikit-learn's ``euclidean_distances``) on a seeded subsample of at most ``max_points`` distinct points.

Conventions
-----------
* Per-point values (``local_dimension_``) have one entry per *original* row of ``X``: duplicate rows get the
  value of the distinct point they copy (through ``graph.inverse``).
* The MLE local value uses the (k - 1) normalisation of Levina & Bickel. With the harmonic (MacKay-Ghahramani)
  aggregation this is the right choice: the sum S_k(x) = sum_{j<k} log(T_k/T_j) is Gamma(k-1, rate m) for a
  locally uniform density, so (k-1) / mean_x S_k(x) is consistent for m. The (k - 2) normalisation
  (``unbiased=True``) makes each *local* value unbiased (E[(k-2)/S] = m, variance m^2/(k-3)) and is the
  right choice with the arithmetic mean (``aggregate="mean"``); combined with the harmonic mean it is
  biased down by the factor (k-2)/(k-1).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from sklearn.base import BaseEstimator
from sklearn.utils.validation import check_is_fitted

from .._params import boolean, check_attributes, choice, integer, real, seed
from .._results import ResultMixin
from .._validation import (
    DataValidationError,
    check_choice,
    check_float,
    check_int,
    check_points,
    make_rng,
    warn,
)
from .neighbors import collapse_duplicates, kneighbors

__all__ = [
    "mle_dimension",
    "twonn_dimension",
    "local_pca_dimension",
    "correlation_dimension",
    "MLEDimension",
    "TwoNNDimension",
    "LocalPCADimension",
    "CorrelationDimension",
    "DimensionEstimate",
    "DimensionProfile",
    "DimensionReport",
    "dimension_profile",
    "estimate_dimension",
    "DEFAULT_PROFILE_SCALES",
]

#: Neighbour counts of the default profile (clipped to the number of distinct points).
DEFAULT_PROFILE_SCALES = (5, 10, 20, 40, 80)

_ESTIMATOR_NAMES = ("mle", "twonn", "lpca", "corr")


# --------------------------------------------------------------------------------------------------------
# plain functions: the algorithms
# --------------------------------------------------------------------------------------------------------
def _log_sums(distances: np.ndarray, ks) -> np.ndarray:
    """S_k(x) = sum_{j<k} log(T_k(x) / T_j(x)) for every row x and every k in ``ks``; shape (n, len(ks))."""
    logd = np.log(distances[:, : max(ks)])
    csum = np.cumsum(logd, axis=1)
    out = np.empty((distances.shape[0], len(ks)))
    for c, k in enumerate(ks):
        out[:, c] = (k - 1) * logd[:, k - 1] - csum[:, k - 2]
    # S_k(x) = 0 only if the k nearest distances tie exactly (a lattice); keep it finite and positive
    np.maximum(out, np.finfo(float).tiny, out=out)
    return out


def _mle_from_sums(sums: np.ndarray, ks: np.ndarray, aggregate: str, unbiased: bool) -> np.ndarray:
    """Aggregate per-point log sums (n, len(ks)) into one MLE value per k (same rules as mle_dimension)."""
    kfac = (ks - 2) if unbiased else (ks - 1)
    if aggregate == "harmonic":
        return kfac / sums.mean(axis=0)
    if aggregate == "mean":
        return (kfac / sums).mean(axis=0)
    if aggregate == "median":
        return np.median(kfac / sums, axis=0)
    raise ValueError(f"aggregate must be 'harmonic', 'mean' or 'median'; got {aggregate!r}.")


def mle_dimension(graph, k_min: int = 10, k_max: int = 20, *, aggregate: str = "harmonic", unbiased: bool = False):
    """Levina-Bickel maximum-likelihood dimension from a neighbour graph.

    For each point x and each k in [k_min, k_max] the local estimate is

        m_k(x) = c_k / sum_{j<k} log(T_k(x) / T_j(x)),   c_k = k - 1 (or k - 2 with ``unbiased``),

    with T_j(x) the distance to the j-th nearest neighbour (self excluded). Local values are combined over
    points for each k (``aggregate``) and the per-k values are averaged over k.

    Parameters
    ----------
    graph : NeighborGraph
        Holds at least ``k_max`` neighbours.
    k_min, k_max : int
        Range of neighbour counts, 3 <= k_min <= k_max <= graph.k (k_min >= 4 with ``unbiased``).
    aggregate : {"harmonic", "mean", "median"}
        "harmonic" (MacKay-Ghahramani): m_k = [mean_x m_k(x)^-1]^-1; "mean": Levina-Bickel's arithmetic
        mean; "median": median of the local values.
    unbiased : bool
        Use (k - 2) instead of (k - 1); see the module notes.

    Returns
    -------
    dimension : float
        Mean over k of the per-k values.
    dimension_by_k : ndarray of shape (k_max - k_min + 1,)
    local : ndarray of shape (graph.n_points,)
        Per distinct point: the harmonic (or arithmetic / median, following ``aggregate``) combination over
        k of m_k(x).

    References
    ----------
    .. [1] E. Levina and P. J. Bickel, "Maximum likelihood estimation of intrinsic dimension", NIPS 17 (2004).
    .. [2] D. J. C. MacKay and Z. Ghahramani, "Comments on 'Maximum likelihood estimation of intrinsic
       dimension' by E. Levina and P. Bickel" (2005).
    """
    ks = np.arange(k_min, k_max + 1)
    sums = _log_sums(graph.distances, ks)
    by_k = _mle_from_sums(sums, ks, aggregate, unbiased)
    kfac = (ks - 2) if unbiased else (ks - 1)
    local_k = kfac / sums
    if aggregate == "harmonic":
        local = 1.0 / np.mean(1.0 / local_k, axis=1)
    elif aggregate == "mean":
        local = local_k.mean(axis=1)
    else:
        local = np.median(local_k, axis=1)
    return float(by_k.mean()), by_k, local


def _gamma_interval(total: float, shape: int, level: float):
    """Interval for a rate d when d * total ~ Gamma(shape, 1)."""
    from scipy.stats import gamma

    a = (1.0 - level) / 2.0
    return (float(gamma.ppf(a, shape) / total), float(gamma.ppf(1.0 - a, shape) / total))


def twonn_from_ratios(mu: np.ndarray, *, method: str = "mle", discard_fraction: float = 0.1, level: float = 0.95):
    """TwoNN dimension from the ratios mu = r2 / r1 (all > 1). See :func:`twonn_dimension`."""
    mu = np.sort(np.asarray(mu, dtype=np.float64))
    N = mu.size
    n_keep = int(N * (1.0 - discard_fraction))
    if n_keep < 2:
        raise DataValidationError(
            f"TwoNN needs at least 2 ratios after discarding the largest {discard_fraction:.0%}; "
            f"got {N} point(s). Pass more distinct points or lower discard_fraction."
        )
    log_mu = np.log(mu[:n_keep])
    # Type-II censored exponential sample: total "time on test" T ~ Gamma(n_keep, rate d)
    total = float(log_mu.sum() + (N - n_keep) * log_mu[-1])
    if total <= 0:
        raise DataValidationError(
            "TwoNN: every kept ratio r2/r1 equals 1 (first and second neighbours at the same distance, "
            "as on a regular grid); the estimator is undefined. Add a little noise or use another estimator."
        )
    interval = _gamma_interval(total, n_keep, level)
    if method == "mle":
        d = (n_keep - 1) / total
    elif method == "linear":
        y = -np.log(1.0 - np.arange(1, n_keep + 1) / N)
        d = float(np.dot(log_mu, y) / np.dot(log_mu, log_mu))
    else:
        raise ValueError(f"method must be 'mle' or 'linear'; got {method!r}.")
    return float(d), interval, n_keep


def twonn_dimension(graph, *, method: str = "mle", discard_fraction: float = 0.1, level: float = 0.95):
    """TwoNN dimension (Facco et al. 2017) from a neighbour graph.

    With r1, r2 the first and second neighbour distances, mu = r2 / r1 follows the Pareto law
    F(mu) = 1 - mu^-d on a locally uniform d-manifold, i.e. log mu ~ Exponential(rate d).

    * ``method="mle"``: keep the N' = floor(N (1 - discard_fraction)) smallest ratios and treat the others
      as right-censored at mu_(N') (Type-II censoring); with T = sum_{i<=N'} log mu_(i) + (N - N') log mu_(N')
      the estimate is (N' - 1) / T. With ``discard_fraction=0`` this is (N - 1) / sum log mu, the unbiased
      Pareto-shape MLE.
    * ``method="linear"``: least-squares slope through the origin of -log(1 - F_emp(mu_(i))) on log mu_(i),
      F_emp(mu_(i)) = i / N, over the N' smallest ratios (the published recipe discards the largest 10 %).

    The interval is exact for the MLE: d T ~ Gamma(N', 1), so [q_a / T, q_(1-a) / T] with q the Gamma(N')
    quantiles and a = (1 - level) / 2. The same interval is returned for the linear method (it describes the
    sampling spread of the TwoNN likelihood, not of the regression).

    Returns
    -------
    dimension : float
    interval : (float, float)
    n_used : int
        Number of ratios kept.

    References
    ----------
    .. [1] E. Facco, M. d'Errico, A. Rodriguez and A. Laio, "Estimating the intrinsic dimension of datasets
       by a minimal neighborhood information", Sci. Rep. 7, 12140 (2017).
    .. [2] F. Denti, D. Doimo, A. Laio and A. Mira, "The generalized ratios intrinsic dimension estimator",
       Sci. Rep. 12, 20005 (2022).
    """
    mu = graph.distances[:, 1] / graph.distances[:, 0]
    return twonn_from_ratios(mu, method=method, discard_fraction=discard_fraction, level=level)


def _local_spectra_multi(points: np.ndarray, indices: np.ndarray, ks, chunk_bytes: float = 64e6) -> dict:
    """Descending eigenvalues of the covariance of each neighbourhood (the point and its k nearest
    neighbours) for every k in ``ks``; returns {k: array of shape (n, min(k + 1, D))}.

    One gather of the largest neighbourhood serves every k: for D >= m the (m x m) Gram matrix of the
    largest neighbourhood is formed once per point and each smaller neighbourhood's centred Gram matrix is
    its leading block, double-centred (same nonzero eigenvalues as the covariance). For D < m the D x D
    covariance is formed per k (cheap at small D)."""
    n, D = points.shape
    ks = sorted({int(k) for k in ks})
    m_max = ks[-1] + 1
    out = {k: np.empty((n, min(k + 1, D))) for k in ks}
    chunk = max(1, int(chunk_bytes // (8 * m_max * D)))
    for start in range(0, n, chunk):
        stop = min(start + chunk, n)
        nb = np.concatenate([np.arange(start, stop)[:, None], indices[start:stop, : m_max - 1]], axis=1)
        Y = points[nb]  # (c, m_max, D)
        if D >= m_max:
            K = Y @ Y.transpose(0, 2, 1)  # uncentred Gram of the largest neighbourhood
        for k in ks:
            m = k + 1
            if D >= m_max:
                G = K[:, :m, :m]
                G = G - G.mean(axis=1, keepdims=True) - G.mean(axis=2, keepdims=True) + G.mean(axis=(1, 2), keepdims=True)
            else:
                Z = Y[:, :m] - Y[:, :m].mean(axis=1, keepdims=True)
                G = Z.transpose(0, 2, 1) @ Z if D < m else Z @ Z.transpose(0, 2, 1)
            r = min(m, D)
            ev = np.linalg.eigvalsh(G)[:, ::-1][:, :r]
            out[k][start:stop] = np.clip(ev, 0.0, None) / (m - 1)
    return out


def _local_spectra(points: np.ndarray, indices: np.ndarray, n_neighbors: int) -> np.ndarray:
    """Descending eigenvalues of each neighbourhood's covariance; shape (n, min(n_neighbors + 1, D))."""
    from .._threads import single_threaded_blas

    with single_threaded_blas():
        return _local_spectra_multi(points, indices, [n_neighbors])[n_neighbors]


def _local_pca_rule(ev: np.ndarray, rule: str, variance: float) -> np.ndarray:
    total = ev.sum(axis=1, keepdims=True)
    total[total == 0] = 1.0
    if rule == "variance":
        frac = np.cumsum(ev, axis=1) / total
        local = np.sum(frac < variance - 1e-12, axis=1) + 1
    elif rule == "gap":
        # numerically zero eigenvalues (a flat neighbourhood) are floored so the gap to them is the largest
        tol = np.maximum(ev[:, :1] * 1e-10, np.finfo(float).tiny)
        pos = ev > tol
        safe = np.maximum(ev, tol)
        local = np.argmax(safe[:, :-1] / safe[:, 1:], axis=1) + 1
        # a neighbourhood whose spectrum has a single positive eigenvalue is one-dimensional
        local[pos.sum(axis=1) <= 1] = 1
    else:
        raise ValueError(f"rule must be 'variance' or 'gap'; got {rule!r}.")
    return local.astype(np.int64)


def local_pca_profile(graph, ks, *, rule: str = "variance", variance: float = 0.95) -> dict:
    """:func:`local_pca_dimension` for several neighbourhood sizes at once: {k: per-point dimensions}.
    One gather of the largest neighbourhood serves every k (see :func:`_local_spectra_multi`)."""
    from .._threads import single_threaded_blas

    with single_threaded_blas():
        spectra = _local_spectra_multi(graph.points, graph.indices, ks)
    return {k: _local_pca_rule(ev, rule, variance) for k, ev in spectra.items()}


def local_pca_dimension(graph, n_neighbors: int = 20, *, rule: str = "variance", variance: float = 0.95):
    """Local PCA dimension of every neighbourhood of a neighbour graph.

    Each neighbourhood is the point and its ``n_neighbors`` nearest neighbours, centred at its mean.

    * ``rule="variance"``: the smallest number of principal components whose eigenvalues reach the fraction
      ``variance`` of the total (the same count as scikit-dimension's ``lPCA(ver="ratio")`` with
      ``alphaRatio=variance``).
    * ``rule="gap"``: the position of the largest ratio lambda_i / lambda_(i+1) between consecutive
      positive eigenvalues (Fukunaga-Olsen style "largest gap").

    Returns
    -------
    local : ndarray of int, shape (graph.n_points,)

    References
    ----------
    .. [1] K. Fukunaga and D. R. Olsen, "An algorithm for finding intrinsic dimensionality of data",
       IEEE Trans. Computers C-20 (1971).
    .. [2] J. Bruske and G. Sommer, "Intrinsic dimensionality estimation with optimally topology preserving
       maps", IEEE TPAMI 20 (1998).
    """
    ev = _local_spectra(graph.points, graph.indices, n_neighbors)
    return _local_pca_rule(ev, rule, variance)


def _pair_distances(pts: np.ndarray) -> np.ndarray:
    """Condensed pairwise Euclidean distances (upper triangle, row-major as scipy's ``pdist``), computed
    through one matrix product: at D in the hundreds this is an order of magnitude faster than pdist."""
    from sklearn.metrics.pairwise import euclidean_distances

    full = euclidean_distances(pts)
    iu = np.triu_indices(pts.shape[0], k=1)
    return full[iu]


def correlation_dimension(
    X,
    *,
    r_min: float | None = None,
    r_max: float | None = None,
    quantiles=(0.001, 0.02),
    n_radii: int = 20,
    max_points: int = 3000,
    seed=0,
):
    """Grassberger-Procaccia correlation dimension.

    C(r) is the fraction of pairs of distinct points closer than r; the dimension is the least-squares slope
    of log C(r) on log r over ``n_radii`` log-spaced radii in [r_min, r_max]. Unset ends are the
    ``quantiles`` of the pair distances (default 0.1 % and 2 %: small enough to stay near the manifold
    scale, large enough that C(r_min) rests on thousands of pairs with 3000 points).

    Pair distances come from pairwise distances (BLAS, as scikit-learn's ``euclidean_distances``) on a seeded uniform subsample of at most
    ``max_points`` distinct points (3000 points give 4.5 million pairs: enough for C(r) down to the 0.1 %
    quantile, and about 36 MB of distances).

    Returns
    -------
    dimension : float
    r_range : (float, float)
    log_r, log_c : ndarrays of the fitted curve
    n_used : int
        Number of points in the subsample.

    References
    ----------
    .. [1] P. Grassberger and I. Procaccia, "Characterization of strange attractors",
       Phys. Rev. Lett. 50, 346 (1983).
    """

    pts = np.asarray(X, dtype=np.float64)
    rng = make_rng(seed)
    if pts.shape[0] > max_points:
        pts = pts[np.sort(rng.choice(pts.shape[0], max_points, replace=False))]
    dist = np.sort(_pair_distances(pts))
    dist = dist[dist > 0]
    if dist.size < 10:
        raise DataValidationError(
            f"CorrelationDimension: only {dist.size} nonzero pair distance(s); at least 10 are needed. "
            "Pass more distinct points."
        )
    lo = float(np.quantile(dist, quantiles[0])) if r_min is None else float(r_min)
    hi = float(np.quantile(dist, quantiles[1])) if r_max is None else float(r_max)
    if not (0 < lo < hi):
        raise ValueError(
            f"CorrelationDimension: the radius range must satisfy 0 < r_min < r_max; got r_min={lo:g}, "
            f"r_max={hi:g}. Widen the range or the quantiles."
        )
    radii = np.geomspace(lo, hi, n_radii)
    counts = np.searchsorted(dist, radii, side="right")
    if counts[0] == 0:
        raise DataValidationError(
            f"CorrelationDimension: no pair is closer than r_min={lo:g}; raise r_min or the lower quantile."
        )
    log_r = np.log(radii)
    log_c = np.log(counts / dist.size)
    slope = float(np.polyfit(log_r, log_c, 1)[0])
    return slope, (lo, hi), log_r, log_c, int(pts.shape[0])


# --------------------------------------------------------------------------------------------------------
# estimators (parameter rules declared once as data, checked by manireg._params at fit)
# --------------------------------------------------------------------------------------------------------
_NEIGHBOR_PARAMS = {
    "neighbor_method": choice("auto", "exact", "approximate"),
    "random_state": seed(),
}


@dataclass
class DimensionEstimate(ResultMixin):
    """One estimator's result: the value, an interval where the method gives one, and the data counts."""

    estimator: str
    dimension: float
    lower: float = math.nan
    upper: float = math.nan
    interval_kind: str = "none"
    n_samples: int = 0
    n_duplicates: int = 0
    params: dict = field(default_factory=dict)


class _DimensionEstimator(BaseEstimator):
    """Shared behaviour: parameter checks, the neighbour query and the summary."""

    _parameter_constraints: dict = {}
    _name = ""

    def _validate(self) -> dict:
        return check_attributes(self, self._parameter_constraints)

    def _graph(self, X, k: int, p: dict):
        owner = type(self).__name__
        X = check_points(X, owner=owner, min_samples=2)
        graph = kneighbors(X, k, method=p["neighbor_method"], random_state=p["random_state"], owner=owner,
                           warn_duplicates=False)
        if graph.n_duplicates:  # warned on every fit, also when the graph comes from the cache
            warn(f"{owner}: collapsed {graph.n_duplicates} exact duplicate row(s) of X before the neighbour search "
                 f"({graph.n_points} distinct points remain); zero distances would break the log-distance "
                 "estimators.", stacklevel=4)
        self.n_samples_ = X.shape[0]
        self.n_features_in_ = X.shape[1]
        self.n_duplicates_ = graph.n_duplicates
        return graph

    def _interval(self):
        return (math.nan, math.nan), "none"

    def summary(self) -> DimensionEstimate:
        """The fitted result as a :class:`DimensionEstimate` (raises ``NotFittedError`` before ``fit``)."""
        check_is_fitted(self, "dimension_")
        (lo, hi), kind = self._interval()
        return DimensionEstimate(self._name, float(self.dimension_), lo, hi, kind, self.n_samples_,
                                 self.n_duplicates_, self.get_params())

    def fit_transform(self, X, y=None):
        """Fit and return the per-row local dimensions (local estimators only)."""
        return self.fit(X).local_dimension_


class MLEDimension(_DimensionEstimator):
    """Levina-Bickel maximum-likelihood intrinsic dimension with MacKay-Ghahramani aggregation.

    Parameters
    ----------
    k_min, k_max : int, default 10 and 20
        Neighbour counts averaged over (3 <= k_min <= k_max). Small k: more noise-sensitive and more
        variable local values; large k: curvature and density changes bias the estimate (usually down on
        curved, high-d sets).
    aggregate : {"harmonic", "mean", "median"}, default "harmonic"
        How local values are combined over points for each k; "harmonic" averages the inverses of the local
        values (MacKay-Ghahramani), which removes the small-k bias of the arithmetic mean.
    unbiased : bool, default False
        Normalise by (k - 2) instead of (k - 1): makes each local value unbiased, meant for
        ``aggregate="mean"``; with the harmonic mean it biases the result down by (k-2)/(k-1).
    n_boot : int, default 200
        Bootstrap replicates over points for ``interval_`` (0 disables it).
    level : float, default 0.95
        Confidence level of ``interval_``.
    neighbor_method : {"auto", "exact", "approximate"}, default "auto"
        Passed to the shared neighbour layer.
    random_state : int, default 0
        Seed of the approximate neighbour index and of the bootstrap.

    Attributes
    ----------
    dimension_ : float
    dimension_by_k_ : ndarray of shape (k_max - k_min + 1,)
    local_dimension_ : ndarray of shape (n_samples,)
        Per original row (duplicates share their point's value).
    interval_ : (float, float)
        Percentile bootstrap interval over points. It treats points as independent; overlapping
        neighbourhoods make it somewhat optimistic, and it does not cover curvature bias.
    n_samples_, n_features_in_, n_duplicates_ : int

    References
    ----------
    .. [1] E. Levina and P. J. Bickel, "Maximum likelihood estimation of intrinsic dimension", NIPS 17 (2004).
    .. [2] D. J. C. MacKay and Z. Ghahramani, "Comments on 'Maximum likelihood estimation of intrinsic
       dimension' by E. Levina and P. Bickel" (2005).

    Examples
    --------
    >>> from manireg.data.manifolds import sphere
    >>> X = sphere(1000, d=2, ambient_dim=5, seed=0).points
    >>> round(MLEDimension().fit(X).dimension_)
    2
    """

    _name = "mle"
    _parameter_constraints = {
        "k_min": integer(3),
        "k_max": integer(3),
        "aggregate": choice("harmonic", "mean", "median"),
        "unbiased": boolean(),
        "n_boot": integer(0),
        "level": real(0.0, 1.0, low_open=True, high_open=True),
        **_NEIGHBOR_PARAMS,
    }

    def __init__(self, *, k_min=10, k_max=20, aggregate="harmonic", unbiased=False, n_boot=200, level=0.95,
                 neighbor_method="auto", random_state=0):
        self.k_min = k_min
        self.k_max = k_max
        self.aggregate = aggregate
        self.unbiased = unbiased
        self.n_boot = n_boot
        self.level = level
        self.neighbor_method = neighbor_method
        self.random_state = random_state

    def fit(self, X, y=None):
        """Estimate the dimension of ``X`` (n_samples, n_features). Returns self."""
        p = self._validate()
        if p["k_min"] > p["k_max"]:
            raise ValueError(
                f"MLEDimension needs k_min <= k_max; got k_min={p['k_min']}, k_max={p['k_max']}. "
                "Swap them or set k_min equal to k_max for a single k."
            )
        if p["unbiased"] and p["k_min"] < 4:
            raise ValueError(f"MLEDimension with unbiased=True needs k_min >= 4 (variance m^2/(k-3)); got {p['k_min']}.")
        graph = self._graph(X, p["k_max"], p)
        d, by_k, local = mle_dimension(graph, p["k_min"], p["k_max"], aggregate=p["aggregate"], unbiased=p["unbiased"])
        self.dimension_ = d
        self.dimension_by_k_ = by_k
        self.local_dimension_ = local[graph.inverse]
        self.interval_ = _mle_bootstrap(graph.distances, p, make_rng(p["random_state"]))
        return self

    def _interval(self):
        return self.interval_, "bootstrap over points"


def _mle_bootstrap(distances, p, rng):
    if p["n_boot"] == 0:
        return (math.nan, math.nan)
    ks = np.arange(p["k_min"], p["k_max"] + 1)
    sums = _log_sums(distances, ks)
    stats = _bootstrap(sums, lambda s: _mle_from_sums(s, ks, p["aggregate"], p["unbiased"]).mean(),
                       p["n_boot"], rng)
    return _percentile(stats, p["level"])


def _bootstrap(values: np.ndarray, stat, n_boot: int, rng) -> np.ndarray:
    """Statistic on ``n_boot`` resamples (with replacement) of the rows of ``values``."""
    n = values.shape[0]
    out = np.empty(n_boot)
    for b in range(n_boot):
        out[b] = stat(values[rng.integers(0, n, n)])
    return out


def _bootstrap_mean_ratio(values: np.ndarray, n_boot: int, rng, chunk: int = 64) -> np.ndarray:
    """Bootstrap means of a 1-D array, vectorised in chunks of replicates."""
    n = values.shape[0]
    out = np.empty(n_boot)
    for s in range(0, n_boot, chunk):
        e = min(s + chunk, n_boot)
        idx = rng.integers(0, n, (e - s, n))
        out[s:e] = values[idx].mean(axis=1)
    return out


def _percentile(stats: np.ndarray, level: float):
    a = (1.0 - level) / 2.0
    lo, hi = np.quantile(stats, [a, 1.0 - a])
    return (float(lo), float(hi))


class TwoNNDimension(_DimensionEstimator):
    """TwoNN intrinsic dimension from the ratio of second to first neighbour distances.

    Parameters
    ----------
    method : {"mle", "linear"}, default "mle"
        "mle": censored maximum likelihood (N' - 1) / T (with ``discard_fraction=0``: (N - 1) / sum log mu);
        "linear": slope through the origin of -log(1 - F_emp) on log mu (the original recipe; equals
        scikit-dimension's ``TwoNN()`` default). See :func:`twonn_dimension`.
    discard_fraction : float in [0, 1), default 0.1
        Fraction of the largest ratios set aside (they are the most affected by curvature and density
        changes); the MLE treats them as censored, the linear fit drops them.
    level : float, default 0.95
        Level of the Gamma interval ``interval_``.
    neighbor_method, random_state
        Passed to the shared neighbour layer.

    Attributes
    ----------
    dimension_ : float
    interval_ : (float, float)
        Exact interval from the Gamma law of the censored sum of log mu.
    n_used_ : int
        Number of ratios kept.
    n_samples_, n_features_in_, n_duplicates_ : int

    References
    ----------
    .. [1] E. Facco, M. d'Errico, A. Rodriguez and A. Laio, Sci. Rep. 7, 12140 (2017).
    .. [2] F. Denti, D. Doimo, A. Laio and A. Mira, Sci. Rep. 12, 20005 (2022).

    Examples
    --------
    >>> from manireg.data.manifolds import torus
    >>> X = torus(2000, seed=0).points
    >>> round(TwoNNDimension().fit(X).dimension_)
    2
    """

    _name = "twonn"
    _parameter_constraints = {
        "method": choice("mle", "linear"),
        "discard_fraction": real(0.0, 1.0, high_open=True),
        "level": real(0.0, 1.0, low_open=True, high_open=True),
        **_NEIGHBOR_PARAMS,
    }

    def __init__(self, *, method="mle", discard_fraction=0.1, level=0.95, neighbor_method="auto", random_state=0):
        self.method = method
        self.discard_fraction = discard_fraction
        self.level = level
        self.neighbor_method = neighbor_method
        self.random_state = random_state

    def fit(self, X, y=None):
        """Estimate the dimension of ``X`` (n_samples, n_features). Returns self."""
        p = self._validate()
        graph = self._graph(X, 2, p)
        d, interval, n_used = twonn_dimension(graph, method=p["method"], discard_fraction=p["discard_fraction"],
                                              level=p["level"])
        self.dimension_ = d
        self.interval_ = interval
        self.n_used_ = n_used
        return self

    def _interval(self):
        return self.interval_, "Gamma (exact for the MLE)"


class LocalPCADimension(_DimensionEstimator):
    """Local PCA dimension: PCA of each point's neighbourhood.

    Parameters
    ----------
    n_neighbors : int, default 20
        Neighbours per neighbourhood (the point itself is added). Needs n_neighbors >= d; too small and the
        count is capped by the neighbourhood size, too large and curvature adds components.
    rule : {"variance", "gap"}, default "variance"
        "variance": fewest components reaching ``variance`` of the local variance; "gap": position of the
        largest ratio between consecutive eigenvalues.
    variance : float in (0, 1], default 0.95
    aggregate : {"mean", "median"}, default "mean"
        Combination of the (integer) local values into ``dimension_``. The mean is the default because it
        moves smoothly with scale (what the profile needs); the median gives an integer.
    n_boot, level : bootstrap over points for ``interval_``.
    neighbor_method, random_state
        Passed to the shared neighbour layer; ``random_state`` also seeds the bootstrap.

    Attributes
    ----------
    dimension_ : float
    local_dimension_ : ndarray of int, shape (n_samples,)
    interval_ : (float, float)
    n_samples_, n_features_in_, n_duplicates_ : int

    References
    ----------
    .. [1] K. Fukunaga and D. R. Olsen, IEEE Trans. Computers C-20, 176-183 (1971).
    .. [2] J. Bruske and G. Sommer, IEEE TPAMI 20, 572-575 (1998).
    """

    _name = "lpca"
    _parameter_constraints = {
        "n_neighbors": integer(2),
        "rule": choice("variance", "gap"),
        "variance": real(0.0, 1.0, low_open=True),
        "aggregate": choice("mean", "median"),
        "n_boot": integer(0),
        "level": real(0.0, 1.0, low_open=True, high_open=True),
        **_NEIGHBOR_PARAMS,
    }

    def __init__(self, *, n_neighbors=20, rule="variance", variance=0.95, aggregate="mean", n_boot=200, level=0.95,
                 neighbor_method="auto", random_state=0):
        self.n_neighbors = n_neighbors
        self.rule = rule
        self.variance = variance
        self.aggregate = aggregate
        self.n_boot = n_boot
        self.level = level
        self.neighbor_method = neighbor_method
        self.random_state = random_state

    def fit(self, X, y=None):
        """Estimate the dimension of ``X`` (n_samples, n_features). Returns self."""
        p = self._validate()
        graph = self._graph(X, p["n_neighbors"], p)
        local = local_pca_dimension(graph, p["n_neighbors"], rule=p["rule"], variance=p["variance"])
        self.local_dimension_ = local[graph.inverse]
        self.dimension_ = float(np.mean(local) if p["aggregate"] == "mean" else np.median(local))
        if p["n_boot"]:
            stats = _bootstrap_mean_ratio(local.astype(float), p["n_boot"], make_rng(p["random_state"])) \
                if p["aggregate"] == "mean" else _bootstrap(local, np.median, p["n_boot"], make_rng(p["random_state"]))
            self.interval_ = _percentile(stats, p["level"])
        else:
            self.interval_ = (math.nan, math.nan)
        return self

    def _interval(self):
        return self.interval_, "bootstrap over points"


class CorrelationDimension(_DimensionEstimator):
    """Grassberger-Procaccia correlation dimension (slope of log C(r) on log r).

    Parameters
    ----------
    r_min, r_max : float or None
        Radius range of the fit; ``None`` takes the corresponding entry of ``quantiles`` of the pair
        distances.
    quantiles : (float, float), default (0.001, 0.02)
        Pair-distance quantiles for unset ends.
    n_radii : int, default 20
        Log-spaced radii in the fit.
    max_points : int, default 3000
        Pair distances are computed (pairwise distances (BLAS, as scikit-learn's ``euclidean_distances``)) on a seeded subsample of at most
        this many distinct points: O(max_points^2) memory and time.
    random_state : int, default 0
        Seed of the subsample.

    Attributes
    ----------
    dimension_ : float
    r_range_ : (float, float)
    log_r_, log_c_ : ndarrays of the fitted curve
    n_used_, n_samples_, n_features_in_, n_duplicates_ : int

    References
    ----------
    .. [1] P. Grassberger and I. Procaccia, Phys. Rev. Lett. 50, 346 (1983).
    """

    _name = "corr"
    _parameter_constraints = {
        "r_min": real(0.0, low_open=True, none=True),
        "r_max": real(0.0, low_open=True, none=True),
        "n_radii": integer(2),
        "max_points": integer(10),
        "random_state": seed(),
    }

    def __init__(self, *, r_min=None, r_max=None, quantiles=(0.001, 0.02), n_radii=20, max_points=3000,
                 random_state=0):
        self.r_min = r_min
        self.r_max = r_max
        self.quantiles = quantiles
        self.n_radii = n_radii
        self.max_points = max_points
        self.random_state = random_state

    def fit(self, X, y=None):
        """Estimate the dimension of ``X`` (n_samples, n_features). Returns self."""
        p = self._validate()
        q = _check_quantiles(self.quantiles, "CorrelationDimension")
        if p["r_min"] is not None and p["r_max"] is not None and p["r_min"] >= p["r_max"]:
            raise ValueError(f"CorrelationDimension needs r_min < r_max; got r_min={p['r_min']}, r_max={p['r_max']}.")
        X = check_points(X, owner="CorrelationDimension", min_samples=3)
        pts, _, n_dup = collapse_duplicates(X)
        if n_dup:
            warn(f"CorrelationDimension: collapsed {n_dup} exact duplicate row(s) of X ({pts.shape[0]} distinct "
                 "points remain); zero pair distances carry no scale information.")
        d, r_range, log_r, log_c, n_used = correlation_dimension(
            pts, r_min=p["r_min"], r_max=p["r_max"], quantiles=q, n_radii=p["n_radii"],
            max_points=p["max_points"], seed=p["random_state"])
        self.n_samples_, self.n_features_in_, self.n_duplicates_ = X.shape[0], X.shape[1], int(n_dup)
        self.dimension_, self.r_range_, self.log_r_, self.log_c_, self.n_used_ = d, r_range, log_r, log_c, n_used
        return self


def _check_quantiles(q, owner):
    try:
        lo, hi = (float(v) for v in q)
    except (TypeError, ValueError):
        raise ValueError(f"the 'quantiles' parameter of {owner} must be a pair (low, high) of floats; got {q!r}.") from None
    if not (0.0 < lo < hi <= 1.0):
        raise ValueError(f"the 'quantiles' parameter of {owner} must satisfy 0 < low < high <= 1; got {q!r}.")
    return (lo, hi)


# --------------------------------------------------------------------------------------------------------
# multiscale profile
# --------------------------------------------------------------------------------------------------------
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


# --------------------------------------------------------------------------------------------------------
# one-call report
# --------------------------------------------------------------------------------------------------------
@dataclass
class DimensionReport(ResultMixin):
    """Result of :func:`estimate_dimension`: per-estimator values, a consensus and the profile."""

    estimates: list
    consensus: float
    consensus_rule: str
    plateau: tuple
    plateau_values: dict
    n_samples: int
    n_distinct: int
    n_duplicates: int
    n_features: int
    warnings: list
    profile: DimensionProfile | None = field(default=None, repr=False)

    def to_dict(self) -> dict:
        out = super().to_dict()
        out["profile"] = None if self.profile is None else self.profile.to_dict()
        return out

    def to_frame(self):
        """One row per estimator: estimator, dimension, lower, upper, interval_kind."""
        import pandas as pd

        return pd.DataFrame([{"estimator": e.estimator, "dimension": e.dimension, "lower": e.lower,
                              "upper": e.upper, "interval_kind": e.interval_kind} for e in self.estimates])

    def __str__(self) -> str:
        lines = [f"Intrinsic dimension of {self.n_samples} points in R^{self.n_features}"
                 + (f" ({self.n_duplicates} duplicate rows collapsed)" if self.n_duplicates else ""),
                 f"{'estimator':<10} {'dimension':>10} {'interval':>22}  kind"]
        for e in self.estimates:
            iv = "-" if not np.isfinite(e.lower) else f"[{e.lower:.2f}, {e.upper:.2f}]"
            lines.append(f"{e.estimator:<10} {e.dimension:>10.2f} {iv:>22}  {e.interval_kind}")
        lines.append(f"consensus: {self.consensus:.2f} ({self.consensus_rule})")
        lines.append(f"plateau: k = {self.plateau[0]}..{self.plateau[1]}")
        for w in self.warnings:
            lines.append(f"warning: {w}")
        return "\n".join(lines)


def estimate_dimension(
    X,
    *,
    estimators=("mle", "twonn", "lpca", "corr"),
    k_min: int = 10,
    k_max: int = 20,
    n_neighbors: int = 20,
    scales=None,
    n_boot: int = 200,
    level: float = 0.95,
    disagreement: float = 0.25,
    neighbor_method: str = "auto",
    seed: int = 0,
) -> DimensionReport:
    """Estimate the intrinsic dimension with several estimators, a profile and a consensus.

    One neighbour query (the largest k among ``k_max``, ``n_neighbors`` and ``scales``) serves the MLE,
    TwoNN, local PCA and the profile. The correlation dimension uses pair distances of a seeded subsample
    of at most 3000 points (see :func:`correlation_dimension`).

    Consensus rule: the profile's plateau is the window of three consecutive scales where the MLE profile is
    flattest; each profiled estimator (MLE, TwoNN, local PCA among ``estimators``) contributes the mean of
    its profile values with scale inside the plateau (TwoNN: its rows in the plateau, else its full-data
    value); the consensus is the median of those contributions. The correlation dimension is reported but
    not in the consensus (it works at larger scales).

    Warnings (in ``warnings``; a Python warning is also emitted): duplicates collapsed; estimators in the
    consensus differ by more than ``disagreement`` times the consensus; the consensus exceeds
    2 log10(n), the largest dimension a sample of n points can resolve (Eckmann & Ruelle 1992).

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
    estimators : subset of ("mle", "twonn", "lpca", "corr")
    k_min, k_max : MLE neighbour range.
    n_neighbors : local PCA neighbourhood size.
    scales : profile scales (see :func:`dimension_profile`).
    n_boot, level : bootstrap replicates and level for intervals.
    disagreement : float > 0
        Relative spread that triggers the disagreement warning.
    neighbor_method : {"auto", "exact", "approximate"}
    seed : int

    Returns
    -------
    DimensionReport

    References
    ----------
    .. [1] E. Levina and P. J. Bickel, NIPS 17 (2004); D. J. C. MacKay and Z. Ghahramani (2005).
    .. [2] E. Facco et al., Sci. Rep. 7, 12140 (2017); F. Denti et al., Sci. Rep. 12, 20005 (2022).
    .. [3] P. Grassberger and I. Procaccia, Phys. Rev. Lett. 50, 346 (1983).
    .. [4] J.-P. Eckmann and D. Ruelle, "Fundamental limitations for estimating dimensions and Lyapunov
       exponents in dynamical systems", Physica D 56, 185-187 (1992).
    """
    owner = "estimate_dimension"
    estimators = _check_estimators(estimators, owner, _ESTIMATOR_NAMES)
    k_min = check_int(k_min, "k_min", owner=owner, low=3)
    k_max = check_int(k_max, "k_max", owner=owner, low=3)
    if k_min > k_max:
        raise ValueError(f"{owner} needs k_min <= k_max; got k_min={k_min}, k_max={k_max}. Swap them.")
    n_neighbors = check_int(n_neighbors, "n_neighbors", owner=owner, low=2)
    n_boot = check_int(n_boot, "n_boot", owner=owner, low=0)
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    disagreement = check_float(disagreement, "disagreement", owner=owner, low=0.0, low_open=True)
    rng = make_rng(seed)
    X = check_points(X, owner=owner, min_samples=4)
    m = _n_distinct(X)
    prof_est = tuple(e for e in estimators if e in ("mle", "twonn", "lpca"))
    ks = _profile_scales(scales, m, owner) if prof_est else []
    need = max([2] + ks + ([k_max] if "mle" in estimators else []) + ([n_neighbors] if "lpca" in estimators else []))
    if prof_est and m > 16:
        need = max(need, 16)
    if need >= m:
        raise DataValidationError(
            f"{owner}: the estimators need {need} neighbours per point but X has only {m} distinct point(s). "
            "Pass more points or lower k_max, n_neighbors and scales."
        )
    graph = kneighbors(X, need, method=neighbor_method, random_state=seed, owner=owner) if prof_est else None
    warn_list = []
    n_dup = graph.n_duplicates if graph is not None else int(X.shape[0] - m)
    if n_dup:
        warn_list.append(f"{n_dup} exact duplicate row(s) collapsed before estimation.")
    estimates = []
    p_common = {"n_boot": n_boot, "level": level}
    if "mle" in estimators:
        d, _, _ = mle_dimension(graph, k_min, k_max)
        iv = _mle_bootstrap(graph.distances, {"k_min": k_min, "k_max": k_max, "aggregate": "harmonic",
                                              "unbiased": False, **p_common}, rng)
        estimates.append(DimensionEstimate("mle", d, iv[0], iv[1], "bootstrap over points", X.shape[0], n_dup,
                                           {"k_min": k_min, "k_max": k_max}))
    if "twonn" in estimators:
        d, iv, _ = twonn_dimension(graph, method="mle", discard_fraction=0.1, level=level)
        estimates.append(DimensionEstimate("twonn", d, iv[0], iv[1], "Gamma (exact for the MLE)", X.shape[0], n_dup,
                                           {"method": "mle", "discard_fraction": 0.1}))
    if "lpca" in estimators:
        local = local_pca_dimension(graph, n_neighbors).astype(float)
        iv = _percentile(_bootstrap_mean_ratio(local, n_boot, rng), level) if n_boot else (math.nan, math.nan)
        estimates.append(DimensionEstimate("lpca", float(local.mean()), iv[0], iv[1], "bootstrap over points",
                                           X.shape[0], n_dup, {"n_neighbors": n_neighbors, "rule": "variance"}))
    if "corr" in estimators:
        pts = graph.points if graph is not None else collapse_duplicates(X)[0]
        d, r_range, *_ = correlation_dimension(pts, seed=seed)
        estimates.append(DimensionEstimate("corr", d, math.nan, math.nan, "none", X.shape[0], n_dup,
                                           {"r_min": r_range[0], "r_max": r_range[1], "max_points": 3000}))

    profile = None
    plateau = (math.nan, math.nan)
    plateau_values = {}
    if prof_est:
        profile = _make_profile(graph, X.shape[0], ks, prof_est, n_boot, level, seed, "variance", 0.95)
        plateau = profile.plateau
        for e in prof_est:
            mask = profile.rows(e)
            sc, dv = profile.scale[mask], profile.dimension[mask]
            inside = (sc >= plateau[0]) & (sc <= plateau[1])
            if inside.any():
                plateau_values[e] = float(np.mean(dv[inside]))
            elif e == "twonn":
                plateau_values[e] = float(dv[0])
        values = np.array(list(plateau_values.values()))
        consensus = float(np.median(values))
        rule = (f"median over {', '.join(plateau_values)} of each estimator's mean profile value at scales "
                f"k = {plateau[0]}..{plateau[1]} (the flattest window of the {profile.plateau_estimator} profile)")
        warn_list.extend(profile.notes)
    else:
        values = np.array([e.dimension for e in estimates])
        consensus = float(np.median(values))
        rule = "median of the estimates (no profile: only the correlation dimension was asked for)"
    if values.size > 1 and (values.max() - values.min()) > disagreement * consensus:
        warn_list.append(f"estimators disagree: values range from {values.min():.2f} to {values.max():.2f}, more "
                         f"than {disagreement:.0%} of the consensus {consensus:.2f}; read the profile before "
                         "trusting one number.")
    limit = 2.0 * math.log10(X.shape[0])
    if consensus > limit:
        warn_list.append(f"too few points for this dimension: {X.shape[0]} points resolve dimensions up to about "
                         f"2 log10(n) = {limit:.1f}, and the consensus is {consensus:.2f}; the value is likely an "
                         "underestimate.")
    for w in warn_list[1 if n_dup else 0:]:  # the neighbour layer already warned about duplicates
        warn(f"{owner}: {w}")
    return DimensionReport(estimates, consensus, rule, plateau, plateau_values, int(X.shape[0]), int(m), int(n_dup),
                           int(X.shape[1]), warn_list, profile)
