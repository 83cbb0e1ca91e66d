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

Every learner's exponent, interval and verdict are listed in one table; with d and s known the core read-out
(:func:`manireg.curves.readout.read_out`) of the selected learner is shown field by field through
:func:`readout_rows`, so a text field added to :class:`~manireg.curves.readout.ReadOut` appears without a panel
change.

Classification campaigns (task "classify") offer the classification metrics the rows hold
(:data:`manireg.curves.metrics.CLASSIFICATION_COLUMNS`) with the floors of the command line's classification
read-out, no regression prediction, and for the excess logistic risk the reference exponent of
:func:`manireg.theory.classification.logistic_excess_risk_exponent` as a line and a row.

The size view adds nets at other width multipliers and depth constants to a campaign
(:func:`manireg.curves.capacity.size_grid_learners`, :func:`~manireg.curves.capacity.add_learners`: nothing
already trained is trained again), runs the new cells in the background and shows the capacity read-out of each
depth setting (:func:`~manireg.curves.capacity.capacity_by_depth`, paired over shared repeats).
"""

from __future__ import annotations

import dataclasses
import html
import threading
from dataclasses import dataclass, field

import ipywidgets as widgets

from .. import style
from .._results import ResultMixin
from ..curves.noise import NoiseLevel
from ._base import BackgroundRun, Panel, set_choices, fmt, fmt_count, fmt_interval, plain_number, table_html
from ._look import WARNING_PREFIX, caption_html, colour_span, style_button, style_progress, title_html

__all__ = ["CurvePanel", "CurveResults", "METRIC_LABELS", "MODEL_LABELS", "SIZE_BUTTON_LABEL", "readout_rows",
           "learner_label"]

#: Error columns on screen: (label, metric name).
METRIC_LABELS = (("test error (MSE)", "test_mse"), ("error against the noise-free target", "test_mse_clean"))
#: Fitted models in plain words.
MODEL_LABELS = {"loglog": "power law, no floor (straight line in log-log)",
                "excess": "power law above a given floor",
                "floor_fit": "power law plus a fitted floor"}
#: The size view's button.
SIZE_BUTTON_LABEL = "Add missing cells and run"
#: Metrics of classification campaigns tried first (the one with a reference exponent first).
_CLASSIFY_PREFERRED = ("excess_logistic_risk", "test_cross_entropy", "test_error_rate")
#: ReadOut fields shown elsewhere in the panel (numbers, the fit table, the planner) or settings: not text rows.
_READOUT_ELSEWHERE = ("fits", "plan", "floor", "metric", "dimension", "dimension_interval", "smoothness",
                      "ambient_dim", "working_dimension", "learner_kinds", "capacity")  # capacity: its own table
#: Plain labels of ReadOut fields; a field not listed reads as its name without underscores.
READOUT_LABELS = {"theory": "against its reference rate", "extrapolation": "extrapolation check",
                  "plan_note": "plan", "floor_note": "floor", "warnings": "warnings", "diagnoses": "diagnosis",
                  "evidence": "evidence cells"}
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


def _as_text(value) -> str:
    """A read-out value in words: strings as they are, lists joined, objects by their ``str``."""
    if value is None:
        return ""
    if isinstance(value, str):
        return value
    if isinstance(value, (list, tuple)):
        return "; ".join(t for t in (_as_text(v) for v in value) if t)
    if isinstance(value, dict):
        return "; ".join(f"{style.plain_label(k)}: {_as_text(v)}" for k, v in value.items() if _as_text(v))
    return str(value)


def readout_rows(readout, learner, skip=()) -> list:
    """``(label, html)`` rows of every text field of a :class:`~manireg.curves.readout.ReadOut` for one learner.

    Fields are taken in their declared order; a dict field shows its entry for ``learner`` (and nothing when it
    has none), a list is joined, any other value is shown by its ``str``. Fields in :data:`_READOUT_ELSEWHERE`
    and in ``skip`` are left out. So a text field added to ``ReadOut`` (for instance a diagnosis per learner)
    is shown without a change here; :data:`READOUT_LABELS` may give it plain words.
    """
    rows = []
    for f in dataclasses.fields(readout):
        if f.name in _READOUT_ELSEWHERE or f.name in skip or f.name.startswith("_"):
            continue
        value = getattr(readout, f.name, None)
        if isinstance(value, dict):
            if learner not in value:
                continue
            value = value[learner]
        text = " ".join(_plain_reason(_as_text(value)).split())
        if text:
            rows.append((html.escape(READOUT_LABELS.get(f.name, f.name.replace("_", " "))), html.escape(text)))
    return rows


def learner_label(name) -> str:
    """A learner's name in the learner dropdown: the plain label of its kind (manireg.style), with a width or
    other suffix kept ("network classifier-w2"); a name the style module does not know is shown as it is, its
    underscores as spaces."""
    name = str(name)
    label = style.learner_style(name)["label"]
    if label != name:
        return label
    for kind in sorted(style.LEARNER_STYLES, key=len, reverse=True):
        if name.startswith(kind) and name != kind:
            return style.LEARNER_STYLES[kind]["label"] + name[len(kind):]
    return name.replace("_", " ")


def _task_of(source, rows) -> str:
    """"classify" or "regress": the campaign's task, or for bare rows whether they hold classification metrics."""
    from manireg.curves.campaign import Campaign, CampaignResult
    from manireg.curves.metrics import CLASSIFICATION_COLUMNS

    if isinstance(source, Campaign):
        return source.data.task
    if isinstance(source, CampaignResult):
        return (source.spec or {}).get("task") or "regress"
    has = any(c in rows.columns and rows[c].notna().any() for c in CLASSIFICATION_COLUMNS)
    mse = "test_mse" in rows.columns and rows["test_mse"].notna().any()
    return "classify" if has and not mse else "regress"


