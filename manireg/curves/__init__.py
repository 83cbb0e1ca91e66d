"""Learning curves: study plans, the result store, execution, baselines, exponent fits and the planner."""

from .baselines import kernel_ridge_regress, knn_k, knn_regress
from .execution import EXECUTORS, run_cells
from .fitting import ExponentFit, ExponentTable, PowerLawFit, fit_all, fit_exponent, fit_power_law, local_slopes
from .learners import LEARNER_KINDS, LearnerSpec, register_learner
from .noise import NoiseEstimate, noise_variance
from .planning import CapacityReadout, ExtrapolationCheck, SamplePlan, capacity_readout, extrapolation_check, plan_samples
from .store import ResultStore, StoreError
from .study import Study, StudyResult
from .sweep import Cell, StudySpec, default_sizes, expand

__all__ = [
    "kernel_ridge_regress", "knn_k", "knn_regress", "EXECUTORS", "run_cells", "ExponentFit", "ExponentTable",
    "PowerLawFit", "fit_all", "fit_exponent", "fit_power_law", "local_slopes", "LEARNER_KINDS", "LearnerSpec",
    "register_learner", "NoiseEstimate", "noise_variance", "CapacityReadout", "ExtrapolationCheck", "SamplePlan",
    "capacity_readout", "extrapolation_check", "plan_samples", "ResultStore", "StoreError", "Study",
    "StudyResult", "Cell", "StudySpec", "default_sizes", "expand",
]
