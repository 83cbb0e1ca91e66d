"""PolicyPanel: run, pause and resume a policy campaign; its regret curves, overlap and learned policy.

The campaign runs in a background thread through :meth:`manireg.curves.policy.PolicyCampaign.run` (its ``stop``
flag and ``on_unit`` callback), as in the curve panel: pause is read between units, the store keeps every
finished cell, and "Start / resume" runs only the missing cells. After each unit the rows are reloaded and the
views redrawn.

Controls -> :meth:`manireg.curves.policy.PolicyResult.fit_all` (bootstrap draws, seed: regret exponents with
intervals and verdicts) -> :func:`manireg.plots.policy.plot_regret_curves`;
:meth:`~manireg.curves.policy.PolicyResult.overlap` -> :func:`~manireg.plots.policy.plot_overlap` and the overlap
table; map size and repeat -> :func:`manireg.curves.policy.learned_policy` (refits one cell, on the button) ->
:func:`~manireg.plots.policy.plot_policy_map`. Nothing is recomputed here.
"""

from __future__ import annotations

import html
import threading
from dataclasses import dataclass, field

import ipywidgets as widgets

from .._results import ResultMixin
from ._base import BackgroundRun, Panel, set_choices, fmt, fmt_count, fmt_interval, table_html
from ._look import caption_html, colour_span, style_button, style_progress, title_html
from .curves import _plain_reason

__all__ = ["PolicyPanel", "PolicyResults"]


@dataclass
class PolicyResults(ResultMixin):
    """Current results of a :class:`PolicyPanel`."""

    learner: str | None
    fits: dict
    unfitted: dict
    overlap: dict
    policy_map: object
    fit_settings: dict
    cells_done: int
    cells_total: int
    rows: object = field(default=None, repr=False)
    _skip_in_dict = ("rows",)


