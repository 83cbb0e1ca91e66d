"""Synthetic manifolds with known geometry, Hölder targets, and loaders for user tables."""

from .io import SUPPORTED_FORMATS, Table, load_table
from .manifolds import (
    GENERATORS,
    ManifoldSample,
    graph_manifold,
    helix,
    random_embedding,
    render_pebble,
    rendered_objects,
    sphere,
    swiss_roll,
    torus,
)
from .scenarios import pebble_scenario
from .targets import HolderTarget, RegressionSample, holder_target, make_regression

__all__ = [
    "GENERATORS", "ManifoldSample", "graph_manifold", "helix", "random_embedding", "render_pebble",
    "rendered_objects", "sphere", "swiss_roll", "torus", "HolderTarget", "RegressionSample",
    "holder_target", "make_regression", "pebble_scenario", "SUPPORTED_FORMATS", "Table", "load_table",
]
