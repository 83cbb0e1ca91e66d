"""Reference rate of the excess logistic risk for classification on a low-dimensional manifold.

References
----------
.. [1] H. Liu, M. Chen, T. Zhao, W. Liao, "Besov function approximation and binary classification on
   low-dimensional manifolds using convolutional residual networks", ICML 2021, PMLR 139, 6770-6780;
   arXiv:2109.02832. The abstract states the excess risk order n^(-s/(2s + 2(s v d))).
"""

from __future__ import annotations

import numpy as np

from manireg._validation import check_float

__all__ = ["logistic_excess_risk_exponent", "LOGISTIC_RATE_CONDITIONS", "LOGISTIC_RATE_SOURCE"]

#: Where the rate of :func:`logistic_excess_risk_exponent` is stated.
LOGISTIC_RATE_SOURCE = ("H. Liu, M. Chen, T. Zhao, W. Liao, \"Besov function approximation and binary classification on "
                        "low-dimensional manifolds using convolutional residual networks\", ICML 2021; arXiv:2109.02832")

#: The conditions under which the rate of :func:`logistic_excess_risk_exponent` is stated, in words.
LOGISTIC_RATE_CONDITIONS = (
    "binary labels; inputs on a d-dimensional Riemannian manifold isometrically embedded in R^D; a target "
    "function of Besov smoothness s on the manifold (Besov classes contain the Hölder ones); an empirical "
    "logistic-risk minimiser over convolutional residual networks whose architecture is chosen with n; "
    "an upper bound on the excess logistic risk, up to logarithmic factors, with constants depending on d, "
    "D, s and the manifold"
)


def logistic_excess_risk_exponent(smoothness, dimension):
    """Predicted exponent ``b`` of the excess logistic risk ``~ n^(-b)``: ``b = s / (2s + 2 max(s, d))`` [1]_.

    The rate is an upper bound (up to log factors) for an empirical logistic-risk minimiser over
    convolutional residual networks, under :data:`LOGISTIC_RATE_CONDITIONS`; the fully connected nets of a
    campaign are not covered by the statement, and no lower bound of this order is claimed. For s <= d the
    exponent is ``s / (2s + 2d)``, half the regression exponent ``2s / (2s + d)`` at ``d -> 2d``.

    Parameters
    ----------
    smoothness : float or array
        s > 0.
    dimension : float or array
        Intrinsic dimension d >= 1.

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [1] H. Liu, M. Chen, T. Zhao, W. Liao, ICML 2021.

    Examples
    --------
    >>> logistic_excess_risk_exponent(1.0, 2.0)
    0.16666666666666666
    """
    owner = "logistic_excess_risk_exponent"
    scalar = np.ndim(smoothness) == 0 and np.ndim(dimension) == 0
    if scalar:
        s = check_float(smoothness, "smoothness", owner=owner, low=0.0, low_open=True)
        d = check_float(dimension, "dimension", owner=owner, low=1.0)
        return s / (2.0 * s + 2.0 * max(s, d))
    s = np.asarray(smoothness, dtype=np.float64)
    d = np.asarray(dimension, dtype=np.float64)
    if not (np.all(s > 0) and np.all(d >= 1)):
        raise ValueError(f"{owner}: smoothness must be > 0 and dimension >= 1 everywhere; got s={s!r}, d={d!r}.")
    return s / (2.0 * s + 2.0 * np.maximum(s, d))
