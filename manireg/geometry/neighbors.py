"""The one nearest-neighbour layer every estimator uses.

No estimator in manireg computes neighbours its own way: they call :func:`kneighbors`, which

* validates the points (:func:`manireg._validation.check_points`),
* collapses exact duplicate points (a zero neighbour distance would send ``log(0)`` into the
  maximum-likelihood and TwoNN formulas) and reports how many were removed,
* runs an exact search (scikit-learn) up to ``APPROXIMATE_ABOVE`` points and an approximate
  nearest-neighbour descent index (pynndescent, which umap-learn brings) above it, and
* caches the last few graphs by a fingerprint of the data, so estimators fitted one after another on the
  same array share one query (the cost of a dimension report is one neighbour query, not one per
  estimator).
"""

from __future__ import annotations

import hashlib
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import DataValidationError, check_choice, check_int, check_points, warn

__all__ = ["APPROXIMATE_ABOVE", "NeighborGraph", "collapse_duplicates", "kneighbors", "data_fingerprint", "clear_cache",
           "index_seed"]

#: Above this many (distinct) points ``method="auto"`` switches from exact search to pynndescent.
#: Exact brute-force search costs O(n^2 D); at 60,000 points in D = 64 it is a few seconds on 2 cores,
#: which is still cheaper than building the approximate index with its compilation overhead.
APPROXIMATE_ABOVE = 60_000

_CACHE: "OrderedDict[tuple, NeighborGraph]" = OrderedDict()
_CACHE_SIZE = 4


@dataclass
class NeighborGraph(ResultMixin):
    """k nearest neighbours of every distinct point, self excluded, sorted by distance.

    Attributes
    ----------
    points : (m, D) array of the distinct points the graph is built on (duplicates collapsed).
    distances, indices : (m, k) arrays; ``indices`` refer to rows of ``points``.
    inverse : (n,) array mapping each original row to its row in ``points``.
    n_duplicates : number of original rows that were exact copies of an earlier row.
    method : "exact" or "approximate".
    """

    points: np.ndarray = field(repr=False)
    distances: np.ndarray = field(repr=False)
    indices: np.ndarray = field(repr=False)
    inverse: np.ndarray = field(repr=False)
    n_duplicates: int
    method: str
    _skip_in_dict = ("points", "distances", "indices", "inverse")

    @property
    def k(self) -> int:
        return self.distances.shape[1]

    @property
    def n_points(self) -> int:
        return self.points.shape[0]

    def head(self, k: int) -> "NeighborGraph":
        """The same graph restricted to the first ``k`` neighbours."""
        if k > self.k:
            raise ValueError(f"this graph holds {self.k} neighbours; {k} were asked for.")
        return NeighborGraph(self.points, self.distances[:, :k], self.indices[:, :k], self.inverse, self.n_duplicates, self.method)


def data_fingerprint(X: np.ndarray) -> str:
    """A content hash of an array (shape, dtype and bytes): equal data, equal fingerprint."""
    arr = np.ascontiguousarray(X)
    h = hashlib.blake2b(digest_size=16)
    h.update(str(arr.shape).encode())
    h.update(str(arr.dtype).encode())
    h.update(arr.tobytes())
    return h.hexdigest()


def collapse_duplicates(X: np.ndarray):
    """Return (distinct points in first-seen order, inverse map, number of duplicate rows)."""
    _, first, inverse = np.unique(X, axis=0, return_index=True, return_inverse=True)
    order = np.argsort(first)
    rank = np.empty_like(order)
    rank[order] = np.arange(len(order))
    distinct = X[np.sort(first)]
    inverse = rank[np.asarray(inverse).reshape(-1)]
    return distinct, inverse, X.shape[0] - distinct.shape[0]


def clear_cache() -> None:
    """Forget cached neighbour graphs."""
    _CACHE.clear()


