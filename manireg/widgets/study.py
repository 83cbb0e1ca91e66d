"""StudyPanel: the geometry, sizing and learning-curve panels in tabs, passing d and s between them.

The consensus dimension of the geometry tab sets d in the sizing tab; d and s of the sizing tab are the ones
a study created in the curves tab is run with (they size its networks and its baselines) and the ones its
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

__all__ = ["StudyPanel", "StudyResults"]


@dataclass
class StudyResults(ResultMixin):
    """Current results of a :class:`StudyPanel` (None for a tab not in use yet)."""

    geometry: object
    sizing: object
    curves: object


class StudyPanel(Panel):
    """Geometry, sizing and learning curves of one data set in three tabs.

    Parameters
    ----------
    X : array of shape (n, D)
    y : array of shape (n,)
    s : float, default=1.0
        Initial smoothness.
    f_clean : array, optional
        Noise-free target (synthetic data), stored with the study rows.
    study : Study, optional
        An existing study for the curves tab (then the tab needs no set-up).
    sizes, repeats, learners, seed, store : passed to :class:`manireg.curves.study.Study` when the study is
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
    curves : CurvePanel or None (until a study exists)
    tabs : ipywidgets.Tab
    """

    title = "Study"

    def __init__(self, X, y, *, s=1.0, f_clean=None, study=None, sizes=None, repeats=3, learners=("net", "knn"),
                 seed=0, store=None, noise_variance=None, geometry_kwargs=None, target_error=None, auto=True):
        super().__init__()
        self.X, self.y, self.f_clean = X, y, f_clean
        self._study_kwargs = {"sizes": None if sizes is None else list(sizes), "repeats": int(repeats),
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
        self.create_button = widgets.Button(description="Create study with current d and s", button_style="primary",
                                            layout=widgets.Layout(width="300px"))
        self.create_button.on_click(lambda b: self.create_study())
        self.curves_box = widgets.VBox([
            widgets.HTML("The study uses d and s from the sizing tab; rows are kept in the store, so a paused "
                         "run resumes where it stopped."),
            self.sizes_text, self.repeats_input, self.create_button,
        ])
        self.tabs = widgets.Tab(children=(self.geometry, self.sizing, self.curves_box))
        for i, name in enumerate(("Geometry", "Sizing", "Learning curves")):
            self.tabs.set_title(i, name)
        self.children = (self.tabs, self.status, self.out)
        if study is not None:
            self.create_study(study)

    def _on_dimension(self, change):
        if change["new"] is not None:
            self.sizing.d.value = round(float(change["new"]), 2)
            if self.curves is not None:
                self.curves.d.value = float(self.sizing.d.value)

    def study_settings(self) -> dict:
        """Keyword arguments of the Study created from the curves tab."""
        sizes = [int(float(t)) for t in self.sizes_text.value.replace(";", ",").split(",") if t.strip()]
        return {**self._study_kwargs, "sizes": sizes or None, "repeats": int(self.repeats_input.value),
                "d": float(self.sizing.d.value), "s": float(self.sizing.s.value)}

    def create_study(self, study=None):
        """Make the study (or take the given one) and put a CurvePanel for it into the curves tab."""
        from manireg.curves.study import Study

        if study is None:
            kwargs = self._call("reading the study settings", self.study_settings)
            if kwargs is None:
                return None
            study = self._call("creating the study", Study, X=self.X, y=self.y, f_clean=self.f_clean,
                               store=self._store, **kwargs)
            if study is None:
                return None
            if self._noise_variance is not None:
                study.data.noise_variance = float(self._noise_variance)
        curves = self._call("curve panel", CurvePanel, study, target_error=self._target_error)
        if curves is None:
            return None
        self.curves = curves
        traitlets.dlink((self.sizing.s, "value"), (curves.s, "value"))
        self.curves_box.children = (curves,)
        self._set_status(f"study created: {len(study.cells())} cells, d={study.data.d:g}, s={study.data.s:g}")
        return study

    def results(self) -> StudyResults:
        return StudyResults(geometry=self.geometry.results(), sizing=self.sizing.results(),
                            curves=None if self.curves is None else self.curves.results())
