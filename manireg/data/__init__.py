"""Synthetic manifolds with known geometry, Hölder targets, and loaders for user tables."""

from .io import SUPPORTED_FORMATS, Table, load_table
from .lazy import LAZY_FORMATS, LazyTable, open_table
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
from .writers import DiskSample, write_synthetic

__all__ = [
    "GENERATORS", "ManifoldSample", "graph_manifold", "helix", "random_embedding", "render_pebble",
    "rendered_objects", "sphere", "swiss_roll", "torus", "HolderTarget", "RegressionSample",
    "holder_target", "make_regression", "pebble_scenario", "SUPPORTED_FORMATS", "Table", "load_table",
    "LAZY_FORMATS", "LazyTable", "open_table", "DiskSample", "write_synthetic",
]
