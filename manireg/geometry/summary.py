"""The whole geometry read-out of a data set in one call: dimension, charts, reach, curvature, resolution.

:func:`describe_geometry` is what the ``manireg geometry`` command, the report and the geometry panel
call; it only chains the estimators of this subpackage (one neighbour query serves most of them, through
the cache of :mod:`manireg.geometry.neighbors`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import check_points, check_target

__all__ = ["GeometrySummary", "describe_geometry", "GEOMETRY_STEPS", "working_dimension", "chart_dimension",
           "dimension_range"]

#: The steps of :func:`describe_geometry`, in order (a progress callback receives these names).
GEOMETRY_STEPS = ("dimension", "charts", "chart counts", "curvature", "resolution", "2-D view")


@dataclass
class GeometrySummary(ResultMixin):
    """Everything :func:`describe_geometry` found; each part is the estimator's own result object.

    Attributes
    ----------
    dimension : DimensionReport (per-estimator values, intervals, consensus, profile).
    atlas : AtlasSummary (chart radius and count, flatness, spectra).
    reach : ReachEstimate or None (None when a radius was given and no reach was estimated).
    chart_counts : ChartCounts (N(r) and its slope).
    curvature : CurvatureReport (largest principal curvature at the chart centres).
    resolution : ResolutionCheck (sample spacing against chart radius and reach, in words).
    embedding : Embedding2D or None (for viewing only).
    assignments : chart index of every row (left out of ``to_dict``).
    target : the target values, if given, for colouring the 2-D view (left out of ``to_dict``).
    dimension_used : the d used for charts, reach and curvature, and ``dimension_source`` saying why.
    """

    n_samples: int
    n_features: int
    dimension: object
    atlas: object
    reach: object
    chart_counts: object
    curvature: object
    resolution: object
    embedding: object
    dimension_used: int
    dimension_source: str
    assignments: np.ndarray = field(default=None, repr=False)
    target: np.ndarray | None = field(default=None, repr=False)
    _skip_in_dict = ("assignments", "target")

    def to_frame(self):
        """Key figures, one row each (quantity, value)."""
        import pandas as pd

        rows = [
            ("samples", self.n_samples),
            ("ambient dimension D", self.n_features),
            ("intrinsic dimension (consensus)", self.dimension.consensus),
            ("consensus rule", self.dimension.consensus_rule),
            ("d used for charts", f"{self.dimension_used} ({self.dimension_source})"),
            ("reach estimate", None if self.reach is None else self.reach.reach),
            ("chart radius", self.atlas.radius),
            ("chart radius rule", self.atlas.radius_rule),
            ("charts", self.atlas.n_charts),
            ("flatness (median / max)", f"{self.atlas.flatness_median:.3g} / {self.atlas.flatness_max:.3g}"),
            ("N(r) slope", self.chart_counts.slope),
            ("largest curvature, median (q95)", f"{self.curvature.median:.3g} ({self.curvature.quantiles.get('q95', float('nan')):.3g})"),
            ("nearest-neighbour spacing", self.resolution.spacing),
            ("resolution", self.resolution.verdict),
        ]
        return pd.DataFrame(rows, columns=["quantity", "value"]).astype({"value": object})

    def __str__(self) -> str:
        width = max(len(q) for q, _ in self.to_frame().itertuples(index=False))
        lines = [str(self.dimension), ""]
        for q, v in self.to_frame().itertuples(index=False):
            v = f"{v:.4g}" if isinstance(v, (float, np.floating)) else str(v)
            lines.append(f"{q:<{width}}  {v}")
        return "\n".join(lines)


def working_dimension(consensus) -> float:
    """The dimension a campaign sizes its networks and predictions with: the consensus rounded to two
    decimals and at least 1 (the one place this rounding is done)."""
    return max(1.0, round(float(consensus), 2))


def dimension_range(report) -> tuple:
    """``(low, high)`` that the intrinsic dimension is read in, for the theory comparison.

    The consensus interval when the report has one (jackknife over blocks of neighbourhoods, widened to the
    value calibrated on the second reference family; see
    :func:`~manireg.geometry.dimension.estimate_dimension`); else, from the lowest to the highest of the
    estimators' values and interval ends."""
    lo, hi = getattr(report, "consensus_lower", np.nan), getattr(report, "consensus_upper", np.nan)
    if lo is not None and hi is not None and np.isfinite(lo) and np.isfinite(hi):
        return (float(min(lo, report.consensus)), float(max(hi, report.consensus)))
    vals = []
    for e in report.estimates:
        for v in (e.dimension, e.lower, e.upper):
            if v is not None and np.isfinite(v):
                vals.append(float(v))
    if not vals:
        return (float(report.consensus), float(report.consensus))
    return (min(vals), max(vals))


