"""GeometryPanel: intrinsic dimension, charts, reach and a 2-D view of a point cloud.

Controls -> core call -> result -> figure function:

* dimension controls -> :func:`manireg.geometry.dimension.estimate_dimension` -> ``DimensionReport``
  -> :func:`manireg.plots.dimension.plot_dimension_profile`;
* chart controls -> :class:`manireg.geometry.charts.ChartAtlas`, :func:`~manireg.geometry.reach.estimate_reach`,
  :func:`~manireg.geometry.charts.chart_counts` -> :func:`manireg.plots.charts.plot_spectra`,
  :func:`~manireg.plots.charts.plot_chart_counts`, :func:`~manireg.plots.charts.plot_reach`;
* the "2-D view" button -> :func:`manireg.geometry.embedding.embed_2d` (UMAP, the slow step, only on the
  button) -> :func:`manireg.plots.charts.plot_embedding` coloured by chart, local dimension or target.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field

import ipywidgets as widgets
import numpy as np
import traitlets

from .._results import ResultMixin
from ._base import Panel, fmt, fmt_interval, table_html
from ._look import caption_html, style_button, title_html

__all__ = ["GeometryPanel", "GeometryResults"]

_STEPS = 4  # steps of the geometry read-out: dimension, charts, reach, N(r)


def _quiet_call(func, *args, **kwargs):
    """``func(*args, **kwargs)`` with third-party prints (UMAP's and TensorFlow's import notes) swallowed."""
    import contextlib
    import io

    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        return func(*args, **kwargs)

_ESTIMATORS = (("maximum likelihood (Levina-Bickel)", "mle"), ("two nearest neighbours (TwoNN)", "twonn"),
               ("local PCA", "lpca"), ("correlation dimension", "corr"))
#: Plain names of the estimators, for tables and rule texts.
ESTIMATOR_NAMES = {"mle": "maximum likelihood", "twonn": "two nearest neighbours", "lpca": "local PCA",
                   "corr": "correlation dimension"}


def _plain(text) -> str:
    """A core text with estimator code names replaced by plain names."""
    import re

    return re.sub(r"\b(mle|twonn|lpca|corr)\b", lambda m: ESTIMATOR_NAMES[m.group(1)], str(text))


@dataclass
class GeometryResults(ResultMixin):
    """Current results of a :class:`GeometryPanel` (None where not computed yet)."""

    dimension: float | None
    chart_dimension: int | None
    report: object = field(default=None, repr=False)
    atlas: object = field(default=None, repr=False)
    reach: object = field(default=None, repr=False)
    chart_counts: object = field(default=None, repr=False)
    embedding: object = field(default=None, repr=False)
    settings: dict = field(default_factory=dict)
    _skip_in_dict = ("embedding",)


class GeometryPanel(Panel):
    """Dimension profile, local PCA spectra, N(r), reach and a 2-D view of ``X``.

    Parameters
    ----------
    X : array of shape (n, D)
    y : array of shape (n,), optional
        Target, one colouring of the 2-D view.
    true_dimension : float, optional
        Reference line on the profile (synthetic data).
    estimators : sequence of str
        Initial estimator choice (subset of "mle", "twonn", "lpca", "corr").
    scales : sequence of int
        Initial profile scales (neighbour counts).
    n_boot : int
        Initial bootstrap replicates of the intervals.
    seed : int
        Seed of every random step (bootstrap, landmarks, base points, UMAP).
    auto : bool, default=True
        Compute the dimension and charts at once (False: only when asked, e.g. by a test).

    Attributes
    ----------
    report : DimensionReport or None
    atlas : ChartAtlas or None (fitted)
    reach : ReachEstimate or None
    counts : ChartCounts or None
    embedding : Embedding2D or None
    """

    title = "Geometry"
    #: Consensus dimension of the last estimate (a trait, so other panels can follow it).
    consensus = traitlets.Float(None, allow_none=True)

    def __init__(self, X, y=None, *, true_dimension=None, estimators=("mle", "twonn", "corr"),
                 scales=(5, 10, 20, 40), n_boot=100, seed=0, auto=True):
        super().__init__()
        self.X = X
        self.y = y
        self.true_dimension = true_dimension
        self.report = self.atlas = self.reach = self.counts = self.embedding = None
        self._quiet = False
        n = int(np.shape(X)[0])
        kmax = max(4, min(200, n - 2))
        style = {"description_width": "190px"}
        wide = widgets.Layout(width="470px")
        narrow = widgets.Layout(width="300px")

        self.estimators = widgets.SelectMultiple(options=_ESTIMATORS, value=tuple(estimators), rows=4,
                                                 description="estimators", style=style, layout=wide)
        self.k_range = widgets.IntRangeSlider(value=(min(10, kmax - 1), min(20, kmax)), min=3, max=kmax,
                                              description="likelihood neighbours k", style=style, layout=wide,
                                              continuous_update=False)
        self.n_neighbors = widgets.IntSlider(value=min(20, kmax), min=3, max=kmax,
                                             description="local PCA neighbours k", style=style, layout=wide,
                                             continuous_update=False)
        self.scales = widgets.Text(value=", ".join(str(k) for k in scales), description="profile scales k",
                                   style=style, layout=wide, continuous_update=False)
        self.n_boot = widgets.IntSlider(value=n_boot, min=0, max=1000, step=50, description="bootstrap draws",
                                        style=style, layout=wide, continuous_update=False)
        self.seed = widgets.IntText(value=seed, description="seed", style=style, layout=narrow)
        self.profile_x = widgets.ToggleButtons(options=[("neighbour count k", "scale"),
                                                        ("neighbour radius", "radius")], value="scale",
                                               description="profile against", style={**style, "button_width": "auto"})
        self.dimension_html = widgets.HTML()
        self.profile_image = self._image()

        self.chart_dimension = widgets.BoundedIntText(value=1, min=1, max=max(1, int(np.shape(X)[1]) - 1),
                                                      description="chart dimension d", style=style, layout=narrow)
        self.radius = widgets.BoundedFloatText(value=0.5, min=1e-9, max=1e12, step=0.05, description="chart radius",
                                               disabled=True, style=style, layout=narrow)
        self.radius_rule = widgets.Checkbox(value=True, description="use the rule's radius", indent=False,
                                            layout=widgets.Layout(width="220px"))
        self.min_points = widgets.BoundedIntText(value=10, min=2, max=max(3, n - 1),
                                                 description="fewest points per chart", style=style, layout=narrow)
        self.reach_quantile = widgets.FloatSlider(value=0.05, min=0.01, max=0.5, step=0.01,
                                                  description="reach quantile", disabled=True, style=style,
                                                  layout=wide, continuous_update=False)
        self.reach_infimum = widgets.Checkbox(value=True, description="reach: smallest value over pairs",
                                              indent=False, layout=widgets.Layout(width="280px"))
        self.charts_html = widgets.HTML()
        self.spectra_image = self._image()
        self.counts_image = self._image()
        self.reach_image = self._image()

        self.embed_button = style_button(widgets.Button(description="Compute the 2-D view (UMAP)",
                                                        layout=widgets.Layout(width="260px")), "action")
        self.umap_neighbors = widgets.IntSlider(value=15, min=2, max=min(100, max(2, n - 1)),
                                                description="UMAP neighbours", style=style, layout=wide,
                                                continuous_update=False)
        colour = [("chart", "chart"), ("local dimension (maximum likelihood)", "dimension")] + (
            [("target", "target")] if y is not None else [])
        self.colour_by = widgets.Dropdown(options=colour, value=colour[-1][1], description="colour by", style=style,
                                          layout=wide)
        self.embedding_image = self._image()
        self.local_dimension = None

        dim_box = widgets.VBox([
            widgets.HBox([widgets.VBox([self.estimators, self.k_range, self.n_neighbors, self.scales, self.n_boot,
                                        self.seed, self.profile_x]),
                          self.profile_image]),
            self.dimension_html,
        ])
        chart_box = widgets.VBox([
            widgets.HBox([self.chart_dimension, self.min_points]),
            widgets.HBox([self.radius, self.radius_rule]),
            widgets.HBox([self.reach_quantile, self.reach_infimum]), self.charts_html,
            widgets.HBox([self.spectra_image, self.counts_image, self.reach_image]),
        ])
        view_box = widgets.VBox([widgets.HBox([self.embed_button, self.colour_by]), self.umap_neighbors,
                                 self.embedding_image])
        self.children = (
            widgets.HTML(title_html("Intrinsic dimension")), dim_box,
            widgets.HTML(title_html("Charts, N(r) and reach")), chart_box,
            widgets.HTML(title_html("2-D view")),
            widgets.HTML(caption_html("for viewing only; no reported number uses it")), view_box,
            self.status, self.out,
        )

        for w in (self.estimators, self.k_range, self.n_neighbors, self.scales, self.n_boot, self.seed):
            w.observe(self.update_dimension, names="value")
        self.profile_x.observe(self._redraw_profile, names="value")
        self.radius_rule.observe(self._on_optional, names="value")
        self.reach_infimum.observe(self._on_optional, names="value")
        for w in (self.chart_dimension, self.radius, self.min_points, self.reach_quantile):
            w.observe(self._on_chart_control, names="value")
        self.embed_button.on_click(self.update_embedding)
        self.colour_by.observe(self._redraw_embedding, names="value")
        if auto:
            self.update_dimension()

    # ------------------------------------------------------------------ settings
    def dimension_settings(self) -> dict:
        """Keyword arguments of the dimension call, from the controls."""
        scales = [int(tok) for tok in self.scales.value.replace(";", ",").split(",") if tok.strip()]
        return {"estimators": tuple(self.estimators.value), "k_min": int(self.k_range.value[0]),
                "k_max": int(self.k_range.value[1]), "n_neighbors": int(self.n_neighbors.value),
                "scales": scales or None, "n_boot": int(self.n_boot.value), "seed": int(self.seed.value)}

    def chart_settings(self) -> dict:
        """Keyword arguments of the chart, reach and N(r) calls, from the controls (None: the rule's value)."""
        return {"dimension": int(self.chart_dimension.value),
                "radius": None if self.radius_rule.value else float(self.radius.value),
                "min_points": int(self.min_points.value),
                "quantile": None if self.reach_infimum.value else float(self.reach_quantile.value),
                "seed": int(self.seed.value)}

    def _on_chart_control(self, change=None):
        if not self._quiet:
            self.update_charts()

    def _on_optional(self, change=None):
        """A "use the rule" checkbox changed: enable or disable its number and recompute the charts."""
        self.radius.disabled = bool(self.radius_rule.value)
        self.reach_quantile.disabled = bool(self.reach_infimum.value)
        self.update_charts()

    # ------------------------------------------------------------------ updates
    def update_dimension(self, change=None):
        """Estimate the dimension with the current settings, redraw the profile, then the charts."""
        from manireg.geometry.dimension import estimate_dimension

        try:
            kwargs = self.dimension_settings()
        except ValueError as exc:
            self._set_error("reading the scales", exc)
            return
        self._set_busy(f"geometry read-out, step 1 of {_STEPS}: intrinsic dimension of {len(self.X):,} points "
                       f"({len(kwargs['estimators'])} estimators, {kwargs['n_boot']} bootstrap draws)")
        report = self._call("the dimension estimate", estimate_dimension, self.X, **kwargs)
        if report is None:
            return
        self.report = report
        self.local_dimension = None
        self.consensus = float(report.consensus)
        self.dimension_html.value = self._dimension_table(report)
        self._redraw_profile()
        self._set_status(f"dimension: consensus {fmt(report.consensus, 2)} ({_plain(report.consensus_rule)})")
        d = int(max(1, min(self.chart_dimension.max, round(float(report.consensus)))))
        if d != self.chart_dimension.value:
            self.chart_dimension.value = d  # observer recomputes the charts
        else:
            self.update_charts()

    @staticmethod
    def _dimension_table(report) -> str:
        rows = [(ESTIMATOR_NAMES.get(e.estimator, e.estimator), fmt(e.dimension, 2),
                 fmt_interval((e.lower, e.upper), 2), html.escape(_plain(e.interval_kind)))
                for e in report.estimates]
        rows.append(("<b>consensus</b>", f"<b>{fmt(report.consensus, 2)}</b>", "",
                     html.escape(_plain(report.consensus_rule))))
        rows.append(("plateau", f"k = {report.plateau[0]} to {report.plateau[1]}", "", ""))
        return table_html(rows, header=("estimator", "dimension d", "interval", "interval from"))

    def _redraw_profile(self, change=None):
        if self.report is None:
            return
        from manireg.plots.dimension import plot_dimension_profile

        self._call("profile plot", self._draw, self.profile_image,
                   lambda ax: plot_dimension_profile(self.report, ax=ax, true_dimension=self.true_dimension,
                                                     x=self.profile_x.value), (6.0, 4.0))

    def update_charts(self, change=None):
        """Charts at the chosen d and radius, the reach estimate and N(r); redraw the three figures."""
        from manireg.geometry.charts import ChartAtlas, chart_counts
        from manireg.geometry.reach import estimate_reach

        p = self.chart_settings()
        self._set_busy(f"geometry read-out, step 2 of {_STEPS}: charts of dimension {p['dimension']}")
        atlas = self._call("the charts", lambda: ChartAtlas(radius=p["radius"], dimension=p["dimension"],
                                                        min_points=p["min_points"],
                                                        random_state=p["seed"]).fit(self.X))
        if atlas is None:
            return
        self._set_busy(f"geometry read-out, step 3 of {_STEPS}: reach")
        reach = self._call("the reach estimate", estimate_reach, self.X, p["dimension"], quantile=p["quantile"],
                           random_state=p["seed"])
        if reach is None:
            return
        self._set_busy(f"geometry read-out, step 4 of {_STEPS}: chart counts N(r)")
        counts = self._call("the chart counts", chart_counts, self.X, random_state=p["seed"])
        if counts is None:
            return
        self.atlas, self.reach, self.counts = atlas, reach, counts
        summary = atlas.summary()
        if p["radius"] is None and np.isfinite(summary.radius):
            self._quiet = True  # the number box shows the rule's radius, the start when the rule is switched off
            try:
                self.radius.value = float(f"{summary.radius:.4g}")
            finally:
                self._quiet = False
        self.charts_html.value = table_html([
            ("charts", str(summary.n_charts)),
            ("chart radius", f"{fmt(summary.radius)} ({summary.radius_rule})"),
            ("reach", f"{fmt(reach.reach)} (pair distance {fmt(reach.pair_distance)})"),
            ("recommended radius", fmt(reach.recommended_radius)),
            ("points per chart", f"{summary.points_per_chart['min']} / {fmt(summary.points_per_chart['median'], 1)}"
                                 f" / {summary.points_per_chart['max']} (fewest / median / most)"),
            ("tangent share", fmt(summary.tangent_share)),
            ("N(r) slope", f"{fmt(counts.slope, 2)}, a dimension of {fmt(counts.dimension_estimate, 2)} "
                           "(diagnostic, no interval)"),
        ])
        from manireg.plots.charts import plot_chart_counts, plot_reach, plot_spectra

        self._call("spectra plot", self._draw, self.spectra_image, lambda ax: plot_spectra(summary, ax=ax), (4.2, 3.2))
        self._call("N(r) plot", self._draw, self.counts_image, lambda ax: plot_chart_counts(counts, ax=ax), (4.2, 3.2))
        self._call("reach plot", self._draw, self.reach_image, lambda ax: plot_reach(reach, ax=ax), (4.2, 3.2))
        self._set_status(f"charts: {summary.n_charts} at radius {fmt(summary.radius)}; reach {fmt(reach.reach)}")
        if self.embedding is not None:
            self._redraw_embedding()

    def update_embedding(self, button=None):
        """The slow step: seeded UMAP view (on the button only; the command line's default view is the lighter
        Laplacian eigenmap, the panel's button asks for UMAP by name)."""
        from manireg.geometry.embedding import embed_2d

        self.embed_button.disabled = True
        self._set_busy(f"2-D view: UMAP on {len(self.X):,} points, one step with no progress of its own (the first "
                       "view of a session also compiles UMAP's code, which can take half a minute)")
        try:
            emb = self._call("the 2-D view", _quiet_call, embed_2d, self.X, random_state=int(self.seed.value),
                             n_neighbors=int(self.umap_neighbors.value), method="umap")
        finally:
            self.embed_button.disabled = False
        if emb is None:
            return
        self.embedding = emb
        self._redraw_embedding()
        method = {"umap": "UMAP", "pca": "first two principal components"}.get(emb.method, emb.method)
        self._set_status(f"2-D view: {method}, {emb.n_neighbors} neighbours")

    def _colour_values(self, kind):
        if kind == "target":
            return self.y
        if kind == "chart":
            return None if self.atlas is None else self.atlas.assignments_
        if self.local_dimension is None:
            from manireg.geometry.dimension import MLEDimension

            k_min, k_max = self.k_range.value
            est = self._call("local dimension", lambda: MLEDimension(k_min=k_min, k_max=k_max, n_boot=0,
                                                                     random_state=int(self.seed.value)).fit(self.X))
            self.local_dimension = None if est is None else est.local_dimension_
        return self.local_dimension

    def _redraw_embedding(self, change=None):
        if self.embedding is None:
            return
        from manireg.plots.charts import plot_embedding

        kind = self.colour_by.value
        values = self._colour_values(kind)
        self._call("2-D view plot", self._draw, self.embedding_image,
                   lambda ax: plot_embedding(self.embedding, values, kind=kind, ax=ax), (5.4, 4.2))

    # ------------------------------------------------------------------ results
    @property
    def dimension(self):
        """The consensus dimension of the last estimate (None before one)."""
        return self.consensus

    def results(self) -> GeometryResults:
        return GeometryResults(
            dimension=self.dimension,
            chart_dimension=None if self.atlas is None else int(self.atlas.dimension_),
            report=self.report, atlas=None if self.atlas is None else self.atlas.summary(), reach=self.reach,
            chart_counts=self.counts, embedding=self.embedding,
            settings={"dimension": self.dimension_settings(), "charts": self.chart_settings()},
        )
