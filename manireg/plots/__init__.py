"""Figure functions. Each takes result objects (plus ``ax=``) and returns a matplotlib Figure.

Plotting never recomputes: every number drawn comes from a core result object.
"""

from .charts import plot_chart_counts, plot_curvature, plot_embedding, plot_reach, plot_spectra
from .curves import plot_learning_curves, plot_local_slopes
from .policy import plot_overlap, plot_policy_map, plot_regret_curves, plot_value_estimates
from .dimension import plot_dimension_calibration, plot_dimension_estimates, plot_dimension_profile
from .sizing import plot_sizing

__all__ = [
    "plot_chart_counts", "plot_curvature", "plot_embedding", "plot_reach", "plot_spectra",
    "plot_learning_curves", "plot_local_slopes", "plot_dimension_estimates", "plot_dimension_profile", "plot_dimension_calibration",
    "plot_sizing", "plot_overlap", "plot_policy_map", "plot_regret_curves", "plot_value_estimates",
]