def chart_dimension(consensus) -> int:
    """The integer dimension of charts, reach and curvature: the rounded consensus, at least 1."""
    return max(1, int(round(float(consensus))))


def describe_geometry(
    X,
    y=None,
    *,
    dimension: int | None = None,
    radius: float | None = None,
    embed: bool | str = True,
    max_embed_points: int = 5000,
    n_boot: int = 200,
    seed: int = 0,
    callback=None,
) -> GeometrySummary:
    """Run the geometry read-out on ``X``.

    Parameters
    ----------
    X : (n, D) array
    y : (n,) array, optional
        Target values; kept for colouring the 2-D view.
    dimension : int, optional
        Intrinsic dimension for the charts, reach and curvature. Default: the rounded consensus of
        :func:`~manireg.geometry.dimension.estimate_dimension` (at least 1).
    radius : float, optional
        Chart radius; default from the reach estimate (see :class:`~manireg.geometry.charts.ChartAtlas`).
    embed : bool or {"spectral", "umap"}
        Compute the 2-D view: True or ``"spectral"`` for the default Laplacian eigenmap, ``"umap"`` for
        UMAP (slower than the rest of the read-out; see :func:`~manireg.geometry.embedding.embed_2d`),
        False for none.
    max_embed_points : int
        The 2-D view uses a seeded subsample of at most this many rows (it is for viewing only).
    n_boot : int
        Bootstrap resamples of the dimension intervals.
    seed : int
        Seed of every random step.
    callback : callable(str), optional
        Called with each step name of :data:`GEOMETRY_STEPS` before it starts (progress bars).

    Notes
    -----
    Runs with single-threaded BLAS (see :mod:`manireg._threads`): the read-out is dominated by small
    per-neighbourhood matrices.
    """
    from .._threads import single_threaded_blas

    with single_threaded_blas():
        return _describe(X, y, dimension=dimension, radius=radius, embed=embed, max_embed_points=max_embed_points,
                         n_boot=n_boot, seed=seed, callback=callback)


def _describe(X, y, *, dimension, radius, embed, max_embed_points, n_boot, seed, callback):
    from .charts import ChartAtlas, chart_counts
    from .curvature import estimate_curvature
    from .dimension import estimate_dimension
    from .embedding import embed_2d
    from .resolution import resolution_check

    X = check_points(X, owner="describe_geometry", min_samples=3)
    yv = None if y is None else check_target(y, X.shape[0], owner="describe_geometry")
    step = callback or (lambda name: None)

    step("dimension")
    report = estimate_dimension(X, n_boot=n_boot, seed=seed)
    if dimension is None:
        d = chart_dimension(report.consensus)
        source = f"rounded consensus {report.consensus:.2f}"
    else:
        d = int(dimension)
        source = "given"
    if d >= X.shape[1]:
        d = X.shape[1] - 1 if X.shape[1] > 1 else 1
        source += f", capped at D - 1 = {d}"

    # the charts' balls must hold more than d points for their PCA; a large estimate raises the floor
    # instead of stopping the read-out
    min_points = max(10, d + 1)
    if min_points > 10:
        source += f"; charts hold at least {min_points} points (d + 1)"

    step("charts")
    atlas = ChartAtlas(radius=radius, dimension=d, min_points=min_points, random_state=seed).fit(X)
    summary = atlas.summary()

    step("chart counts")
    counts = chart_counts(X, random_state=seed)

    step("curvature")
    curv = estimate_curvature(X, d, landmarks=atlas.landmark_indices_[:500], random_state=seed)

    step("resolution")
    reach = atlas.reach_
    if reach is not None and np.isfinite(reach.reach) and reach.reach > 0:
        res = resolution_check(X, d, reach=reach.reach, chart_radius=atlas.radius_, random_state=seed)
    else:
        res = resolution_check(X, d, chart_radius=atlas.radius_, random_state=seed)

    emb = None
    if embed:
        step("2-D view")
        rows = np.arange(X.shape[0])
        if X.shape[0] > max_embed_points:
            rows = np.sort(np.random.default_rng(seed).choice(X.shape[0], max_embed_points, replace=False))
        emb = embed_2d(X[rows], random_state=seed, method="spectral" if embed is True else embed)
        emb.rows = rows  # which rows of X the view shows

    return GeometrySummary(
        n_samples=X.shape[0], n_features=X.shape[1], dimension=report, atlas=summary, reach=reach,
        chart_counts=counts, curvature=curv, resolution=res, embedding=emb, dimension_used=d,
        dimension_source=source, assignments=atlas.assignments_, target=yv,
    )
