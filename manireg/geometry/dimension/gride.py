"""The generalised ratio estimator: the dimension from the ratio of the k-th to the (k/2)-th neighbour distance.

At ``n2 = 2`` (``n1 = 1``) it is the TwoNN likelihood; at larger ``n2`` it reads the dimension at the scale of
the ``n2``-th neighbour without using any smaller distance than the ``n1``-th, which keeps ambient noise at
the scale of the first neighbours out of it.

References
----------
.. [1] F. Denti, D. Doimo, A. Laio and A. Mira, "The generalized ratios intrinsic dimension estimator",
   Sci. Rep. 12, 20005 (2022).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["gride_dimension", "gride_log_ratios"]


def gride_log_ratios(distances: np.ndarray, n2: int) -> np.ndarray:
    """log(T_n2 / T_n1) per point, n1 = n2 // 2 (T_j: distance to the j-th neighbour, self excluded)."""
    n1 = max(1, n2 // 2)
    return np.log(distances[:, n2 - 1] / distances[:, n1 - 1])


def gride_dimension(log_mu: np.ndarray, n2: int, *, d_max: float = 1000.0) -> float:
    """Maximum-likelihood dimension from ratios mu = T_n2 / T_n1 (n1 = n2 // 2) of a locally uniform sample.

    The ratio has density f(mu) = d (mu^d - 1)^(n2-n1-1) / (B(n2-n1, n1) mu^((n2-1) d + 1)) on mu > 1
    (Denti et al. 2022, eq. 5). The log-likelihood's derivative

        N / d + (n2 - n1 - 1) sum_i log mu_i / (1 - mu_i^-d) - (n2 - 1) sum_i log mu_i

    falls strictly in d, so its root is found by bracketing. For n2 = 2 the middle term vanishes and
    d = N / sum log mu (the TwoNN likelihood without discarding).
    """
    from scipy.optimize import brentq

    log_mu = np.asarray(log_mu, dtype=float)
    log_mu = log_mu[np.isfinite(log_mu) & (log_mu > 0)]
    N = log_mu.size
    if N == 0:
        return math.nan
    n1 = max(1, n2 // 2)
    a = n2 - n1 - 1
    S = float(log_mu.sum())
    if a == 0:
        return N / S

    def score(d):
        return N / d + a * float(np.sum(log_mu / -np.expm1(-d * log_mu))) - (n2 - 1) * S

    lo, hi = 1e-6, 1.0
    while score(hi) > 0 and hi < d_max:
        lo, hi = hi, hi * 2.0
    if score(hi) > 0:
        return float(d_max)
    return float(brentq(score, lo, hi, xtol=1e-8, rtol=1e-10))
