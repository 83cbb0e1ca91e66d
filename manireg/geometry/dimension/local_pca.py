"""Local PCA dimension of each neighbourhood: spectra, the counting rules, the function and the estimator.

References
----------
.. [1] K. Fukunaga and D. R. Olsen, IEEE Trans. Computers C-20, 176-183 (1971).
.. [2] J. Bruske and G. Sommer, IEEE TPAMI 20, 572-575 (1998).
"""

from __future__ import annotations

import math

import numpy as np

from ..._params import choice, integer, real
from ..._validation import make_rng
from ._base import _bootstrap, _bootstrap_mean_ratio, _LocalDimensionEstimator, _NEIGHBOR_PARAMS, _percentile

__all__ = ["local_pca_profile", "local_pca_dimension", "LocalPCADimension"]


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
    from ..._threads import single_threaded_blas

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
    from ..._threads import single_threaded_blas

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


class LocalPCADimension(_LocalDimensionEstimator):
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