def _classify_floors() -> dict:
    """Metric -> floor of a classification fit (the core table, one place)."""
    from manireg.curves.readout import CLASSIFY_METRICS

    return {m: ("none" if f is None else f) for m, f in CLASSIFY_METRICS.items()}


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
    task: str = "regress"
    readout: object = None
    reference_exponent: float | None = None
    capacity: list = field(default_factory=list)
    _skip_in_dict = ("rows", "readout")


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
    task : "regress" or "classify" (the campaign's; classification offers its metrics in ``metric``)
    readout : ReadOut or None
        The core read-out (:func:`manireg.curves.readout.read_out`) with the metric and floor of the controls,
        computed when d and s are known and no run is going.
    reference_exponent : float or None
        The excess logistic risk's reference exponent (classification, that metric, d and s known).
    capacity : list of (label, CapacityReadout or str)
        The capacity read-out of each depth setting of the campaign's nets (:func:`capacity_by_depth`).
    size_widths, size_depths, size_button : the size view (width multipliers, depth constants c_depth)
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
        self.fit = self.plan = self.readout = self.reference_exponent = None
        self.fits = {}
        self.fit_errors = {}
        self.capacity = []
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
        self.task = _task_of(source, self.rows)
        self._spec = getattr(source, "spec", None) if isinstance(source, CampaignResult) else None
        self._bayes_known = None
        if self.task == "classify":
            noise_estimate = None  # labels have no noise variance; classification floors are "fit" or "none"
            if self.campaign is not None:
                self._bayes_known = self.campaign.data.bayes_proba is not None
        # the campaign's estimate with its interval, the one the command line and CampaignResult.fit use
        self.noise_level = noise_estimate if hasattr(noise_estimate, "value") else (
            None if plain_number(noise_estimate) is None else NoiseLevel(plain_number(noise_estimate)))
        self.noise_estimate = None if self.noise_level is None else plain_number(self.noise_level.value)
        metric_options = self._metric_options()
        metric0 = next((v for v in ("test_mse", *_CLASSIFY_PREFERRED) if v in [o[1] for o in metric_options]),
                       metric_options[0][1])
        if floor is None and self.task == "classify":
            floor = _classify_floors().get(metric0, "fit")
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
        self.metric = widgets.Dropdown(options=metric_options, value=metric0, description="error", style=style,
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
        self.fits_html = widgets.HTML()
        self.readout_html = widgets.HTML()
        self.slopes_html = widgets.HTML()
        self.plan_html = widgets.HTML()
        self.curves_image = self._image()
        self.slopes_image = self._image()

        run_box = widgets.HBox([self.start_button, self.pause_button, self.progress, self.progress_label])
        size_box = self._size_view()
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
            self.fits_html, self.readout_html, self.slopes_image, size_box,
            widgets.HTML(title_html("Sample planner")), widgets.HBox([self.target_error, self.allow_unverified]),
            self.plan_html, self.status, self.out,
        )
        self.start_button.on_click(lambda b: self.start())
        self.pause_button.on_click(lambda b: self.pause())
        self.floor.observe(self._on_floor, names="value")
        self.metric.observe(self._on_metric, names="value")
        self.size_button.on_click(lambda b: self.add_sizes())
        for box, unknown in ((self.dimension, self.dimension_unknown), (self.smoothness, self.smoothness_unknown),
                             (self.ambient_dim, self.ambient_dim_unknown)):
            unknown.observe(lambda change, box=box: self._on_unknown(box, change), names="value")
        for w in (self.learner, self.n_range, self.floor_value, self.n_boot, self.seed, self.dimension,
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

    def _metric_options(self) -> list:
        """(label, column) of the error dropdown: MSE (and the clean error) for regression; for classification the
        metrics the rows hold (before any row: those the campaign can measure)."""
        if self.task != "classify":
            return list(METRIC_LABELS[:2] if self._has_clean() else METRIC_LABELS[:1])
        from manireg.curves.metrics import CLASSIFICATION_COLUMNS

        cols = [c for c in CLASSIFICATION_COLUMNS if c in self.rows.columns and self.rows[c].notna().any()]
        if not cols:
            cols = [c for c in CLASSIFICATION_COLUMNS if self._bayes_known is not False or not c.startswith("excess")]
        order = [c for c in _CLASSIFY_PREFERRED if c in cols] + [c for c in cols if c not in _CLASSIFY_PREFERRED]
        return [(style.plain_label(c), c) for c in order]

    def _set_metric_options(self):
        """New metric options (e.g. the clean error once its rows exist) without firing the update; the
        current metric is kept when still offered."""
        options = self._metric_options()
        if [tuple(o) for o in self.metric.options] == [tuple(o) for o in options]:
            return
        values = [v for _, v in options]
        current = self.metric.value
        self._quiet = True
        try:
            self.metric.options = options
            self.metric.value = current if current in values else next(
                (v for v in ("test_mse", *_CLASSIFY_PREFERRED) if v in values), values[0])
        finally:
            self._quiet = False

    def _on_metric(self, change):
        """A classification metric brings its own floor (fitted for the error rate and the cross-entropy, whose
        floor is the unknown Bayes risk; none for the excess risks and the calibration error)."""
        if self.task == "classify" and not self._quiet:
            floor = _classify_floors().get(self.metric.value)
            if floor is not None and floor != self.floor.value:
                self._quiet = True
                try:
                    self.floor.value = floor
                    self.floor_value.disabled = True
                finally:
                    self._quiet = False
        self._on_fit_control(change)

    # ------------------------------------------------------------------ size view
    def _size_view(self):
        """Width multipliers and depth constants to add to the campaign's nets, its button and the capacity
        read-out."""
        from manireg.curves.capacity import template_net
        from manireg.theory.sizing import SizingConstants

        style_ = {"description_width": "170px"}
        self._template = None if self.campaign is None else template_net(self.campaign.data.learners)
        c_depth = SizingConstants().c_depth
        if self._template is not None:
            c_depth = (self._template.params.get("constants") or {}).get("c_depth", c_depth)
        usable = self._template is not None
        self.size_widths = widgets.Text(value="0.5, 1, 2", description="width multipliers", style=style_,
                                        layout=widgets.Layout(width="420px"), disabled=not usable)
        self.size_depths = widgets.Text(value=f"{c_depth:g}", description="depth constants c_depth", style=style_,
                                        layout=widgets.Layout(width="420px"), disabled=not usable)
        self.size_button = style_button(widgets.Button(description=SIZE_BUTTON_LABEL, disabled=not usable,
                                                       layout=widgets.Layout(width="240px")), "action")
        self.extra_buttons = ("size_button",) if usable else ()
        if usable:
            note = ("Nets at every pair of width multiplier and depth constant (hidden layers = ceil(c_depth log n)), "
                    f"with the other settings of '{self._template.name}'. The rule's width (multiplier 1) and its "
                    "depth constant are always included; cells already in the store are not trained again.")
        elif self.campaign is None:
            note = "The size view adds cells to a campaign: pass a Campaign (rows from a store cannot train)."
        else:
            note = "The size view varies nets: this campaign has no net learner."
        self.capacity_html = widgets.HTML()
        return widgets.VBox([widgets.HTML(title_html("Network size")), widgets.HTML(caption_html(note)),
                             widgets.HBox([self.size_widths, self.size_depths]), self.size_button,
                             self.capacity_html])

    @staticmethod
    def _numbers(text, what) -> list:
        try:
            return [float(t) for t in str(text).replace(";", ",").split(",") if t.strip()]
        except ValueError:
            raise ValueError(f"{what} must be numbers separated by commas, e.g. 0.5, 1, 2; got {text!r}.") from None

    def size_learners(self) -> list:
        """The learners of the size view's controls (:func:`manireg.curves.capacity.size_grid_learners`)."""
        from manireg.curves.capacity import size_grid_learners

        if self._template is None:
            raise ValueError("the size view needs a Campaign with a net learner.")
        return size_grid_learners(self._template, self._numbers(self.size_widths.value, "width multipliers"),
                                  self._numbers(self.size_depths.value, "depth constants c_depth"))

    def add_sizes(self, run=True):
        """Add the size view's nets to the campaign (only those it lacks) and run the missing cells in the
        background. Returns the learners added (None on error)."""
        from manireg.curves.capacity import add_learners

        if self.running:
            self._set_error("adding sizes", ValueError("a run is going; pause it first."))
            return None
        specs = self._call("reading the size view", self.size_learners)
        if specs is None:
            return None
        added = self._call("adding the sizes to the campaign", add_learners, self.campaign, specs)
        if added is None:
            return None
        with self._lock:
            self.cells_total = len(self.campaign.cells())
            self.progress.max = max(1, self.cells_total)
        self.refresh()
        p = self.campaign.progress()
        names = ", ".join(l.name for l in added) or "none (every requested net is in the campaign)"
        self._set_status(f"added learners: {names}; {p['remaining']} cells to run, {p['finished']} already "
                         "finished are kept")
        if run and p["remaining"]:
            self.start()
        return added

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
        # classification: no regression prediction 2s/(2s+d) on the fits (the reference is the excess
        # logistic risk's, shown on its own)
        theory = self.theory() if self.task != "classify" else {}
        return {"metric": self.metric.value, "n_range": None if full else (lo, hi), "n_boot": int(self.n_boot.value),
                "seed": int(self.seed.value), **theory, "floor": floor, **extra}

    # ------------------------------------------------------------------ updates
    def refresh(self):
        """Reload the rows (from the campaign's store), move the progress bar, refit and redraw."""
        with self._lock:
            if self.campaign is not None:
                result = self._call("loading the rows", self.campaign.result)
                if result is None:
                    return
                self.rows = result.rows
                self._rows_version = getattr(self, "_rows_version", 0) + 1
                done = int(self.campaign.progress()["finished"])
            else:
                done = len(self.rows)
            self.progress.value = min(done, self.progress.max)
            self.progress_label.value = f"{done} of {self.cells_total} cells finished"
            if done >= self.cells_total:
                style_progress(self.progress, "done")
            set_choices(self, self.learner, [(learner_label(l), l) for l in self._learners()],
                        preferred=("net", "net_classifier"))
            self._set_metric_options()
            self.update_fit()

    @staticmethod
    def _fit_status(fit) -> str:
        return f"{fit.learner}: exponent {fmt(fit.exponent)} {fmt_interval(fit.interval)}, {fit.verdict}"

    def update_fit(self):
        """Fit every learner with the current settings; show the selected one, every learner's exponent, the
        core read-out, the capacity read-out and redraw."""
        from manireg.curves.fitting import fit_exponent

        with self._lock:
            learners = self._learners()
            if not learners:
                self.fit, self.fits, self.fit_errors, self.readout = None, {}, {}, None
                self.exponent_html.value = caption_html("no finished cells yet")
                self.fits_html.value = self.readout_html.value = ""
                return
            kwargs = self._call("reading the fit settings", self.fit_settings)
            if kwargs is None:
                self.fit, self.fits, self.fit_errors, self.readout = None, {}, {}, None
                self.exponent_html.value = caption_html("no fit: see the message below")
                self.slopes_html.value = self.fits_html.value = self.readout_html.value = ""
                self.update_plan()
                return
            fits, fit_errors, notes = {}, {}, []
            for i, name in enumerate(learners, 1):
                self._set_busy(f"fitting learner {i} of {len(learners)} ({name}, {kwargs['n_boot']:,} bootstrap "
                               "draws)")
                f = self._call(f"the fit of {name}", fit_exponent, self.rows, name, **kwargs)
                if f is None:
                    fit_errors[name] = self.error
                else:
                    fits[name] = f
                    notes.extend(self.notes)
            self.fits, self.fit_errors = fits, fit_errors
            self.fit = fits.get(self.learner.value)
            self.reference_exponent = self._reference_exponent()
            self.exponent_html.value = self._exponent_text(self.fit, self._extra_rows())
            self.slopes_html.value = self._slopes_text(self.fit)
            self.fits_html.value = self._fits_text()
            self.update_readout()
            self.update_capacity()
            from manireg.plots.curves import plot_learning_curves, plot_local_slopes

            rows, metric, ref = self.rows, kwargs["metric"], self.reference_exponent
            classify = self.task == "classify"

            def draw(ax):
                plot_learning_curves(rows, fits, metric=metric, ax=ax, show_predicted=not classify,
                                     show_ambient=not classify)
                if ref is not None:
                    self._reference_line(ax, rows, metric, ref)

            self._call("the learning-curve plot", self._draw, self.curves_image, draw, (6.8, 4.6))
            if fits:
                self._call("the local-slope plot", self._draw, self.slopes_image,
                           lambda ax: plot_local_slopes(list(fits.values()), ax=ax), (6.8, 3.2))
            self.notes = list(dict.fromkeys(notes))
            selected = self.learner.value
            if selected in fit_errors:  # the selected learner's failure is the panel's error; others stay in the table
                self.error = fit_errors[selected]
                self.status.value = colour_span(self.error or "", "error")
            elif self.fit is not None:
                self._set_status(self._fit_status(self.fit))
            else:
                self._set_status("fitted")
            self.update_plan()

    # ------------------------------------------------------------------ read-outs
    def _reference_exponent(self):
        """The excess logistic risk's reference exponent (classification, that metric, d and s known), or None."""
        if self.task != "classify" or self.metric.value != "excess_logistic_risk":
            return None
        t = self.theory()
        if t["dimension"] is None or t["smoothness"] is None:
            return None
        from manireg.theory.classification import logistic_excess_risk_exponent

        return self._call("the reference exponent", logistic_excess_risk_exponent, t["smoothness"],
                          max(float(t["dimension"]), 1.0), _show=False)

    def _extra_rows(self) -> list:
        """Rows of the selected learner's table that depend on the task: the regression predictions and the
        implied d and s, or the classification reference."""
        fit = self.fit
        if fit is None:
            return []
        if self.task != "classify":
            return [
                ("predicted exponent 2s/(2s+d)", _fmt_predicted(fit.predicted_exponent)),
                ("predicted ambient exponent 2s/(2s+D)", _fmt_predicted(fit.ambient_exponent)),
                ("implied d (given s)", fmt_interval(fit.implied_dimension, 2)),
                ("implied s (given d)", fmt_interval(fit.implied_smoothness, 2)),
            ]
        if self.metric.value != "excess_logistic_risk":
            return [("reference exponent", "none for this metric")]
        if self.reference_exponent is None:
            return [("reference exponent s/(2s+2 max(s,d))", "needs d and s")]
        return [("reference exponent s/(2s+2 max(s,d))",
                 f"{fmt(self.reference_exponent)}: an upper bound up to log factors, stated for convolutional "
                 "residual networks (Liu, Chen, Zhao, Liao, ICML 2021)")]

    @staticmethod
    def _reference_line(ax, rows, metric, b):
        """The reference slope n^(-b), anchored at the mean error of all learners at the smallest size."""
        import numpy as np

        ok = rows[rows["status"] == "ok"] if "status" in rows else rows
        vals = ok[["n", metric]].dropna()
        vals = vals[vals[metric] > 0]
        if not len(vals):
            return
        n0, n1 = float(vals["n"].min()), float(vals["n"].max())
        e0 = float(np.exp(np.log(vals[vals["n"] == n0][metric]).mean()))
        grid = np.geomspace(n0, n1, 50)
        ax.plot(grid, e0 * (grid / n0) ** (-b), **style.reference_line("predicted"),
                label=f"reference exponent {b:.3f} (upper bound)")
        ax.legend(loc="upper left", bbox_to_anchor=(0.0, -0.13), ncol=1, borderaxespad=0.0)

    def _fits_text(self) -> str:
        """Every learner's exponent with interval and verdict; learners without a fit say why."""
        if not self.fits and not self.fit_errors:
            return ""
        rows = []
        for name in self._learners():
            f = self.fits.get(name)
            if f is not None:
                role = "measured" if f.verdict == "measured" else "unverified"
                rows.append((html.escape(name), f"<b>{fmt(f.exponent)}</b>", fmt_interval(f.interval),
                             colour_span(f.verdict, role)))
            elif name in self.fit_errors:
                reason = str(self.fit_errors[name] or "").split(" failed: ", 1)[-1]
                rows.append((html.escape(name), "none", "none", html.escape("no fit: " + reason)))
        label = style.plain_label(self.metric.value)
        return (f"<b>every learner ({html.escape(label)})</b>"
                + table_html(rows, header=("learner", "exponent", "interval", "verdict")))

    def update_readout(self):
        """The core read-out (:func:`manireg.curves.readout.read_out`) with the metric and floor of the controls,
        when d and s are known and no run is going; its text fields for the selected learner."""
        from manireg.curves.readout import read_out

        t = self.theory()
        if self.running or t["dimension"] is None or t["smoothness"] is None or not self.fits:
            self.readout = None
            why = "after the run" if self.running else "with d and s known"
            self.readout_html.value = caption_html(f"read-out: shown {why}") if self.fits else ""
            return
        metric = self.metric.value
        classify = self.task == "classify"
        choice = self.floor_choice()
        # classifier kinds have no regression reference rate (the read-out's theory rows are not shown then)
        kinds = {} if classify else self._learner_kinds()
        # the learners the panel could fit (one without a curve must not take the others' read-out with it)
        rows = self.rows[self.rows["learner"].astype(str).isin(list(self.fits))]
        # the read-out depends on the rows, metric, floor, d, s, D and seed only (not on the fit range, the
        # bootstrap draws or the selected learner): computed again only when one of those changed
        key = (getattr(self, "_rows_version", 0), len(rows), tuple(sorted(self.fits)), metric, repr(choice), t["dimension"],
               t["smoothness"], t["ambient_dim"], int(self.seed.value))
        if key == getattr(self, "_readout_key", None) and self.readout is not None:
            ro = self.readout
        else:
            ro = self._call("the read-out", read_out, rows, dimension=float(t["dimension"]),
                            smoothness=float(t["smoothness"]), ambient_dim=t["ambient_dim"],
                            noise_estimate=None if classify else self.noise_level, floor=choice, metric=metric,
                            seed=int(self.seed.value), learner_kinds=kinds or None, _show=False)
            self._readout_key = key
        self.readout = ro
        if ro is None:
            self.readout_html.value = colour_span(self.last_message or "", "error")
            return
        # the fit warnings are the status line's already; classification: the read-out's theory rows are the
        # regression rates (the reference is shown above) and its plan sizes a regression net
        skip = ("warnings", "theory", "plan_note") if classify else ("warnings",)
        rows = readout_rows(ro, self.learner.value, skip=skip)
        self.readout_html.value = (f"<b>read-out of {html.escape(str(self.learner.value))}</b>"
                                   + caption_html("the core read-out over every size, with this metric and floor")
                                   + table_html(rows))

    def _learner_kinds(self) -> dict:
        """Learner name -> kind, from the campaign or the stored spec (rows alone: from the names)."""
        if self.campaign is not None:
            return {l.name: l.kind for l in self.campaign.data.learners}
        out = {}
        for l in (self._spec or {}).get("learners") or []:
            if isinstance(l, dict) and l.get("name"):
                out[l["name"]] = l.get("kind")
        return out

    def update_capacity(self):
        """The capacity read-out of every depth setting of the campaign's nets with two or more widths."""
        from manireg.curves.capacity import capacity_by_depth, depth_groups

        metric = self.metric.value
        groups = {label: learners for label, learners in depth_groups(self.rows)}
        shown = [(label, ro) for label, ro in (capacity_by_depth(self.rows, metric=metric) if groups else [])
                 if len(groups.get(label, ())) > 1]
        self.capacity = shown
        if not shown:
            self.capacity_html.value = caption_html("capacity read-out: needs nets at two or more width multipliers")
            return
        parts = []
        for label, ro in shown:
            if isinstance(ro, str):
                parts.append(f"<b>{html.escape(label)}</b>" + caption_html(ro))
                continue
            rows = [(fmt_count(r["n"]), f"{r['best_multiplier']:g}", fmt(r.get("rule_error"), 4),
                     html.escape(str(r["status"])), html.escape(str(r["reason"]))) for r in ro.table]
            parts.append(f"<b>capacity read-out, {html.escape(label)}</b>"
                         + caption_html(f"widths compared paired over the repeats both ran ({int(round(100 * ro.level))}% "
                                        "Student-t interval of the difference)")
                         + table_html(rows, header=("n", "best width multiplier", "error at the rule's width",
                                                    "status", "why")))
        self.capacity_html.value = "".join(parts)

    @staticmethod
    def _exponent_text(fit, extra_rows=None) -> str:
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
            *(extra_rows if extra_rows is not None else [
                ("predicted exponent 2s/(2s+d)", _fmt_predicted(fit.predicted_exponent)),
                ("predicted ambient exponent 2s/(2s+D)", _fmt_predicted(fit.ambient_exponent)),
                ("implied d (given s)", fmt_interval(fit.implied_dimension, 2)),
                ("implied s (given d)", fmt_interval(fit.implied_smoothness, 2))]),
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
                            cells_done=int(self.progress.value), cells_total=self.cells_total, rows=self.rows,
                            task=self.task, readout=self.readout, reference_exponent=self.reference_exponent,
                            capacity=list(self.capacity))
