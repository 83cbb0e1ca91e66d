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

An approximate graph carries its measured recall: the share of the true k nearest neighbours it found,
measured against an exact search for a seeded subsample of ``RECALL_QUERIES`` points
(:func:`measure_recall`), so every estimate built on it can say how good its neighbours were.

Data larger than memory (a :class:`manireg.data.LazyTable`) goes through :func:`stream_kneighbors`: exact
neighbours of a subsample of query rows, found by one pass over the file in blocks (memory bounded by
the block size and the number of queries, not by the file). An all-points graph of such data is what the
approximate index is for.
"""

from __future__ import annotations

import hashlib
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import DataValidationError, check_choice, check_int, check_points, warn

__all__ = ["APPROXIMATE_ABOVE", "RECALL_QUERIES", "NeighborGraph", "collapse_duplicates", "kneighbors", "data_fingerprint",
           "clear_cache", "measure_recall", "stream_kneighbors", "NEIGHBOR_METHODS", "index_seed", "query_neighbors",
           "QueryNeighbors", "QUERY_APPROXIMATE_ABOVE"]

#: Choices of ``method`` in :func:`kneighbors`.
NEIGHBOR_METHODS = ("auto", "exact", "approximate")

#: Points of the seeded subsample on which an approximate graph's recall is measured.
RECALL_QUERIES = 200

#: Above this many (distinct) points ``method="auto"`` switches from exact search to pynndescent.
#: Exact brute-force search costs O(n^2 D); at 60,000 points in D = 64 it is a few seconds on 2 cores,
#: which is still cheaper than building the approximate index with its compilation overhead.
APPROXIMATE_ABOVE = 60_000

#: Above this many reference points ``query_neighbors(method="auto")`` (the kNN baselines) uses the approximate
#: index. Exact search of m queries costs 2 m n D flops, O(n^2 D) when the training points are among the
#: queries; the index costs about O(n k^2 D) plus a compilation of its search function in each process
#: (measured in docs/scaling.md).
QUERY_APPROXIMATE_ABOVE = 50_000

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
    method : "exact", "approximate" or "streamed exact" (queries of a file; then ``points`` are the query
        rows, ``indices`` are row numbers of the file and ``inverse`` is ``arange(n_queries)``).
    recall : share of the exact k nearest neighbours the graph holds, measured on ``recall_queries``
        points (1.0 for exact search, which is not measured).
    recall_queries : how many points the recall was measured on (0: not measured).
    """

    points: np.ndarray = field(repr=False)
    distances: np.ndarray = field(repr=False)
    indices: np.ndarray = field(repr=False)
    inverse: np.ndarray = field(repr=False)
    n_duplicates: int
    method: str
    recall: float = 1.0
    recall_queries: int = 0
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
        return NeighborGraph(self.points, self.distances[:, :k], self.indices[:, :k], self.inverse, self.n_duplicates,
                             self.method, self.recall, self.recall_queries)


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
    recall_queries: int = RECALL_QUERIES,
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
    recall_queries : int
        For an approximate graph: the seeded subsample on which its recall is measured against exact
        search (:func:`measure_recall`; costs ``recall_queries`` exact queries); 0 skips it.

    Returns
    -------
    NeighborGraph
    """
    k = check_int(k, "k", owner=owner, low=1)
    check_choice(method, "method", owner=owner, choices=NEIGHBOR_METHODS)
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
        graph = NeighborGraph(points, dist, idx, inverse, int(n_dup), "approximate", float("nan"), 0)
        if recall_queries:
            graph.recall, graph.recall_queries = measure_recall(graph, recall_queries, seed=random_state)
    else:
        dist, idx = _exact(points, k)
        graph = NeighborGraph(points, dist, idx, inverse, int(n_dup), "exact")
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


def measure_recall(graph: NeighborGraph, n_queries: int = RECALL_QUERIES, *, seed: int = 0):
    """``(recall, n_queries)``: the share of the exact k nearest neighbours that ``graph`` lists, over a seeded
    subsample of its points (exact search by brute force for those points only: O(n_queries n D)).

    Recall at k is the usual measure of approximate nearest-neighbour search (common practice, e.g. the
    ann-benchmarks project): a listed neighbour at or inside the exact k-th distance counts as found.
    """
    m = graph.n_points
    q = min(int(n_queries), m)
    rows = np.sort(np.random.default_rng(seed).choice(m, q, replace=False))
    exact_d, exact_i = _exact_queries(graph.points, rows, graph.k)
    # a listed neighbour at or inside the exact k-th distance counts as found, so ties are not misses
    # (distances of the approximate index are float32: relative tolerance 1e-5)
    kth = exact_d[:, -1:] * (1 + 1e-5) + 1e-12
    found = int(np.minimum(np.sum(graph.distances[rows] <= kth, axis=1), graph.k).sum())
    return found / (q * graph.k), q


def _exact_queries(points: np.ndarray, rows: np.ndarray, k: int):
    from sklearn.neighbors import NearestNeighbors

    nn = NearestNeighbors(n_neighbors=k + 1, algorithm="brute").fit(points)
    dist, idx = nn.kneighbors(points[rows])
    # drop each query itself
    keep = idx != rows[:, None]
    over = keep.sum(axis=1) > k
    keep[over, -1] = False
    return dist[keep].reshape(len(rows), -1)[:, :k], idx[keep].reshape(len(rows), -1)[:, :k]


def stream_kneighbors(table, query_rows, k: int, *, chunk_rows: int | None = None, margin: int = 8,
                      max_block_bytes: float = 16e6, owner: str = "stream_kneighbors") -> NeighborGraph:
    """Exact k nearest neighbours of some rows of a table on disk, found in one pass over the file.

    Each block of the file (:meth:`LazyTable.chunks`) is compared with all queries at once (one matrix
    product in the file's precision) and a running list of ``k + margin`` candidates per query is kept;
    at the end the candidates' distances are recomputed in float64 from the rows themselves and the k
    nearest are kept. The query row itself and exact duplicates of it (distance 0) are left out and
    counted in ``n_duplicates``. Memory: one block, the queries and a (queries x block) distance slab of at
    most ``max_block_bytes``; it does not grow with the file.

    Parameters
    ----------
    table : LazyTable or array (n, D)
    query_rows : array of int
        Rows whose neighbours are wanted (distinct).
    k : int >= 1
    chunk_rows : int, optional
        Block size of the pass (default: the table's).
    margin : int
        Extra candidates kept per query so that float32 rounding in the pass cannot drop a true neighbour.

    Returns
    -------
    NeighborGraph
        ``method="streamed exact"``; ``points`` are the query rows, ``indices`` rows of the file.
    """
    k = check_int(k, "k", owner=owner, low=1)
    q_rows = np.unique(np.asarray(query_rows, dtype=np.int64))
    if q_rows.size != np.asarray(query_rows).size:
        raise ValueError(f"{owner}: query_rows must be distinct row numbers.")
    q_rows = np.asarray(query_rows, dtype=np.int64)
    get_rows = table.rows if hasattr(table, "rows") else (lambda r: np.asarray(table, dtype=np.float64)[r])
    n = table.shape[0]
    if n <= k + 1:
        raise DataValidationError(f"{owner}: {k} neighbours were asked for but the table has only {n} rows.")
    Q = get_rows(q_rows)
    m = len(Q)
    fdt = np.float32 if getattr(table, "dtype", np.float64) == np.float32 else np.float64
    Qf = Q.astype(fdt)
    qn = np.einsum("ij,ij->i", Qf, Qf)
    K = min(k + margin, n - 1)
    best_d = np.full((m, K), np.inf, dtype=fdt)
    best_i = np.full((m, K), -1, dtype=np.int64)
    worst = np.full(m, np.inf, dtype=fdt)  # each query's current K-th candidate distance
    if hasattr(table, "chunks"):
        blocks = table.chunks(chunk_rows, dtype=fdt)
    else:
        arr = np.asarray(table)
        step = int(chunk_rows or max(256, int(64e6 // (8 * arr.shape[1]))))
        blocks = ((a, arr[a:a + step]) for a in range(0, n, step))
    sub = max(64, int(max_block_bytes // (np.dtype(fdt).itemsize * max(m, 1))))
    order_q = np.argsort(q_rows)
    sorted_q = q_rows[order_q]
    for start, block in blocks:
        B = np.asarray(block, dtype=fdt)
        bn = np.einsum("ij,ij->i", B, B)
        for a in range(0, len(B), sub):
            Bs = B[a:a + sub]
            lo, hi = start + a, start + a + len(Bs)
            d2 = Qf @ Bs.T  # squared distances, built in place in one (queries x sub-block) slab
            d2 *= -2.0
            d2 += qn[:, None]
            d2 += bn[None, a:a + len(Bs)]
            s0, s1 = np.searchsorted(sorted_q, [lo, hi])
            if s1 > s0:  # the queries that lie in this sub-block are not their own neighbours
                d2[order_q[s0:s1], sorted_q[s0:s1] - lo] = np.inf
            # only entries below a query's current K-th candidate can enter its list. In the first blocks
            # that is most of the slab (merge it whole); later they are few, and the merge touches them alone
            hit = d2 < worst[:, None]
            n_hit = int(np.count_nonzero(hit))
            if n_hit == 0:
                continue
            if n_hit > hit.size // 8:
                del hit
                rows_hit = np.arange(m)
                part = np.argpartition(d2, min(K, d2.shape[1]) - 1, axis=1)[:, :K]
                pad_d = np.take_along_axis(d2, part, axis=1)
                pad_i = part + lo
                del part
            else:
                r, c = np.nonzero(hit)
                del hit
                rows_hit, first, counts = np.unique(r, return_index=True, return_counts=True)
                pad_d = np.full((rows_hit.size, int(counts.max())), np.inf, dtype=fdt)
                pad_i = np.full(pad_d.shape, -1, dtype=np.int64)
                slot = np.arange(r.size) - np.repeat(first, counts)
                which = np.repeat(np.arange(rows_hit.size), counts)
                pad_d[which, slot] = d2[r, c]
                pad_i[which, slot] = c + lo
                del r, c, slot, which
            del d2
            cat_d = np.concatenate([best_d[rows_hit], pad_d], axis=1)
            cat_i = np.concatenate([best_i[rows_hit], pad_i], axis=1)
            part = np.argpartition(cat_d, K - 1, axis=1)[:, :K]
            best_d[rows_hit] = np.take_along_axis(cat_d, part, axis=1)
            best_i[rows_hit] = np.take_along_axis(cat_i, part, axis=1)
            worst[rows_hit] = best_d[rows_hit].max(axis=1)
    # exact float64 distances of the candidates, a batch of queries at a time
    dist = np.empty((m, k))
    idx = np.empty((m, k), dtype=np.int64)
    n_dup = 0
    batch = max(1, int(max_block_bytes // (8 * K * Q.shape[1])))
    for a in range(0, m, batch):
        cand = best_i[a:a + batch]
        uniq, inv = np.unique(cand, return_inverse=True)
        C = get_rows(uniq)[inv.reshape(cand.shape)]
        d = np.sqrt(np.sum((C - Q[a:a + batch, None, :]) ** 2, axis=2))
        zero = d == 0
        n_dup += int(zero.any(axis=1).sum())
        d[zero] = np.inf
        order = np.argsort(d, axis=1, kind="stable")[:, :k]
        dd = np.take_along_axis(d, order, axis=1)
        if not np.all(np.isfinite(dd)):
            raise DataValidationError(
                f"{owner}: some query rows have fewer than {k} distinct neighbours (exact duplicates of the query "
                "are left out). Lower k or remove duplicated rows."
            )
        dist[a:a + batch] = dd
        idx[a:a + batch] = np.take_along_axis(cand, order, axis=1)
    return NeighborGraph(Q, dist, idx, np.arange(m), n_dup, "streamed exact")


@dataclass
class QueryNeighbors(ResultMixin):
    """The k nearest reference rows of each query row (:func:`query_neighbors`).

    Attributes
    ----------
    indices : (m, k) rows of the reference array, nearest first (a query that is a reference row lists itself).
    method : "exact" or "approximate".
    recall : share of the exact k nearest rows found, measured on ``recall_queries`` queries (1.0 for exact).
    """

    indices: np.ndarray = field(repr=False)
    method: str
    recall: float = 1.0
    recall_queries: int = 0
    _skip_in_dict = ("indices",)


def leading_rows_of(A, B) -> bool:
    """True when the array A is literally B's first rows: the same memory, type and row layout (so equal
    without comparing a value)."""
    return (A.dtype == B.dtype and A.shape[1:] == B.shape[1:] and A.strides == B.strides
            and A.__array_interface__["data"][0] == B.__array_interface__["data"][0])


#: Queries per block when the approximate search reads its answers from the graph.
_GRAPH_BLOCK = 8192
#: Trees and candidates per row of the kNN baselines' neighbour-descent graph (see query_neighbors).
_GRAPH_TREES, _GRAPH_CANDIDATES = 8, 20


def query_neighbors(reference, queries, k: int, *, method: str = "auto", random_state: int = 0,
                    self_rows: int = 0, recall_queries: int = 0, owner: str = "query_neighbors") -> QueryNeighbors:
    """k nearest rows of ``reference`` for each row of ``queries`` (duplicates kept, a row's own copy counts).

    This is the neighbour search of the kNN baselines; :func:`kneighbors` is the one of the geometry. "auto"
    searches exactly (scikit-learn, brute force) up to :data:`QUERY_APPROXIMATE_ABOVE` reference rows and
    with a nearest-neighbour descent graph (pynndescent) above, built over the reference rows and the queries
    together (the first ``self_rows`` queries, which must be the reference rows ``0..self_rows-1`` in order,
    are not added twice). Each query's neighbours are read from that graph, reference rows only; a query
    whose graph row holds fewer than k reference rows is searched exactly. Reading the graph instead of
    searching a built index matters on manifold data: on a 3-dimensional graph manifold in R^20 (3,000
    training points, k = 15) the index's search found none of the 15 true neighbours for some test points
    and the kNN test error moved by 11 %, while the graph's own rows had recall 0.9999.

    Parameters
    ----------
    reference : array (n, D)
    queries : array (m, D)
    k : int in [1, n]
    method : {"auto", "exact", "approximate"}
    random_state : int
        Seed of the index.
    self_rows : int
        How many leading queries are the reference rows themselves (0: none).
    recall_queries : int
        For the approximate index: queries (a seeded subsample) on which the recall is measured against
        exact search; 0 skips it.

    Returns
    -------
    QueryNeighbors
    """
    check_choice(method, "method", owner=owner, choices=NEIGHBOR_METHODS)
    n = reference.shape[0]
    k = check_int(k, "k", owner=owner, low=1, high=n)
    use_approx = method == "approximate" or (method == "auto" and n > QUERY_APPROXIMATE_ABOVE)
    if not use_approx or k >= n - 1:
        return QueryNeighbors(_brute_indices(reference, queries, k), "exact")
    from pynndescent import NNDescent

    m = queries.shape[0]
    # one index over the reference rows and the other queries together: each query's neighbours are read from
    # the index's own graph (its recall is far higher than a search of the built index, which can end in the
    # wrong part of a manifold's graph), keeping reference rows only. The graph lists enough neighbours that
    # k of them are reference rows for almost every query; a query left short is searched exactly.
    extra = queries[self_rows:]
    share = n / (n + extra.shape[0])
    width = int(min(n + extra.shape[0] - 1, np.ceil((k + 3 * np.sqrt(k) + 2) / share)))
    if (self_rows == n and queries.dtype == np.float32 and queries.flags.c_contiguous
            and leading_rows_of(reference, queries)):
        U = queries  # float32 queries that begin with the reference rows themselves: already the stack
    else:
        U = np.empty((n + extra.shape[0], reference.shape[1]), dtype=np.float32)  # cast in place: no float64 stack
        U[:n], U[n:] = reference, extra
    # 8 trees and 20 candidates instead of the library's defaults (about 5 + n^0.5 / 20 trees, up to 60
    # candidates): the same recall where measured (1.000 at k = 20 and 44 on 1e5 rows of a 4-d graph manifold
    # in R^256; 1.000 at k = 40 on 3e4 rows of 4- and 10-spheres in R^50) with a third of the builder's memory
    # (179 MB instead of 550 MB over the data at 1e5 x 256, width 85) and less time; recall is still
    # measured where asked (``recall_queries``) and a query left short is searched exactly
    graph = NNDescent(U, n_neighbors=max(width, 10), random_state=random_state, n_jobs=1, low_memory=True,
                      n_trees=_GRAPH_TREES, max_candidates=_GRAPH_CANDIDATES).neighbor_graph[0]
    del U
    # each query's first k reference rows, a block of queries at a time (whole-graph int64 copies were 0.6 GB
    # of a 2.5e5-row campaign cell's memory)
    idx = np.empty((m, k), dtype=np.int64)
    short = []
    for a in range(0, m, _GRAPH_BLOCK):
        q = np.arange(a, min(a + _GRAPH_BLOCK, m))
        cand = graph[np.where(q < self_rows, q, n + q - self_rows)].astype(np.int64)
        if self_rows:
            # a reference row that is its own query lists itself first, as an exact search does
            is_self = q < self_rows
            cand[is_self[:, None] & (cand == q[:, None])] = -1
            cand = np.concatenate([np.where(is_self, q, -1)[:, None], cand], axis=1)
        keep = (cand >= 0) & (cand < n)
        order = np.argsort(~keep, axis=1, kind="stable")  # reference rows first, in the graph's distance order
        idx[q] = np.take_along_axis(cand, order, axis=1)[:, :k]
        short.append(q[keep.sum(axis=1) < k])
    del graph
    short = np.concatenate(short)
    if short.size:
        idx[short] = _brute_indices(reference, queries[short], k)
    out = QueryNeighbors(idx, "approximate", float("nan"), 0)
    if recall_queries:
        q = min(int(recall_queries), queries.shape[0])
        pick = np.sort(np.random.default_rng(random_state).choice(queries.shape[0], q, replace=False))
        exact = _brute_indices(reference, queries[pick], k)
        d_true = np.linalg.norm(reference[exact[:, -1]] - queries[pick], axis=1)
        d_found = np.linalg.norm(reference[idx[pick]] - queries[pick][:, None, :], axis=2)
        # a listed row at or inside the exact k-th distance counts as found (ties are not misses)
        out.recall = float(np.minimum((d_found <= d_true[:, None] * (1 + 1e-6) + 1e-12).sum(axis=1), k).sum() / (q * k))
        out.recall_queries = q
    return out


def _brute_indices(reference, queries, k):
    from sklearn.neighbors import NearestNeighbors

    return NearestNeighbors(n_neighbors=k, algorithm="brute").fit(reference).kneighbors(queries, return_distance=False)