def index_seed(random_state) -> int | None:
    """The seed a caller's ``random_state`` gives the approximate index of :func:`kneighbors`.

    An int (or ``None``, fresh entropy) is passed on as it is. A numpy Generator gives 0: drawing a seed
    from it would shift the caller's own stream, which its other random steps use.
    """
    if isinstance(random_state, np.random.Generator):
        return 0
    return random_state


def kneighbors(
    X,
    k: int,
    *,
    method: str = "auto",
    random_state: int = 0,
    owner: str = "kneighbors",
    warn_duplicates: bool = True,
) -> NeighborGraph:
    """k nearest neighbours (self excluded) of every distinct point of ``X``.

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
    k : int >= 1
        Number of neighbours. After duplicates are collapsed there must be more than ``k`` distinct points.
    method : {"auto", "exact", "approximate"}
        "auto" is exact up to :data:`APPROXIMATE_ABOVE` distinct points, approximate above.
    random_state : int
        Seed of the approximate index (the exact search is deterministic).
    owner : str
        Name used in error messages (the estimator that asked).
    warn_duplicates : bool
        Warn when exact duplicates were collapsed.

    Returns
    -------
    NeighborGraph
    """
    k = check_int(k, "k", owner=owner, low=1)
    check_choice(method, "method", owner=owner, choices=("auto", "exact", "approximate"))
    X = check_points(X, owner=owner, min_samples=2)
    key = (data_fingerprint(X), method, random_state)
    cached = _CACHE.get(key)
    if cached is not None and cached.k >= k:
        _CACHE.move_to_end(key)
        return cached.head(k)

    points, inverse, n_dup = collapse_duplicates(X)
    m = points.shape[0]
    if m == 1:
        raise DataValidationError(
            f"{owner}: all {X.shape[0]} rows of X are the same point; neighbour distances are all zero. "
            "Pass data with more than one distinct point."
        )
    if m <= k:
        raise DataValidationError(
            f"{owner}: {k} neighbours were asked for but X has only {m} distinct point(s)"
            + (f" ({n_dup} exact duplicate row(s) collapsed)" if n_dup else "")
            + f". Pass at least {k + 1} distinct points or lower k."
        )
    if n_dup and warn_duplicates:
        warn(
            f"{owner}: collapsed {n_dup} exact duplicate row(s) of X before the neighbour search "
            f"({m} distinct points remain); zero distances would break the log-distance estimators."
        )
    use_approx = method == "approximate" or (method == "auto" and m > APPROXIMATE_ABOVE)
    if use_approx:
        dist, idx = _approximate(points, k, random_state)
        kind = "approximate"
    else:
        dist, idx = _exact(points, k)
        kind = "exact"
    graph = NeighborGraph(points, dist, idx, inverse, int(n_dup), kind)
    _CACHE[key] = graph
    _CACHE.move_to_end(key)
    while len(_CACHE) > _CACHE_SIZE:
        _CACHE.popitem(last=False)
    return graph


def _exact(points: np.ndarray, k: int):
    from sklearn.neighbors import NearestNeighbors

    nn = NearestNeighbors(n_neighbors=k + 1).fit(points)
    dist, idx = nn.kneighbors(points)
    return _drop_self(dist, idx, k)


def _approximate(points: np.ndarray, k: int, random_state: int):
    from pynndescent import NNDescent

    index = NNDescent(points, n_neighbors=k + 1, random_state=random_state, n_jobs=1, low_memory=True)
    idx, dist = index.neighbor_graph
    return _drop_self(dist.astype(np.float64), idx.astype(np.int64), k)


def _drop_self(dist: np.ndarray, idx: np.ndarray, k: int):
    """Remove each point from its own neighbour list (it is usually, not always, in column 0)."""
    n = dist.shape[0]
    is_self = idx == np.arange(n)[:, None]
    # rows where self is absent (ties, approximate search) lose their last column instead
    missing = ~is_self.any(axis=1)
    is_self[missing, -1] = True
    keep = ~is_self
    dist = dist[keep].reshape(n, -1)[:, :k]
    idx = idx[keep].reshape(n, -1)[:, :k]
    return np.ascontiguousarray(dist), np.ascontiguousarray(idx)
