"""Convergence exponents and approximation sizes for regression on data near a d-dimensional manifold.

All functions are pure and vectorised over numpy arrays (scalars in, Python floats out; arrays in,
arrays out). Inputs are validated at once and bad values raise ``ValueError`` naming the parameter, the
function, what is allowed, what was received and how to fix the call.

References
----------
.. [1] C. J. Stone, "Optimal global rates of convergence for nonparametric regression",
   Ann. Statist. 10 (1982).
.. [2] D. Yarotsky, "Error bounds for approximations with deep ReLU networks", Neural Networks 94 (2017).
.. [3] J. Schmidt-Hieber, "Deep ReLU network approximation of functions on a manifold",
   arXiv:1908.00695 (2019).
.. [4] J. Schmidt-Hieber, "Nonparametric regression using deep neural networks with ReLU activation
   function", Ann. Statist. 48 (2020).
.. [5] M. Chen, H. Jiang, W. Liao, T. Zhao, "Nonparametric regression on low-dimensional manifolds using
   deep ReLU networks: function approximation and statistical recovery", Information and Inference 11
   (2022), arXiv:1908.01842.
.. [6] R. Nakada, M. Imaizumi, "Adaptive approximation and generalization of deep neural network with
   intrinsic dimensionality", JMLR 21 (2020).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from manireg._results import ResultMixin

__all__ = [
    "regression_exponent",
    "ambient_exponent",
    "implied_dimension",
    "implied_smoothness",
    "approximation_parameters",
    "ambient_approximation_parameters",
    "predicted_error",
    "ApproximationParameters",
    "ReferenceRate",
    "reference_rate",
    "LEARNER_RATE_KINDS",
    "noise_estimate_bias_exponent",
]


def _as_array(value, name: str, func: str, *, low: float, low_open: bool, rule: str, fix: str):
    """Convert to a float array and check every entry against ``low`` (strict if ``low_open``)."""
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(
            f"the '{name}' parameter of {func} must be a real number or an array of reals; got {value!r}. {fix}"
        ) from None
    bad = ~np.isfinite(arr) | ((arr <= low) if low_open else (arr < low))
    if np.any(bad):
        got = arr[bad].ravel()[0] if arr.ndim else arr
        raise ValueError(f"the '{name}' parameter of {func} must be {rule}; got {float(got)!r}. {fix}")
    return arr


def _out(arr, *inputs):
    """Return a Python float when every input was a scalar, otherwise the array."""
    if all(np.ndim(x) == 0 for x in inputs):
        return float(arr)
    return np.asarray(arr, dtype=np.float64)


def _dimension(d, func: str, name: str = "d"):
    return _as_array(
        d, name, func, low=1.0, low_open=False, rule="a finite real >= 1",
        fix=f"Pass the (intrinsic or Minkowski) dimension, e.g. {name}=2 for a surface.",
    )


def _smoothness(s, func: str):
    return _as_array(
        s, "s", func, low=0.0, low_open=True, rule="a finite real > 0",
        fix="Pass the Hölder order of the target, e.g. s=1 for a Lipschitz target.",
    )


def _exponent(b, func: str):
    arr = _as_array(
        b, "exponent", func, low=0.0, low_open=True, rule="a finite real in (0, 1)",
        fix="Pass a rate exponent b of error ~ n^(-b) with 0 < b < 1.",
    )
    if np.any(arr >= 1.0):
        got = arr[arr >= 1.0].ravel()[0] if arr.ndim else arr
        raise ValueError(
            f"the 'exponent' parameter of {func} must be a finite real in (0, 1); got {float(got)!r}. "
            "Pass a rate exponent b of error ~ n^(-b) with 0 < b < 1."
        )
    return arr


def regression_exponent(d, s):
    """Exponent ``b = 2s / (2s + d)`` of the squared-error rate ``n^(-b)``.

    Stone's minimax exponent for ``s``-smooth regression in ``d`` dimensions [1]_. For data on (or near) a
    ``d``-dimensional manifold in R^D, deep ReLU networks of the size given by
    :func:`manireg.theory.size_network` attain it up to log factors with the intrinsic ``d`` in place of
    ``D`` [5]_ [6]_.

    Parameters
    ----------
    d : float or array_like
        Intrinsic dimension, >= 1 (non-integer values are allowed, e.g. a Minkowski dimension [6]_).
    s : float or array_like
        Hölder smoothness of the target, > 0 (order including the fractional part).

    Returns
    -------
    float or ndarray
        ``2s / (2s + d)``, in (0, 1). Broadcasts over array inputs.

    Raises
    ------
    ValueError
        If ``d < 1`` or ``s <= 0`` or either is not finite.

    References
    ----------
    .. [1] C. J. Stone, Ann. Statist. 10 (1982).
    .. [5] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
    .. [6] R. Nakada, M. Imaizumi, JMLR 21 (2020).

    Examples
    --------
    >>> regression_exponent(2, 1)
    0.5
    """
    dd = _dimension(d, "regression_exponent")
    ss = _smoothness(s, "regression_exponent")
    return _out(2.0 * ss / (2.0 * ss + dd), d, s)


def ambient_exponent(D, s, d=None):
    """Exponent ``2s / (2s + D)`` a method blind to the manifold would attain in ambient dimension ``D``.

    Parameters
    ----------
    D : float or array_like
        Ambient dimension, >= 1.
    s : float or array_like
        Hölder smoothness, > 0.
    d : float or array_like, optional
        Intrinsic dimension; when given, ``D >= d`` is checked.

    Returns
    -------
    float or ndarray
        ``2s / (2s + D)``.

    References
    ----------
    .. [1] C. J. Stone, Ann. Statist. 10 (1982).

    Examples
    --------
    >>> round(ambient_exponent(10, 1), 4)
    0.1667
    """
    DD = _dimension(D, "ambient_exponent", name="D")
    ss = _smoothness(s, "ambient_exponent")
    if d is not None:
        dd = _dimension(d, "ambient_exponent")
        if np.any(DD < dd):
            raise ValueError(
                f"the 'D' parameter of ambient_exponent must be >= the intrinsic dimension d={d!r}; got D={D!r}. "
                "The ambient dimension is the number of columns of X; check that d and D are not swapped."
            )
    return _out(2.0 * ss / (2.0 * ss + DD), D, s)


def implied_dimension(exponent, s):
    """Intrinsic dimension implied by an observed exponent: ``d = 2s (1 - b) / b``.

    Inverts :func:`regression_exponent` in ``d``.

    Parameters
    ----------
    exponent : float or array_like
        Observed rate exponent ``b`` in (0, 1).
    s : float or array_like
        Assumed smoothness, > 0.

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [1] C. J. Stone, Ann. Statist. 10 (1982).

    Examples
    --------
    >>> implied_dimension(0.5, 1)
    2.0
    """
    b = _exponent(exponent, "implied_dimension")
    ss = _smoothness(s, "implied_dimension")
    return _out(2.0 * ss * (1.0 - b) / b, exponent, s)


def implied_smoothness(exponent, d):
    """Smoothness implied by an observed exponent: ``s = b d / (2 (1 - b))``.

    Inverts :func:`regression_exponent` in ``s``.

    Parameters
    ----------
    exponent : float or array_like
        Observed rate exponent ``b`` in (0, 1).
    d : float or array_like
        Intrinsic dimension, >= 1.

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [1] C. J. Stone, Ann. Statist. 10 (1982).

    Examples
    --------
    >>> implied_smoothness(0.5, 2)
    1.0
    """
    b = _exponent(exponent, "implied_smoothness")
    dd = _dimension(d, "implied_smoothness")
    return _out(b * dd / (2.0 * (1.0 - b)), exponent, d)


@dataclass
class ApproximationParameters(ResultMixin):
    """Order-of-magnitude size of a ReLU network approximating an ``s``-smooth function to sup error eps.

    Attributes
    ----------
    eps : float or ndarray
        Target sup-norm error, in (0, 1).
    dimension : float or ndarray
        The dimension that drives the size (intrinsic ``d`` or ambient ``D``).
    s : float or ndarray
        Smoothness.
    depth : float or ndarray
        ``log(1/eps)`` (constants omitted).
    nonzero_weights : float or ndarray
        ``eps^(-dimension/s) * log(1/eps)`` (constants omitted).
    """

    eps: object
    dimension: object
    s: object
    depth: object
    nonzero_weights: object


def _approx(eps, dim, s, func: str, dim_name: str):
    e = _as_array(
        eps, "eps", func, low=0.0, low_open=True, rule="a finite real in (0, 1)",
        fix="Pass the target approximation error, e.g. eps=0.01.",
    )
    if np.any(e >= 1.0):
        raise ValueError(
            f"the 'eps' parameter of {func} must be a finite real in (0, 1); got {eps!r}. "
            "The size formula is an asymptotic for small eps; pass e.g. eps=0.01."
        )
    dd = _dimension(dim, func, name=dim_name)
    ss = _smoothness(s, func)
    log_term = np.log(1.0 / e)
    depth = log_term
    weights = e ** (-dd / ss) * log_term
    return ApproximationParameters(
        eps=_out(e, eps), dimension=_out(dd, dim), s=_out(ss, s),
        depth=_out(depth, eps, dim, s), nonzero_weights=_out(weights, eps, dim, s),
    )


def approximation_parameters(eps, d, s) -> ApproximationParameters:
    """Depth ``~ log(1/eps)`` and nonzero weights ``~ eps^(-d/s) log(1/eps)`` on a d-manifold.

    The ReLU approximation bound of Yarotsky [2]_ with the intrinsic dimension in place of the ambient
    one, as shown for functions on a manifold by Schmidt-Hieber [3]_ (see also [5]_). Constants are
    omitted: compare sizes across ``eps``, not absolute counts.

    Parameters
    ----------
    eps : float or array_like
        Sup-norm approximation error, in (0, 1).
    d : float or array_like
        Intrinsic dimension, >= 1.
    s : float or array_like
        Hölder smoothness, > 0.

    Returns
    -------
    ApproximationParameters

    References
    ----------
    .. [2] D. Yarotsky, Neural Networks 94 (2017).
    .. [3] J. Schmidt-Hieber, arXiv:1908.00695 (2019).
    .. [5] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).

    Examples
    --------
    >>> p = approximation_parameters(0.01, 2, 1)
    >>> round(p.nonzero_weights)
    46052
    """
    return _approx(eps, d, s, "approximation_parameters", "d")


def ambient_approximation_parameters(eps, D, s) -> ApproximationParameters:
    """Yarotsky's ambient size: depth ``~ log(1/eps)``, weights ``~ eps^(-D/s) log(1/eps)`` [2]_.

    Parameters
    ----------
    eps : float or array_like
        Sup-norm approximation error, in (0, 1).
    D : float or array_like
        Ambient dimension, >= 1.
    s : float or array_like
        Hölder smoothness, > 0.

    Returns
    -------
    ApproximationParameters

    References
    ----------
    .. [2] D. Yarotsky, Neural Networks 94 (2017).
    """
    return _approx(eps, D, s, "ambient_approximation_parameters", "D")


def predicted_error(n, d, s, scale=1.0, log_power=0.0):
    """Predicted squared error ``scale * n^(-2s/(2s+d)) * log(n)^log_power``.

    The rate of Chen, Jiang, Liao and Zhao [5]_ carries ``log_power = 3``; Schmidt-Hieber [4]_ and
    Nakada-Imaizumi [6]_ give the same exponent up to (other) log factors. The default drops the log
    factor, which is how learning curves are usually compared with the exponent.

    Parameters
    ----------
    n : float or array_like
        Sample size, >= 2.
    d : float or array_like
        Intrinsic dimension, >= 1.
    s : float or array_like
        Hölder smoothness, > 0.
    scale : float, default=1.0
        Multiplicative constant, > 0.
    log_power : float, default=0.0
        Power of ``log n``, >= 0.

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [4] J. Schmidt-Hieber, Ann. Statist. 48 (2020).
    .. [5] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
    .. [6] R. Nakada, M. Imaizumi, JMLR 21 (2020).

    Examples
    --------
    >>> predicted_error(10_000, 2, 1)
    0.01
    """
    nn_ = _as_array(
        n, "n", "predicted_error", low=2.0, low_open=False, rule="a finite real >= 2",
        fix="Pass the number of training samples, e.g. n=1000.",
    )
    b = regression_exponent(d, s)
    sc = _as_array(scale, "scale", "predicted_error", low=0.0, low_open=True, rule="a finite real > 0",
                   fix="Pass a positive constant, e.g. scale=1.0.")
    lp = _as_array(log_power, "log_power", "predicted_error", low=0.0, low_open=False,
                   rule="a finite real >= 0", fix="Pass 0 for no log factor or 3 for the bound of Chen et al.")
    val = sc * nn_ ** (-np.asarray(b)) * np.log(nn_) ** lp
    return _out(val, n, d, s, scale, log_power)


# ----------------------------------------------------------------------------------------------------
# Reference rates per learner
# ----------------------------------------------------------------------------------------------------
LEARNER_RATE_KINDS = ("net", "knn", "kernel_ridge")


@dataclass
class ReferenceRate(ResultMixin):
    """The exponent a learner can be expected to reach, as a band ``[low, high]`` (equal ends for a single
    rate; NaN when no rate can be stated), with its formula, source and the conditions it needs.
    """

    learner_kind: str
    dimension: float
    smoothness: float
    low: float
    high: float
    formula: str
    source: str
    conditions: str

    @property
    def stated(self) -> bool:
        """True when a rate is stated (not NaN)."""
        return bool(np.isfinite(self.low))


def reference_rate(learner_kind, d, s) -> ReferenceRate:
    """Reference exponent of a learner's squared-error rate on an ``s``-smooth target in dimension ``d``.

    * ``"net"``: ``2s/(2s+d)``, up to log factors, for ReLU networks sized by the rule (depth ~ log n, width
      ~ n^(d/(2s+d))) on a compact d-dimensional manifold with a Hölder-s target (Chen, Jiang, Liao, Zhao,
      Information and Inference 11, 2022; Schmidt-Hieber, Ann. Statist. 48, 2020; Nakada and Imaizumi, JMLR 21,
      2020). Conditions: the network is trained to (near) empirical risk minimisation, which training does
      not guarantee.
    * ``"knn"``: ``2s/(2s+d)`` for ``s <= 1`` with ``k ~ n^(2s/(2s+d))`` (Györfi, Kohler, Krzyżak, Walk, *A
      Distribution-Free Theory of Nonparametric Regression*, 2002, Thm 6.2, Lipschitz-type targets, bounded
      support). For ``s > 1`` a local average does not exploit the extra smoothness in general: its bias is of
      order ``h`` with boundaries or a non-smooth design density (exponent ``2/(2+d)``) and of order
      ``h^min(s,2)`` only where the density is smooth and there is no boundary (exponent
      ``2 min(s,2)/(2 min(s,2)+d)``; ibid., Ch. 6 on local averaging). The band is ``[2/(2+d),
      2 min(s,2)/(2 min(s,2)+d)]``.
    * ``"kernel_ridge"``: no rate is stated. Gaussian kernel ridge with bandwidth ``~ n^(-1/(2s+d))`` and
      a tuned penalty is known to reach ``2s/(2s+D)`` up to a factor ``n^epsilon`` in the ambient dimension
      (Eberts and Steinwart, Electron. J. Statist. 7, 2013, from memory), and intrinsic-dimension versions
      exist for data on manifolds (Hamm and Steinwart, from memory), but the exact conditions for the
      bandwidth rule used here (median distance times ``n^(-1/(2s+d))``, penalty ``n^(-2s/(2s+d))``) were not
      checked against the sources, so the comparison is left undetermined.

    Parameters
    ----------
    learner_kind : {"net", "knn", "kernel_ridge"}
    d : float
        Intrinsic dimension, >= 1.
    s : float
        Hölder smoothness, > 0.

    Returns
    -------
    ReferenceRate

    Examples
    --------
    >>> r = reference_rate("knn", 2, 1.5)
    >>> round(r.low, 3), round(r.high, 3)
    (0.5, 0.6)
    """
    func = "reference_rate"
    dd = float(_dimension(d, func))
    ss = float(_smoothness(s, func))
    if learner_kind == "net":
        b = 2 * ss / (2 * ss + dd)
        return ReferenceRate("net", dd, ss, b, b, "2s/(2s+d)",
                             "Chen, Jiang, Liao, Zhao (2022); Schmidt-Hieber (2020); Nakada and Imaizumi (2020)",
                             "network sized by the rule and trained to near empirical risk minimisation; "
                             "rate up to log factors")
    if learner_kind == "knn":
        if ss <= 1:
            b = 2 * ss / (2 * ss + dd)
            return ReferenceRate("knn", dd, ss, b, b, "2s/(2s+d)", "Györfi, Kohler, Krzyżak, Walk (2002), Thm 6.2",
                                 "s <= 1, k ~ n^(2s/(2s+d)), bounded support")
        se = min(ss, 2.0)
        return ReferenceRate("knn", dd, ss, 2 / (2 + dd), 2 * se / (2 * se + dd),
                             "2/(2+d) to 2 min(s,2)/(2 min(s,2)+d)", "Györfi, Kohler, Krzyżak, Walk (2002), Ch. 6",
                             "s > 1: bias of order h with boundaries or a rough design density (low end), of order "
                             "h^min(s,2) with a smooth density and no boundary (high end)")
    if learner_kind == "kernel_ridge":
        return ReferenceRate("kernel_ridge", dd, ss, float("nan"), float("nan"), "none stated",
                             "none checked (Eberts and Steinwart 2013 for the ambient rate, from memory)",
                             "the bandwidth rule's conditions were not verified against a source")
    raise ValueError(
        f"the 'learner_kind' parameter of {func} must be one of {LEARNER_RATE_KINDS}; got {learner_kind!r}. "
        "Pass the kind of the learner (LearnerSpec.kind)."
    )


def noise_estimate_bias_exponent(d, s):
    """Exponent of the bias of nearest-neighbour noise-variance estimates: ``n^(-2 min(s,1)/d)``.

    The bias is half the mean squared change of the target between neighbours at distance ``r ~ n^(-1/d)``;
    a Hölder-s target changes by ``r^min(s,1)`` over ``r`` (beyond s = 1 the first-order change ``r`` is what
    remains), so the bias falls like ``r^(2 min(s,1)) = n^(-2 min(s,1)/d)`` (Devroye, Györfi, Lugosi and
    Walk, Electron. J. Statist. 12, 2018; derived).
    """
    dd = _dimension(d, "noise_estimate_bias_exponent")
    ss = _smoothness(s, "noise_estimate_bias_exponent")
    return _out(2.0 * np.minimum(ss, 1.0) / dd, d, s)
