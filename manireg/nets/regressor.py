"""A scikit-learn style regressor: one ReLU network sized by the manifold rules, trained by the batched
trainer.

Kept apart from :mod:`manireg.nets.training` so that the trainer (what campaign workers import) does not pull
in scikit-learn.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import torch
from sklearn.base import BaseEstimator, RegressorMixin
from sklearn.utils.validation import check_is_fitted

from manireg._params import check_attributes, instance, seed
from manireg._threads import torch_threads
from manireg._validation import DataValidationError, check_float, check_points, check_target, make_rng
from manireg.nets.training import TRAIN_RULES, BatchedTrainer, ReplicaTask, TrainConfig
from manireg.theory.sizing import SizingConstants, size_network

__all__ = ["NetworkRegressor"]

#: The :class:`TrainConfig` fields a :class:`NetworkRegressor` takes as its own parameters: same names, same
#: defaults (read from TrainConfig below) and same rules (``TRAIN_RULES``).
TRAIN_PARAMS = ("learning_rate", "schedule", "batch_size", "full_batch_threshold", "max_steps", "max_seconds",
                "min_steps", "patience_steps", "validation_fraction", "project_weights", "prune", "precision",
                "n_threads")
_T = {f.name: f.default for f in dataclasses.fields(TrainConfig)}


class NetworkRegressor(RegressorMixin, BaseEstimator):
    """ReLU network regressor sized by the manifold rules and trained by :class:`BatchedTrainer`.

    Parameters
    ----------
    dimension : float or None, default=None
        Intrinsic dimension d used for sizing; None uses the number of features (no manifold assumed).
        Estimate it with :mod:`manireg.geometry`.
    smoothness : float, default=1.0
        Assumed Hölder smoothness s of the target.
    sizing_constants : SizingConstants or None
        Constants of :func:`~manireg.theory.size_network`.
    width_multiplier : float, default=1.0
        Extra factor on the width.
    output_bound : float, "auto" or None, default="auto"
        Output clipping bound; "auto" uses ``1.1 * max|y_train|``; None disables clipping.
    learning_rate, schedule, batch_size, full_batch_threshold, max_steps, max_seconds, min_steps,
    patience_steps, validation_fraction, project_weights, prune, precision, n_threads
        As in :class:`~manireg.nets.training.TrainConfig`.
    random_state : int or None
        Seed of the validation split, the initial weights and the minibatch stream.

    Attributes
    ----------
    spec_ : ArchitectureSpec
    model_ : ReLUNetwork
        The trained network (restored best-validation weights).
    result_ : ReplicaResult
    n_features_in_ : int

    References
    ----------
    .. [4] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(300, 4)); y = np.cos(X[:, 0])
    >>> reg = NetworkRegressor(dimension=1, max_steps=200, random_state=0).fit(X, y)
    >>> reg.predict(X[:3]).shape
    (3,)
    """

    # d, s and width_multiplier are checked by size_network, output_bound in fit ("auto", None or a real > 0)
    _parameter_constraints = {
        "sizing_constants": instance(SizingConstants, none=True),
        **{name: TRAIN_RULES[name] for name in TRAIN_PARAMS if name in TRAIN_RULES},
        "random_state": seed(none=True, generator=True),
    }

    # scikit-learn's get_params reads the parameters from this signature, so it lists them one by one
    def __init__(
        self,
        *,
        dimension=None,
        smoothness=1.0,
        sizing_constants=None,
        width_multiplier=1.0,
        output_bound="auto",
        learning_rate=_T["learning_rate"],
        schedule=_T["schedule"],
        batch_size=_T["batch_size"],
        full_batch_threshold=_T["full_batch_threshold"],
        max_steps=_T["max_steps"],
        max_seconds=_T["max_seconds"],
        min_steps=_T["min_steps"],
        patience_steps=_T["patience_steps"],
        validation_fraction=_T["validation_fraction"],
        project_weights=_T["project_weights"],
        prune=_T["prune"],
        precision=_T["precision"],
        n_threads=_T["n_threads"],
        random_state=None,
    ):
        self.dimension = dimension
        self.smoothness = smoothness
        self.sizing_constants = sizing_constants
        self.width_multiplier = width_multiplier
        self.output_bound = output_bound
        self.learning_rate = learning_rate
        self.schedule = schedule
        self.batch_size = batch_size
        self.full_batch_threshold = full_batch_threshold
        self.max_steps = max_steps
        self.max_seconds = max_seconds
        self.min_steps = min_steps
        self.patience_steps = patience_steps
        self.validation_fraction = validation_fraction
        self.project_weights = project_weights
        self.prune = prune
        self.precision = precision
        self.n_threads = n_threads
        self.random_state = random_state

    def _config(self) -> TrainConfig:
        """The trainer's settings: this regressor's copies of the :data:`TRAIN_PARAMS` fields, as given."""
        return TrainConfig(**{name: getattr(self, name) for name in TRAIN_PARAMS})

    def fit(self, X, y):
        """Size the network for ``len(X)``, train it with validation early stopping, return ``self``."""
        owner = "NetworkRegressor"
        check_attributes(self, self._parameter_constraints, owner=owner)
        X = check_points(X, min_samples=3, owner=owner)
        y = check_target(y, len(X), owner=owner)
        config = self._config()
        D = X.shape[1]
        d = D if self.dimension is None else self.dimension
        if self.output_bound == "auto":
            bound = 1.1 * float(np.abs(y).max()) if np.abs(y).max() > 0 else 1.0
        elif self.output_bound is None:
            bound = math.inf
        else:
            bound = check_float(self.output_bound, "output_bound", owner=owner, low=0.0, low_open=True)
        rng = make_rng(self.random_state)
        n_val = max(1, int(round(config.validation_fraction * len(X))))
        if len(X) - n_val < 2:
            raise DataValidationError(f"{owner}: X has {len(X)} rows; too few to hold out a validation set.")
        perm = rng.permutation(len(X))
        tr, va = perm[n_val:], perm[:n_val]
        self.spec_ = size_network(
            len(tr), d, self.smoothness, D, constants=self.sizing_constants,
            width_multiplier=self.width_multiplier, output_bound=bound,
        )
        seed = int(rng.integers(0, 2**31 - 1))
        trainer = BatchedTrainer(self.spec_, config)
        (self.result_,) = trainer.fit([ReplicaTask(X[tr], y[tr], X[va], y[va], seed=seed)])
        self.model_ = self.result_.to_module()
        self.n_features_in_ = D
        return self

    def predict(self, X):
        """Predictions of the trained network, shape (m,)."""
        check_is_fitted(self, "model_")
        X = check_points(X, min_samples=1, owner="NetworkRegressor.predict")
        if X.shape[1] != self.n_features_in_:
            raise DataValidationError(
                f"NetworkRegressor.predict: X has {X.shape[1]} features, but NetworkRegressor is expecting "
                f"{self.n_features_in_} features as input (the number it was fitted with). Pass the same columns."
            )
        with torch_threads(self.n_threads), torch.no_grad():
            return self.model_(torch.from_numpy(X.astype(np.float32))).numpy().astype(np.float64)
