"""CurvePanel: run, pause and resume a learning-curve campaign; fit its exponent; plan samples.

The sweep runs in a background thread through :meth:`manireg.curves.Campaign.run` (with its ``stop`` flag and
``on_unit`` callback), so the kernel stays free. Pause sets the stop flag, which is read between units; the store keeps every finished
cell, so resume is "run again": finished cells are skipped. After each unit the rows are reloaded, the
progress bar moves (cells done / total) and the curves are refitted and redrawn.

Controls -> :func:`manireg.curves.fitting.fit_exponent` (fit range, floor model, metric) ->
:func:`manireg.plots.curves.plot_learning_curves` and :func:`~manireg.plots.curves.plot_local_slopes`;
target error -> :func:`manireg.curves.planning.plan_samples`.
"""

from __future__ import annotations

import html
import threading
from dataclasses import dataclass, field

import ipywidgets as widgets

from .._results import ResultMixin
from ._base import Panel, fmt, fmt_count, fmt_interval, table_html

__all__ = ["CurvePanel", "CurveResults"]

_FLOORS = (("none", "none"), ("fit", "fit"), ("estimate (noise variance)", "estimate"), ("known", "known"))
_VERDICT_COLOURS = {"measured": "#1b7f3b"}


@dataclass
class CurveResults(ResultMixin):
    """Current results of a :class:`CurvePanel`."""

    learner: str | None
    fit: object
    fits: dict
    plan: object
    fit_settings: dict
    cells_done: int
    cells_total: int
    rows: object = field(default=None, repr=False)
    _skip_in_dict = ("rows",)


