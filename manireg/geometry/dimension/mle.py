"""Levina-Bickel maximum-likelihood dimension (MacKay-Ghahramani aggregation): the function and the estimator.

The local value uses the (k - 1) normalisation of Levina & Bickel. With the harmonic (MacKay-Ghahramani)
aggregation this is the right choice: the sum S_k(x) = sum_{j<k} log(T_k/T_j) is Gamma(k-1, rate m) for a
locally uniform density, so (k-1) / mean_x S_k(x) is consistent for m. The (k - 2) normalisation
(``unbiased=True``) makes each *local* value unbiased (E[(k-2)/S] = m, variance m^2/(k-3)) and is the right
choice with the arithmetic mean (``aggregate="mean"``); combined with the harmonic mean it is biased down by
the factor (k-2)/(k-1).

References
----------
.. [1] E. Levina and P. J. Bickel, "Maximum likelihood estimation of intrinsic dimension", NIPS 17 (2004).
.. [2] D. J. C. MacKay and Z. Ghahramani, "Comments on 'Maximum likelihood estimation of intrinsic
   dimension' by E. Levina and P. Bickel" (2005).
"""

from __future__ import annotations

import math

import numpy as np

from ..._params import boolean, choice, integer, real
from ..._validation import make_rng
from ._base import _bootstrap, _LocalDimensionEstimator, _NEIGHBOR_PARAMS, _percentile

__all__ = ["mle_dimension", "MLEDimension"]


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


class MLEDimension(_LocalDimensionEstimator):
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
