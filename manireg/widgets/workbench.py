"""WorkbenchPanel: the geometry, sizing and learning-curve panels in tabs, passing d and s between them.

The consensus dimension of the geometry tab sets d in the sizing tab; d and s of the sizing tab are the ones
a campaign created in the curves tab is run with (they size its networks and its baselines) and the ones its
exponent is compared with.
"""

from __future__ import annotations

from dataclasses import dataclass

import ipywidgets as widgets
import numpy as np
import traitlets

from .._results import ResultMixin
from ._base import Panel
from .curves import CurvePanel
from .geometry import GeometryPanel
from .sizing import SizingPanel

__all__ = ["WorkbenchPanel", "WorkbenchResults"]


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
    s : float, default=1.0
        Initial smoothness.
    f_clean : array, optional
        Noise-free target (synthetic data), stored with the campaign rows.
    campaign : Campaign, optional
        An existing campaign for the curves tab (then the tab needs no set-up).
    sizes, repeats, learners, seed, store : passed to :class:`manireg.curves.campaign.Campaign` when the campaign is
        created from the curves tab.
    noise_variance : float, optional
        Known noise variance (synthetic data) for the "estimate" floor.
    geometry_kwargs : dict, optional
        Passed to :class:`GeometryPanel` (e.g. ``estimators``, ``scales``, ``true_dimension``).
    target_error : float, optional
        Initial target of the planner.

    Attributes
    ----------
    geometry : GeometryPanel
    sizing : SizingPanel
    curves : CurvePanel or None (until a campaign exists)
    tabs : ipywidgets.Tab
    """

    title = "Campaign"

    def __init__(self, X, y, *, s=1.0, f_clean=None, campaign=None, sizes=None, repeats=3, learners=("net", "knn"),
                 seed=0, store=None, noise_variance=None, geometry_kwargs=None, target_error=None, auto=True):
        super().__init__()
        self.X, self.y, self.f_clean = X, y, f_clean
        self._campaign_kwargs = {"sizes": None if sizes is None else list(sizes), "repeats": int(repeats),
                              "learners": list(learners), "seed": int(seed)}
        self._store = store
        self._noise_variance = noise_variance
        self._target_error = target_error
        self.geometry = GeometryPanel(X, y, auto=auto, **(geometry_kwargs or {}))
        n, D = np.shape(X)
        d0 = self.geometry.dimension or 2.0
        self.sizing = SizingPanel(n=int(n), d=round(float(d0), 2), s=float(s), input_dim=int(D))
        self.geometry.observe(self._on_dimension, names="consensus")
        self.curves = None

        style = {"description_width": "120px"}
        self.sizes_text = widgets.Text(value="" if sizes is None else ", ".join(str(int(v)) for v in sizes),
                                       description="sizes n", placeholder="empty: default grid", style=style,
                                       layout=widgets.Layout(width="460px"))
        self.repeats_input = widgets.BoundedIntText(value=int(repeats), min=1, max=1000, description="repeats",
                                                    style=style, layout=widgets.Layout(width="220px"))
        self.create_button = widgets.Button(description="Create campaign with current d and s", button_style="primary",
                                            layout=widgets.Layout(width="300px"))
        self.create_button.on_click(lambda b: self.create_campaign())
        self.curves_box = widgets.VBox([
            widgets.HTML("The campaign uses d and s from the sizing tab; rows are kept in the store, so a paused "
                         "run resumes where it stopped."),
            self.sizes_text, self.repeats_input, self.create_button,
        ])
        self.tabs = widgets.Tab(children=(self.geometry, self.sizing, self.curves_box))
        for i, name in enumerate(("Geometry", "Sizing", "Learning curves")):
            self.tabs.set_title(i, name)
        self.children = (self.tabs, self.status, self.out)
        if campaign is not None:
            self.create_campaign(campaign)

    def _on_dimension(self, change):
        if change["new"] is not None:
            self.sizing.d.value = round(float(change["new"]), 2)
            if self.curves is not None:
                self.curves.d.value = float(self.sizing.d.value)

    def campaign_settings(self) -> dict:
        """Keyword arguments of the Campaign created from the curves tab."""
        sizes = [int(float(t)) for t in self.sizes_text.value.replace(";", ",").split(",") if t.strip()]
        return {**self._campaign_kwargs, "sizes": sizes or None, "repeats": int(self.repeats_input.value),
                "d": float(self.sizing.d.value), "s": float(self.sizing.s.value)}

    def create_campaign(self, campaign=None):
        """Make the campaign (or take the given one) and put a CurvePanel for it into the curves tab."""
        from manireg.curves.campaign import Campaign

        if campaign is None:
            kwargs = self._call("reading the campaign settings", self.campaign_settings)
            if kwargs is None:
                return None
            campaign = self._call("creating the campaign", Campaign, X=self.X, y=self.y, f_clean=self.f_clean,
                               store=self._store, **kwargs)
            if campaign is None:
                return None
            if self._noise_variance is not None:
                campaign.data.noise_variance = float(self._noise_variance)
        curves = self._call("curve panel", CurvePanel, campaign, target_error=self._target_error)
        if curves is None:
            return None
        self.curves = curves
        traitlets.dlink((self.sizing.s, "value"), (curves.s, "value"))
        self.curves_box.children = (curves,)
        self._set_status(f"campaign created: {len(campaign.cells())} cells, d={campaign.data.d:g}, s={campaign.data.s:g}")
        return campaign

    def results(self) -> WorkbenchResults:
        return WorkbenchResults(geometry=self.geometry.results(), sizing=self.sizing.results(),
                            curves=None if self.curves is None else self.curves.results())
