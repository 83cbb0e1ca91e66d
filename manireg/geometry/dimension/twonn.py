"""TwoNN dimension from the ratio of second to first neighbour distances: the function and the estimator.

References
----------
.. [1] E. Facco, M. d'Errico, A. Rodriguez and A. Laio, Sci. Rep. 7, 12140 (2017).
.. [2] F. Denti, D. Doimo, A. Laio and A. Mira, Sci. Rep. 12, 20005 (2022).
"""

from __future__ import annotations

import numpy as np

from ..._params import choice, real
from ..._validation import DataValidationError
from ._base import _DimensionEstimator, _NEIGHBOR_PARAMS

__all__ = ["twonn_from_ratios", "twonn_dimension", "TwoNNDimension"]


def _gamma_interval(total: float, shape: int, level: float):
    """Interval for a rate d when d * total ~ Gamma(shape, 1)."""
    from scipy.stats import gamma

    a = (1.0 - level) / 2.0
    return (float(gamma.ppf(a, shape) / total), float(gamma.ppf(1.0 - a, shape) / total))


def twonn_from_ratios(mu: np.ndarray, *, method: str = "mle", discard_fraction: float = 0.1, level: float = 0.95):
    """TwoNN dimension from the ratios mu = r2 / r1 (all > 1). See :func:`twonn_dimension`."""
    mu = np.sort(np.asarray(mu, dtype=np.float64))
    N = mu.size
    n_keep = int(N * (1.0 - discard_fraction))
    if n_keep < 2:
        raise DataValidationError(
            f"TwoNN needs at least 2 ratios after discarding the largest {discard_fraction:.0%}; "
            f"got {N} point(s). Pass more distinct points or lower discard_fraction."
        )
    log_mu = np.log(mu[:n_keep])
    # Type-II censored exponential sample: total "time on test" T ~ Gamma(n_keep, rate d)
    total = float(log_mu.sum() + (N - n_keep) * log_mu[-1])
    if total <= 0:
        raise DataValidationError(
            "TwoNN: every kept ratio r2/r1 equals 1 (first and second neighbours at the same distance, "
            "as on a regular grid); the estimator is undefined. Add a little noise or use another estimator."
        )
    interval = _gamma_interval(total, n_keep, level)
    if method == "mle":
        d = (n_keep - 1) / total
    elif method == "linear":
        y = -np.log(1.0 - np.arange(1, n_keep + 1) / N)
        d = float(np.dot(log_mu, y) / np.dot(log_mu, log_mu))
    else:
        raise ValueError(f"method must be 'mle' or 'linear'; got {method!r}.")
    return float(d), interval, n_keep


def twonn_dimension(graph, *, method: str = "mle", discard_fraction: float = 0.1, level: float = 0.95):
    """TwoNN dimension (Facco et al. 2017) from a neighbour graph.

    With r1, r2 the first and second neighbour distances, mu = r2 / r1 follows the Pareto law
    F(mu) = 1 - mu^-d on a locally uniform d-manifold, i.e. log mu ~ Exponential(rate d).

    * ``method="mle"``: keep the N' = floor(N (1 - discard_fraction)) smallest ratios and treat the others
      as right-censored at mu_(N') (Type-II censoring); with T = sum_{i<=N'} log mu_(i) + (N - N') log mu_(N')
      the estimate is (N' - 1) / T. With ``discard_fraction=0`` this is (N - 1) / sum log mu, the unbiased
      Pareto-shape MLE.
    * ``method="linear"``: least-squares slope through the origin of -log(1 - F_emp(mu_(i))) on log mu_(i),
      F_emp(mu_(i)) = i / N, over the N' smallest ratios (the published recipe discards the largest 10 %).

    The interval is exact for the MLE: d T ~ Gamma(N', 1), so [q_a / T, q_(1-a) / T] with q the Gamma(N')
    quantiles and a = (1 - level) / 2. The same interval is returned for the linear method (it describes the
    sampling spread of the TwoNN likelihood, not of the regression).

    Returns
    -------
    dimension : float
    interval : (float, float)
    n_used : int
        Number of ratios kept.

    References
    ----------
    .. [1] E. Facco, M. d'Errico, A. Rodriguez and A. Laio, "Estimating the intrinsic dimension of datasets
       by a minimal neighborhood information", Sci. Rep. 7, 12140 (2017).
    .. [2] F. Denti, D. Doimo, A. Laio and A. Mira, "The generalized ratios intrinsic dimension estimator",
       Sci. Rep. 12, 20005 (2022).
    """
    mu = graph.distances[:, 1] / graph.distances[:, 0]
    return twonn_from_ratios(mu, method=method, discard_fraction=discard_fraction, level=level)


class TwoNNDimension(_DimensionEstimator):
    """TwoNN intrinsic dimension from the ratio of second to first neighbour distances.

    Parameters
    ----------
    method : {"mle", "linear"}, default "mle"
        "mle": censored maximum likelihood (N' - 1) / T (with ``discard_fraction=0``: (N - 1) / sum log mu);
        "linear": slope through the origin of -log(1 - F_emp) on log mu (the original recipe; equals
        scikit-dimension's ``TwoNN()`` default). See :func:`twonn_dimension`.
    discard_fraction : float in [0, 1), default 0.1
        Fraction of the largest ratios set aside (they are the most affected by curvature and density
        changes); the MLE treats them as censored, the linear fit drops them.
    level : float, default 0.95
        Level of the Gamma interval ``interval_``.
    neighbor_method, random_state
        Passed to the shared neighbour layer.

    Attributes
    ----------
    dimension_ : float
    interval_ : (float, float)
        Exact interval from the Gamma law of the censored sum of log mu.
    n_used_ : int
        Number of ratios kept.
    n_samples_, n_features_in_, n_duplicates_ : int

    References
    ----------
    .. [1] E. Facco, M. d'Errico, A. Rodriguez and A. Laio, Sci. Rep. 7, 12140 (2017).
    .. [2] F. Denti, D. Doimo, A. Laio and A. Mira, Sci. Rep. 12, 20005 (2022).

    Examples
    --------
    >>> from manireg.data.manifolds import torus
    >>> X = torus(2000, seed=0).points
    >>> round(TwoNNDimension().fit(X).dimension_)
    2
    """

    _name = "twonn"
    _parameter_constraints = {
        "method": choice("mle", "linear"),
        "discard_fraction": real(0.0, 1.0, high_open=True),
        "level": real(0.0, 1.0, low_open=True, high_open=True),
        **_NEIGHBOR_PARAMS,
    }

    def __init__(self, *, method="mle", discard_fraction=0.1, level=0.95, neighbor_method="auto", random_state=0):
        self.method = method
        self.discard_fraction = discard_fraction
        self.level = level
        self.neighbor_method = neighbor_method
        self.random_state = random_state

    def fit(self, X, y=None):
        """Estimate the dimension of ``X`` (n_samples, n_features). Returns self."""
        p = self._validate()
        graph = self._graph(X, 2, p)
        d, interval, n_used = twonn_dimension(graph, method=p["method"], discard_fraction=p["discard_fraction"],
                                              level=p["level"])
        self.dimension_ = d
        self.interval_ = interval
        self.n_used_ = n_used
        return self

    def _interval(self):
        return self.interval_, "Gamma (exact for the MLE)"