class PolicyPanel(BackgroundRun, Panel):
    """Regret curves, overlap view and the learned policy of a policy campaign.

    Parameters
    ----------
    source : PolicyCampaign or PolicyResult
        A :class:`manireg.curves.policy.PolicyCampaign` (can be run, paused and resumed here; its learned
        policy can be drawn) or a finished :class:`~manireg.curves.policy.PolicyResult` (for instance from
        ``PolicyCampaign.from_store``; the learned policy needs the campaign's data, so it is not drawn).
    learner : str, optional
        Learner shown first (default: "dr" when present).
    n_boot, seed : int
        Bootstrap draws and seed of the exponent intervals (the defaults of ``PolicyResult.fit_all``).
    max_points : int
        Test rows drawn in the learned-policy view.

    Attributes
    ----------
    campaign : PolicyCampaign or None
    result : PolicyResult of the rows so far
    fits : dict learner -> ExponentFit (from ``result.fit_all``); unfitted : dict learner -> reason
    overlap : dict from ``result.overlap(learner)``
    policy_map : PolicyMap or None
    running : bool
    """

    title = "Policy campaign"
    run_noun = "policy campaign"
    run_source = "PolicyCampaign"
    extra_buttons = ("map_button",)

    def _fit_text(self) -> str:
        return self._fit_status()

    def __init__(self, source, *, learner=None, n_boot=1000, seed=0, max_points=2000):
        super().__init__()
        from manireg.curves.policy import PolicyCampaign, PolicyResult

        self.campaign = None
        self.result = None
        self.fits, self.unfitted, self.overlap = {}, {}, {}
        self.policy_map = None
        self.max_points = int(max_points)
        self._init_run()
        self._lock = threading.RLock()
        self._quiet = False
        if isinstance(source, PolicyCampaign):
            self.campaign = source
            self.cells_total = len(source.cells())
            self.result = source.result()
            sizes = [int(v) for v in source.data.sizes]
            repeats = int(source.data.repeats)
        elif isinstance(source, PolicyResult):
            self.result = source
            self.cells_total = len(source.rows)
            sizes = sorted(int(v) for v in source.rows["n"].unique()) if len(source.rows) else []
            repeats = int(source.rows["repeat"].max()) + 1 if len(source.rows) else 1
        else:
            raise ValueError(
                f"PolicyPanel: source must be a PolicyCampaign or a PolicyResult; got {type(source).__name__}. "
                "Pass PolicyCampaign(...) to run cells here, or PolicyCampaign.from_store(path) to read stored ones.")
        self._first = learner
        style = {"description_width": "150px"}
        lay = widgets.Layout(width="310px")

        self.start_button = style_button(widgets.Button(description="Start / resume", disabled=self.campaign is None,
                                                        layout=widgets.Layout(width="150px")), "run")
        self.pause_button = style_button(widgets.Button(description="Pause", disabled=True,
                                                        layout=widgets.Layout(width="100px")), "pause")
        self.progress = style_progress(widgets.IntProgress(value=0, min=0, max=max(1, self.cells_total),
                                                           layout=widgets.Layout(width="320px")), "running")
        self.progress_label = widgets.Label()
        self.learner = widgets.Dropdown(options=[], description="learner", style=style, layout=lay)
        self.n_boot = widgets.BoundedIntText(value=int(n_boot), min=10, max=100000, description="bootstrap draws",
                                             style=style, layout=lay)
        self.seed = widgets.IntText(value=int(seed), description="seed", style=style, layout=lay)
        self.map_n = widgets.Dropdown(options=[(fmt_count(v), v) for v in sizes], value=sizes[-1] if sizes else None,
                                      description="map size n", style=style, layout=lay)
        self.map_repeat = widgets.BoundedIntText(value=0, min=0, max=max(0, repeats - 1), description="map repeat",
                                                 style=style, layout=lay)
        self.map_button = style_button(widgets.Button(description="Draw the learned policy",
                                                      disabled=self.campaign is None,
                                                      layout=widgets.Layout(width="200px")), "action")

        self.exponent_html = widgets.HTML()
        self.overlap_html = widgets.HTML()
        self.map_html = widgets.HTML(caption_html(
            "refits one cell and draws its policy on the first two principal components of the test rows"
            if self.campaign is not None else
            "the learned policy needs the campaign's data: pass the PolicyCampaign to draw it"))
        self.regret_image = self._image()
        self.overlap_image = self._image()
        self.map_image = self._image()

        run_box = widgets.HBox([self.start_button, self.pause_button, self.progress, self.progress_label])
        self.children = (
            widgets.HTML(title_html("Policy campaign")), run_box,
            widgets.HBox([self.learner, self.n_boot, self.seed]),
            widgets.HTML(title_html("Regret curves")),
            widgets.HBox([self.regret_image, self.exponent_html]),
            widgets.HTML(title_html("Overlap")),
            widgets.HBox([self.overlap_image, self.overlap_html]),
            widgets.HTML(title_html("Learned policy on the 2-D view of the covariates")),
            widgets.HBox([self.map_n, self.map_repeat, self.map_button]), self.map_html, self.map_image,
            self.status, self.out,
        )
        self.start_button.on_click(lambda b: self.start())
        self.pause_button.on_click(lambda b: self.pause())
        self.map_button.on_click(lambda b: self.draw_policy())
        for w in (self.n_boot, self.seed):
            w.observe(self._on_fit_control, names="value")
        self.learner.observe(self._on_learner, names="value")
        self.refresh()

    # ------------------------------------------------------------------ helpers
    def _learners(self):
        rows = self.result.rows
        if not len(rows):
            return []
        ok = rows[rows["status"] == "ok"]
        return list(dict.fromkeys(str(v) for v in ok["learner"]))

    def _on_fit_control(self, change):
        if not self._quiet:
            self.update_fits()

    def _on_learner(self, change):
        if not self._quiet:
            self.update_fits()
            self.update_overlap()

    def fit_settings(self) -> dict:
        """Keyword arguments of ``PolicyResult.fit_all`` from the controls."""
        return {"n_boot": int(self.n_boot.value), "seed": int(self.seed.value)}

    # ------------------------------------------------------------------ updates
    def refresh(self):
        """Reload the rows (from the campaign's store), move the progress bar, refit and redraw."""
        with self._lock:
            if self.campaign is not None:
                result = self._call("loading the rows", self.campaign.result)
                if result is None:
                    return
                self.result = result
                done = int(self.campaign.progress()["finished"])
            else:
                done = len(self.result.rows)
            self.progress.value = min(done, self.progress.max)
            self.progress_label.value = f"{done} of {self.cells_total} cells finished"
            if done >= self.cells_total:
                style_progress(self.progress, "done")
            set_choices(self, self.learner, self._learners(), preferred=(self._first, "dr"))
            self.update_fits()
            self.update_overlap()

    def update_fits(self):
        """Regret exponents of every learner (``PolicyResult.fit_all``) and the regret curves."""
        from manireg.plots.policy import plot_regret_curves

        with self._lock:
            result = self.result
            if not self._learners():
                self.fits, self.unfitted = {}, {}
                self.exponent_html.value = caption_html("no finished cells yet")
                self._set_status("no finished cells yet")
                return
            settings = self.fit_settings()
            self._set_busy(f"fitting the regret curves ({settings['n_boot']:,} bootstrap draws per learner)")
            table = self._call("the regret fits", result.fit_all, **settings)
            if table is None:
                self.fits, self.unfitted = {}, {}
                self.exponent_html.value = caption_html("no fit: see the message below")
                return
            notes = list(self.notes)
            self.fits, self.unfitted = dict(table.fits), result.unfitted()
            self.exponent_html.value = self._exponent_text()
            fits, rows = self.fits, result.rows
            self._call("the regret plot", self._draw, self.regret_image,
                       lambda ax: plot_regret_curves(rows, fits, ax=ax), (6.6, 4.4))
            self.notes = notes
            if self.error is None:
                self._set_status(self._fit_status() or "fitted")

    def _fit_status(self) -> str:
        """The selected learner's regret exponent in one line ("" when there is nothing to say)."""
        fit = self.fits.get(self.learner.value)
        if fit is not None:
            return f"{fit.learner}: regret exponent {fmt(fit.exponent)} {fmt_interval(fit.interval)}, {fit.verdict}"
        if self.learner.value in self.unfitted:
            return f"{self.learner.value}: regret not fitted"
        return ""

    def _exponent_text(self) -> str:
        if not self.result.truth:
            return caption_html("regret needs the true mean rewards, which logged data from a table do not have; "
                                "no regret exponent")
        rows = []
        for name, fit in self.fits.items():
            role = "measured" if fit.verdict == "measured" else "unverified"
            pct = int(round(100 * fit.level))
            label = f"<b>{html.escape(name)}</b>" if name == self.learner.value else html.escape(name)
            rows.append((label, f"{fmt(fit.exponent)}, {pct}% interval {fmt_interval(fit.interval)}",
                         colour_span(fit.verdict, role, bold=True), html.escape(_plain_reason(fit.verdict_reason))))
        for name, why in self.unfitted.items():
            rows.append((html.escape(name), "not fitted", "", html.escape(why)))
        return ("<b>regret exponents</b>"
                + caption_html("no predicted exponent: no verified reference rate for policy regret")
                + table_html(rows, header=("learner", "exponent", "verdict", "why")))

    def update_overlap(self):
        """Overlap of the selected learner's cells (``PolicyResult.overlap``): histogram and table."""
        from manireg.plots.policy import plot_overlap

        with self._lock:
            if not self._learners():
                self.overlap = {}
                self.overlap_html.value = ""
                return
            ov = self._call("the overlap diagnostics", self.result.overlap, self.learner.value, _show=False)
            if ov is None:
                self.overlap = {}
                self.overlap_html.value = colour_span(self.last_message or "", "error")
                return
            self.overlap = ov
            self._call("the overlap plot", self._draw, self.overlap_image, lambda ax: plot_overlap(ov, ax=ax),
                       (6.4, 3.8))
            columns = zip(ov["sizes"], ov["min"], ov["ess"], ov["ess_fraction"], ov["clipped_share"])
            rows = [(fmt_count(n), fmt(m, 4), fmt(e, 1), fmt(f), fmt(c)) for n, m, e, f, c in columns]
            clip = self.result.clip
            self.overlap_html.value = (
                "<b>overlap (mean over repeats)</b>"
                + caption_html(f"{self.result.propensity_source} propensities; clipping "
                               + (f"at {clip:g}" if clip else "off"))
                + table_html(rows, header=("size n", "smallest propensity", "effective sample size",
                                           "effective share of n", "clipped share")))

    def draw_policy(self):
        """Refit the chosen cell (``learned_policy``) and draw its policy on the 2-D view of the test rows."""
        from manireg.curves import policy as core
        from manireg.plots.policy import plot_policy_map

        if self.campaign is None:
            self._set_error("the learned policy", ValueError(
                "it needs the campaign's data; pass the PolicyCampaign instead of its result."))
            return
        if self.running:
            self._set_error("the learned policy", ValueError("the campaign is running; pause it first."))
            return
        learner, n, repeat = self.learner.value, self.map_n.value, int(self.map_repeat.value)
        if learner is None or n is None:
            self._set_error("the learned policy", ValueError("no learner yet; run the campaign first."))
            return
        self._set_busy(f"refitting the cell of {learner} at n = {fmt_count(n)}, repeat {repeat}")
        pmap = self._call("the learned policy", core.learned_policy, self.campaign, learner, n=n, repeat=repeat,
                          max_points=self.max_points)
        self.policy_map = pmap
        if pmap is None:
            self.map_image.layout.display = "none"
            return

        def draw(fig):
            plot_policy_map(pmap, fig=fig)

        self._call("the learned-policy plot", self._draw_figure, self.map_image, draw,
                   (5.2 * (2 if pmap.optimal is not None else 1), 4.4))
        text = (f"{html.escape(learner)} at n = {fmt_count(n)}, repeat {repeat}; the view's two components keep "
                f"{fmt(100 * pmap.explained, 1)}% of the variance")
        if pmap.agreement is not None:
            text += f"; the learned action is the optimal one on {fmt(100 * pmap.agreement, 1)}% of the points"
        self.map_html.value = caption_html(text)
        if self.error is None:
            self._set_status(f"learned policy drawn: {learner} at n = {fmt_count(n)}, repeat {repeat}")

    @staticmethod
    def _draw_figure(image, draw, figsize):
        """Like ``Panel._draw`` for figure functions that lay out their own axes on a given Figure."""
        from matplotlib.figure import Figure

        from ._base import figure_png

        fig = Figure(figsize=figsize, dpi=90, layout="constrained")
        draw(fig)
        image.value = figure_png(fig)
        image.layout.display = None

    def results(self) -> PolicyResults:
        return PolicyResults(learner=self.learner.value, fits=dict(self.fits), unfitted=dict(self.unfitted),
                             overlap=dict(self.overlap), policy_map=self.policy_map, fit_settings=self.fit_settings(),
                             cells_done=int(self.progress.value), cells_total=self.cells_total,
                             rows=None if self.result is None else self.result.rows)
