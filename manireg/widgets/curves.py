"""CurvePanel: run, pause and resume a learning-curve campaign; fit its exponent; plan samples.

The sweep runs in a background thread through :meth:`manireg.curves.Campaign.run` (with its ``stop`` flag and
``on_unit`` callback), so the kernel stays free. Pause sets the stop flag, which is read between units; the
store keeps every finished cell, so resume is "run again": finished cells are skipped, and the status line says
how many were found and how many remain (:meth:`~manireg.curves.Campaign.progress`). After each unit the rows
are reloaded, the progress bar moves (cells finished of the total) and the curves are refitted and redrawn.

The floor offers the choices of :mod:`manireg.curves.floors` (none, fitted, the campaign's noise-variance
estimate, a value; default: fitted, as floors.DEFAULT_FLOOR) and goes through :func:`~manireg.curves.floors.choose_floor` with the
campaign's own noise estimate, so with its default controls the panel shows what ``CampaignResult.fit`` and the
command line give for the same rows.

Controls -> :func:`manireg.curves.fitting.fit_exponent` (fit range, floor, error column) ->
:func:`manireg.plots.curves.plot_learning_curves` and :func:`~manireg.plots.curves.plot_local_slopes`;
target error -> :func:`manireg.curves.planning.plan_samples`.
"""

from __future__ import annotations

import html
import threading
from dataclasses import dataclass, field

import ipywidgets as widgets

from .._results import ResultMixin
from ..curves.noise import NoiseLevel
from ._base import BackgroundRun, Panel, set_choices, fmt, fmt_count, fmt_interval, plain_number, table_html
from ._look import WARNING_PREFIX, caption_html, colour_span, style_button, style_progress, title_html

__all__ = ["CurvePanel", "CurveResults", "METRIC_LABELS", "MODEL_LABELS"]

#: Error columns on screen: (label, metric name).
METRIC_LABELS = (("test error (MSE)", "test_mse"), ("error against the noise-free target", "test_mse_clean"))
#: Fitted models in plain words.
MODEL_LABELS = {"loglog": "power law, no floor (straight line in log-log)",
                "excess": "power law above a given floor",
                "floor_fit": "power law plus a fitted floor"}
# stop reasons that reach the verdict text, in plain words
_STOP_WORDS = {"step_cap": "the step limit", "time_cap": "the time limit"}


def _plain_reason(text) -> str:
    for code, words in _STOP_WORDS.items():
        text = str(text).replace(code, words)
    return text


def _fmt_predicted(iv, digits=3) -> str:
    """A predicted value: one number, or a range when s or d is a range."""
    if iv is None:
        return "none"
    lo, hi = iv
    return fmt(lo, digits) if lo == hi else f"{fmt(lo, digits)} to {fmt(hi, digits)}"


@dataclass
class CurveResults(ResultMixin):
    """Current results of a :class:`CurvePanel`."""

    learner: str | None
    fit: object
    fits: dict
    plan: object
    fit_settings: dict
    floor: object
    noise_estimate: float | None
    cells_done: int
    cells_total: int
    rows: object = field(default=None, repr=False)
    _skip_in_dict = ("rows",)


