"""ReLU network builders, the batched trainers (dense and residual convolutional) and a scikit-learn style
regressor.

Names are imported on first use (see :mod:`manireg._lazy`): the trainer does not need scikit-learn, the
regressor does.
"""

from manireg._lazy import lazy_namespace

_EXPORTS = {
    ".builders": ["build_network", "build_conv_network", "init_parameters", "project_weights", "prune_to_budget",
                  "apply_masks", "count_parameters", "count_nonzero_weights", "ClipOutput", "OutputScale",
                  "Standardize", "ReLUNetwork", "ResidualConvNetwork"],
    ".training": ["TrainConfig", "ReplicaTask", "ReplicaResult", "BatchedTrainer", "lr_at_step", "resolve_precision"],
    ".regressor": ["NetworkRegressor"],
    ".conv": ["BatchedConvTrainer", "conv_forward", "check_image_shape"],
}

__getattr__, __dir__, __all__ = lazy_namespace(__name__, _EXPORTS)
