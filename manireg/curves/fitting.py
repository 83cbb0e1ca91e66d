"""Power-law fits to learning curves, with intervals over whole repeats and a verdict that can say no.

A learning curve is a table of campaign rows (one per learner, sample size ``n`` and repeat). This module fits

* ``err = a n^(-b)`` by least squares on ``log err`` against ``log n`` (model ``"loglog"``);
* ``err = a n^(-b) + c`` with a known floor ``c`` by least squares on ``log(err - c)`` (model ``"excess"``);
* ``err = a n^(-b) + c`` with ``c`` fitted within bounds (model ``"floor_fit"``),

forms a Student-t interval for the exponent ``b`` from the delete-one jackknife over whole repeats (``R``
repeats, ``R - 1`` degrees of freedom), compares curve models on held-out sizes, and says whether the curve
is a power law over the fitted range at all (the *verdict*): "measured" needs the halves of the range to be
shown equivalent by two one-sided tests, not merely "not different". An exponent is never reported without
its interval and verdict.

References
----------
.. [1] Hestness et al., "Deep Learning Scaling is Predictable, Empirically", arXiv:1712.00409 (2017).
.. [2] Cortes, Jackel, Solla, Vapnik, Denker, "Learning curves: asymptotic values and rate of
   convergence", NIPS 1993.
.. [3] Viering and Loog, "The Shape of Learning Curves: a Review", IEEE TPAMI 45 (2023).
.. [4] Efron and Tibshirani, "An Introduction to the Bootstrap", Chapman & Hall (1993) (the jackknife,
   percentile intervals).
.. [5] Schuirmann, J. Pharmacokinet. Biopharm. 15 (1987) (two one-sided tests of equivalence).
.. [6] Alabdulmohsin, Neyshabur and Zhai, NeurIPS 2022 (judging a curve model by held-out sizes).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_choice, check_float, check_int, make_rng, warn

__all__ = [
    "PowerLawFit",
    "SubrangeFit",
    "ExponentFit",
    "ExponentTable",
    "fit_power_law",
    "local_slopes",
    "fit_exponent",
    "fit_all",
    "VERDICT_MEASURED",
    "VERDICT_NOT_POWER_LAW",
    "VERDICT_INSUFFICIENT",
    "VERDICT_NOT_SHOWN",
    "VERDICT_OPTIMISATION_LIMITED",
    "VERDICTS",
    "FloorChoice",
    "floor_model",
    "exponent_scan",
    "jackknife_se",
    "t_quantile",
    "CURVE_MODELS",
]

VERDICT_MEASURED = "measured"
VERDICT_NOT_POWER_LAW = "not a power law over this range"
VERDICT_INSUFFICIENT = "insufficient data"
VERDICT_NOT_SHOWN = "power law not shown at this precision"
#: Given by the budget check (:func:`manireg.curves.evidence.gate_verdict`), never by ``fit_exponent`` alone:
#: retraining with more steps moved cells at an end of the curve by more than the seed spread.
VERDICT_OPTIMISATION_LIMITED = "optimisation-limited"
#: Every verdict a fit can give.
VERDICTS = (VERDICT_MEASURED, VERDICT_NOT_POWER_LAW, VERDICT_NOT_SHOWN, VERDICT_INSUFFICIENT,
            VERDICT_OPTIMISATION_LIMITED)

REQUIRED_COLUMNS = ("learner", "n", "repeat", "test_mse")
OPTIMISATION_CAPS = ("step_cap", "time_cap")
MIN_REPEATS_FOR_INTERVAL = 5

_MODELS = {
    "loglog": "err = a n^-b (least squares on log err vs log n)",
    "excess": "err = a n^-b + c, c given (least squares on log(err - c) vs log n)",
    "floor_fit": "err = a n^-b + c, c fitted within bounds (relative least squares)",
}


# ----------------------------------------------------------------------------------------------------
# Single-curve fits
# ----------------------------------------------------------------------------------------------------
@dataclass
class PowerLawFit(ResultMixin):
    """Result of :func:`fit_power_law`: ``err ~ a n^(-b) + c``.

    Attributes
    ----------
    a, b, c : float
        Prefactor, exponent and floor (``c = 0`` for the plain log-log model).
    model : str
        ``"loglog"``, ``"excess"`` or ``"floor_fit"``.
    n, err : list of float
        The points used in the fit.
    residuals : list of float
        ``log(err) - log(a n^-b + c)`` at each point used.
    dropped : list of dict
        Points left out, each with ``n``, ``err`` and ``reason``.
    """

    a: float
    b: float
    c: float
    model: str
    n: list
    err: list
    residuals: list
    dropped: list = field(default_factory=list)

    def predict(self, n):
        """The fitted curve ``a n^(-b) + c`` at ``n``."""
        n = np.asarray(n, dtype=float)
        return self.a * n ** (-self.b) + self.c

    def __str__(self) -> str:
        return f"PowerLawFit({self.model}: err = {self.a:.4g} n^-{self.b:.4g} + {self.c:.4g}, {len(self.n)} points)"


def _check_curve(n, err, owner):
    n = np.asarray(n, dtype=float).ravel()
    err = np.asarray(err, dtype=float).ravel()
    if n.shape != err.shape:
        raise ValueError(f"{owner}: n and err must have the same length; got {n.size} and {err.size}.")
    if n.size == 0:
        raise ValueError(f"{owner}: no points were given; pass at least two sample sizes with errors.")
    if not (np.all(np.isfinite(n)) and np.all(np.isfinite(err))):
        raise ValueError(f"{owner}: n and err must be finite; remove NaN/inf rows first.")
    if np.any(n <= 0):
        raise ValueError(f"{owner}: sample sizes must be positive; got min(n) = {n.min():g}.")
    if np.any(err <= 0):
        raise ValueError(
            f"{owner}: errors must be positive for a fit on the log scale; got {int(np.sum(err <= 0))} "
            f"value(s) <= 0 (min {err.min():g}). Check the error column or drop those rows."
        )
    return n, err


def _ols_loglog(logn, logy):
    """Slope/intercept of logy on logn; returns (log a, b)."""
    xm, ym = logn.mean(), logy.mean()
    sxx = np.sum((logn - xm) ** 2)
    slope = np.sum((logn - xm) * (logy - ym)) / sxx
    return ym - slope * xm, -slope


def _fit_floor_model(n, err, start=None, bounds=(0.0, None)):
    """Fit ``err = a n^-b + c`` with ``c`` in ``bounds``; returns (a, b, c). See :func:`_floor_fit_batch`."""
    x = np.log(np.asarray(n, dtype=float))
    M = np.asarray(err, dtype=float)[None, :]
    lo, hi = bounds
    hi = 0.95 * float(np.min(err)) if hi is None else hi
    a, b, c = _floor_fit_batch(x, M, np.ones_like(M), lo, hi)
    if not np.isfinite(b[0]):
        raise ValueError("fit_power_law: the floor fit failed (no positive prefactor at any exponent); try floor=None.")
    return float(a[0]), float(b[0]), float(c[0])


def fit_power_law(n, err, *, floor=None) -> PowerLawFit:
    """Fit ``err = a n^(-b) + c`` to one learning curve.

    Parameters
    ----------
    n : array-like of shape (m,)
        Sample sizes (positive; repeated values allowed).
    err : array-like of shape (m,)
        Test errors (positive).
    floor : None, float or "fit"
        ``None``: plain log-log least squares (``c = 0``); it flattens the slope as the curve nears an
        unknown floor. A float ``c >= 0``: least squares on ``log(err - c)``; points with ``err <= c`` are
        dropped and listed with the reason. ``"fit"``: nonlinear least squares of ``log err`` on
        ``log(a n^-b + c)`` with ``c >= 0`` fitted too (needs at least 3 distinct sizes).

    Returns
    -------
    PowerLawFit

    Raises
    ------
    ValueError
        For empty input, non-positive sizes or errors, too few distinct sizes, or an unknown ``floor``.

    References
    ----------
    .. [1] Hestness et al., arXiv:1712.00409 (2017): the form ``a n^-b + c``.
    .. [2] Cortes et al., NIPS 1993: test error = asymptote + power-law term.

    Examples
    --------
    >>> fit = fit_power_law([100, 1000, 10000], [0.1, 0.01, 0.001])
    >>> round(fit.b, 6)
    1.0
    """
    owner = "fit_power_law"
    n, err = _check_curve(n, err, owner)
    dropped = []
    if floor is None:
        model, c = "loglog", 0.0
        use = np.ones(n.size, bool)
    elif isinstance(floor, str):
        if floor != "fit":
            raise ValueError(f"the 'floor' parameter of {owner} must be None, a float >= 0 or 'fit'; got {floor!r}.")
        model, c = "floor_fit", None
        use = np.ones(n.size, bool)
    else:
        c = check_float(floor, "floor", owner=owner, low=0.0)
        model = "excess"
        use = err > c
        for ni, ei in zip(n[~use], err[~use]):
            dropped.append(
                {"n": float(ni), "err": float(ei), "reason": f"error {ei:.4g} <= floor {c:.4g}: no excess to fit"}
            )
    nu, eu = n[use], err[use]
    need = 3 if model == "floor_fit" else 2
    if np.unique(nu).size < need:
        raise ValueError(
            f"{owner}: model {model!r} needs at least {need} distinct sample sizes with usable errors; "
            f"got {np.unique(nu).size}. Add sizes or use a simpler model (floor=None)."
        )
    if model == "floor_fit":
        a, b, c = _fit_floor_model(nu, eu)
    else:
        la, b = _ols_loglog(np.log(nu), np.log(eu - c))
        a = math.exp(la)
    resid = np.log(eu) - np.log(a * nu ** (-b) + c)
    return PowerLawFit(
        a=float(a), b=float(b), c=float(c), model=model, n=nu.tolist(), err=eu.tolist(),
        residuals=resid.tolist(), dropped=dropped,
    )


def local_slopes(n, err, floor=0.0):
    """Local exponents between successive sizes, from the per-size mean error.

    ``slope_i = -[log(m_{i+1} - c) - log(m_i - c)] / [log n_{i+1} - log n_i]`` where ``m`` is the mean
    error over repeats at each size and ``c`` the floor. A power law has roughly constant local slopes; a
    curve flattening into a floor has slopes falling towards zero.

    Parameters
    ----------
    n, err : array-like
        Sample sizes and errors (repeated sizes are averaged).
    floor : float, default 0
        Subtracted before taking logs; a slope touching a mean at or below the floor is NaN.

    Returns
    -------
    pandas.DataFrame
        Columns ``n_lo``, ``n_hi``, ``slope``.

    References
    ----------
    .. [1] Hestness et al., arXiv:1712.00409 (2017): small-data, power-law and irreducible regions.
    """
    import pandas as pd

    n, err = _check_curve(n, err, "local_slopes")
    c = 0.0 if floor is None else check_float(floor, "floor", owner="local_slopes", low=0.0)
    sizes = np.unique(n)
    means = np.array([err[n == s].mean() for s in sizes])
    rows = []
    for i in range(sizes.size - 1):
        lo, hi = means[i] - c, means[i + 1] - c
        if lo > 0 and hi > 0:
            slope = -(math.log(hi) - math.log(lo)) / (math.log(sizes[i + 1]) - math.log(sizes[i]))
        else:
            slope = float("nan")
        rows.append({"n_lo": float(sizes[i]), "n_hi": float(sizes[i + 1]), "slope": slope})
    return pd.DataFrame(rows, columns=["n_lo", "n_hi", "slope"])


# ----------------------------------------------------------------------------------------------------
# Batched curve fits (used for the full fit, the leave-one-repeat-out replicates and the held-out sizes)
# ----------------------------------------------------------------------------------------------------
_B_GRID = np.linspace(0.0, 4.0, 401)


def _floor_fit_batch(x, M, W, c_lo, c_hi):
    """Fit ``a n^-b + c`` (``c_lo <= c <= c_hi``) to every row of ``M`` (B, k) by relative least squares.

    For a fixed ``b`` the model is linear in ``(a, c)``: the weighted least squares of ``(M - a n^-b - c) / M``
    (which equals the log residual to first order) is solved in closed form, ``c`` clipped to its bounds and
    ``a`` refitted; ``b`` is found on a grid over [0, 4] refined twice. Deterministic and vectorised, with no
    local minima to fall into. ``W`` (B, k) weights the sizes (0 leaves a size out). ``c_hi`` may be an array
    (one bound per row). Returns arrays ``a, b, c``; NaN where no positive prefactor fits.
    """
    B = M.shape[0]
    ok = np.isfinite(M) & (W > 0)
    Mz = np.where(ok, M, 1.0)
    Wz = np.where(ok, W, 0.0)
    q = 1.0 / Mz  # (B, k)
    c_lo = np.broadcast_to(np.asarray(c_lo, float), (B,))[:, None]
    c_hi = np.broadcast_to(np.asarray(c_hi, float), (B,))[:, None]
    c_hi = np.maximum(c_hi, c_lo)

    def solve(bgrid):  # bgrid (B, G)
        p = np.exp(-bgrid[:, :, None] * x[None, None, :]) * q[:, None, :]  # (B, G, k)
        w = Wz[:, None, :]
        q3 = q[:, None, :]
        spp = (w * p * p).sum(-1)
        spq = (w * p * q3).sum(-1)
        sqq = (w * q3 * q3).sum(-1)
        sp = (w * p).sum(-1)
        sq = (w * q3).sum(-1)
        det = spp * sqq - spq**2
        with np.errstate(divide="ignore", invalid="ignore"):
            a = (sp * sqq - sq * spq) / det
            c = (spp * sq - spq * sp) / det
            cc = np.clip(np.where(np.isfinite(c), c, c_lo), c_lo, c_hi)
            a_c = (sp - cc * spq) / spp
        a = np.where((c == cc) & np.isfinite(a), a, a_c)
        c = cc
        r = 1.0 - a[:, :, None] * p - c[:, :, None] * q3
        ssr = (w * r * r).sum(-1)
        ssr = np.where((a > 0) & np.isfinite(ssr), ssr, np.inf)
        return a, c, ssr

    grid = np.broadcast_to(_B_GRID, (B, _B_GRID.size))
    step = _B_GRID[1] - _B_GRID[0]
    for _ in range(3):
        a, c, ssr = solve(grid)
        j = np.argmin(ssr, axis=1)
        best_b = grid[np.arange(B), j]
        grid = best_b[:, None] + np.linspace(-step, step, 41)[None, :]
        step = step / 20.0
    rows = np.arange(B)
    a, c, ssr = a[rows, j], c[rows, j], ssr[rows, j]
    bad = ~np.isfinite(ssr) | (ok.sum(axis=1) < 3)
    return (np.where(bad, np.nan, a), np.where(bad, np.nan, best_b), np.where(bad, np.nan, c))


def _wls(D, Y, W):
    """Row-wise weighted least squares: design ``D`` (k, p), responses ``Y`` (B, k), weights ``W`` (B, k).
    Returns coefficients (B, p); NaN rows where fewer usable points than parameters."""
    Yz = np.where(W > 0, Y, 0.0)
    XtWX = np.einsum("bk,kp,kq->bpq", W, D, D)
    XtWy = np.einsum("bk,kp,bk->bp", W, D, Yz)
    coef = np.full((Y.shape[0], D.shape[1]), np.nan)
    enough = np.count_nonzero(W, axis=1) >= D.shape[1]
    for i in np.flatnonzero(enough):
        coef[i] = np.linalg.lstsq(XtWX[i], XtWy[i], rcond=None)[0]
    return coef


def _excess_logs(M, c):
    """log(M - c) per row with weights 1 where the excess is positive."""
    c_arr = np.broadcast_to(np.asarray(c, dtype=float), (M.shape[0],))
    ex = M - c_arr[:, None]
    W = (np.isfinite(ex) & (ex > 0)).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        Y = np.log(np.where(W > 0, ex, 1.0))
    return Y, W


def _weighted_ols(x, Y, W):
    """Row-wise weighted least squares of Y (B,k) on x (k,) with weights W (B,k); returns (log a, b)."""
    sw = W.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        xm = (W * x).sum(axis=1) / sw
        Yz = np.where(W > 0, Y, 0.0)
        ym = (W * Yz).sum(axis=1) / sw
        dx = x[None, :] - xm[:, None]
        sxx = (W * dx**2).sum(axis=1)
        sxy = (W * dx * (Yz - ym[:, None])).sum(axis=1)
        slope = sxy / sxx
    ok = (np.count_nonzero(W, axis=1) >= 2) & (sxx > 0)
    slope = np.where(ok, slope, np.nan)
    return ym - slope * xm, -slope


def _fit_means(x, M, floor, W=None):
    """Fit the model of ``floor`` (a :class:`FloorChoice`) to every row of ``M`` (B, k).
    Returns arrays ``a, b, c`` of length B."""
    B = M.shape[0]
    if W is None:
        W = np.ones_like(M)
    if floor.model == "floor_fit":
        c_hi = floor.c_high
        if c_hi is None:  # no bound from a noise estimate: keep the floor below the smallest mean
            c_hi = 0.95 * np.nanmin(np.where(W > 0, M, np.inf), axis=1)
        return _floor_fit_batch(x, M, W, floor.c_low, c_hi)
    Y, Wp = _excess_logs(M, floor.value)
    la, b = _weighted_ols(x, Y, Wp * W)
    return np.exp(la), b, np.full(B, floor.value)


def _subrange_slopes(x, M, c, mask):
    """Exponent on the sizes in ``mask`` with the floor held at ``c`` (per row)."""
    Y, W = _excess_logs(M[:, mask], c)
    return _weighted_ols(x[mask], Y, W)[1]


# ----------------------------------------------------------------------------------------------------
# Intervals over whole repeats
# ----------------------------------------------------------------------------------------------------
def t_quantile(level, dof):
    """Two-sided Student-t quantile ``t_{dof, (1+level)/2}`` (scipy.stats.t)."""
    from scipy.stats import t

    return float(t.ppf(0.5 + level / 2.0, dof))


def _leave_one_out_means(E):
    """(R, k) error matrix -> (R, k) means of the other R-1 repeats (NaN cells skipped)."""
    R = E.shape[0]
    ok = np.isfinite(E)
    tot = np.where(ok, E, 0.0).sum(axis=0)
    cnt = ok.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = (tot[None, :] - np.where(ok, E, 0.0)) / (cnt[None, :] - ok)
    return np.where(np.isfinite(out), out, np.nan) if R > 1 else out


def jackknife_se(theta_loo):
    """Delete-one jackknife standard error ``sqrt((R-1)/R sum (theta_(-r) - mean)^2)``, per column.

    For a statistic linear in the per-repeat curves (the log-log slope of the mean of logs) it equals the
    standard error of the mean of the per-repeat estimates, so ``estimate +- t_{R-1} se`` is the Student
    interval over repeats; for the nonlinear fits (floors) it is its smooth generalisation.
    """
    th = np.asarray(theta_loo, dtype=float)
    R = np.sum(np.isfinite(th), axis=0)
    # a column with fewer than two finite replicates has no spread: NaN, said by the caller, not a warning
    ok = R >= 2
    safe = np.where(np.isfinite(th) & ok, th, 0.0)
    mean = np.sum(safe, axis=0) / np.maximum(R, 1)
    dev = np.where(np.isfinite(th), th - mean, 0.0)
    return np.where(ok, np.sqrt((R - 1) / np.maximum(R, 1) * np.sum(dev**2, axis=0)), np.nan)


def _t_interval(est, se, level, dof):
    h = t_quantile(level, dof) * se
    return (float(est - h), float(est + h))


# ----------------------------------------------------------------------------------------------------
# The floor: one place turns the user's choice into a model
# ----------------------------------------------------------------------------------------------------
@dataclass
class FloorChoice(ResultMixin):
    """The floor of ``err = a n^-b + c`` as used by a fit (see :func:`floor_model`).

    Attributes
    ----------
    model : str
        ``"loglog"`` (no floor), ``"excess"`` (``c`` given) or ``"floor_fit"`` (``c`` fitted in bounds).
    value : float
        ``c`` for ``"loglog"``/``"excess"`` (0 for no floor); NaN for ``"floor_fit"`` before fitting.
    interval : tuple or None
        The floor's own interval when it comes from a noise estimate with one.
    c_low, c_high : float or None
        Bounds of a fitted floor (``c_high=None``: below the smallest mean error, i.e. unbounded).
    source : str
        Plain words.
    """

    model: str
    value: float
    interval: tuple | None
    c_low: float
    c_high: float | None
    source: str


def _noise_parts(noise_variance, owner):
    """(value, interval or None) from a float or a NoiseEstimate-like object."""
    nv = getattr(noise_variance, "value", noise_variance)
    value = check_float(nv, "noise_variance", owner=owner, low=0.0)
    iv = getattr(noise_variance, "interval", None)
    if iv is not None:
        lo, hi = (float(v) for v in iv)
        if not (np.isfinite(lo) and np.isfinite(hi)):
            iv = None
        else:
            iv = (max(0.0, min(lo, value)), max(hi, value))
    return value, iv


def floor_model(floor, noise_variance=None, *, owner="fit_exponent") -> FloorChoice:
    """Turn a floor choice into the model a fit uses (the one place this is decided).

    Parameters
    ----------
    floor : None, float, "fit" or "estimate"
        ``None``: plain power law, no floor. A float ``c >= 0``: known floor. ``"estimate"``: the noise
        variance ``noise_variance`` as the floor (its interval, when it has one, widens the exponent's
        interval). ``"fit"``: ``c`` fitted on every replicate, bounded by the noise estimate's interval
        when ``noise_variance`` has one, by ``[0, 1.25 value]`` when it is a plain number, and only by the
        smallest mean error when there is no estimate (then a floor can absorb a bend; the verdict says so).
    noise_variance : float or NoiseEstimate, optional

    Returns
    -------
    FloorChoice
    """
    if floor is None:
        return FloorChoice("loglog", 0.0, None, 0.0, 0.0, "none (plain power law)")
    if isinstance(floor, str):
        if floor == "estimate":
            if noise_variance is None:
                raise ValueError(
                    f"{owner}: floor='estimate' needs noise_variance=...; pass noise_variance(X, y) from "
                    "manireg.curves.noise (or its .value), or use floor='fit'."
                )
            value, iv = _noise_parts(noise_variance, owner)
            src = "estimated noise variance" + ("" if iv is None else f" [{iv[0]:.4g}, {iv[1]:.4g}]")
            return FloorChoice("excess", value, iv, value, value, src)
        if floor == "fit":
            if noise_variance is None:
                return FloorChoice("floor_fit", float("nan"), None, 0.0, None,
                                   "fitted (c >= 0, no noise estimate to bound it)")
            value, iv = _noise_parts(noise_variance, owner)
            lo, hi = iv if iv is not None else (0.0, 1.25 * value)
            return FloorChoice("floor_fit", float("nan"), None, lo, hi,
                               f"fitted within [{lo:.4g}, {hi:.4g}] allowed by the noise estimate")
        raise ValueError(
            f"the 'floor' parameter of {owner} must be None, a float >= 0, 'fit' or 'estimate'; got {floor!r}."
        )
    c = check_float(floor, "floor", owner=owner, low=0.0)
    return FloorChoice("excess", c, None, c, c, "given")


# ----------------------------------------------------------------------------------------------------
# Campaign-level result
# ----------------------------------------------------------------------------------------------------
@dataclass
class SubrangeFit(ResultMixin):
    """Exponent fitted on part of the sizes (floor held at each replicate's full-range value), with its
    Student-t interval over repeats."""

    name: str
    n_min: float
    n_max: float
    n_sizes: int
    exponent: float
    interval: tuple


@dataclass
class ExponentFit(ResultMixin):
    """Fitted learning-curve exponent of one learner, with interval and verdict.

    The exponent is meaningful only together with ``interval`` and ``verdict``; ``str(fit)`` always shows
    all three. ``replicate_params`` (the leave-one-repeat-out fits of ``a, b, c``) is kept for the planner
    and left out of :meth:`to_dict`.

    Attributes
    ----------
    exponent : float
        Fitted ``b`` in ``err ~ a n^-b + c`` (on the per-size mean error).
    interval : tuple of float
        ``exponent +- t_{R-1} se`` with ``se`` the jackknife standard error over whole repeats (plus the
        floor's own uncertainty for ``floor="estimate"``); always contains ``exponent``.
    interval_method, standard_error, dof : str, float, int
    verdict : str
        ``"measured"``, ``"not a power law over this range"``, ``"power law not shown at this precision"``
        or ``"insufficient data"``.
    verdict_reason : str
        Plain words: why the verdict, the range actually fitted, optimisation-limited cells.
    model, floor, floor_source, floor_interval : str, float, str, tuple
    sizes, mean_errors : list
        Every size of the learner and its mean error; ``n_range`` is the range actually fitted.
    local_slopes : list of dict
        ``n_lo``, ``n_hi``, ``slope`` between successive sizes (floor subtracted).
    scan : list of dict
        Exponent over sliding windows of sizes, with intervals (``n_lo``, ``n_hi``, ``exponent``, ``lo``,
        ``hi``): where the curve bends.
    subrange_fits : list of SubrangeFit
        Lower and upper halves of the fitted sizes.
    equivalence : dict
        The two one-sided tests on the paired difference ``b_upper - b_lower``: ``difference``, ``se``,
        ``interval`` (at ``equivalence_level``), ``margin``, ``equivalent``, ``different``.
    model_comparison : list of dict
        Curve models with their leave-one-size-out error (mean squared log error); ``preferred_model``.
    optimisation_limited, dropped : list of dict
    predicted_exponent, ambient_exponent, implied_dimension, implied_smoothness : tuple or None
        Kept for callers that pass ``smoothness``/``dimension``; the formal comparison is
        :func:`manireg.curves.comparison.compare_with_theory`.
    """

    learner: str
    metric: str
    exponent: float
    interval: tuple
    level: float
    verdict: str
    verdict_reason: str
    model: str
    prefactor: float
    floor: float
    floor_source: str
    floor_interval: tuple
    n_repeats: int
    n_sizes: int
    n_range: tuple
    sizes: list
    mean_errors: list
    residuals: list
    local_slopes: list
    subrange_fits: list
    optimisation_limited: list
    dropped: list
    predicted_exponent: tuple | None
    ambient_exponent: tuple | None
    implied_dimension: tuple | None
    implied_smoothness: tuple | None
    smoothness: object
    dimension: float | None
    ambient_dim: int | None
    n_boot: int
    seed: object
    warnings: list
    interval_method: str = "jackknife"
    standard_error: float = float("nan")
    dof: int = 0
    equivalence: dict = field(default_factory=dict)
    model_comparison: list = field(default_factory=list)
    preferred_model: str = ""
    scan: list = field(default_factory=list)
    floor_bounds: tuple | None = None
    replicate_params: np.ndarray = field(default=None, repr=False)

    _skip_in_dict = ("replicate_params",)

    @property
    def boot_params(self):
        """Old name of :attr:`replicate_params`."""
        return self.replicate_params

    def predict(self, n):
        """The fitted curve ``a n^(-b) + c`` at ``n``."""
        n = np.asarray(n, dtype=float)
        return self.prefactor * n ** (-self.exponent) + self.floor

    def scan_frame(self):
        """The sliding-window exponents as a DataFrame."""
        import pandas as pd

        return pd.DataFrame(self.scan, columns=["n_lo", "n_hi", "n_sizes", "exponent", "lo", "hi"])

    def to_frame(self):
        """One row: learner, exponent with interval, verdict, model, floor, preferred curve model."""
        import pandas as pd

        def lohi(t):
            return (np.nan, np.nan) if t is None else (t[0], t[1])

        row = {
            "learner": self.learner,
            "metric": self.metric,
            "exponent": self.exponent,
            "exponent_lo": self.interval[0],
            "exponent_hi": self.interval[1],
            "level": self.level,
            "verdict": self.verdict,
            "verdict_reason": self.verdict_reason,
            "model": self.model,
            "preferred_model": self.preferred_model,
            "floor": self.floor,
            "floor_source": self.floor_source,
            "prefactor": self.prefactor,
            "n_min": self.n_range[0],
            "n_max": self.n_range[1],
            "n_sizes": self.n_sizes,
            "n_repeats": self.n_repeats,
            "n_optimisation_limited": len(self.optimisation_limited),
            "subrange_difference": self.equivalence.get("difference", np.nan),
        }
        for name in ("predicted_exponent", "ambient_exponent", "implied_dimension", "implied_smoothness"):
            row[name + "_lo"], row[name + "_hi"] = lohi(getattr(self, name))
        return pd.DataFrame([row])

    def __str__(self) -> str:
        pct = int(round(100 * self.level))
        lo, hi = self.interval
        lines = [
            f"{self.learner}: exponent {self.exponent:.3f} [{pct}% interval {lo:.3f}, {hi:.3f}] - "
            f"verdict: {self.verdict}",
            f"  why: {self.verdict_reason}",
            f"  model: {_MODELS.get(self.model, self.model)}; floor {self.floor:.4g} ({self.floor_source}); "
            f"n from {self.n_range[0]:g} to {self.n_range[1]:g}, {self.n_sizes} sizes, {self.n_repeats} repeats",
        ]
        if self.preferred_model:
            lines.append(f"  preferred curve model (held-out sizes): {self.preferred_model}")
        if self.scan:
            lines.append("  exponent over windows: " + "; ".join(
                f"{w['n_lo']:g}-{w['n_hi']:g}: {w['exponent']:.2f} [{w['lo']:.2f}, {w['hi']:.2f}]" for w in self.scan))
        for name, label in (("predicted_exponent", "predicted 2s/(2s+d)"), ("ambient_exponent", "ambient 2s/(2s+D)")):
            p = getattr(self, name)
            if p is not None:
                lines.append(f"  {label}: {p[0]:.3f}" + (f" to {p[1]:.3f}" if p[1] != p[0] else ""))
        return "\n".join(lines)


@dataclass
class ExponentTable(ResultMixin):
    """Exponent fits for several learners (``fits`` maps learner name to :class:`ExponentFit`)."""

    fits: dict

    def __getitem__(self, learner) -> ExponentFit:
        return self.fits[learner]

    def __iter__(self):
        return iter(self.fits.values())

    def __len__(self) -> int:
        return len(self.fits)

    def to_frame(self):
        """One row per learner (see :meth:`ExponentFit.to_frame`)."""
        import pandas as pd

        frames = [f.to_frame() for f in self.fits.values()]
        return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()

    def __str__(self) -> str:
        return "\n".join(str(f) for f in self.fits.values())


def _check_table(rows, metric, owner):
    """Validate a campaign table: a non-empty DataFrame with the required columns; keep status 'ok' rows.
    Only ``learner``, ``n``, ``repeat`` and the ``metric`` column are required."""
    import pandas as pd

    if not isinstance(rows, pd.DataFrame):
        try:
            rows = pd.DataFrame(rows)
        except Exception:  # noqa: BLE001 - any failure means the input is not tabular
            raise ValueError(f"{owner}: rows must be a pandas DataFrame of campaign rows; got {type(rows).__name__}.")
    if len(rows) == 0:
        raise ValueError(f"{owner}: rows is empty; run or load a campaign before fitting (no rows to fit).")
    need = [c for c in (*REQUIRED_COLUMNS[:3], metric) if c not in rows.columns]
    if need:
        raise ValueError(
            f"{owner}: rows is missing column(s) {need}; a campaign table needs at least "
            f"{list(REQUIRED_COLUMNS[:3]) + [metric]} (got {list(rows.columns)})."
        )
    if "status" in rows.columns:
        rows = rows[rows["status"].astype(str) == "ok"]
        if len(rows) == 0:
            raise ValueError(f"{owner}: no rows with status 'ok'; every cell failed, so there is nothing to fit.")
    return rows

def _select_rows(rows, learner, metric, n_range, owner):
    """Validate the campaign table and return the rows of one learner (status ok, within n_range)."""
    import pandas as pd

    rows = _check_table(rows, metric, owner)
    learners = sorted(rows["learner"].astype(str).unique())
    if learner is None:
        if len(learners) != 1:
            raise ValueError(
                f"{owner}: rows hold {len(learners)} learners {learners}; pass learner=... to pick one, "
                "or use fit_all."
            )
        learner = learners[0]
    if str(learner) not in learners:
        raise ValueError(f"{owner}: unknown learner {learner!r}; the rows hold {learners}.")
    sel = rows[rows["learner"].astype(str) == str(learner)].copy()
    if n_range is not None:
        lo, hi = n_range
        lo = -np.inf if lo is None else lo
        hi = np.inf if hi is None else hi
        sel = sel[(sel["n"] >= lo) & (sel["n"] <= hi)]
        if len(sel) == 0:
            raise ValueError(f"{owner}: no rows of {learner!r} with n in {n_range}; widen n_range.")
    err = pd.to_numeric(sel[metric], errors="coerce").to_numpy(dtype=float)
    if not np.all(np.isfinite(err)):
        raise ValueError(
            f"{owner}: column {metric!r} of {learner!r} has {int(np.sum(~np.isfinite(err)))} non-finite "
            "value(s); drop those rows or mark them status='failed'."
        )
    if np.any(err <= 0):
        raise ValueError(
            f"{owner}: errors must be positive for a fit on the log scale; column {metric!r} of {learner!r} "
            f"has {int(np.sum(err <= 0))} value(s) <= 0. Check the column or drop those rows."
        )
    if np.any(sel["n"].to_numpy(dtype=float) <= 0):
        raise ValueError(f"{owner}: sample sizes n must be positive; drop rows with n <= 0.")
    return sel, str(learner)


def _optimisation_limited(sel):
    out = []
    has_stop = "stop_reason" in sel.columns
    has_late = "late_best" in sel.columns
    if not (has_stop or has_late):
        return out
    for _, r in sel.iterrows():
        why = []
        if has_stop and str(r["stop_reason"]) in OPTIMISATION_CAPS:
            why.append("stopped at the " + {"step_cap": "step limit", "time_cap": "time limit"}.get(
                str(r["stop_reason"]), str(r["stop_reason"])))
        if has_late and bool(r["late_best"]) and r["late_best"] == r["late_best"]:
            why.append("best step came late")
        if why:
            out.append({"n": int(r["n"]), "repeat": int(r["repeat"]), "reason": ", ".join(why)})
    return out


def _as_range(value, name):
    if value is None:
        return None
    if isinstance(value, numbers.Real) and not isinstance(value, bool):
        v = check_float(value, name, owner="fit_exponent", low=0.0, low_open=True)
        return (v, v)
    try:
        lo, hi = value
        lo = check_float(lo, name, owner="fit_exponent", low=0.0, low_open=True)
        hi = check_float(hi, name, owner="fit_exponent", low=0.0, low_open=True)
    except (TypeError, ValueError):
        raise ValueError(
            f"the '{name}' parameter of fit_exponent must be a positive number or a (low, high) pair; got {value!r}."
        ) from None
    return (min(lo, hi), max(lo, hi))


def _theory(interval, exponent, smoothness, dimension, ambient_dim):
    """Predicted / ambient exponents and implied d or s, as (lo, hi) tuples or None."""
    s_rng = _as_range(smoothness, "smoothness")
    if dimension is not None:
        dimension = check_float(dimension, "dimension", owner="fit_exponent", low=0.0, low_open=True)
    if ambient_dim is not None:
        ambient_dim = check_int(ambient_dim, "ambient_dim", owner="fit_exponent", low=1)
    if s_rng is None and dimension is None:
        return None, None, None, None
    from manireg.theory import rates

    def span(vals):
        vals = [v for v in vals if v is not None]
        return None if not vals else (float(min(vals)), float(max(vals)))

    def implied(fn, b, other, at_zero, at_one):
        # exponents outside (0, 1) imply no finite positive value: report the limit instead
        if b <= 0.0:
            return at_zero
        if b >= 1.0:
            return at_one
        return float(fn(b, other))

    predicted = ambient = implied_d = implied_s = None
    if s_rng is not None and dimension is not None:
        predicted = span([float(rates.regression_exponent(dimension, s)) for s in s_rng])
    if s_rng is not None and ambient_dim is not None:
        ambient = span([float(rates.ambient_exponent(ambient_dim, s)) for s in s_rng])
    lo, hi = interval
    if np.isfinite(lo) and np.isfinite(hi):
        if s_rng is not None:
            implied_d = span(
                [implied(rates.implied_dimension, b, s, math.inf, 0.0) for b in (lo, hi) for s in s_rng]
            )
        if dimension is not None:
            implied_s = span([implied(rates.implied_smoothness, b, dimension, 0.0, math.inf) for b in (lo, hi)])
    return predicted, ambient, implied_d, implied_s


# ----------------------------------------------------------------------------------------------------
# Curve models compared on held-out sizes
# ----------------------------------------------------------------------------------------------------
CURVE_MODELS = {
    "power law": "a n^-b (+ the chosen floor)",
    "power law + floor": "a n^-b + c, c refitted within what the noise estimate allows",
    "broken power law": "two exponents joined at a fitted break",
    "power law x log": "a n^-b (log n)^p",
}


def _predict_broken(x, Y, W, xt):
    """Continuous two-segment line in (log n, log excess), break on a grid; predict at ``xt`` per row."""
    B, k = Y.shape
    out = np.full(B, np.nan)
    for i in range(B):
        use = W[i] > 0
        xs = x[use]
        if xs.size < 5:
            continue
        cands = np.concatenate([xs[1:-2], 0.5 * (xs[1:-2] + xs[2:-1])])
        D = np.stack([np.column_stack([np.ones(k), -x, -np.maximum(x - xb, 0.0)]) for xb in cands])  # (C,k,3)
        w = W[i]
        y = np.where(use, Y[i], 0.0)
        A = np.einsum("k,ckp,ckq->cpq", w, D, D)
        rhs = np.einsum("k,ckp,k->cp", w, D, y)
        good = np.abs(np.linalg.det(A)) > 1e-12
        if not good.any():
            continue
        coef = np.linalg.solve(A[good], rhs[good][..., None])[..., 0]  # (C', 3)
        r = (np.einsum("ckp,cp->ck", D[good], coef) - y) * use
        j = int(np.argmin((r * r).sum(axis=1)))
        xb = cands[good][j]
        out[i] = float(coef[j] @ [1.0, -xt[i], -max(xt[i] - xb, 0.0)])
    return out


def _loso_errors(x, m, floor, c0, noise_high):
    """Leave-one-size-out mean squared log error of each curve model on the mean curve ``m`` (k,).

    Every size is held out in turn (the ends are extrapolations); each model is refitted on the others and
    predicts the held-out mean error. Returns {model: error or None (too few sizes)}.
    """
    preds = _model_predictions(x, m, floor, c0, noise_high, held_out=True)
    target = np.log(m)
    errs = {}
    for name, pred in preds.items():
        with np.errstate(invalid="ignore", divide="ignore"):
            e = (np.log(pred) - target) ** 2
        errs[name] = float(np.mean(e)) if np.all(np.isfinite(e)) else float("inf")
    return errs


def _model_drift(x, m, floor, c0, noise_high, masks):
    """How far each curve model's own exponent moves across the fitted range: each model is fitted on every
    size, and the exponent of its fitted curve (floor ``c0`` subtracted, as for the data) is read on the lower
    and the upper half of the sizes. Returns {model: |upper - lower|} (inf where the fitted curve falls to
    the floor). A model that predicts held-out sizes better but bends less than the equivalence margin does
    not contradict a single exponent at that precision."""
    out = {}
    for name, pred in _model_predictions(x, m, floor, c0, noise_high, held_out=False).items():
        if name == "power law":
            continue
        pred = np.asarray(pred, dtype=float)
        if not np.all(np.isfinite(pred)) or np.any(pred <= c0):
            out[name] = float("inf")
            continue
        up = _subrange_slopes(x, pred[None, :], c0, masks["upper half"])[0]
        lo = _subrange_slopes(x, pred[None, :], c0, masks["lower half"])[0]
        out[name] = float(abs(up - lo)) if np.isfinite(up) and np.isfinite(lo) else float("inf")
    return out


def _model_predictions(x, m, floor, c0, noise_high, *, held_out):
    """Each curve model's prediction of the mean error at every size: refitted without that size
    (``held_out=True``) or fitted on all sizes."""
    k = m.size
    Mrep = np.broadcast_to(m, (k, k)).copy()
    W = 1.0 - np.eye(k) if held_out else np.ones((k, k))
    out = {}
    # the base power law, with the chosen floor treatment (a fitted floor is refitted each time)
    a, b, c = _fit_means(x, Mrep, floor, W)
    out["power law"] = np.exp(x) ** 0 * (a * np.exp(-b * x) + c)
    if floor.model != "floor_fit" and k >= 5:
        alt = FloorChoice("floor_fit", float("nan"), None, 0.0, noise_high, "")
        a2, b2, c2 = _fit_means(x, Mrep, alt, W)
        out["power law + floor"] = a2 * np.exp(-b2 * x) + c2
    cfix = c if floor.model == "floor_fit" else np.full(k, c0)
    Y, Wp = _excess_logs(Mrep, cfix)
    Wp = Wp * W
    if k >= 6:
        out["broken power law"] = np.exp(_predict_broken(x, Y, Wp, x)) + cfix
    if k >= 5:
        D = np.column_stack([np.ones(k), -x, np.log(x)])
        coef = _wls(D, Y, Wp)
        out["power law x log"] = np.exp(np.einsum("kp,kp->k", coef, D)) + cfix
    return out


# ----------------------------------------------------------------------------------------------------
# Sliding-window scan
# ----------------------------------------------------------------------------------------------------
def _window_scan(x, sizes, m, Mloo, c0, c_loo, level, window):
    k = sizes.size
    R = Mloo.shape[0]
    w = min(window, k)
    out = []
    for i in range(k - w + 1):
        mask = np.zeros(k, bool)
        mask[i:i + w] = True
        est = float(_subrange_slopes(x, m[None, :], c0, mask)[0])
        loo = _subrange_slopes(x, Mloo, c_loo, mask)
        se = float(jackknife_se(loo))
        lo, hi = _t_interval(est, se, level, R - 1) if np.isfinite(est) else (np.nan, np.nan)
        out.append({"n_lo": float(sizes[i]), "n_hi": float(sizes[i + w - 1]), "n_sizes": int(w),
                    "exponent": est, "lo": lo, "hi": hi})
    return out


def exponent_scan(rows, learner=None, *, window=3, **fit_kwargs):
    """The exponent over sliding windows of ``window`` successive sizes, with Student-t intervals over
    repeats: where a curve bends. A DataFrame with ``n_lo``, ``n_hi``, ``n_sizes``, ``exponent``, ``lo``, ``hi``.
    ``fit_kwargs`` go to :func:`fit_exponent` (``floor``, ``noise_variance``, ``metric``, ``level``, ...)."""
    return fit_exponent(rows, learner, scan_window=window, **fit_kwargs).scan_frame()


# ----------------------------------------------------------------------------------------------------
# fit_exponent
# ----------------------------------------------------------------------------------------------------
def _error_matrix(sel, metric):
    """(sizes, E) with E[repeat, size] the mean error of that cell (NaN where a cell is missing)."""
    n = sel["n"].to_numpy(dtype=float)
    sizes, si = np.unique(n, return_inverse=True)
    _, ri = np.unique(sel["repeat"].to_numpy(), return_inverse=True)
    tot = np.zeros((ri.max() + 1, sizes.size))
    cnt = np.zeros_like(tot)
    np.add.at(tot, (ri, si), sel[metric].to_numpy(dtype=float))
    np.add.at(cnt, (ri, si), 1.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return sizes, np.where(cnt > 0, tot / np.maximum(cnt, 1), np.nan)


def _shared_scatter_se(x, E, m, a, b, c, n_params):
    """Standard error added by scatter that every repeat shares at a size (one test set scores every cell).

    Repeats cannot see it: it moves all repeats' errors at a size together. It shows as lack of fit of the
    mean curve beyond what the repeats' own scatter explains: ``tau^2 = max(0, s_res^2 - mean_i v_i)`` with
    ``s_res^2`` the residual variance of the fit to the means (log scale) and ``v_i`` the variance of the
    log mean at size ``i`` from the repeats; its effect on the slope is ``tau / sqrt(Sxx)``.
    """
    k = x.size
    if k <= n_params:
        return 0.0
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.log(m) - np.log(a * np.exp(-b * x) + c)
        logE = np.log(E)
        v = np.nanvar(logE, axis=0, ddof=1) / np.sum(np.isfinite(logE), axis=0)
    if not np.all(np.isfinite(r)):
        return 0.0
    tau2 = max(0.0, float(r @ r) / (k - n_params) - float(np.nanmean(v)))
    return float(np.sqrt(tau2 / np.sum((x - x.mean()) ** 2)))


def _interval_for(method, b0, E, x, floor, level, n_boot, seed, Mloo, bloo):
    """(interval, se) of the exponent by ``method``; the interval always contains ``b0``."""
    R = E.shape[0]
    if method == "jackknife":
        se = float(jackknife_se(bloo))
        return _t_interval(b0, se, level, R - 1), se
    if method == "per_repeat":
        _, bb, _ = _fit_means(x, E, floor)
        bb = bb[np.isfinite(bb)]
        se = float(np.std(bb, ddof=1) / np.sqrt(bb.size)) if bb.size > 1 else float("nan")
        return _t_interval(b0, se, level, R - 1), se
    if method == "bootstrap":
        rng = make_rng(seed)
        idx = rng.integers(0, R, size=(n_boot, R))
        with np.errstate(invalid="ignore"), _QuietEmptyMean():
            Mb = np.nanmean(E[idx], axis=1)
        _, bb, _ = _fit_means(x, Mb, floor)
        bb = bb[np.isfinite(bb)]
        alpha = (1.0 - level) / 2.0
        lo, hi = np.quantile(bb, [alpha, 1 - alpha])
        return (float(min(lo, b0)), float(max(hi, b0))), float(np.std(bb, ddof=1))
    raise ValueError(
        f"the 'interval' parameter of fit_exponent must be 'jackknife', 'per_repeat' or 'bootstrap'; got {method!r}."
    )


def fit_exponent(
    rows,
    learner=None,
    *,
    floor=None,
    noise_variance=None,
    metric="test_mse",
    n_range=None,
    level=0.95,
    interval="jackknife",
    equivalence_margin=0.1,
    equivalence_level=0.90,
    beaten_ratio=0.5,
    min_decades=1.0,
    scan_window=3,
    n_boot=1000,
    seed=0,
    smoothness=None,
    dimension=None,
    ambient_dim=None,
) -> ExponentFit:
    """Fit the learning-curve exponent of one learner, with an interval over whole repeats and a verdict.

    The per-size mean error over repeats is fitted by the model that ``floor`` selects
    (:func:`floor_model`). The interval is ``b +- t_{R-1} se`` where ``se`` is the delete-one jackknife over
    whole repeats (each repeat's curve, all sizes, left out in turn and the full model, floor included,
    refitted): ``R`` repeats carry ``R - 1`` degrees of freedom, and Student's quantile says so. With
    ``floor="estimate"`` the floor's own interval adds the exponent's sensitivity to it.

    The verdict is ``"measured"`` only when all of these hold:

    1. the range actually fitted (after sizes at or below the floor are dropped) spans ``min_decades``;
    2. the single power law is not beaten on held-out sizes: no other curve model (power law + floor, broken
       power law, power law x log factor) has a leave-one-size-out error below ``beaten_ratio`` times the
       power law's while the power law's error exceeds twice the noise of the means;
    3. the exponents of the lower and upper halves of the fitted sizes are shown **equivalent**: the
       ``equivalence_level`` interval of the paired difference ``b_upper - b_lower`` (jackknife over repeats,
       Student t) lies inside ``(-equivalence_margin, equivalence_margin)``, the two one-sided tests of
       Schuirmann (1987);
    4. with ``floor="estimate"``, the exponent moves by less than ``equivalence_margin`` across the floor's
       interval; with ``floor="fit"`` and no noise estimate to bound it, the fitted floor is not allowed to
       carry the curve (it stays below half the smallest mean error).

    A curve whose halves differ (the difference's ``level`` interval excludes 0) or whose power law is beaten
    is ``"not a power law over this range"``; one where neither difference nor equivalence can be shown is
    ``"power law not shown at this precision"`` (more repeats or sizes would decide).

    Parameters
    ----------
    rows : pandas.DataFrame
        Campaign rows with ``learner``, ``n``, ``repeat`` and the ``metric`` column; optional ``status``
        (only ``"ok"`` rows are used), ``stop_reason`` and ``late_best`` (optimisation-limited cells).
    learner : str, optional
        Which learner; may be omitted when the rows hold one learner.
    floor : None, float, "fit" or "estimate"
        See :func:`floor_model`.
    noise_variance : float or NoiseEstimate, optional
        Required with ``floor="estimate"``; bounds the floor of ``floor="fit"``.
    metric : str, default "test_mse"
        Error column, e.g. ``"test_mse_clean"`` (error against the noise-free target, floor 0).
    n_range : (low, high), optional
        Fit only sizes in ``[low, high]`` (either end may be None).
    level : float, default 0.95
        Interval level.
    interval : {"jackknife", "per_repeat", "bootstrap"}
        ``"jackknife"`` (default, see above); ``"per_repeat"``: the Student interval of exponents fitted to
        each repeat alone, centred on the fit to the mean; ``"bootstrap"``: the percentile bootstrap over
        repeats (kept for comparison; it under-covers at small R, docs/fitting.md).
    equivalence_margin, equivalence_level : float
        Tolerance and confidence of the equivalence test of the halves (0.1 and 0.90).
    beaten_ratio : float, default 0.5
        How much better another curve model must predict held-out sizes to beat the power law.
    min_decades : float, default 1
        Fitted range needed for "measured".
    scan_window : int, default 3
        Sizes per window of the sliding exponent scan.
    n_boot, seed
        Draws and seed of ``interval="bootstrap"``.
    smoothness, dimension, ambient_dim : optional
        Only fill the old ``predicted_exponent``/``ambient_exponent``/``implied_*`` fields; use
        :func:`manireg.curves.comparison.compare_with_theory` for the comparison with theory.

    Returns
    -------
    ExponentFit

    Warns
    -----
    UserWarning
        With fewer than 5 repeats: the interval is wide for a reason (few degrees of freedom).

    References
    ----------
    .. [1] Efron and Tibshirani, "An Introduction to the Bootstrap" (1993), Ch. 11 (the jackknife).
    .. [2] D. J. Schuirmann, "A comparison of the two one-sided tests procedure and the power approach for
       assessing the equivalence of average bioavailability", J. Pharmacokinet. Biopharm. 15 (1987).
    .. [3] Hestness et al., arXiv:1712.00409 (2017): power-law region between small-data and floor.
    .. [4] Alabdulmohsin, Neyshabur and Zhai, NeurIPS 2022: judge a curve model by held-out sizes.
    """
    owner = "fit_exponent"
    n_boot = check_int(n_boot, "n_boot", owner=owner, low=10)
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    eq_level = check_float(equivalence_level, "equivalence_level", owner=owner, low=0.0, high=1.0,
                           low_open=True, high_open=True)
    margin = check_float(equivalence_margin, "equivalence_margin", owner=owner, low=0.0, low_open=True)
    check_choice(interval, "interval", owner=owner, choices=("jackknife", "per_repeat", "bootstrap"))
    sel, learner = _select_rows(rows, learner, metric, n_range, owner)
    fl = floor_model(floor, noise_variance, owner=owner)
    sizes_all, E_all = _error_matrix(sel, metric)
    R = E_all.shape[0]
    opt_lim = _optimisation_limited(sel)
    warnings_out: list[str] = []
    means_all = np.nanmean(E_all, axis=0)
    seed_out = seed if not isinstance(seed, np.random.Generator) else None
    base = dict(
        learner=learner, metric=metric, level=level, model=fl.model, floor_source=fl.source, n_repeats=R,
        sizes=sizes_all.tolist(), mean_errors=means_all.tolist(), optimisation_limited=opt_lim,
        smoothness=smoothness, dimension=dimension, ambient_dim=ambient_dim, n_boot=n_boot, seed=seed_out,
        warnings=warnings_out, interval_method=interval, dof=max(R - 1, 0),
        floor_bounds=None if fl.model != "floor_fit" else (fl.c_low, fl.c_high),
    )

    def empty_result(verdict, reason, dropped=()):
        return ExponentFit(
            exponent=float("nan"), interval=(float("nan"), float("nan")), verdict=verdict, verdict_reason=reason,
            prefactor=float("nan"), floor=fl.value, floor_interval=(float("nan"), float("nan")),
            n_sizes=int(sizes_all.size), n_range=(float(sizes_all.min()), float(sizes_all.max())), residuals=[],
            local_slopes=[], subrange_fits=[], dropped=list(dropped), predicted_exponent=None,
            ambient_exponent=None, implied_dimension=None, implied_smoothness=None,
            replicate_params=np.empty((0, 3)), **base,
        )

    if sizes_all.size < 3:
        return empty_result(VERDICT_INSUFFICIENT, f"only {sizes_all.size} sample size(s); at least 3 sizes "
                            "spanning a decade of n are needed to judge a power law.")
    if R < 2:
        return empty_result(VERDICT_INSUFFICIENT, "a single repeat per size: no interval can be formed from "
                            "one repeat; run at least 5 repeats per size.")
    if R < MIN_REPEATS_FOR_INTERVAL:
        msg = (f"fit_exponent: only {R} repeats for learner {learner!r}: the interval uses Student's t with "
               f"{R - 1} degrees of freedom (t = {t_quantile(level, R - 1):.2f} against 1.96 for a normal), so "
               f"it is wide for a reason: {R} repeats say little about the spread. Run at least "
               f"{MIN_REPEATS_FOR_INTERVAL} repeats per size for a narrower interval.")
        warn(msg)
        warnings_out.append(msg)

    # sizes at or below a known floor are dropped; the rest is the fitted range
    dropped = []
    if fl.model == "excess":
        for s_, m_ in zip(sizes_all, means_all):
            if m_ <= fl.value:
                dropped.append({"n": float(s_), "err": float(m_), "reason": f"mean error {m_:.4g} <= floor {fl.value:.4g}"})
    keep = np.array([not any(d_["n"] == s_ for d_ in dropped) for s_ in sizes_all])
    sizes, E = sizes_all[keep], E_all[:, keep]
    k = sizes.size
    if k < 3:
        return empty_result(VERDICT_INSUFFICIENT, f"only {k} size(s) have mean error above the floor "
                            f"{fl.value:.4g}; nothing left to fit. Check the floor or use floor='fit'.", dropped)
    x = np.log(sizes)
    m = np.nanmean(E, axis=0)
    Mloo = _leave_one_out_means(E)
    a0, b0, c0 = (float(v[0]) for v in _fit_means(x, m[None, :], fl))
    aloo, bloo, cloo = _fit_means(x, Mloo, fl)
    iv, se = _interval_for(interval, b0, E, x, fl, level, n_boot, seed, Mloo, bloo)
    se_shared = _shared_scatter_se(x, E, m, a0, b0, c0, 3 if fl.model == "floor_fit" else 2)
    if interval != "bootstrap" and se_shared > 0:
        se = float(np.hypot(se, se_shared))
        iv = _t_interval(b0, se, level, R - 1)
    floor_interval = (c0, c0)
    if fl.model == "floor_fit":
        floor_interval = _t_interval(c0, float(jackknife_se(cloo)), level, R - 1)
        floor_interval = (max(floor_interval[0], fl.c_low), floor_interval[1])
    floor_shift = None
    if fl.model == "excess" and fl.interval is not None:
        # the floor's own uncertainty: the exponent's change across the floor's interval
        ends = []
        for cc in fl.interval:
            _, bb, _ = _fit_means(x, m[None, :], FloorChoice("excess", cc, None, cc, cc, ""))
            ends.append(float(bb[0]))
        floor_interval = tuple(fl.interval)
        floor_shift = (ends[0], ends[1])
        if all(np.isfinite(ends)):
            z = 2.0 * 1.959963984540054
            se_floor = abs(ends[1] - ends[0]) / z
            se = float(np.hypot(se, se_floor))
            iv = _t_interval(b0, se, level, R - 1)
    replicate = np.column_stack([aloo, bloo, cloo])

    # halves: paired difference with the floor at each replicate's own value
    half = (k + 1) // 2
    masks = {"lower half": np.arange(k) < half, "upper half": np.arange(k) >= k - half}
    sub, est, loo = [], {}, {}
    for name, mask in masks.items():
        est[name] = float(_subrange_slopes(x, m[None, :], c0, mask)[0])
        loo[name] = _subrange_slopes(x, Mloo, cloo, mask)
        sub.append(SubrangeFit(name=name, n_min=float(sizes[mask].min()), n_max=float(sizes[mask].max()),
                               n_sizes=int(mask.sum()), exponent=est[name],
                               interval=_t_interval(est[name], float(jackknife_se(loo[name])), level, R - 1)))
    diff = est["upper half"] - est["lower half"]
    diff_se = float(jackknife_se(loo["upper half"] - loo["lower half"]))
    equivalence = _tost(diff, diff_se, margin, eq_level, level, R)
    equivalence["difference_interval"] = _t_interval(diff, diff_se, level, R - 1)
    # an unsure floor: the halves must be equivalent at either end of the floor's allowed range too
    ends = fl.interval if fl.model == "excess" else (
        (fl.c_low, fl.c_high) if fl.model == "floor_fit" and fl.c_high is not None else None)
    equivalence["at_floor_ends"] = []
    if ends is not None and ends[1] > ends[0]:
        for cc in ends:
            d_full = _subrange_slopes(x, m[None, :], cc, masks["upper half"]) - _subrange_slopes(
                x, m[None, :], cc, masks["lower half"])
            d_loo = _subrange_slopes(x, Mloo, cc, masks["upper half"]) - _subrange_slopes(
                x, Mloo, cc, masks["lower half"])
            t_ = _tost(float(d_full[0]), float(jackknife_se(d_loo)), margin, eq_level, level, R)
            t_["floor"] = float(cc)
            equivalence["at_floor_ends"].append(t_)

    # curve models on held-out sizes
    noise_high = fl.interval[1] if fl.interval is not None else (
        fl.c_high if (fl.model == "floor_fit" and fl.c_high is not None) else 0.95 * float(np.min(m)))
    cv = _loso_errors(x, m, fl, c0, min(noise_high, 0.95 * float(np.min(m))))
    with np.errstate(invalid="ignore", divide="ignore"):
        logE = np.log(E)
        noise_var = float(np.nanmean(np.nanvar(logE, axis=0, ddof=1) / np.sum(np.isfinite(logE), axis=0)))
    pl = cv["power law"]
    drift = _model_drift(x, m, fl, c0, min(noise_high, 0.95 * float(np.min(m))), masks)
    better = [nm for nm, e in cv.items() if nm != "power law" and e < beaten_ratio * pl and pl > max(2.0 * noise_var, 1e-10)]
    # beaten: a model that predicts held-out sizes better AND bends by at least the equivalence margin
    beaten = [nm for nm in better if drift.get(nm, float("inf")) >= margin]
    preferred = min(beaten or better, key=cv.get) if better else "power law"
    comparison = [{"model": nm, "description": CURVE_MODELS[nm], "loso_error": e,
                   "exponent_drift": drift.get(nm, 0.0 if nm == "power law" else float("nan"))} for nm, e in cv.items()]

    scan = _window_scan(x, sizes, m, Mloo, c0, cloo, level, scan_window)
    local = local_slopes(sizes, m, floor=c0 if c0 > 0 else 0.0).to_dict(orient="records")
    resid = (np.log(m) - np.log(a0 * sizes ** (-b0) + c0)).tolist()

    verdict, reason = _verdict(
        sizes=sizes, sizes_all=sizes_all, min_decades=min_decades, sub=sub, equivalence=equivalence, pct=int(round(100 * level)),
        beaten=beaten, cv=cv, preferred=preferred, fl=fl, c0=c0, m=m, floor_shift=floor_shift, margin=margin,
        b0=b0,
    )
    unsure = _unsure_floor(fl, m)
    if unsure and "the floor is unsure" not in reason:
        reason = unsure + reason  # whatever the verdict, a floor that can bend the curve is said first
    if dropped:
        reason += (f" {len(dropped)} size(s) with mean error at or below the floor {fl.value:.4g} were dropped "
                   f"(n = {', '.join(format(d_['n'], 'g') for d_ in dropped)}); the floor may be too high.")
    if opt_lim:
        cells = ", ".join(f"n={c['n']} repeat {c['repeat']} ({c['reason']})" for c in opt_lim[:6])
        more = "" if len(opt_lim) <= 6 else f" and {len(opt_lim) - 6} more"
        reason += (f" {len(opt_lim)} cell(s) are optimisation-limited: {cells}{more}; their error may reflect the "
                   "training budget rather than the sample size.")
    if R < MIN_REPEATS_FOR_INTERVAL:
        reason += f" With {R} repeats the interval is wide for a reason (Student t with {R - 1} degrees of freedom)."

    predicted, ambient, implied_d, implied_s = _theory(iv, b0, smoothness, dimension, ambient_dim)
    return ExponentFit(
        exponent=b0, interval=iv, verdict=verdict, verdict_reason=reason, prefactor=a0, floor=c0,
        floor_interval=tuple(float(v) for v in floor_interval), n_sizes=k,
        n_range=(float(sizes.min()), float(sizes.max())), residuals=resid, local_slopes=local, subrange_fits=sub,
        dropped=dropped, predicted_exponent=predicted, ambient_exponent=ambient, implied_dimension=implied_d,
        implied_smoothness=implied_s, standard_error=float(se), equivalence=equivalence,
        model_comparison=comparison, preferred_model=preferred, scan=scan, replicate_params=replicate, **base,
    )


def _tost(diff, se, margin, eq_level, level, R):
    """Two one-sided tests of |difference| < margin at ``eq_level`` (the ``2 eq_level - 1`` Student interval
    inside the margins), and whether the ``level`` interval excludes 0."""
    ok = bool(np.isfinite(diff) and np.isfinite(se))
    eq_iv = _t_interval(diff, se, 2 * eq_level - 1, R - 1) if ok else (float("nan"), float("nan"))
    d_iv = _t_interval(diff, se, level, R - 1) if ok else (float("nan"), float("nan"))
    return {"difference": float(diff), "se": float(se), "interval": eq_iv, "level": eq_level, "margin": margin,
            "equivalent": bool(ok and -margin < eq_iv[0] and eq_iv[1] < margin),
            "different": bool(ok and abs(diff) > 1e-9 and (d_iv[0] > 0 or d_iv[1] < 0))}


def _verdict(*, sizes, sizes_all, min_decades, sub, equivalence, pct, beaten, cv, preferred, fl, c0, m, floor_shift,
             margin, b0):
    decades = math.log10(sizes.max() / sizes.min())
    rng_txt = f"n = {sizes.min():g}..{sizes.max():g} ({decades:.2f} decades)"
    lo_s, up_s = sub
    halves = (f"lower half {lo_s.exponent:.3f} {_fmt_iv(lo_s.interval)}, upper half {up_s.exponent:.3f} "
              f"{_fmt_iv(up_s.interval)}; difference {equivalence['difference']:+.3f}, "
              f"{int(round(100 * equivalence['level']))}% interval {_fmt_iv(equivalence['interval'], '+.3f')}")
    if not np.isfinite(equivalence["difference"]):
        return VERDICT_NOT_POWER_LAW, (f"the sub-range exponents could not be fitted over {rng_txt} (too few sizes "
                                       "above the floor in one half).")
    if decades < min_decades:
        return VERDICT_NOT_POWER_LAW, (f"the range actually fitted, {rng_txt}, is below {min_decades:g} decade(s); "
                                       "a slope over less than a decade cannot be called a power law. Add sizes.")
    unsure = _unsure_floor(fl, m)
    if beaten:
        trend = "flattens" if equivalence["difference"] < 0 else "steepens"
        return VERDICT_NOT_POWER_LAW, (
            f"over {rng_txt} the single power law is beaten on held-out sizes by the {preferred} (leave-one-size-out "
            f"error {cv[preferred]:.3g} against {cv['power law']:.3g}); the curve {trend} ({halves}). See the "
            "exponent scan." + (" An unknown error floor would do this; try floor='estimate' with a noise estimate."
                                if fl.model == "loglog" and trend == "flattens" else ""))
    if equivalence["different"]:
        trend = "flattens" if equivalence["difference"] < 0 else "steepens"
        return VERDICT_NOT_POWER_LAW, (
            f"the curve {trend} over {rng_txt}: {halves}, which excludes 0 at {pct}%. See the exponent scan."
            + (" An unknown error floor would do this; try floor='estimate' with a noise estimate."
               if fl.model == "loglog" and trend == "flattens" else ""))
    bad_end = [e for e in equivalence.get("at_floor_ends", []) if not e["equivalent"]]
    if equivalence["equivalent"] and bad_end:
        e = bad_end[0]
        return VERDICT_NOT_SHOWN, (
            f"the floor is unsure: with the floor at {e['floor']:.4g} (an end of its allowed range) the halves "
            f"differ by {e['difference']:+.3f}, {int(round(100 * e['level']))}% interval "
            f"{_fmt_iv(e['interval'], '+.3f')}, not within +-{margin:g}; a sharper noise estimate would decide. "
            f"Over {rng_txt}: {halves}.")
    if floor_shift is not None and not (all(np.isfinite(floor_shift)) and abs(floor_shift[1] - floor_shift[0]) < margin):
        return VERDICT_NOT_SHOWN, (
            f"the floor is unsure: across its interval the exponent moves from {floor_shift[0]:.3f} to "
            f"{floor_shift[1]:.3f} (by more than {margin:g}); a sharper noise estimate (more data or neighbours) "
            f"would decide. Over {rng_txt}: {halves}.")
    if fl.model == "floor_fit" and fl.c_high is None and c0 > 0.5 * float(np.min(m)):
        return VERDICT_NOT_SHOWN, (
            f"the fitted floor {c0:.4g} carries more than half of the smallest mean error and nothing bounds it: a "
            "floor fitted without a noise estimate can absorb a bend. Pass noise_variance=... to bound it. "
            f"Over {rng_txt}: {halves}.")
    if unsure:
        return VERDICT_NOT_SHOWN, (
            f"A sharper noise estimate (more data or neighbours) or a known floor would decide. Over {rng_txt}: {halves}.")
    if not equivalence["equivalent"]:
        return VERDICT_NOT_SHOWN, (
            f"over {rng_txt} the halves are not shown equivalent within +-{margin:g}: {halves}. More repeats or "
            "sizes would decide.")
    return VERDICT_MEASURED, (
        f"over {rng_txt} the single power law is not beaten on held-out sizes and the halves are equivalent "
        f"within +-{margin:g} (two one-sided tests): {halves}.")


#: A floor whose allowed range is wider than this share of the smallest mean error is called unsure.
UNSURE_FLOOR_SHARE = 0.5


def _unsure_floor(fl, m) -> str:
    """A sentence starting the reason when the floor's interval (an estimate's interval, or the bounds of a
    fitted floor) is wide against the smallest mean error: then the floor alone can bend or straighten the
    curve, whatever the verdict. Empty otherwise."""
    ends = fl.interval if fl.model == "excess" else (
        (fl.c_low, fl.c_high) if fl.model == "floor_fit" and fl.c_high is not None else None)
    if ends is None:
        return ""
    smallest = float(np.min(m))
    width = float(ends[1]) - float(ends[0])
    if not (np.isfinite(width) and width > UNSURE_FLOOR_SHARE * smallest):
        return ""
    return (f"the floor is unsure: its interval [{ends[0]:.4g}, {ends[1]:.4g}] is wider than "
            f"{UNSURE_FLOOR_SHARE:g} x the smallest mean error {smallest:.4g}, so the floor alone can bend the curve; "
            "what follows may come from the floor. ")


def _fmt_iv(iv, fmt=".3f"):
    return f"[{iv[0]:{fmt}}, {iv[1]:{fmt}}]"


class _QuietEmptyMean:
    """Silence numpy's 'mean of empty slice' when a resample misses a size (that size is then skipped)."""

    def __enter__(self):
        import warnings

        self._cm = warnings.catch_warnings()
        self._cm.__enter__()
        warnings.simplefilter("ignore", RuntimeWarning)
        return self

    def __exit__(self, *exc):
        return self._cm.__exit__(*exc)


def fit_all(rows, **kwargs) -> ExponentTable:
    """Run :func:`fit_exponent` for every learner in ``rows`` (``kwargs`` are passed on).

    Returns
    -------
    ExponentTable
        ``to_frame()`` gives one row per learner.
    """
    if "learner" in kwargs:
        raise ValueError("fit_all fits every learner; call fit_exponent(rows, learner=...) for one.")
    metric = kwargs.get("metric", "test_mse")
    rows = _check_table(rows, metric, "fit_all")
    fits = {}
    for name in sorted(rows["learner"].astype(str).unique()):
        fits[name] = fit_exponent(rows, name, **kwargs)
    return ExponentTable(fits=fits)
