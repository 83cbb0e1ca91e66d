"""A measured exponent compared with the learner's own reference rate, by an interval test.

References
----------
.. [1] Györfi, Kohler, Krzyżak, Walk, "A Distribution-Free Theory of Nonparametric Regression" (2002),
   Thm 6.2 and Ch. 6 (local averaging: kNN).
.. [2] Chen, Jiang, Liao, Zhao, Information and Inference 11 (2022) (deep ReLU networks on manifolds).
.. [3] C. J. Stone, Ann. Statist. 10 (1982) (the exponent 2s/(2s+d)).
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_float

__all__ = [
    "TheoryComparison",
    "compare_with_theory",
    "THEORY_INTRINSIC",
    "THEORY_STEEPER",
    "THEORY_SHALLOWER",
    "THEORY_AMBIENT",
    "THEORY_UNDETERMINED",
]

THEORY_INTRINSIC = "consistent with the intrinsic rate"
THEORY_STEEPER = "steeper than the intrinsic rate"
THEORY_SHALLOWER = "shallower than the intrinsic rate"
THEORY_AMBIENT = "consistent with the ambient rate"
THEORY_UNDETERMINED = "undetermined"


@dataclass
class TheoryComparison(ResultMixin):
    """One learner's measured exponent against its reference rate.

    Attributes
    ----------
    learner, learner_kind : str
    exponent, interval : float, tuple
        The measured exponent and its interval (from the fit).
    fit_verdict : str
        The fit's own verdict ("measured" or not): a comparison of an exponent that is not a measured power
        law says little, and ``reason`` says so.
    predicted_exponent : tuple
        ``(low, high)`` of the learner's reference exponent over the dimension's interval and the smoothness
        range (for kNN with s > 1 also over its band).
    ambient_exponent : tuple or None
        The same rate with the ambient dimension ``D`` in place of ``d``.
    dimension_interval, smoothness_range : tuple
    tolerance : float
        Slack of the interval test: intervals closer than this count as touching.
    verdict : str
        "consistent with the intrinsic rate", "steeper than the intrinsic rate", "shallower than the intrinsic
        rate", "consistent with the ambient rate" or "undetermined".
    reason : str
    formula, source, conditions : str
        Of the reference rate.
    """

    learner: str
    learner_kind: str
    exponent: float
    interval: tuple
    fit_verdict: str
    predicted_exponent: tuple
    ambient_exponent: tuple | None
    dimension_interval: tuple
    smoothness_range: tuple
    ambient_dim: int | None
    tolerance: float
    verdict: str
    reason: str
    formula: str
    source: str
    conditions: str

    def __str__(self) -> str:
        p = self.predicted_exponent
        pred = "none stated" if not np.isfinite(p[0]) else (f"{p[0]:.3f}" + (f" to {p[1]:.3f}" if p[1] > p[0] else ""))
        return (f"{self.learner}: exponent {self.exponent:.3f} [{self.interval[0]:.3f}, {self.interval[1]:.3f}] "
                f"against {self.formula} = {pred}: {self.verdict}. {self.reason}")


def _as_range(value, name, owner):
    if isinstance(value, numbers.Real) and not isinstance(value, bool):
        v = check_float(value, name, owner=owner, low=0.0, low_open=True)
        return (v, v)
    try:
        lo, hi = value
    except (TypeError, ValueError):
        raise ValueError(f"the '{name}' parameter of {owner} must be a positive number or a (low, high) pair; "
                         f"got {value!r}.") from None
    lo = check_float(lo, name, owner=owner, low=0.0, low_open=True)
    hi = check_float(hi, name, owner=owner, low=0.0, low_open=True)
    return (min(lo, hi), max(lo, hi))


def _band(kind, dims, smooths):
    from manireg.theory.rates import reference_rate

    rates = [reference_rate(kind, max(1.0, d), s) for d in dims for s in smooths]
    if not rates[0].stated:
        return (float("nan"), float("nan")), rates[0]
    return (min(r.low for r in rates), max(r.high for r in rates)), rates[0]


def _touch(a, b, tol):
    return a[0] <= b[1] + tol and b[0] <= a[1] + tol


def compare_with_theory(fit, dimension, smoothness, ambient_dim=None, *, learner_kind="net",
                        dimension_interval=None, tolerance=0.02) -> TheoryComparison:
    """Compare a fitted exponent with the learner's own reference rate (:func:`manireg.theory.reference_rate`).

    The predicted exponent is an interval: the reference rate over ``d`` in ``dimension_interval`` (default:
    ``dimension`` alone) and ``s`` in the ``smoothness`` range; for kNN with ``s > 1`` it is the band of the
    rate. The verdict is an interval test with slack ``tolerance``: the exponent's interval touching the
    predicted interval (within ``tolerance``) is *consistent with the intrinsic rate*; lying wholly above it,
    *steeper*; below it, *shallower*, or *consistent with the ambient rate* when it touches the rate with
    ``D`` in place of ``d``; touching both the intrinsic and the ambient interval, or no rate stated for the
    learner, or no finite interval, is *undetermined*.

    Parameters
    ----------
    fit : ExponentFit
    dimension : float
        Intrinsic dimension estimate ``d``.
    smoothness : float or (low, high)
        Hölder order ``s`` of the target, or a range.
    ambient_dim : int, optional
        Ambient dimension ``D``.
    learner_kind : {"net", "knn", "kernel_ridge"}
    dimension_interval : (low, high), optional
        The dimension estimate's interval; carried into the predicted exponent.
    tolerance : float, default 0.02
        Slack of the interval test, in exponent units.

    Returns
    -------
    TheoryComparison

    References
    ----------
    .. [1] Györfi et al. (2002), Thm 6.2 and Ch. 6. .. [2] Chen et al. (2022).
    """
    owner = "compare_with_theory"
    d = check_float(dimension, "dimension", owner=owner, low=0.0, low_open=True)
    d_iv = (d, d) if dimension_interval is None else _as_range(dimension_interval, "dimension_interval", owner)
    d_iv = (min(d_iv[0], d), max(d_iv[1], d))
    s_rng = _as_range(smoothness, "smoothness", owner)
    tol = check_float(tolerance, "tolerance", owner=owner, low=0.0)
    pred, ref = _band(learner_kind, d_iv, s_rng)
    amb = None
    if ambient_dim is not None:
        amb, _ = _band(learner_kind, (float(ambient_dim),), s_rng)
    iv = tuple(float(v) for v in fit.interval)
    b = float(fit.exponent)
    note = "" if fit.verdict == "measured" else (
        f" The fit's own verdict is '{fit.verdict}': the exponent is not a measured power law over this range, "
        "so read the comparison with care.")
    if not ref.stated:
        verdict, reason = THEORY_UNDETERMINED, f"no reference rate is stated for {learner_kind!r} ({ref.conditions})."
    elif not all(np.isfinite(iv)):
        verdict, reason = THEORY_UNDETERMINED, "the fit has no finite interval."
    else:
        intr = _touch(iv, pred, tol)
        ambient = amb is not None and _touch(iv, amb, tol)
        ptxt = f"[{pred[0]:.3f}, {pred[1]:.3f}]"
        if intr and ambient:
            verdict = THEORY_UNDETERMINED
            reason = (f"the interval [{iv[0]:.3f}, {iv[1]:.3f}] touches both the intrinsic {ptxt} and the ambient "
                      f"[{amb[0]:.3f}, {amb[1]:.3f}] exponent (tolerance {tol:g}); more repeats or sizes would separate them.")
        elif intr:
            verdict = THEORY_INTRINSIC
            reason = f"the interval [{iv[0]:.3f}, {iv[1]:.3f}] meets the predicted {ptxt} within {tol:g}."
        elif ambient:
            verdict = THEORY_AMBIENT
            reason = (f"the interval [{iv[0]:.3f}, {iv[1]:.3f}] lies below the intrinsic {ptxt} and meets the ambient "
                      f"[{amb[0]:.3f}, {amb[1]:.3f}] within {tol:g}.")
        elif iv[0] > pred[1] + tol:
            verdict = THEORY_STEEPER
            reason = (f"the interval [{iv[0]:.3f}, {iv[1]:.3f}] lies above the predicted {ptxt} by more than {tol:g} "
                      "(a pre-asymptotic range, a target smoother than assumed, or a too-high floor can do this).")
        else:
            verdict = THEORY_SHALLOWER
            reason = (f"the interval [{iv[0]:.3f}, {iv[1]:.3f}] lies below the predicted {ptxt} by more than {tol:g} "
                      "(optimisation limits, an unsubtracted floor or a larger effective dimension can do this).")
    return TheoryComparison(
        learner=fit.learner, learner_kind=learner_kind, exponent=b, interval=iv, fit_verdict=fit.verdict,
        predicted_exponent=pred, ambient_exponent=amb, dimension_interval=d_iv, smoothness_range=s_rng,
        ambient_dim=None if ambient_dim is None else int(ambient_dim), tolerance=tol, verdict=verdict,
        reason=reason + note, formula=ref.formula, source=ref.source, conditions=ref.conditions,
    )
