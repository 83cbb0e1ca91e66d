"""Power-law fits to learning curves, with bootstrap intervals over repeats and a verdict.

A learning curve is a table of campaign rows (one per learner, sample size ``n`` and repeat). This module fits

* ``err = a n^(-b)`` by least squares on ``log err`` against ``log n`` (model ``"loglog"``);
* ``err = a n^(-b) + c`` with a known floor ``c`` by least squares on ``log(err - c)`` (model ``"excess"``);
* ``err = a n^(-b) + c`` with ``c >= 0`` fitted jointly (model ``"floor_fit"``),

forms a percentile bootstrap interval for the exponent ``b`` by resampling whole repeats and refitting the
full model, and says whether the curve is a power law over the fitted range at all (the *verdict*). An
exponent is never reported without its interval and verdict.

References
----------
.. [1] Hestness et al., "Deep Learning Scaling is Predictable, Empirically", arXiv:1712.00409 (2017).
.. [2] Cortes, Jackel, Solla, Vapnik, Denker, "Learning curves: asymptotic values and rate of
   convergence", NIPS 1993.
.. [3] Viering and Loog, "The Shape of Learning Curves: a Review", IEEE TPAMI 45 (2023).
.. [4] Efron and Tibshirani, "An Introduction to the Bootstrap", Chapman & Hall (1993) (percentile
   intervals).
.. [5] Chen, Jiang, Liao, Zhao, "Nonparametric regression on low-dimensional manifolds using deep ReLU
   networks", Information and Inference 11 (2022) (the exponent 2s/(2s+d)).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_float, check_int, make_rng, warn

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
]

VERDICT_MEASURED = "measured"
VERDICT_NOT_POWER_LAW = "not a power law over this range"
VERDICT_INSUFFICIENT = "insufficient data"

REQUIRED_COLUMNS = ("learner", "n", "repeat", "test_mse")
OPTIMISATION_CAPS = ("step_cap", "time_cap")
MIN_REPEATS_FOR_INTERVAL = 5

_MODELS = {
    "loglog": "err = a n^-b (least squares on log err vs log n)",
    "excess": "err = a n^-b + c, c given (least squares on log(err - c) vs log n)",
    "floor_fit": "err = a n^-b + c, c >= 0 fitted (nonlinear least squares on log err)",
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


def _fit_floor_model(n, err, start=None):
    """Nonlinear least squares of log err on log(a n^-b + c) with c >= 0. Returns (a, b, c)."""
    from scipy.optimize import least_squares

    logn = np.log(n)
    logy = np.log(err)
    scale = float(np.min(err))

    def resid(p):
        la, b, u = p  # c = u * scale keeps the parameters on comparable scales
        pred = np.exp(la - b * logn) + u * scale
        return np.log(pred) - logy

    def jac(p):
        la, b, u = p
        A = np.exp(la - b * logn)
        pred = A + u * scale
        return np.column_stack([A / pred, -logn * A / pred, np.full_like(pred, scale) / pred])

    starts = []
    if start is not None and np.all(np.isfinite(start)) and start[0] > 0:
        starts.append((math.log(start[0]), start[1], start[2] / scale))
    for frac in ((0.0, 0.5, 0.9) if not starts else ()):
        excess = err - frac * scale
        la, b = _ols_loglog(logn, np.log(excess))
        starts.append((la, b, frac))
    best = None
    for p0 in starts:
        p0 = (p0[0], float(np.clip(p0[1], -9.0, 19.0)), max(float(p0[2]), 0.0))
        try:
            sol = least_squares(
                resid, p0, jac=jac, bounds=([-np.inf, -10.0, 0.0], [np.inf, 20.0, np.inf]), method="trf",
                x_scale="jac",
            )
        except (ValueError, FloatingPointError):  # pragma: no cover - defensive
            continue
        if best is None or sol.cost < best.cost:
            best = sol
    if best is None:  # pragma: no cover - defensive
        raise ValueError("fit_power_law: the nonlinear floor fit failed from every start; try floor=None.")
    la, b, u = best.x
    return math.exp(la), float(b), float(u * scale)


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
# Campaign-level fits with bootstrap and verdict
# ----------------------------------------------------------------------------------------------------
@dataclass
class SubrangeFit(ResultMixin):
    """Exponent fitted on part of the sizes (same model; a fitted floor is held at each draw's full-range
    value), with its bootstrap interval."""

    name: str
    n_min: float
    n_max: float
    n_sizes: int
    exponent: float
    interval: tuple


@dataclass
class ExponentFit(ResultMixin):
    """Fitted learning-curve exponent of one learner, with interval, verdict and theory comparison.

    The exponent is meaningful only together with ``interval`` and ``verdict``; ``str(fit)`` always shows
    all three. ``boot_params`` (bootstrap draws of ``a, b, c``) is kept for the planner and left out of
    :meth:`to_dict`.

    Attributes
    ----------
    exponent : float
        Fitted ``b`` in ``err ~ a n^-b + c``.
    interval : tuple of float
        Percentile bootstrap interval at ``level`` (resampling whole repeats, refitting the full model).
    verdict : str
        ``"measured"``, ``"not a power law over this range"`` or ``"insufficient data"``.
    verdict_reason : str
        Plain words: why the verdict, and which cells were optimisation-limited.
    model, floor, floor_source : str, float, str
        The model fitted and where its floor came from.
    local_slopes : list of dict
        ``n_lo``, ``n_hi``, ``slope`` between successive sizes (floor subtracted).
    subrange_fits : list of SubrangeFit
        Lower and upper halves of the sizes.
    optimisation_limited : list of dict
        Cells that stopped at a step or time cap, or whose best step came late.
    predicted_exponent, ambient_exponent : tuple or None
        ``2s/(2s+d)`` and ``2s/(2s+D)`` (an interval when ``s`` is a range).
    implied_dimension, implied_smoothness : tuple or None
        ``d`` implied by the exponent interval at the given ``s``; ``s`` implied at the given ``d``.
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
    boot_params: np.ndarray = field(default=None, repr=False)

    _skip_in_dict = ("boot_params",)

    def predict(self, n):
        """The fitted curve ``a n^(-b) + c`` at ``n``."""
        n = np.asarray(n, dtype=float)
        return self.prefactor * n ** (-self.exponent) + self.floor

    def to_frame(self):
        """One row: learner, exponent with interval, verdict, model, floor and theory comparison."""
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
            "floor": self.floor,
            "floor_source": self.floor_source,
            "prefactor": self.prefactor,
            "n_min": self.n_range[0],
            "n_max": self.n_range[1],
            "n_sizes": self.n_sizes,
            "n_repeats": self.n_repeats,
            "n_optimisation_limited": len(self.optimisation_limited),
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
        if self.predicted_exponent is not None:
            p = self.predicted_exponent
            lines.append(f"  predicted 2s/(2s+d): {p[0]:.3f}" + (f" to {p[1]:.3f}" if p[1] != p[0] else ""))
        if self.ambient_exponent is not None:
            p = self.ambient_exponent
            lines.append(f"  ambient 2s/(2s+D): {p[0]:.3f}" + (f" to {p[1]:.3f}" if p[1] != p[0] else ""))
        if self.implied_dimension is not None:
            p = self.implied_dimension
            if p[1] == 0.0:
                lines.append("  implied d (given s): none: an exponent of 1 or more exceeds 2s/(2s+d) for every d > 0")
            else:
                lines.append(f"  implied d (given s): {p[0]:.3g} to {p[1]:.3g}")
        if self.implied_smoothness is not None:
            p = self.implied_smoothness
            if p[0] == math.inf:
                lines.append("  implied s (given d): none: an exponent of 1 or more needs s -> infinity")
            else:
                lines.append(f"  implied s (given d): {p[0]:.3g} to {p[1]:.3g}")
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
    """Validate a campaign table: a non-empty DataFrame with the required columns; keep status 'ok' rows."""
    import pandas as pd

    if not isinstance(rows, pd.DataFrame):
        try:
            rows = pd.DataFrame(rows)
        except Exception:  # noqa: BLE001 - any failure means the input is not tabular
            raise ValueError(f"{owner}: rows must be a pandas DataFrame of campaign rows; got {type(rows).__name__}.")
    if len(rows) == 0:
        raise ValueError(f"{owner}: rows is empty; run or load a campaign before fitting (no rows to fit).")
    need = [c for c in REQUIRED_COLUMNS if c not in rows.columns]
    if metric not in rows.columns and metric not in need:
        need.append(metric)
    if need:
        raise ValueError(
            f"{owner}: rows is missing column(s) {need}; a campaign table needs at least "
            f"{list(REQUIRED_COLUMNS)} (got {list(rows.columns)})."
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
            why.append(f"stopped at {r['stop_reason']}")
        if has_late and bool(r["late_best"]) and r["late_best"] == r["late_best"]:
            why.append("best step came late")
        if why:
            out.append({"n": int(r["n"]), "repeat": int(r["repeat"]), "reason": ", ".join(why)})
    return out


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


def _fit_means(x, M, c, model, starts=None):
    """Fit every row of a (B,k) matrix of per-size means. Returns arrays a, b, c of length B."""
    B = M.shape[0]
    if model == "floor_fit":
        a = np.full(B, np.nan)
        b = np.full(B, np.nan)
        cc = np.full(B, np.nan)
        n = np.exp(x)
        for i in range(B):
            ok = np.isfinite(M[i])
            if ok.sum() < 3:
                continue
            st = None if starts is None else starts
            a[i], b[i], cc[i] = _fit_floor_model(n[ok], M[i, ok], start=st)
        return a, b, cc
    c_arr = np.broadcast_to(np.asarray(c, dtype=float), (B,))
    ex = M - c_arr[:, None]
    W = (np.isfinite(ex) & (ex > 0)).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        Y = np.log(np.where(W > 0, ex, 1.0))
    la, b = _weighted_ols(x, Y, W)
    return np.exp(la), b, c_arr.copy()


def _subrange_slopes(x, M, c, mask):
    """Exponent on the sizes in ``mask`` with the floor held at ``c`` (per row)."""
    c_arr = np.broadcast_to(np.asarray(c, dtype=float), (M.shape[0],))
    ex = M[:, mask] - c_arr[:, None]
    W = (np.isfinite(ex) & (ex > 0)).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        Y = np.log(np.where(W > 0, ex, 1.0))
    return _weighted_ols(x[mask], Y, W)[1]


def _percentile(draws, level):
    d = np.asarray(draws, dtype=float)
    d = d[np.isfinite(d)]
    if d.size == 0:
        return (float("nan"), float("nan"))
    alpha = (1.0 - level) / 2.0
    lo, hi = np.quantile(d, [alpha, 1.0 - alpha])
    return (float(lo), float(hi))


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


def fit_exponent(
    rows,
    learner=None,
    *,
    floor=None,
    noise_variance=None,
    metric="test_mse",
    n_range=None,
    n_boot=1000,
    level=0.95,
    seed=0,
    smoothness=None,
    dimension=None,
    ambient_dim=None,
) -> ExponentFit:
    """Fit the learning-curve exponent of one learner, with a bootstrap interval and a verdict.

    The per-size mean error over repeats is fitted by the model chosen with ``floor``. The interval is a
    percentile bootstrap over repeats: whole repeats (all sizes of one repeat id) are resampled with
    replacement and the full model, floor included, is refitted on every draw.

    The verdict is ``"measured"`` only when (i) there are at least 3 sizes, (ii) the fitted range spans at
    least a decade of ``n``, and (iii) the exponents fitted on the lower and upper halves of the sizes (the
    middle size shared when their number is odd) agree within their intervals: the two bootstrap intervals
    overlap. Otherwise it is ``"not a power law over this range"`` (or ``"insufficient data"`` with fewer
    than 3 sizes or a single repeat). On a fitted floor the halves hold each draw's fitted ``c`` fixed.

    Parameters
    ----------
    rows : pandas.DataFrame
        Campaign rows with at least ``learner``, ``n``, ``repeat`` and the ``metric`` column; optional
        ``status`` (only ``"ok"`` rows are used), ``stop_reason`` and ``late_best`` (to flag
        optimisation-limited cells).
    learner : str, optional
        Which learner; may be omitted when the rows hold one learner.
    floor : None, float, "fit" or "estimate"
        ``None``: log-log fit with no floor. A float: known floor ``c`` (fit on ``log(err - c)``).
        ``"fit"``: ``c >= 0`` fitted jointly. ``"estimate"``: ``c = noise_variance`` (the irreducible error of
        ``test_mse`` against noisy targets; see :func:`manireg.curves.noise.noise_variance`).
    noise_variance : float or NoiseEstimate, optional
        Required with ``floor="estimate"``.
    metric : str, default "test_mse"
        Error column, e.g. ``"test_mse_clean"`` (error against the noise-free target, floor 0).
    n_range : (low, high), optional
        Fit only sizes in ``[low, high]`` (either end may be None).
    n_boot : int, default 1000
        Bootstrap draws.
    level : float, default 0.95
        Interval level.
    seed : int, Generator or None, default 0
        Seed of the bootstrap.
    smoothness : float or (low, high), optional
        Hölder order ``s`` of the target, for the predicted exponent ``2s/(2s+d)`` and the implied ``d``.
    dimension : float, optional
        Intrinsic dimension ``d``, for the predicted exponent and the implied ``s``.
    ambient_dim : int, optional
        Ambient dimension ``D``, for the ambient exponent ``2s/(2s+D)``.

    Returns
    -------
    ExponentFit

    Raises
    ------
    ValueError
        Empty rows, missing columns, unknown learner, non-positive errors, bad parameters.

    Warns
    -----
    UserWarning
        When there are fewer than 5 repeats (3 repeats give only 10 distinct bootstrap resamples).

    References
    ----------
    .. [1] Efron and Tibshirani, "An Introduction to the Bootstrap" (1993): percentile intervals.
    .. [2] Hestness et al., arXiv:1712.00409 (2017): power-law region between small-data and floor.
    .. [3] Chen, Jiang, Liao, Zhao, Information and Inference 11 (2022): exponent 2s/(2s+d).
    """
    owner = "fit_exponent"
    n_boot = check_int(n_boot, "n_boot", owner=owner, low=10)
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    sel, learner = _select_rows(rows, learner, metric, n_range, owner)
    warnings_out: list[str] = []

    # floor and model
    if floor is None:
        model, c_fixed, floor_source = "loglog", 0.0, "none (plain log-log fit)"
    elif isinstance(floor, str):
        if floor == "fit":
            model, c_fixed, floor_source = "floor_fit", None, "fitted (c >= 0)"
        elif floor == "estimate":
            if noise_variance is None:
                raise ValueError(
                    "fit_exponent: floor='estimate' needs noise_variance=...; pass "
                    "noise_variance(X, y).value from manireg.curves.noise, or use floor='fit'."
                )
            nv = getattr(noise_variance, "value", noise_variance)
            c_fixed = check_float(nv, "noise_variance", owner=owner, low=0.0)
            model = "excess"
            floor_source = "estimated noise variance"
        else:
            raise ValueError(
                f"the 'floor' parameter of {owner} must be None, a float >= 0, 'fit' or 'estimate'; got {floor!r}."
            )
    else:
        c_fixed = check_float(floor, "floor", owner=owner, low=0.0)
        model, floor_source = "excess", "given"

    # matrix of errors: repeat x size (NaN where a cell is missing)
    piv = sel.pivot_table(index="repeat", columns="n", values=metric, aggfunc="mean")
    sizes = piv.columns.to_numpy(dtype=float)
    E = piv.to_numpy(dtype=float)
    R, k = E.shape
    x = np.log(sizes)
    opt_lim = _optimisation_limited(sel)

    def empty_result(verdict, reason):
        return ExponentFit(
            learner=learner, metric=metric, exponent=float("nan"), interval=(float("nan"), float("nan")),
            level=level, verdict=verdict, verdict_reason=reason, model=model, prefactor=float("nan"),
            floor=float("nan") if c_fixed is None else c_fixed, floor_source=floor_source,
            floor_interval=(float("nan"), float("nan")), n_repeats=R, n_sizes=k,
            n_range=(float(sizes.min()), float(sizes.max())), sizes=sizes.tolist(),
            mean_errors=np.nanmean(E, axis=0).tolist(), residuals=[], local_slopes=[], subrange_fits=[],
            optimisation_limited=opt_lim, dropped=[], predicted_exponent=None, ambient_exponent=None,
            implied_dimension=None, implied_smoothness=None, smoothness=smoothness, dimension=dimension,
            ambient_dim=ambient_dim, n_boot=n_boot, seed=seed if not isinstance(seed, np.random.Generator) else None,
            warnings=warnings_out, boot_params=np.empty((0, 3)),
        )

    need = 3
    if k < need:
        return empty_result(
            VERDICT_INSUFFICIENT,
            f"only {k} sample size(s); at least 3 sizes spanning a decade of n are needed to judge a power law.",
        )
    if R < 2:
        return empty_result(
            VERDICT_INSUFFICIENT,
            "a single repeat per size: no bootstrap interval can be formed; run at least 5 repeats per size.",
        )
    if R < MIN_REPEATS_FOR_INTERVAL:
        distinct = math.comb(2 * R - 1, R)
        msg = (
            f"fit_exponent: only {R} repeats for learner {learner!r}; a bootstrap over {R} repeats has only "
            f"{distinct} distinct resamples, so the interval is coarse and too narrow. Run at least "
            f"{MIN_REPEATS_FOR_INTERVAL} repeats per size."
        )
        warn(msg)
        warnings_out.append(msg)

    means = np.nanmean(E, axis=0)[None, :]
    a0, b0, c0 = (v[0] for v in _fit_means(x, means, c_fixed, model))
    if not np.isfinite(b0):
        return empty_result(
            VERDICT_INSUFFICIENT,
            f"fewer than 2 sizes have mean error above the floor {c_fixed:.4g}; nothing left to fit. "
            "Check the floor or use floor='fit'.",
        )
    dropped = []
    if model == "excess":
        for s_, m_ in zip(sizes, means[0]):
            if m_ <= c_fixed:
                dropped.append(
                    {"n": float(s_), "err": float(m_), "reason": f"mean error {m_:.4g} <= floor {c_fixed:.4g}"}
                )

    # bootstrap over repeats
    rng = make_rng(seed)
    idx = rng.integers(0, R, size=(n_boot, R))
    Eb = E[idx]  # (B, R, k)
    with np.errstate(invalid="ignore"), _QuietEmptyMean():
        Mb = np.nanmean(Eb, axis=1)
    ab, bb, cb = _fit_means(x, Mb, c_fixed, model, starts=(a0, b0, c0) if model == "floor_fit" else None)
    interval = _percentile(bb, level)
    floor_interval = _percentile(cb, level) if model == "floor_fit" else (c0, c0)
    boot = np.column_stack([ab, bb, cb])

    # sub-range fits: lower and upper halves of the sizes (sharing the middle size when k is odd)
    half = (k + 1) // 2
    lower = np.zeros(k, bool)
    lower[:half] = True
    upper = np.zeros(k, bool)
    upper[k - half:] = True
    sub = []
    diffs = None
    draws = {}
    for name, mask in (("lower half", lower), ("upper half", upper)):
        est = float(_subrange_slopes(x, means, c0, mask)[0])
        d = _subrange_slopes(x, Mb, cb, mask)
        draws[name] = d
        sub.append(
            SubrangeFit(
                name=name, n_min=float(sizes[mask].min()), n_max=float(sizes[mask].max()),
                n_sizes=int(mask.sum()), exponent=est, interval=_percentile(d, level),
            )
        )
    diffs = draws["upper half"] - draws["lower half"]
    diff_iv = _percentile(diffs, level)
    diff_est = sub[1].exponent - sub[0].exponent

    # local slopes with the fitted / given floor
    ls = local_slopes(sizes, means[0], floor=c0 if c0 > 0 else 0.0)
    local = ls.to_dict(orient="records")

    resid = (np.log(means[0]) - np.log(a0 * sizes ** (-b0) + c0)).tolist()

    # verdict
    decades = math.log10(sizes.max() / sizes.min())
    pct = int(round(100 * level))
    if not np.isfinite(diff_est) or not all(np.isfinite(diff_iv)):
        verdict = VERDICT_NOT_POWER_LAW
        reason = "the sub-range exponents could not be fitted (too few sizes above the floor in one half)."
    elif decades < 1.0:
        verdict = VERDICT_NOT_POWER_LAW
        reason = (
            f"the fitted range n = {sizes.min():g}..{sizes.max():g} spans only {decades:.2f} decades; at least "
            "one decade is needed before a slope can be called a power law. Add sizes."
        )
    elif _overlap(sub[0].interval, sub[1].interval):
        verdict = VERDICT_MEASURED
        reason = (
            f"the exponents on the lower half ({sub[0].exponent:.3f} {_fmt_iv(sub[0].interval)}) and upper half "
            f"({sub[1].exponent:.3f} {_fmt_iv(sub[1].interval)}) agree within their {pct}% intervals over "
            f"{decades:.2f} decades of n."
        )
    else:
        trend = "flattens" if diff_est < 0 else "steepens"
        verdict = VERDICT_NOT_POWER_LAW
        reason = (
            f"the curve {trend}: lower-half exponent {sub[0].exponent:.3f} {_fmt_iv(sub[0].interval)}, upper-half "
            f"{sub[1].exponent:.3f} {_fmt_iv(sub[1].interval)}: their {pct}% intervals do not overlap (difference "
            f"{diff_est:+.3f}, paired interval [{diff_iv[0]:+.3f}, {diff_iv[1]:+.3f}]). See the local slopes"
            + ("; an unknown error floor would do this, try floor='fit' or floor='estimate'." if trend == "flattens"
               and model == "loglog" else ".")
        )
    if dropped:
        reason += (
            f" {len(dropped)} size(s) with mean error at or below the floor {c0:.4g} were dropped "
            f"(n = {', '.join(format(d_['n'], 'g') for d_ in dropped)}); the floor may be too high."
        )
    if opt_lim:
        cells = ", ".join(f"n={c['n']} repeat {c['repeat']} ({c['reason']})" for c in opt_lim[:6])
        more = "" if len(opt_lim) <= 6 else f" and {len(opt_lim) - 6} more"
        reason += (
            f" {len(opt_lim)} cell(s) are optimisation-limited: {cells}{more}; their error may reflect the "
            "training budget rather than the sample size."
        )

    predicted, ambient, implied_d, implied_s = _theory(interval, b0, smoothness, dimension, ambient_dim)

    return ExponentFit(
        learner=learner, metric=metric, exponent=float(b0), interval=interval, level=level, verdict=verdict,
        verdict_reason=reason, model=model, prefactor=float(a0), floor=float(c0), floor_source=floor_source,
        floor_interval=floor_interval, n_repeats=R, n_sizes=k, n_range=(float(sizes.min()), float(sizes.max())),
        sizes=sizes.tolist(), mean_errors=means[0].tolist(), residuals=resid, local_slopes=local,
        subrange_fits=sub, optimisation_limited=opt_lim, dropped=dropped, predicted_exponent=predicted,
        ambient_exponent=ambient, implied_dimension=implied_d, implied_smoothness=implied_s,
        smoothness=smoothness, dimension=dimension, ambient_dim=ambient_dim, n_boot=n_boot,
        seed=seed if not isinstance(seed, np.random.Generator) else None, warnings=warnings_out, boot_params=boot,
    )


def _overlap(iv1, iv2, tol=1e-9):
    """Do two intervals overlap (with a relative tolerance for noise-free curves, whose intervals are points)?"""
    slack = tol * max(1.0, abs(iv1[0]), abs(iv1[1]), abs(iv2[0]), abs(iv2[1]))
    return iv1[0] <= iv2[1] + slack and iv2[0] <= iv1[1] + slack


def _fmt_iv(iv):
    return f"[{iv[0]:.3f}, {iv[1]:.3f}]"


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
    """Run :func:`fit_exponent` for every learner in ``rows``.

    Parameters
    ----------
    rows : pandas.DataFrame
        Campaign rows (see :func:`fit_exponent`).
    **kwargs
        Passed to :func:`fit_exponent` (``floor``, ``n_range``, ``n_boot``, ``seed``, ...).

    Returns
    -------
    ExponentTable
        ``to_frame()`` gives one row per learner.

    References
    ----------
    .. [1] Efron and Tibshirani, "An Introduction to the Bootstrap" (1993).
    """
    if "learner" in kwargs:
        raise ValueError("fit_all fits every learner; call fit_exponent(rows, learner=...) for one.")
    metric = kwargs.get("metric", "test_mse")
    rows = _check_table(rows, metric, "fit_all")
    fits = {}
    for name in sorted(rows["learner"].astype(str).unique()):
        fits[name] = fit_exponent(rows, name, **kwargs)
    return ExponentTable(fits=fits)
