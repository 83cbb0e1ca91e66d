"""What every dimension estimator shares: the result record, the base class and the bootstrap helpers.

:class:`_DimensionEstimator` checks the estimator's parameter table (:mod:`manireg._params`) when ``fit``
starts, asks the shared neighbour layer for the graph and builds the :class:`DimensionEstimate` summary.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from sklearn.base import BaseEstimator
from sklearn.utils.validation import check_is_fitted

from ..._params import check_attributes, choice, seed
from ..._results import ResultMixin
from ..._validation import check_points, warn
from ..neighbors import kneighbors

__all__ = ["DimensionEstimate"]


@dataclass
class DimensionEstimate(ResultMixin):
    """One estimator's result: the value, an interval where the method gives one, and the data counts."""

    estimator: str
    dimension: float
    lower: float = math.nan
    upper: float = math.nan
    interval_kind: str = "none"
    n_samples: int = 0
    n_duplicates: int = 0
    params: dict = field(default_factory=dict)


_NEIGHBOR_PARAMS = {
    "neighbor_method": choice("auto", "exact", "approximate"),
    "random_state": seed(),
}


class _DimensionEstimator(BaseEstimator):
    """Shared behaviour: parameter checks, the neighbour query and the summary."""

    _parameter_constraints: dict = {}
    _name = ""

    def _validate(self) -> dict:
        return check_attributes(self, self._parameter_constraints)

    def _graph(self, X, k: int, p: dict):
        owner = type(self).__name__
        X = check_points(X, owner=owner, min_samples=2)
        graph = kneighbors(X, k, method=p["neighbor_method"], random_state=p["random_state"], owner=owner,
                           warn_duplicates=False)
        if graph.n_duplicates:  # warned on every fit, also when the graph comes from the cache
            warn(f"{owner}: collapsed {graph.n_duplicates} exact duplicate row(s) of X before the neighbour search "
                 f"({graph.n_points} distinct points remain); zero distances would break the log-distance "
                 "estimators.", stacklevel=4)
        self.n_samples_ = X.shape[0]
        self.n_features_in_ = X.shape[1]
        self.n_duplicates_ = graph.n_duplicates
        return graph

    def _interval(self):
        return (math.nan, math.nan), "none"

    def summary(self) -> DimensionEstimate:
        """The fitted result as a :class:`DimensionEstimate` (raises ``NotFittedError`` before ``fit``)."""
        check_is_fitted(self, "dimension_")
        (lo, hi), kind = self._interval()
        return DimensionEstimate(self._name, float(self.dimension_), lo, hi, kind, self.n_samples_,
                                 self.n_duplicates_, self.get_params())


class _LocalDimensionEstimator(_DimensionEstimator):
    """An estimator with a value per point (``local_dimension_``), which ``fit_transform`` returns."""

    def fit_transform(self, X, y=None):
        """Fit and return the per-row local dimensions."""
        return self.fit(X).local_dimension_


def _bootstrap(values: np.ndarray, stat, n_boot: int, rng) -> np.ndarray:
    """Statistic on ``n_boot`` resamples (with replacement) of the rows of ``values``."""
    n = values.shape[0]
    out = np.empty(n_boot)
    for b in range(n_boot):
        out[b] = stat(values[rng.integers(0, n, n)])
    return out


def _bootstrap_mean_ratio(values: np.ndarray, n_boot: int, rng, chunk: int = 64) -> np.ndarray:
    """Bootstrap means of a 1-D array, vectorised in chunks of replicates."""
    n = values.shape[0]
    out = np.empty(n_boot)
    for s in range(0, n_boot, chunk):
        e = min(s + chunk, n_boot)
        idx = rng.integers(0, n, (e - s, n))
        out[s:e] = values[idx].mean(axis=1)
    return out


def _percentile(stats: np.ndarray, level: float):
    a = (1.0 - level) / 2.0
    lo, hi = np.quantile(stats, [a, 1.0 - a])
    return (float(lo), float(hi))
