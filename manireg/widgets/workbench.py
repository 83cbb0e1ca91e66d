"""WorkbenchPanel: the geometry, sizing and learning-curve panels in tabs, passing d and s between them.

The consensus dimension of the geometry tab sets d in the sizing tab; d and s of the sizing tab, its width
multiplier and its sizing constants are the ones a campaign set up in the curves tab is run with (d and s size
its networks and its baselines; the multiplier and constants go to its net learners) and d and s are the ones
its exponent is compared with.
"""

from __future__ import annotations

from dataclasses import dataclass

import ipywidgets as widgets
import numpy as np
import traitlets

from .._results import ResultMixin
from ._base import Panel
from ._look import caption_html, style_button
from .curves import CurvePanel
from .geometry import GeometryPanel
from .sizing import SizingPanel

__all__ = ["WorkbenchPanel", "WorkbenchResults", "SET_UP_LABEL"]

#: The button that sets up a campaign in the curves tab.
SET_UP_LABEL = "Set up campaign (d, s and network size from the sizing tab)"


@dataclass
class WorkbenchResults(ResultMixin):
    """Current results of a :class:`WorkbenchPanel` (None for a tab not in use yet)."""

    geometry: object
    sizing: object
    curves: object


class WorkbenchPanel(Panel):
    """Geometry, sizing and learning curves of one data set in three tabs.

    Parameters
    ----------
    X : array of shape (n, D)
    y : array of shape (n,)
    smoothness : float, default=1.0
        Initial smoothness s of the sizing tab.
    f_clean : array, optional
        Noise-free target (synthetic data), stored with the campaign rows.
    campaign : Campaign, optional
        An existing campaign for the curves tab (then the tab needs no set-up).
    sizes, repeats, learners, seed, store, name, validation_fraction : passed to
        :class:`manireg.curves.campaign.Campaign` when the campaign is set up from the curves tab (``name`` and
        ``validation_fraction`` only when given). Net learners get the sizing tab's width multiplier and
        constants as their ``width_multiplier`` and ``constants`` parameters.
    noise_variance : float, optional
        True noise variance of synthetic data, recorded with a campaign set up here (the curve panel's floor
        value starts at it; the "estimate" floor uses the campaign's own estimate).
    geometry_kwargs : dict, optional
        Passed to :class:`GeometryPanel` (e.g. ``estimators``, ``scales``, ``true_dimension``).
    target_error : float, optional
        Initial target of the planner.
    auto : bool, default=True
        Compute the geometry read-out at once.

    Attributes
    ----------
    geometry : GeometryPanel
    sizing : SizingPanel
    curves : CurvePanel or None (until a campaign exists)
    tabs : ipywidgets.Tab
    """

    title = "Workbench"

    def __init__(self, X, y, *, smoothness=1.0, f_clean=None, campaign=None, sizes=None, repeats=3,
                 learners=("net", "knn"), seed=0, store=None, name=None, validation_fraction=None,
                 noise_variance=None, geometry_kwargs=None, target_error=None, auto=True):
        super().__init__()
        self.X, self.y, self.f_clean = X, y, f_clean
        self._campaign_kwargs = {"sizes": None if sizes is None else list(sizes), "repeats": int(repeats),
                                 "learners": list(learners), "seed": int(seed)}
        if name is not None:
            self._campaign_kwargs["name"] = str(name)
        if validation_fraction is not None:
            self._campaign_kwargs["validation_fraction"] = float(validation_fraction)
        self._store = store
        self._noise_variance = noise_variance
        self._target_error = target_error
        self.geometry = GeometryPanel(X, y, auto=auto, **(geometry_kwargs or {}))
        n, D = np.shape(X)
        d0 = self.geometry.dimension or 2.0
        self.sizing = SizingPanel(n=int(n), dimension=round(float(d0), 2), smoothness=float(smoothness),
                                  ambient_dim=int(D))
        self.geometry.observe(self._on_dimension, names="consensus")
        self.curves = None

        style = {"description_width": "120px"}
        self.sizes_text = widgets.Text(value="" if sizes is None else ", ".join(str(int(v)) for v in sizes),
                                       description="sizes n", placeholder="empty: the default grid", style=style,
                                       layout=widgets.Layout(width="460px"))
        self.repeats_input = widgets.BoundedIntText(value=int(repeats), min=1, max=1000, description="repeats",
                                                    style=style, layout=widgets.Layout(width="220px"))
        self.create_button = style_button(widgets.Button(description=SET_UP_LABEL,
                                                         layout=widgets.Layout(width="360px")), "run")
        self.create_button.on_click(lambda b: self.create_campaign())
        self.curves_box = widgets.VBox([
            widgets.HTML(caption_html("The campaign uses d, s, the width multiplier and the sizing constants of the "
                                      "sizing tab; rows are kept in the store, so a paused run resumes where it "
                                      "stopped.")),
            self.sizes_text, self.repeats_input, self.create_button,
        ])
        self.tabs = widgets.Tab(children=(self.geometry, self.sizing, self.curves_box))
        for i, title in enumerate(("Geometry", "Sizing", "Learning curves")):
            self.tabs.set_title(i, title)
        self.children = (self.tabs, self.status, self.out)
        if campaign is not None:
            self.create_campaign(campaign)

    def _on_dimension(self, change):
        if change["new"] is not None:
            self.sizing.dimension.value = round(float(change["new"]), 2)
            if self.curves is not None:
                self.curves.dimension_unknown.value = False
                self.curves.dimension.value = float(self.sizing.dimension.value)

    def learner_specs(self) -> list:
        """The campaign's learners, net learners with the sizing tab's width multiplier and every sizing constant
        (those with a control and the others the sizing panel was built with: caps and floors included)."""
        import dataclasses

        from manireg.curves.capacity import NET_KINDS
        from manireg.curves.learners import LEARNER_KINDS, LearnerSpec

        constants = dataclasses.asdict(self.sizing.sizing_constants())
        constants.pop("output_bound")  # a campaign net's output bound is its own parameter ("auto" by default)
        out = []
        for value in self._campaign_kwargs["learners"]:
            spec = LearnerSpec.coerce(value)
            if spec.kind in NET_KINDS:
                params = dict(spec.params)
                params["width_multiplier"] = float(self.sizing.width_multiplier.value)
                params["constants"] = {**dict(params.get("constants") or {}), **constants}
                default = spec.name == LEARNER_KINDS[spec.kind].default_name(spec.params)
                spec = LearnerSpec(spec.kind, name=None if default else spec.name, params=params)
            out.append(spec)
        return out

    def campaign_settings(self) -> dict:
        """Keyword arguments of the Campaign set up from the curves tab."""
        sizes = [int(float(t)) for t in self.sizes_text.value.replace(";", ",").split(",") if t.strip()]
        return {**self._campaign_kwargs, "sizes": sizes or None, "repeats": int(self.repeats_input.value),
                "learners": self.learner_specs(), "dimension": float(self.sizing.dimension.value),
                "smoothness": float(self.sizing.smoothness.value)}

    def create_campaign(self, campaign=None):
        """Set up the campaign (or take the given one) and put a CurvePanel for it into the curves tab."""
        from manireg.curves.campaign import Campaign

        if campaign is None:
            kwargs = self._call("reading the campaign settings", self.campaign_settings)
            if kwargs is None:
                return None
            self._set_busy("setting up the campaign")
            campaign = self._call("setting up the campaign", Campaign, X=self.X, y=self.y, f_clean=self.f_clean,
                                  store=self._store, **kwargs)
            if campaign is None:
                return None
            if self._noise_variance is not None:
                campaign.data.noise_variance = float(self._noise_variance)
        curves = self._call("the curve panel", CurvePanel, campaign, target_error=self._target_error)
        if curves is None:
            return None
        self.curves = curves
        traitlets.dlink((self.sizing.smoothness, "value"), (curves.smoothness, "value"))
        self.curves_box.children = (curves,)
        p = campaign.progress()
        found = (f"; found {p['finished']} finished cells in the store, {p['remaining']} remain" if p["finished"]
                 else "; press Start / resume in the curves tab to run it")
        self._set_status(f"campaign '{campaign.data.name}' set up: {p['total']} cells, d={campaign.data.dimension:g}, "
                         f"s={campaign.data.smoothness:g}{found}")
        return campaign

    def results(self) -> WorkbenchResults:
        return WorkbenchResults(geometry=self.geometry.results(), sizing=self.sizing.results(),
                                curves=None if self.curves is None else self.curves.results())