class CurvePanel(BackgroundRun, Panel):
    """Learning curves of a campaign with a live fit, its verdict and the sample planner.

    Parameters
    ----------
    source : Campaign, CampaignResult or pandas.DataFrame
        A :class:`manireg.curves.campaign.Campaign` (can be run, paused and resumed here), a finished
        :class:`~manireg.curves.campaign.CampaignResult` (for instance from ``Campaign.from_store``), or
        campaign rows.
    dimension, smoothness : float, optional
        Intrinsic dimension d and smoothness s for the predicted exponent and the implied d or s (default:
        the campaign's; "unknown" for rows without them).
    ambient_dim : int, optional
        Ambient dimension D (default: the campaign's).
    target_error : float, optional
        Initial target of the planner.
    n_boot, seed : int
        Bootstrap draws and seed of the exponent interval (the defaults of
        :func:`manireg.curves.fitting.fit_exponent`, so the panel shows what ``CampaignResult.fit`` gives).
    learner : str, optional
        Learner shown first (default: "net" when present).
    floor : "none", "fit", "estimate" or float, default=DEFAULT_FLOOR ("fit")
        Initial floor choice (:mod:`manireg.curves.floors`).
    noise_estimate : float, optional
        The noise-variance estimate of the "estimate" floor. Default: the campaign's own
        (``Campaign.noise_estimate()`` or ``CampaignResult.noise_estimate``, computed outside the test rows);
        rows given as a DataFrame have none unless given here.

    Attributes
    ----------
    campaign : Campaign or None
    rows : DataFrame of the rows so far
    noise_estimate : float or None
    fit : ExponentFit of the selected learner, or None
    fits : dict learner -> ExponentFit (every learner, same settings)
    plan : SamplePlan or None
    running : bool
    dimension, smoothness, ambient_dim : number controls, each with a checkbox ``dimension_unknown``,
        ``smoothness_unknown``, ``ambient_dim_unknown``
    floor : the floor choice ("none", "fit", "estimate" or "value"), with ``floor_value`` for "value"
    """

    title = "Learning curves"
    run_noun = "campaign"
    run_source = "Campaign"

    def _fit_text(self) -> str:
        return "" if self.fit is None else self._fit_status(self.fit)

    def __init__(self, source, *, dimension=None, smoothness=None, ambient_dim=None, target_error=None, n_boot=1000,
                 seed=0, learner=None, floor=None, noise_estimate=None):
        super().__init__()
        import pandas as pd

        from manireg.curves.campaign import Campaign, CampaignResult
        from manireg.curves.floors import DEFAULT_FLOOR, parse_floor

        self.campaign = None
        self.fit = self.plan = None
        self.fits = {}
        self._init_run()
        self._lock = threading.RLock()
        self._quiet = False
        meta = {}
        self.noise_estimate = None
        if isinstance(source, Campaign):
            self.campaign = source
            data = source.data
            meta = {"dimension": data.dimension, "smoothness": data.smoothness, "ambient_dim": data.ambient_dim,
                    "noise_variance": data.noise_variance}
            sizes = list(data.sizes)
            self.cells_total = len(source.cells())
            if noise_estimate is None:
                self._set_busy(f"noise-variance estimate on the {len(data.y) - len(data.test_idx):,} rows outside "
                               "the test set")
                noise_estimate = self._call("the noise-variance estimate", source.noise_level)
            self.rows = source.result().rows
        elif isinstance(source, CampaignResult):
            meta = {"dimension": source.dimension, "smoothness": source.smoothness,
                    "ambient_dim": source.ambient_dim, "noise_variance": source.noise_variance}
            if noise_estimate is None:
                noise_estimate = source.noise_level
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
                f"{type(source).__name__}. Pass Campaign(...) to run cells here, or Campaign.from_store(path) to "
                "read stored ones."
            )
        if len(sizes) < 2:
            raise ValueError(f"CurvePanel: a learning curve needs at least 2 sizes; got {sizes}. Add sizes.")
        # the campaign's estimate with its interval, the one the command line and CampaignResult.fit use
        self.noise_level = noise_estimate if hasattr(noise_estimate, "value") else (
            None if plain_number(noise_estimate) is None else NoiseLevel(plain_number(noise_estimate)))
        self.noise_estimate = None if self.noise_level is None else plain_number(self.noise_level.value)
        choice = parse_floor(DEFAULT_FLOOR if floor is None else floor)
        true_variance = plain_number(meta.get("noise_variance"))
        style = {"description_width": "170px"}
        lay = widgets.Layout(width="330px")

        self.start_button = style_button(widgets.Button(description="Start / resume", disabled=self.campaign is None,
                                                        layout=widgets.Layout(width="150px")), "run")
        self.pause_button = style_button(widgets.Button(description="Pause", disabled=True,
                                                        layout=widgets.Layout(width="100px")), "pause")
        self.progress = style_progress(widgets.IntProgress(value=0, min=0, max=max(1, self.cells_total),
                                                           layout=widgets.Layout(width="320px")), "running")
        self.progress_label = widgets.Label()

        self.learner = widgets.Dropdown(options=[], description="learner", style=style, layout=lay)
        self.metric = widgets.Dropdown(options=list(METRIC_LABELS[:2] if self._has_clean() else METRIC_LABELS[:1]),
                                       value="test_mse", description="error", style=style,
                                       layout=widgets.Layout(width="480px"))
        self.n_range = widgets.SelectionRangeSlider(options=[(str(v), v) for v in sizes], index=(0, len(sizes) - 1),
                                                    description="fit range n", style=style,
                                                    layout=widgets.Layout(width="520px"), continuous_update=False)
        from manireg.curves.floors import describe_floor

        self.floor = widgets.ToggleButtons(
            options=[(describe_floor(c), c) for c in ("none", "fit", "estimate")] + [("a value", "value")],
            value="value" if isinstance(choice, float) else choice, description="floor",
            style={**style, "button_width": "auto"})
        value0 = choice if isinstance(choice, float) else (true_variance if true_variance is not None else 0.0)
        value0 = float(f"{value0:.6g}")  # 0.010000000000000002 reads 0.01
        self.floor_value = widgets.BoundedFloatText(value=float(value0), min=0.0, max=1e300, step=0.001,
                                                    description="floor value", disabled=self.floor.value != "value",
                                                    style=style, layout=lay)
        self.noise_html = widgets.HTML(self._noise_text(true_variance))
        self.n_boot = widgets.BoundedIntText(value=int(n_boot), min=10, max=100000, description="bootstrap draws",
                                             style=style, layout=lay)
        self.seed = widgets.IntText(value=int(seed), description="seed", style=style, layout=lay)
        self.dimension, self.dimension_unknown = self._optional(
            dimension if dimension is not None else meta.get("dimension"), "intrinsic dimension d", "d unknown",
            2.0, widgets.BoundedFloatText, min=0.01, max=1e6, step=0.1)
        self.smoothness, self.smoothness_unknown = self._optional(
            smoothness if smoothness is not None else meta.get("smoothness"), "smoothness s", "s unknown", 1.0,
            widgets.BoundedFloatText, min=0.01, max=100.0, step=0.1)
        self.ambient_dim, self.ambient_dim_unknown = self._optional(
            ambient_dim if ambient_dim is not None else meta.get("ambient_dim"), "ambient dimension D",
            "D unknown", 1, widgets.BoundedIntText, min=1, max=10**9)
        self.target_error = widgets.BoundedFloatText(value=float(plain_number(target_error) or 0.0), min=0.0,
                                                     max=1e300, step=0.001, description="target error",
                                                     style=style, layout=lay)
        self.allow_unverified = widgets.Checkbox(value=False, description="plan from an unverified fit", indent=False,
                                                 layout=widgets.Layout(width="260px"))

        self.exponent_html = widgets.HTML()
        self.slopes_html = widgets.HTML()
        self.plan_html = widgets.HTML()
        self.curves_image = self._image()
        self.slopes_image = self._image()

        run_box = widgets.HBox([self.start_button, self.pause_button, self.progress, self.progress_label])
        fit_box = widgets.VBox([
            widgets.HBox([self.learner, self.metric]), self.n_range, self.floor,
            widgets.HBox([self.floor_value, self.noise_html]),
            widgets.HBox([self.n_boot, self.seed]),
            widgets.HBox([self.dimension, self.dimension_unknown, self.smoothness, self.smoothness_unknown]),
            widgets.HBox([self.ambient_dim, self.ambient_dim_unknown]),
        ])
        self.children = (
            widgets.HTML(title_html("Learning-curve campaign")), run_box, fit_box,
            widgets.HBox([self.curves_image, widgets.VBox([self.exponent_html, self.slopes_html])]),
            self.slopes_image,
            widgets.HTML(title_html("Sample planner")), widgets.HBox([self.target_error, self.allow_unverified]),
            self.plan_html, self.status, self.out,
        )
        self.start_button.on_click(lambda b: self.start())
        self.pause_button.on_click(lambda b: self.pause())
        self.floor.observe(self._on_floor, names="value")
        for box, unknown in ((self.dimension, self.dimension_unknown), (self.smoothness, self.smoothness_unknown),
                             (self.ambient_dim, self.ambient_dim_unknown)):
            unknown.observe(lambda change, box=box: self._on_unknown(box, change), names="value")
        for w in (self.learner, self.metric, self.n_range, self.floor_value, self.n_boot, self.seed, self.dimension,
                  self.smoothness, self.ambient_dim):
            w.observe(self._on_fit_control, names="value")
        for w in (self.target_error, self.allow_unverified):
            w.observe(self._on_plan_control, names="value")
        self.refresh()

    # ------------------------------------------------------------------ helpers
    @staticmethod
    def _optional(value, label, unknown_label, placeholder, cls, **kw):
        """A number box and its "unknown" checkbox (no 0-sentinel): the box is disabled while unknown."""
        v = plain_number(value)
        box = cls(value=placeholder if v is None else (int(v) if cls is widgets.BoundedIntText else v),
                  description=label, disabled=v is None, style={"description_width": "170px"},
                  layout=widgets.Layout(width="330px"), **kw)
        unknown = widgets.Checkbox(value=v is None, description=unknown_label, indent=False,
                                   layout=widgets.Layout(width="150px"))
        return box, unknown

    def _noise_text(self, true_variance=None) -> str:
        est = ("none recorded" if self.noise_estimate is None else fmt(self.noise_estimate, 4))
        text = f"campaign's noise-variance estimate: {est}"
        if true_variance is not None:
            text += f"; true noise variance (synthetic data): {fmt(true_variance, 4)}"
        return caption_html(text)

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

    def _on_floor(self, change):
        self.floor_value.disabled = self.floor.value != "value"
        self._on_fit_control(change)

    def _on_unknown(self, box, change):
        box.disabled = bool(change["new"])
        self._on_fit_control(change)

    @staticmethod
    def _value(box, unknown):
        return None if unknown.value else plain_number(box.value)

    def theory(self) -> dict:
        """``dimension``, ``smoothness`` and ``ambient_dim`` from the controls (None where unknown)."""
        D = self._value(self.ambient_dim, self.ambient_dim_unknown)
        return {"dimension": self._value(self.dimension, self.dimension_unknown),
                "smoothness": self._value(self.smoothness, self.smoothness_unknown),
                "ambient_dim": None if D is None else int(D)}

    def floor_choice(self):
        """The floor choice of the controls: "none", "fit", "estimate" or the value (a float)."""
        return float(self.floor_value.value) if self.floor.value == "value" else self.floor.value

    def fit_settings(self) -> dict:
        """Keyword arguments of ``fit_exponent`` from the controls (``learner`` and ``rows`` aside).

        The floor goes through :func:`manireg.curves.floors.choose_floor` with the campaign's noise estimate.
        """
        from manireg.curves.floors import choose_floor

        floor, nv, _ = choose_floor(self.floor_choice(), self.metric.value, self.noise_level)
        extra = {} if nv is None else {"noise_variance": nv}
        lo, hi = self.n_range.value
        full = (lo, hi) == (self.n_range.options[0][1], self.n_range.options[-1][1])
        return {"metric": self.metric.value, "n_range": None if full else (lo, hi), "n_boot": int(self.n_boot.value),
                "seed": int(self.seed.value), **self.theory(), "floor": floor, **extra}

    # ------------------------------------------------------------------ updates
    def refresh(self):
        """Reload the rows (from the campaign's store), move the progress bar, refit and redraw."""
        with self._lock:
            if self.campaign is not None:
                result = self._call("loading the rows", self.campaign.result)
                if result is None:
                    return
                self.rows = result.rows
                done = int(self.campaign.progress()["finished"])
            else:
                done = len(self.rows)
            self.progress.value = min(done, self.progress.max)
            self.progress_label.value = f"{done} of {self.cells_total} cells finished"
            if done >= self.cells_total:
                style_progress(self.progress, "done")
            set_choices(self, self.learner, self._learners(), preferred=("net",))
            if len(self.metric.options) < 2 and self._has_clean():
                self._quiet = True
                try:
                    self.metric.options = list(METRIC_LABELS)
                    self.metric.value = "test_mse"
                finally:
                    self._quiet = False
            self.update_fit()

    @staticmethod
    def _fit_status(fit) -> str:
        return f"{fit.learner}: exponent {fmt(fit.exponent)} {fmt_interval(fit.interval)}, {fit.verdict}"

    def update_fit(self):
        """Fit every learner with the current settings; show the selected one and redraw."""
        from manireg.curves.fitting import fit_exponent

        with self._lock:
            learners = self._learners()
            if not learners:
                self.fit, self.fits = None, {}
                self.exponent_html.value = caption_html("no finished cells yet")
                return
            kwargs = self._call("reading the fit settings", self.fit_settings)
            if kwargs is None:
                self.fit, self.fits = None, {}
                self.exponent_html.value = caption_html("no fit: see the message below")
                self.slopes_html.value = ""
                self.update_plan()
                return
            fits, errors, notes = {}, [], []
            for i, name in enumerate(learners, 1):
                self._set_busy(f"fitting learner {i} of {len(learners)} ({name}, {kwargs['n_boot']:,} bootstrap "
                               "draws)")
                f = self._call(f"the fit of {name}", fit_exponent, self.rows, name, **kwargs)
                if f is None:
                    errors.append(self.error)
                else:
                    fits[name] = f
                    notes.extend(self.notes)
            self.fits = fits
            self.fit = fits.get(self.learner.value)
            self.exponent_html.value = self._exponent_text(self.fit)
            self.slopes_html.value = self._slopes_text(self.fit)
            from manireg.plots.curves import plot_learning_curves, plot_local_slopes

            rows = self.rows
            self._call("the learning-curve plot", self._draw, self.curves_image,
                       lambda ax: plot_learning_curves(rows, fits, metric=kwargs["metric"], ax=ax), (6.8, 4.6))
            if fits:
                self._call("the local-slope plot", self._draw, self.slopes_image,
                           lambda ax: plot_local_slopes(list(fits.values()), ax=ax), (6.8, 3.2))
            self.notes = list(dict.fromkeys(notes))
            if errors:
                self.error = errors[-1]
                self.status.value = "<br>".join(colour_span(e, "error") for e in errors if e)
            elif self.fit is not None:
                self._set_status(self._fit_status(self.fit))
            else:
                self._set_status("fitted")
            self.update_plan()

    @staticmethod
    def _exponent_text(fit) -> str:
        if fit is None:
            return caption_html("no fit")
        role = "measured" if fit.verdict == "measured" else "unverified"
        pct = int(round(100 * fit.level))
        floor = "no floor" if fit.model == "loglog" else f"floor {fmt(fit.floor, 4)} ({html.escape(fit.floor_source)})"
        rows = [
            ("exponent", f"<b>{fmt(fit.exponent)}</b>, {pct}% interval {fmt_interval(fit.interval)}"),
            ("verdict", colour_span(fit.verdict, role, bold=True)),
            ("why", html.escape(_plain_reason(fit.verdict_reason))),
            ("model", f"{html.escape(MODEL_LABELS.get(fit.model, fit.model))}; {floor}"),
            ("sizes", f"n = {fmt_count(fit.n_range[0])} to {fmt_count(fit.n_range[1])}, {fit.n_sizes} sizes, "
                      f"{fit.n_repeats} repeats"),
            ("predicted exponent 2s/(2s+d)", _fmt_predicted(fit.predicted_exponent)),
            ("predicted ambient exponent 2s/(2s+D)", _fmt_predicted(fit.ambient_exponent)),
            ("implied d (given s)", fmt_interval(fit.implied_dimension, 2)),
            ("implied s (given d)", fmt_interval(fit.implied_smoothness, 2)),
            ("cells limited by optimisation", str(len(fit.optimisation_limited))),
        ]
        return f"<b>{html.escape(fit.learner)}</b>" + table_html(rows)

    @staticmethod
    def _slopes_text(fit) -> str:
        if fit is None or not fit.local_slopes:
            return ""
        rows = [(f"{fmt_count(s['n_lo'])} to {fmt_count(s['n_hi'])}", fmt(s["slope"])) for s in fit.local_slopes]
        return ("<b>local slopes</b>" + caption_html("between successive sizes; a diagnostic, no interval")
                + table_html(rows, header=("sizes n", "local slope")))

    def update_plan(self):
        """Samples needed for the target error, from the selected learner's fit."""
        from manireg.curves.planning import plan_samples

        target = float(self.target_error.value)
        if self.fit is None or not target > 0:
            self.plan = None
            self.plan_html.value = caption_html("set a target error above 0 to plan") if self.fit is not None else ""
            return
        theory = self.theory()
        plan = self._call("the plan", plan_samples, self.fit, target, allow_unverified=bool(self.allow_unverified.value),
                          _show=False, dimension=theory["dimension"], smoothness=theory["smoothness"],
                          ambient_dim=theory["ambient_dim"])
        self.plan = plan
        if plan is None:
            self.plan_html.value = colour_span(self.last_message or "", "error")
            return
        rows = [
            ("samples needed", f"<b>{fmt_count(plan.n_required)}</b>, {int(round(100 * plan.level))}% interval "
                               f"{fmt_interval(plan.interval, count=True)}"),
            ("extrapolated", "yes" if plan.extrapolated else "no"),
            ("verdict of the fit", html.escape(plan.verdict)),
        ]
        if plan.architecture:
            a = plan.architecture
            rows.append(("network at that n", f"depth {a['depth']}, width {a['width']}, "
                                              f"{a['n_parameters']:,} parameters"))
        text = table_html(rows)
        if plan.warning:
            text += colour_span(WARNING_PREFIX + _plain_reason(" ".join(str(plan.warning).split())), "warning")
        self.plan_html.value = text

    def results(self) -> CurveResults:
        settings = self._call("reading the fit settings", self.fit_settings, _show=False) or {}
        return CurveResults(learner=self.learner.value, fit=self.fit, fits=dict(self.fits), plan=self.plan,
                            fit_settings=settings, floor=self.floor_choice(), noise_estimate=self.noise_estimate,
                            cells_done=int(self.progress.value), cells_total=self.cells_total, rows=self.rows)
