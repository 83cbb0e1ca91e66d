"""manireg: intrinsic geometry, network sizing and learning-curve campaigns for data near a manifold.

``import manireg as mr`` gives the names a campaign needs; the subpackages hold the rest:
:mod:`manireg.data`, :mod:`manireg.geometry`, :mod:`manireg.theory`, :mod:`manireg.nets`,
:mod:`manireg.curves`, :mod:`manireg.plots` and :mod:`manireg.widgets` (notebook panels).

Names are imported on first use (``mr.Campaign`` imports :mod:`manireg.curves.campaign` then), so
``import manireg`` is quick and a campaign's worker processes load only what they run.
"""

from manireg._lazy import lazy_namespace

__version__ = "0.1.0"

_EXPORTS = {
    ".curves": ["LearnerSpec", "ResultStore", "Campaign", "CampaignResult", "capacity_readout", "extrapolation_check",
                "fit_all", "fit_exponent", "noise_variance", "plan_samples"],
    ".data": ["graph_manifold", "helix", "load_table", "make_regression", "pebble_scenario", "rendered_objects",
              "sphere", "swiss_roll", "torus"],
    ".geometry": ["ChartAtlas", "CorrelationDimension", "LocalPCADimension", "MLEDimension", "TwoNNDimension",
                  "chart_counts", "describe_geometry", "dimension_profile", "embed_2d", "estimate_curvature",
                  "estimate_dimension", "estimate_reach", "resolution_check"],
    ".nets": ["BatchedTrainer", "NetworkRegressor", "TrainConfig", "build_network"],
    ".theory": ["SizingConstants", "ambient_exponent", "implied_dimension", "implied_smoothness",
                "predicted_error", "regression_exponent", "size_network"],
}
_SUBPACKAGES = ("curves", "data", "geometry", "nets", "plots", "theory", "widgets")

__getattr__, __dir__, _names = lazy_namespace(__name__, _EXPORTS, _SUBPACKAGES)
__all__ = ["__version__", *_names]
