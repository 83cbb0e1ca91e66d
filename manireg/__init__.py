"""manireg: intrinsic geometry, network sizing and learning-curve studies for data near a manifold.

``import manireg as mr`` gives the names a study needs; the subpackages hold the rest:
:mod:`manireg.data`, :mod:`manireg.geometry`, :mod:`manireg.theory`, :mod:`manireg.nets`,
:mod:`manireg.curves`, :mod:`manireg.plots` and :mod:`manireg.widgets` (notebook panels).
"""

__version__ = "0.1.0"

from .curves import (
    LearnerSpec,
    ResultStore,
    Study,
    StudyResult,
    capacity_readout,
    extrapolation_check,
    fit_all,
    fit_exponent,
    noise_variance,
    plan_samples,
)
from .data import graph_manifold, helix, load_table, make_regression, pebble_scenario, rendered_objects, sphere, swiss_roll, torus
from .geometry import (
    ChartAtlas,
    CorrelationDimension,
    LocalPCADimension,
    MLEDimension,
    TwoNNDimension,
    chart_counts,
    describe_geometry,
    dimension_profile,
    embed_2d,
    estimate_curvature,
    estimate_dimension,
    estimate_reach,
    resolution_check,
)
from .nets import BatchedTrainer, NetworkRegressor, TrainConfig, build_network
from .theory import (
    SizingConstants,
    ambient_exponent,
    implied_dimension,
    implied_smoothness,
    predicted_error,
    regression_exponent,
    size_network,
)

__all__ = [
    "__version__", "LearnerSpec", "ResultStore", "Study", "StudyResult", "capacity_readout", "extrapolation_check",
    "fit_all", "fit_exponent", "noise_variance", "plan_samples", "graph_manifold", "helix", "load_table",
    "make_regression", "pebble_scenario", "rendered_objects", "sphere", "swiss_roll", "torus", "ChartAtlas",
    "CorrelationDimension", "LocalPCADimension", "MLEDimension", "TwoNNDimension", "chart_counts",
    "describe_geometry", "dimension_profile", "embed_2d", "estimate_curvature", "estimate_dimension",
    "estimate_reach", "resolution_check", "BatchedTrainer", "NetworkRegressor", "TrainConfig", "build_network",
    "SizingConstants", "ambient_exponent", "implied_dimension", "implied_smoothness", "predicted_error",
    "regression_exponent", "size_network",
]
