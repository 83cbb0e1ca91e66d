"""ReLU network builders and the batched trainer."""

from manireg.nets.builders import (
    ClipOutput,
    OutputScale,
    ReLUNetwork,
    ResidualConvNetwork,
    Standardize,
    apply_masks,
    build_conv_network,
    build_network,
    count_nonzero_weights,
    count_parameters,
    init_parameters,
    project_weights,
    prune_to_budget,
)
from manireg.nets.training import BatchedTrainer, NetworkRegressor, ReplicaResult, ReplicaTask, TrainConfig, lr_at_step

__all__ = [
    "build_network",
    "build_conv_network",
    "init_parameters",
    "project_weights",
    "prune_to_budget",
    "apply_masks",
    "count_parameters",
    "count_nonzero_weights",
    "ClipOutput",
    "OutputScale",
    "Standardize",
    "ReLUNetwork",
    "ResidualConvNetwork",
    "TrainConfig",
    "ReplicaTask",
    "ReplicaResult",
    "BatchedTrainer",
    "NetworkRegressor",
    "lr_at_step",
]
