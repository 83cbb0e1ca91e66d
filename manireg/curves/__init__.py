"""Learning curves: campaign plans, the result store, execution, baselines, exponent fits and the planner.

Names are imported on first use (see :mod:`manireg._lazy`).
"""

from manireg._lazy import lazy_namespace

_EXPORTS = {
    ".baselines": ["kernel_ridge_regress", "knn_k", "knn_regress"],
    ".comparison": ["TheoryComparison", "compare_with_theory"],
    ".execution": ["EXECUTORS", "run_cells"],
    ".fitting": ["ExponentFit", "ExponentTable", "FloorChoice", "PowerLawFit", "exponent_scan", "fit_all",
                 "fit_exponent", "fit_power_law", "floor_model", "local_slopes"],
    ".floors": ["DEFAULT_FLOOR", "FLOOR_CHOICES", "choose_floor", "describe_floor", "parse_floor"],
    ".learners": ["LEARNER_KINDS", "LearnerSpec", "register_learner"],
    ".noise": ["NoiseEstimate", "noise_variance"],
    ".planning": ["CapacityReadout", "ExtrapolationCheck", "SamplePlan", "capacity_readout", "extrapolation_check",
                  "plan_samples"],
    ".readout": ["ReadOut", "read_out"],
    ".store": ["ResultStore", "StoreError"],
    ".campaign": ["Campaign", "CampaignResult"],
    ".sweep": ["Cell", "CampaignSpec", "default_sizes", "expand"],
    ".smoothness": ["SmoothnessEstimate", "estimate_smoothness"],
    ".tracking": ["TrackingResult", "track_rates"],
}

__getattr__, __dir__, __all__ = lazy_namespace(__name__, _EXPORTS)
