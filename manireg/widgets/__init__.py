"""Notebook panels (ipywidgets): geometry, sizing, learning curves, policy campaigns, and a campaign panel holding
geometry, sizing and learning curves.

Each panel wires controls to core calls and draws with the figure functions of :mod:`manireg.plots`; it
holds no numerical code. ``panel.results()`` returns a dataclass of the current results.
"""

from .curves import CurvePanel, CurveResults
from .geometry import GeometryPanel, GeometryResults
from .policy import PolicyPanel, PolicyResults
from .sizing import SizingPanel, SizingResults
from .workbench import WorkbenchPanel, WorkbenchResults

__all__ = ["GeometryPanel", "GeometryResults", "SizingPanel", "SizingResults", "CurvePanel", "CurveResults",
           "WorkbenchPanel", "WorkbenchResults", "PolicyPanel", "PolicyResults"]
