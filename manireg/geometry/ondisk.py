"""The geometry read-out of a table on disk, in memory that does not grow with the file.

:func:`describe_geometry_on_disk` reads a :class:`manireg.data.LazyTable` and

* estimates the intrinsic dimension from the exact neighbours of a seeded subsample of query rows, found in
  one pass over the file (:func:`manireg.geometry.neighbors.stream_kneighbors`): the maximum-likelihood
  estimator with the MacKay-Ghahramani combination (interval: bootstrap over the queries) and TwoNN
  (interval: its Gamma law). The neighbours are those in the whole file, so the scale is the file's;
  only the number of points the estimate averages over is subsampled;
* fits the charts and the reach on a seeded random subsample of landmark rows held in memory
  (:class:`manireg.geometry.charts.ChartAtlas`). Those are estimates for the subsample: its spacing is about
  ``(n / n_landmarks)^(1/d)`` times the file's, which the result states.

Every subsampling is part of the result (``n_queries``, ``n_landmarks``, ``subsampling``).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import check_int

__all__ = ["DiskGeometry", "describe_geometry_on_disk"]


@dataclass
class DiskGeometry(ResultMixin):
    """What :func:`describe_geometry_on_disk` found, with the subsampling stated.

    Attributes
    ----------
    n_samples, n_features : size of the file's table.
    source : the file.
    estimates : {"mle": {"dimension", "interval"}, "twonn": {...}} from the query subsample.
    consensus : mean of the estimates, or the MLE when the two disagree; ``consensus_rule`` says which.
    dimension_used : the integer d for charts and reach, ``dimension_source`` why.
    neighbor_method : how the neighbours were found ("streamed exact"), ``neighbor_recall`` their recall.
    n_queries, k : queries of the neighbour pass and neighbours per query.
    n_duplicates : queries with an exact duplicate elsewhere in the file (left out of their neighbours).
    n_landmarks : rows of the subsample the charts and reach were fitted on.
    atlas, reach : the chart summary and reach estimate on that subsample (None with ``charts=False``).
    subsampling : the subsampling in words.
    seconds : time of each step.
    """

    n_samples: int
    n_features: int
    source: str
    estimates: dict
    consensus: float
    consensus_rule: str
    dimension_used: int
    dimension_source: str
    neighbor_method: str
    neighbor_recall: float
    n_queries: int
    k: int
    n_duplicates: int
    n_landmarks: int
    atlas: object
    reach: object
    subsampling: str
    seconds: dict = field(default_factory=dict)

    def to_frame(self):
        import pandas as pd

        rows = [("samples", self.n_samples), ("ambient dimension D", self.n_features)]
        for name, e in self.estimates.items():
            lo, hi = e["interval"]
            rows.append((f"dimension ({name})", f"{e['dimension']:.3g} [{lo:.3g}, {hi:.3g}]"))
        rows += [("intrinsic dimension (consensus)", self.consensus), ("consensus rule", self.consensus_rule),
                 ("d used for charts", f"{self.dimension_used} ({self.dimension_source})"),
                 ("neighbours", f"{self.neighbor_method}, recall {self.neighbor_recall:.3g}, {self.n_queries} queries, k = {self.k}")]
        if self.atlas is not None:
            rows += [("chart radius (landmark subsample)", self.atlas.radius), ("charts (landmark subsample)", self.atlas.n_charts),
                     ("reach estimate (landmark subsample)", None if self.reach is None else self.reach.reach)]
        rows.append(("subsampling", self.subsampling))
        return pd.DataFrame(rows, columns=["quantity", "value"]).astype({"value": object})

    def __str__(self) -> str:
        frame = self.to_frame()
        width = max(len(q) for q in frame["quantity"])
        out = []
        for q, v in frame.itertuples(index=False):
            v = f"{v:.4g}" if isinstance(v, (float, np.floating)) else str(v)
            out.append(f"{q:<{width}}  {v}")
        return "\n".join(out)


def _consensus(estimates, k):
    """The mean of MLE and TwoNN when their intervals meet; when they are apart, the MLE alone, named as such.

    TwoNN reads the ratio of the first two neighbour distances, the smallest scale of the data, which ambient
    noise inflates (and rounded or repeated values deflate); the MLE here averages neighbours 10..k. On the
    files this read-out is for (1e5 rows and more), neighbour k = 20 is still far inside the curvature
    scale, so when the two disagree the larger scale is the one to trust (a 2-d sheet in R^40 with 1 %
    noise, 60,000 rows: TwoNN 4.7, MLE 2.5; their mean, 3.6, was the consensus before)."""
    (mlo, mhi), (tlo, thi) = estimates["mle"]["interval"], estimates["twonn"]["interval"]
    if thi < mlo or mhi < tlo:
        return estimates["mle"]["dimension"], (
            f"MLE (neighbours 10..{k}); MLE and TwoNN disagree (intervals apart): TwoNN reads the nearest-neighbour "
            "scale, which noise inflates and repeated values deflate, so the larger scale is taken. The profile over "
            "scales of manireg geometry on a subsample in memory shows where each scale sits")
    return float(np.mean([e["dimension"] for e in estimates.values()])), "mean of MLE and TwoNN"


def describe_geometry_on_disk(table, *, n_queries: int = 2000, k: int = 20, n_landmarks: int = 4000,
                              dimension: int | None = None, radius: float | None = None, charts: bool = True,
                              n_boot: int = 200, level: float = 0.95, chunk_rows: int | None = None, seed: int = 0,
                              callback=None) -> DiskGeometry:
    """Dimension, charts and reach of a table on disk (see the module docstring).

    Parameters
    ----------
    table : LazyTable (or a path, opened with :func:`manireg.data.open_table`)
    n_queries : int
        Query rows of the neighbour pass (the dimension estimates average over them).
    k : int
        Neighbours per query (the MLE uses k from 10 to ``k``; at least 10).
    n_landmarks : int
        Rows of the subsample the charts and reach are fitted on.
    dimension : int, optional
        d for charts and reach; default the rounded consensus.
    radius : float, optional
        Chart radius (default: the rule's, from the reach estimate).
    charts : bool
        Fit charts and reach (False: dimension only).
    n_boot, level : bootstrap resamples and level of the MLE interval.
    chunk_rows : int, optional
        Block size of the pass over the file.
    seed : int
    callback : callable(str), optional
        Called with "dimension" and "charts" before each step.

    Returns
    -------
    DiskGeometry

    References
    ----------
    .. [1] E. Levina and P. J. Bickel, NIPS 17 (2004); D. J. C. MacKay and Z. Ghahramani (2005).
    .. [2] E. Facco, M. d'Errico, A. Rodriguez and A. Laio, Sci. Rep. 7, 12140 (2017).
    """
    from .._threads import single_threaded_blas
    from .dimension import mle_dimension, twonn_dimension
    from .neighbors import stream_kneighbors
    from .summary import chart_dimension

    owner = "describe_geometry_on_disk"
    if isinstance(table, (str, bytes)) or hasattr(table, "__fspath__"):
        from ..data.lazy import open_table

        table = open_table(table)
    n, D = table.shape
    k = check_int(k, "k", owner=owner, low=10)
    n_queries = min(check_int(n_queries, "n_queries", owner=owner, low=20), n)
    n_landmarks = min(check_int(n_landmarks, "n_landmarks", owner=owner, low=20), n)
    step = callback or (lambda name: None)
    rng = np.random.default_rng(seed)
    seconds = {}

    step("dimension")
    t0 = time.perf_counter()
    table.scan() if hasattr(table, "scan") else None  # NaN/inf check, chunk by chunk, before any estimate
    seconds["check"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    q = np.sort(rng.choice(n, n_queries, replace=False))
    graph = stream_kneighbors(table, q, k, chunk_rows=chunk_rows, owner=owner)
    seconds["neighbours"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    mle, _, _ = mle_dimension(graph, 10, k)
    boots = np.empty(n_boot)
    for b in range(n_boot):
        pick = rng.integers(0, n_queries, n_queries)
        boots[b] = mle_dimension(graph.__class__(graph.points[:1], graph.distances[pick], graph.indices[pick],
                                                 graph.inverse[:1], 0, graph.method), 10, k)[0]
    a = (1 - level) / 2
    tw, tw_int, _ = twonn_dimension(graph, level=level)
    estimates = {"mle": {"dimension": float(mle), "interval": (float(np.quantile(boots, a)), float(np.quantile(boots, 1 - a)))},
                 "twonn": {"dimension": float(tw), "interval": (float(tw_int[0]), float(tw_int[1]))}}
    consensus, rule = _consensus(estimates, k)
    seconds["estimates"] = time.perf_counter() - t0
    if dimension is None:
        d, source = chart_dimension(consensus), f"rounded consensus {consensus:.2f}"
    else:
        d, source = int(dimension), "given"
    if d >= D:
        d = max(1, D - 1)
        source += f", capped at D - 1 = {d}"

    atlas = reach = None
    if charts:
        step("charts")
        t0 = time.perf_counter()
        from .charts import ChartAtlas

        rows = np.sort(rng.choice(n, n_landmarks, replace=False))
        sub = table.rows(rows)
        with single_threaded_blas():
            fitted = ChartAtlas(radius=radius, dimension=d, random_state=seed).fit(sub)
        atlas, reach = fitted.summary(), fitted.reach_
        seconds["charts"] = time.perf_counter() - t0
    coarser = (n / n_landmarks) ** (1.0 / max(d, 1))
    subsampling = (f"dimension from the exact neighbours (in all {n:,} rows) of {n_queries:,} random query rows; "
                   + (f"charts and reach on a random subsample of {n_landmarks:,} rows, whose spacing is about "
                      f"{coarser:.3g} times the file's" if charts else "no charts or reach"))
    return DiskGeometry(n_samples=n, n_features=D, source=str(getattr(table, "path", "array")), estimates=estimates,
                        consensus=consensus, consensus_rule=rule, dimension_used=d,
                        dimension_source=source, neighbor_method=graph.method, neighbor_recall=graph.recall,
                        n_queries=n_queries, k=k, n_duplicates=graph.n_duplicates, n_landmarks=n_landmarks if charts else 0,
                        atlas=atlas, reach=reach, subsampling=subsampling, seconds=seconds)