class CurvePanel(Panel):
    """Learning curves of a campaign with a live fit, its verdict and the sample planner.

    Parameters
    ----------
    source : Campaign, CampaignResult or pandas.DataFrame
        A :class:`manireg.curves.campaign.Campaign` (can be run, paused and resumed here), a finished
        :class:`~manireg.curves.campaign.CampaignResult`, or campaign rows.
    d, s : float, optional
        Intrinsic dimension and smoothness for the predicted exponent and the implied d or s (default: the
        campaign's).
    input_dim : int, optional
        Ambient dimension D (default: the campaign's).
    target_error : float, optional
        Initial target of the planner.
    n_boot, seed : int
        Bootstrap draws and seed of the exponent interval.
    learner : str, optional
        Learner shown first (default: "net" when present).

    Attributes
    ----------
    campaign : Campaign or None
    rows : DataFrame of the rows so far
    fit : ExponentFit of the selected learner, or None
    fits : dict learner -> ExponentFit (every learner, same settings)
    plan : SamplePlan or None
    running : bool
    """

    title = "Learning curves"

    def __init__(self, source, *, d=None, s=None, input_dim=None, target_error=None, n_boot=500, seed=0,
                 learner=None, noise_variance=None):
        super().__init__()
        import pandas as pd

        from manireg.curves.campaign import Campaign, CampaignResult

        self.campaign = None
        self.fit = self.plan = None
        self.fits = {}
        self.running = False
        self._thread = None
        self._stop = threading.Event()
        self._lock = threading.RLock()
        self._quiet = False
        meta = {}
        if isinstance(source, Campaign):
            self.campaign = source
            data = source.data
            meta = {"d": data.dimension, "s": data.smoothness, "D": data.ambient_dim, "noise_variance": data.noise_variance}
            sizes = list(data.sizes)
            self.rows = source.result().rows
            self.cells_total = len(source.cells())
        elif isinstance(source, CampaignResult):
            meta = {"d": source.d, "s": source.s, "D": source.D, "noise_variance": source.noise_variance}
            self.rows = source.rows
            sizes = sorted(int(v) for v in self.rows["n"].unique())
            self.cells_total = len(self.rows)
        elif isinstance(source, pd.DataFrame):
            self.rows = source
            sizes = sorted(int(v) for v in self.rows["n"].unique())
            self.cells_total = len(self.rows)
        else:
            raise ValueError(
                f"CurvePanel: source must be a Campaign, a CampaignResult or a DataFrame of campaign rows; got "
                f"{type(source).__name__}."
            )
        if len(sizes) < 2:
            raise ValueError(f"CurvePanel: a learning curve needs at least 2 sizes; got {sizes}.")
        nv = noise_variance if noise_variance is not None else meta.get("noise_variance")
        style = {"description_width": "130px"}
        lay = widgets.Layout(width="280px")

        self.start_button = widgets.Button(description="Start / resume", button_style="success", icon="play",
                                           disabled=self.campaign is None)
        self.pause_button = widgets.Button(description="Pause", button_style="warning", icon="pause", disabled=True)
        self.progress = widgets.IntProgress(value=0, min=0, max=max(1, self.cells_total), description="cells",
                                            bar_style="info", layout=widgets.Layout(width="360px"))
        self.progress_label = widgets.Label()

        self.learner = widgets.Dropdown(options=[], description="learner", style=style, layout=lay)
        self.metric = widgets.Dropdown(options=["test_mse"] + (["test_mse_clean"] if self._has_clean() else []),
                                       value="test_mse", description="error", style=style, layout=lay)
        self.n_range = widgets.SelectionRangeSlider(options=[(str(v), v) for v in sizes], index=(0, len(sizes) - 1),
                                                    description="fit range n", style=style,
                                                    layout=widgets.Layout(width="480px"), continuous_update=False)
        self.floor = widgets.ToggleButtons(options=_FLOORS, value="none", description="floor", style=style)
        self.known_floor = widgets.FloatText(value=0.0, description="known floor", style=style, layout=lay)
        self.noise_variance = widgets.FloatText(value=float("nan") if nv is None else float(nv),
                                                description="noise variance", style=style, layout=lay)
        self.n_boot = widgets.BoundedIntText(value=int(n_boot), min=10, max=100000, description="bootstrap draws",
                                             style=style, layout=lay)
        self.seed = widgets.IntText(value=int(seed), description="seed", style=style, layout=lay)
        self.d = widgets.FloatText(value=float(d if d is not None else (meta.get("d") or float("nan"))),
                                   description="d (theory)", style=style, layout=lay)
        self.s = widgets.FloatText(value=float(s if s is not None else (meta.get("s") or float("nan"))),
                                   description="s (theory)", style=style, layout=lay)
        D = input_dim if input_dim is not None else meta.get("D")
        self.input_dim = widgets.IntText(value=int(D) if D else 0, description="D (0: unknown)", style=style,
                                         layout=lay)
        self.target_error = widgets.FloatText(value=float(target_error) if target_error else 0.0,
                                              description="target error", style=style, layout=lay)
        self.allow_unverified = widgets.Checkbox(value=False, description="plan from an unverified fit", indent=False)

        self.exponent_html = widgets.HTML()
        self.slopes_html = widgets.HTML()
        self.plan_html = widgets.HTML()
        self.curves_image = self._image()
        self.slopes_image = self._image()

        run_box = widgets.HBox([self.start_button, self.pause_button, self.progress, self.progress_label])
        fit_box = widgets.VBox([
            widgets.HBox([self.learner, self.metric]), self.n_range, self.floor,
            widgets.HBox([self.known_floor, self.noise_variance]),
            widgets.HBox([self.n_boot, self.seed]), widgets.HBox([self.d, self.s, self.input_dim]),
        ])
        self.children = (
            widgets.HTML("<b>Learning-curve campaign</b>"), run_box, fit_box,
            widgets.HBox([self.curves_image, widgets.VBox([self.exponent_html, self.slopes_html])]),
            self.slopes_image,
            widgets.HTML("<b>Sample planner</b>"), widgets.HBox([self.target_error, self.allow_unverified]),
            self.plan_html, self.status, self.out,
        )
        self.start_button.on_click(lambda b: self.start())
        self.pause_button.on_click(lambda b: self.pause())
        for w in (self.learner, self.metric, self.n_range, self.floor, self.known_floor, self.noise_variance,
                  self.n_boot, self.seed, self.d, self.s, self.input_dim):
            w.observe(self._on_fit_control, names="value")
        for w in (self.target_error, self.allow_unverified):
            w.observe(self._on_plan_control, names="value")
        self.refresh()

    # ------------------------------------------------------------------ helpers
    def _has_clean(self):
        return "test_mse_clean" in self.rows.columns and self.rows["test_mse_clean"].notna().any()

    def _learners(self):
        if len(self.rows) == 0:
            return []
        ok = self.rows[self.rows["status"] == "ok"] if "status" in self.rows else self.rows
        return list(dict.fromkeys(str(v) for v in ok["learner"]))

    def _on_fit_control(self, change):
        if not self._quiet:
            self.update_fit()

    def _on_plan_control(self, change):
        if not self._quiet:
            self.update_plan()

    @staticmethod
    def _number(v):
        """A control value as a float, or None when it is NaN or 0-meaning-unset."""
        return None if v is None or v != v else float(v)

    def fit_settings(self) -> dict:
        """Keyword arguments of ``fit_exponent`` from the controls (``learner`` and ``rows`` aside)."""
        floor = self.floor.value
        out = {"metric": self.metric.value, "n_range": tuple(self.n_range.value), "n_boot": int(self.n_boot.value),
               "seed": int(self.seed.value), "smoothness": self._number(self.s.value),
               "dimension": self._number(self.d.value),
               "ambient_dim": int(self.input_dim.value) if self.input_dim.value > 0 else None}
        if floor == "none":
            out["floor"] = None
        elif floor == "known":
            out["floor"] = float(self.known_floor.value)
        elif floor == "fit":
            out["floor"] = "fit"
        else:
            out["floor"] = "estimate"
            out["noise_variance"] = self._noise_variance()
        return out

    def _noise_variance(self):
        nv = self._number(self.noise_variance.value)
        if nv is None and self.campaign is not None:
            from manireg.curves.noise import noise_variance

            est = noise_variance(self.campaign.data.X, self.campaign.data.y)
            self._quiet = True
            try:
                self.noise_variance.value = float(est.value)
            finally:
                self._quiet = False
            nv = float(est.value)
        return nv

    # ------------------------------------------------------------------ running
    def start(self):
        """Run the missing cells in a background thread (returns at once)."""
        if self.campaign is None:
            self._set_error("start", ValueError("this panel shows stored rows; pass a Campaign to run cells."))
            return
        if self.running:
            return
        self._stop.clear()
        self.running = True
        self.start_button.disabled = True
        self.pause_button.disabled = False
        self._thread = threading.Thread(target=self._worker, name="manireg-curve-panel", daemon=True)
        self._thread.start()

    def pause(self):
        """Stop after the unit in flight; finished cells stay in the store (start again to resume)."""
        self._stop.set()
        self.pause_button.disabled = True

    def wait(self, timeout=None) -> bool:
        """Block until the background run ends (for scripts and tests); True when it has ended."""
        if self._thread is not None:
            self._thread.join(timeout)
            return not self._thread.is_alive()
        return True

    def _worker(self):
        campaign = self.campaign
        try:
            pending = len(campaign.cells()) - len(campaign.store.finished_keys(campaign=campaign.data.name))
            self._set_status(f"running about {max(pending, 0)} cells")
            campaign.run(progress=False, stop=self._stop, on_unit=lambda rows: self.refresh())
        except Exception as exc:  # noqa: BLE001 - shown in the panel
            self._set_error("campaign run", exc)
        finally:
            self.running = False
            self.start_button.disabled = False
            self.pause_button.disabled = True
            paused = self._stop.is_set()
            self.refresh()
            if paused:
                self.progress.bar_style = "warning"
                self.progress_label.value += " (paused)"

    # ------------------------------------------------------------------ updates
    def refresh(self):
        """Reload the rows (from the campaign's store), move the progress bar, refit and redraw."""
        with self._lock:
            if self.campaign is not None:
                result = self._call("loading rows", self.campaign.result)
                if result is None:
                    return
                self.rows = result.rows
            done = len(self.rows)
            self.progress.value = min(done, self.progress.max)
            self.progress_label.value = f"{done} / {self.cells_total} cells"
            self.progress.bar_style = "success" if done >= self.cells_total else "info"
            learners = self._learners()
            if list(self.learner.options) != learners:
                self._quiet = True
                try:
                    current = self.learner.value
                    self.learner.options = learners
                    if current in learners:
                        self.learner.value = current
                    elif learners:
                        self.learner.value = "net" if "net" in learners else learners[0]
                finally:
                    self._quiet = False
            if "test_mse_clean" not in self.metric.options and self._has_clean():
                self._quiet = True
                try:
                    self.metric.options = ["test_mse", "test_mse_clean"]
                    self.metric.value = "test_mse"
                finally:
                    self._quiet = False
            self.update_fit()

    def update_fit(self):
        """Fit every learner with the current settings; show the selected one and redraw."""
        from manireg.curves.fitting import fit_exponent

        with self._lock:
            learners = self._learners()
            if not learners:
                self.fit, self.fits = None, {}
                self.exponent_html.value = "<i>no finished cells yet</i>"
                return
            kwargs = self._call("fit settings", self.fit_settings)
            if kwargs is None:
                return
            fits, errors = {}, []
            for name in learners:
                f = self._call(f"fit of {name}", fit_exponent, self.rows, name, **kwargs)
                if f is None:
                    errors.append(self.error)
                else:
                    fits[name] = f
            self.fits = fits
            self.fit = fits.get(self.learner.value)
            self.exponent_html.value = self._exponent_text(self.fit)
            self.slopes_html.value = self._slopes_text(self.fit)
            from manireg.plots.curves import plot_learning_curves, plot_local_slopes

            rows = self.rows
            self._call("curve plot", self._draw, self.curves_image,
                       lambda ax: plot_learning_curves(rows, fits, metric=kwargs["metric"], ax=ax), (6.8, 4.6))
            if fits:
                self._call("local slopes plot", self._draw, self.slopes_image,
                           lambda ax: plot_local_slopes(list(fits.values()), ax=ax), (6.8, 3.2))
            if errors:
                self.status.value = '<span style="color:#b00020">' + "<br>".join(html.escape(e) for e in errors if e) + "</span>"
            elif self.fit is not None:
                self._set_status(f"{self.fit.learner}: exponent {fmt(self.fit.exponent)} "
                                 f"{fmt_interval(self.fit.interval)}, {self.fit.verdict}")
            self.update_plan()

    @staticmethod
    def _exponent_text(fit) -> str:
        if fit is None:
            return "<i>no fit</i>"
        colour = _VERDICT_COLOURS.get(fit.verdict, "#b35c00")
        pct = int(round(100 * fit.level))
        rows = [
            ("exponent", f"<b>{fmt(fit.exponent)}</b> {pct}% interval {fmt_interval(fit.interval)}"),
            ("verdict", f'<b style="color:{colour}">{html.escape(fit.verdict)}</b>'),
            ("why", html.escape(fit.verdict_reason)),
            ("model", f"{html.escape(fit.model)}; floor {fmt(fit.floor, 4)} ({html.escape(fit.floor_source)})"),
            ("sizes", f"n = {fmt_count(fit.n_range[0])}..{fmt_count(fit.n_range[1])}, {fit.n_sizes} sizes, "
                      f"{fit.n_repeats} repeats"),
            ("predicted 2s/(2s+d)", fmt_interval(fit.predicted_exponent)),
            ("ambient 2s/(2s+D)", fmt_interval(fit.ambient_exponent)),
            ("implied d (given s)", fmt_interval(fit.implied_dimension, 2)),
            ("implied s (given d)", fmt_interval(fit.implied_smoothness, 2)),
            ("optimisation-limited cells", str(len(fit.optimisation_limited))),
        ]
        return f"<b>{html.escape(fit.learner)}</b>" + table_html(rows)

    @staticmethod
    def _slopes_text(fit) -> str:
        if fit is None or not fit.local_slopes:
            return ""
        rows = [(f"{fmt_count(s['n_lo'])} -> {fmt_count(s['n_hi'])}", fmt(s["slope"])) for s in fit.local_slopes]
        return "<b>local slopes</b>" + table_html(rows, header=("n", "slope"))

    def update_plan(self):
        """Samples needed for the target error, from the selected learner's fit."""
        from manireg.curves.planning import plan_samples

        target = float(self.target_error.value)
        if self.fit is None or not target > 0:
            self.plan = None
            self.plan_html.value = "<i>set a target error above 0 to plan</i>" if self.fit is not None else ""
            return
        plan = self._call("plan", plan_samples, self.fit, target, allow_unverified=bool(self.allow_unverified.value),
                          _show=False,
                          dimension=self._number(self.d.value), smoothness=self._number(self.s.value),
                          input_dim=int(self.input_dim.value) if self.input_dim.value > 0 else None)
        self.plan = plan
        if plan is None:
            self.plan_html.value = f'<span style="color:#b00020">{html.escape(self.last_message or "")}</span>'
            return
        rows = [
            ("samples needed", f"<b>{fmt_count(plan.n_required)}</b> {int(round(100 * plan.level))}% interval "
                               f"{fmt_interval(plan.interval, count=True)}"),
            ("extrapolated", "yes" if plan.extrapolated else "no"),
            ("verdict of the fit", html.escape(plan.verdict)),
        ]
        if plan.architecture:
            a = plan.architecture
            rows.append(("network at that n", f"depth {a['depth']}, width {a['width']}, "
                                              f"{a['n_parameters']:,} parameters"))
        if plan.warning:
            rows.append(("warning", f'<span style="color:#b35c00">{html.escape(plan.warning)}</span>'))
        self.plan_html.value = table_html(rows)

    def results(self) -> CurveResults:
        settings = self._call("fit settings", self.fit_settings) or {}
        return CurveResults(learner=self.learner.value, fit=self.fit, fits=dict(self.fits), plan=self.plan,
                            fit_settings=settings, cells_done=len(self.rows), cells_total=self.cells_total,
                            rows=self.rows)
