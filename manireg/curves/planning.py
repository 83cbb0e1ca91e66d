"""Sample-size planning from a fitted learning curve, an extrapolation check and a capacity read-out.

References
----------
.. [1] Hestness et al., "Deep Learning Scaling is Predictable, Empirically", arXiv:1712.00409 (2017).
.. [2] I. Alabdulmohsin, B. Neyshabur and X. Zhai, "Revisiting Neural Scaling Laws in Language and
   Vision", NeurIPS 2022 (judge a fitted curve by how well it extrapolates to held-out larger n).
.. [3] Chen, Jiang, Liao, Zhao, "Nonparametric regression on low-dimensional manifolds using deep ReLU
   networks", Information and Inference 11 (2022) (width ~ n^(d/(2s+d)) at the rate-optimal size).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_float, check_int

from .fitting import (
    VERDICT_MEASURED,
    ExponentFit,
    _error_matrix,
    _select_rows,
    _t_interval,
    fit_exponent,
    jackknife_se,
    t_quantile,
)

__all__ = [
    "SamplePlan",
    "ExtrapolationCheck",
    "CapacityReadout",
    "plan_samples",
    "extrapolation_check",
    "capacity_readout",
]


# ----------------------------------------------------------------------------------------------------
# plan_samples
# ----------------------------------------------------------------------------------------------------
@dataclass
class SamplePlan(ResultMixin):
    """Samples needed to reach a target test error, with an interval and the network at that n.

    Attributes
    ----------
    target_error : float
    n_required : float
        ``(a / (target - c))^(1/b)`` from the fitted curve (not rounded).
    interval : tuple of float
        ``exp(log n +- t_{R-1} se)`` over the leave-one-repeat-out fits; ``inf`` when a replicate puts the
        target at or below its floor or gives a curve that does not fall.
    level : float
    exponent, exponent_interval, floor, model, verdict : as in the fit
    extrapolated : bool
        True when ``n_required`` lies beyond the largest measured size (a forecast, not an interpolation).
    largest_measured_n : float
    warning : str or None
        Set when the plan was made from a fit whose verdict is not "measured" (``allow_unverified=True``).
    architecture : dict or None
        :func:`manireg.theory.sizing.size_network` at ``n_required`` when ``d`` and ``s`` are known.
    """

    learner: str
    target_error: float
    n_required: float
    interval: tuple
    level: float
    exponent: float
    exponent_interval: tuple
    floor: float
    model: str
    verdict: str
    extrapolated: bool
    largest_measured_n: float
    warning: str | None = None
    architecture: dict | None = None
    architecture_n: int | None = None

    def to_frame(self):
        """One row: the plan with its interval ends and the exponent interval."""
        import pandas as pd

        row = {k: v for k, v in self.to_dict().items() if not isinstance(v, (list, dict))}
        row["n_required_lo"], row["n_required_hi"] = self.interval
        row["exponent_lo"], row["exponent_hi"] = self.exponent_interval
        return pd.DataFrame([row])

    def __str__(self) -> str:
        lo, hi = self.interval
        pct = int(round(100 * self.level))
        s = (
            f"{self.learner}: about {self.n_required:,.0f} samples for test error {self.target_error:.4g} "
            f"[{pct}% interval {lo:,.0f} to {hi:,.0f}] from exponent {self.exponent:.3f} "
            f"[{self.exponent_interval[0]:.3f}, {self.exponent_interval[1]:.3f}], floor {self.floor:.4g}; "
            f"verdict: {self.verdict}"
        )
        if self.extrapolated:
            s += f"; extrapolated beyond the largest measured n = {self.largest_measured_n:g}"
        if self.warning:
            s += f"\n  WARNING: {self.warning}"
        return s


def _invert(a, b, c, target):
    """n with a n^-b + c = target; inf where the target is unreachable."""
    a, b, c = (np.asarray(v, dtype=float) for v in (a, b, c))
    gap = target - c
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        n = np.exp((np.log(a) - np.log(gap)) / b)
    bad = ~(np.isfinite(a) & np.isfinite(b)) | (gap <= 0) | (b <= 0) | (a <= 0) | ~np.isfinite(n)
    return np.where(bad, np.inf, n)


def plan_samples(
    fit: ExponentFit,
    target_error,
    *,
    allow_unverified=False,
    dimension=None,
    smoothness=None,
    ambient_dim=None,
    constants=None,
) -> SamplePlan:
    """Samples needed for a target test error, by inverting the fitted ``err = a n^-b + c``.

    ``n = (a / (target - c))^(1/b)``. The interval applies the same inversion to every leave-one-repeat-out
    fit kept in the fit and forms ``log n +- t_{R-1} se`` from their jackknife standard error; when a
    replicate's floor is at or above the target the upper end is ``inf``. A target at or below the floor, or
    below the upper end of the floor's interval, is refused with the reason.

    Parameters
    ----------
    fit : ExponentFit
        From :func:`manireg.curves.fitting.fit_exponent`.
    target_error : float
        Desired test error, in the units of the fitted metric; must lie above the fitted floor.
    allow_unverified : bool, default False
        Plan from a fit whose verdict is not "measured"; the plan then carries a ``warning``.
    dimension, smoothness : float, optional
        ``d`` and ``s`` for the network size at the planned n (default: the values stored in the fit).
    ambient_dim : int, optional
        Input width ``D`` of the network (default: the fit's ``ambient_dim``).
    constants : optional
        Passed to :func:`manireg.theory.sizing.size_network`.

    Returns
    -------
    SamplePlan

    Raises
    ------
    ValueError
        Target at or below the floor; fit not measured (unless allowed); a curve that does not fall.

    References
    ----------
    .. [1] Hestness et al., arXiv:1712.00409 (2017): sample-size forecasts from fitted learning curves.
    .. [2] Chen, Jiang, Liao, Zhao, Information and Inference 11 (2022): network size at the planned n.
    """
    owner = "plan_samples"
    if not isinstance(fit, ExponentFit):
        raise ValueError(f"{owner}: fit must be an ExponentFit from fit_exponent; got {type(fit).__name__}.")
    target = check_float(target_error, "target_error", owner=owner, low=0.0, low_open=True)
    if not np.isfinite(fit.exponent):
        raise ValueError(f"{owner}: the fit has no exponent ({fit.verdict}: {fit.verdict_reason}); nothing to invert.")
    warning = None
    if fit.verdict != VERDICT_MEASURED:
        msg = (
            f"the exponent of {fit.learner!r} is not measured (verdict: {fit.verdict}; {fit.verdict_reason})"
        )
        if not allow_unverified:
            raise ValueError(
                f"{owner}: refusing to plan: {msg}. Fix the fit (range, floor, more sizes) or pass "
                "allow_unverified=True to get a plan marked with a warning."
            )
        warning = msg + "; this plan extrapolates a curve that is not a verified power law."
    floor_hi = max(fit.floor, fit.floor_interval[1]) if np.isfinite(fit.floor_interval[1]) else fit.floor
    if target <= fit.floor:
        raise ValueError(
            f"{owner}: target_error {target:.4g} is at or below the fitted floor {fit.floor:.4g} "
            f"({fit.floor_source}); no sample size reaches it. Choose a target above the floor or reduce the "
            "noise/floor (e.g. better features)."
        )
    if target <= floor_hi:
        raise ValueError(
            f"{owner}: target_error {target:.4g} lies inside the floor's interval [{fit.floor_interval[0]:.4g}, "
            f"{fit.floor_interval[1]:.4g}] ({fit.floor_source}): the floor itself may be at or above the target, so "
            "no sample size is sure to reach it. Choose a target above the floor's interval."
        )
    if fit.exponent <= 0:
        raise ValueError(
            f"{owner}: the fitted exponent {fit.exponent:.3g} is not positive: the error does not fall with n, "
            "so more samples do not reach a lower target."
        )
    n_req = float(_invert(fit.prefactor, fit.exponent, fit.floor, target))
    reps = fit.replicate_params if fit.replicate_params is not None else np.empty((0, 3))
    if len(reps) >= 2:
        draws = _invert(reps[:, 0], reps[:, 1], reps[:, 2], target)
        if np.all(np.isfinite(draws)):
            se = float(jackknife_se(np.log(draws)))
            lo, hi = _t_interval(math.log(n_req), se, fit.level, len(reps) - 1)
            interval = (math.exp(lo), math.exp(hi))
        else:
            interval = (float(np.min(draws[np.isfinite(draws)])) if np.isfinite(draws).any() else n_req, float("inf"))
        interval = (min(interval[0], n_req), max(interval[1], n_req))
    else:
        interval = (float("nan"), float("nan"))

    arch = None
    arch_n = None
    d = dimension if dimension is not None else fit.dimension
    s = smoothness if smoothness is not None else fit.smoothness
    D = ambient_dim if ambient_dim is not None else fit.ambient_dim
    if smoothness is None and s is not None and not isinstance(s, (int, float)):
        s = None  # the fit holds a range of s; size the network only when one value is passed here
    if d is not None and s is not None and D is not None and np.isfinite(n_req):
        if not isinstance(s, (int, float)):
            raise ValueError(
                f"{owner}: the network size needs one smoothness value; the fit holds the range {s!r}. "
                "Pass smoothness=<value> to plan_samples."
            )
        from manireg.theory.sizing import size_network

        arch_n = int(math.ceil(n_req))
        spec = size_network(arch_n, d, s, check_int(D, "ambient_dim", owner=owner, low=1), constants=constants)
        arch = spec.to_dict()

    return SamplePlan(
        learner=fit.learner, target_error=target, n_required=n_req, interval=interval, level=fit.level,
        exponent=fit.exponent, exponent_interval=tuple(fit.interval), floor=fit.floor, model=fit.model,
        verdict=fit.verdict, extrapolated=bool(n_req > fit.n_range[1]), largest_measured_n=fit.n_range[1],
        warning=warning, architecture=arch, architecture_n=arch_n,
    )


# ----------------------------------------------------------------------------------------------------
# extrapolation_check
# ----------------------------------------------------------------------------------------------------
@dataclass
class ExtrapolationCheck(ResultMixin):
    """Forecast of held-out larger sizes from a fit on the smaller ones.

    Attributes
    ----------
    table : list of dict
        Per held-out size: ``n``, ``observed`` (mean over repeats), ``predicted``, ``predicted_lo``,
        ``predicted_hi`` (a prediction interval for the held-out *mean*: ``predicted * exp(+- t_{R-1} se)`` with
        ``se`` the jackknife over repeats of ``log observed - log predicted``, so it carries the noise of the
        held-out mean and of the fit, and their correlation through shared repeats), ``relative_error`` =
        (predicted - observed) / observed, ``inside_band``.
    fit : ExponentFit
        The fit on the smaller sizes.
    mean_abs_relative_error : float
    """

    learner: str
    holdout_sizes: list
    table: list
    mean_abs_relative_error: float
    fit: ExponentFit = field(repr=False)

    def to_frame(self):
        """One row per held-out size."""
        import pandas as pd

        return pd.DataFrame(self.table)

    def __str__(self) -> str:
        rows = "; ".join(
            f"n={r['n']:g}: observed {r['observed']:.4g}, predicted {r['predicted']:.4g} "
            f"({100 * r['relative_error']:+.1f}%)"
            for r in self.table
        )
        return f"{self.learner}: extrapolation from n <= {self.fit.n_range[1]:g}: {rows}"


def extrapolation_check(rows, learner=None, *, holdout=1, metric="test_mse", **fit_kwargs) -> ExtrapolationCheck:
    """Fit on all but the largest ``holdout`` sizes and forecast those sizes.

    A curve that is a power law over the fitted range should forecast the next sizes within its band;
    a large relative error says the fitted form (or its floor) does not carry over.

    Parameters
    ----------
    rows : pandas.DataFrame
        Campaign rows (see :func:`manireg.curves.fitting.fit_exponent`).
    learner : str, optional
    holdout : int, default 1
        Number of largest sizes held out.
    metric : str, default "test_mse"
    **fit_kwargs
        Passed to :func:`fit_exponent` (``floor``, ``n_boot``, ``seed``, ``level``, ...).

    Returns
    -------
    ExtrapolationCheck

    References
    ----------
    .. [1] I. Alabdulmohsin, B. Neyshabur and X. Zhai, NeurIPS 2022: extrapolation to held-out larger n as
       the test of a fitted scaling law.
    """
    owner = "extrapolation_check"
    holdout = check_int(holdout, "holdout", owner=owner, low=1)
    if "n_range" in fit_kwargs:
        raise ValueError(f"{owner}: n_range is set from holdout; filter rows beforehand instead.")
    sel, learner = _select_rows(rows, learner, metric, None, owner)
    sizes = np.sort(sel["n"].unique().astype(float))
    if sizes.size < holdout + 3:
        raise ValueError(
            f"{owner}: {sizes.size} sizes; holding out {holdout} leaves fewer than 3 to fit. Add sizes or lower holdout."
        )
    fit_sizes, held = sizes[:-holdout], sizes[-holdout:]
    fit = fit_exponent(sel, learner, metric=metric, n_range=(fit_sizes[0], fit_sizes[-1]), **fit_kwargs)
    all_sizes, E = _error_matrix(sel, metric)
    reps = fit.replicate_params
    R = E.shape[0]
    table = []
    for n in held:
        col = E[:, int(np.searchsorted(all_sizes, n))]
        obs = float(np.nanmean(col))
        pred = float(fit.predict(n))
        lo = hi = float("nan")
        if reps is not None and len(reps) == R and R >= 2:
            ok = np.isfinite(col)
            tot = np.nansum(col)
            with np.errstate(invalid="ignore", divide="ignore"):
                obs_loo = (tot - np.where(ok, col, 0.0)) / (ok.sum() - ok)
                pred_loo = reps[:, 0] * n ** (-reps[:, 1]) + reps[:, 2]
                stat_loo = np.log(obs_loo) - np.log(pred_loo)
            se = float(jackknife_se(stat_loo))
            h = t_quantile(fit.level, R - 1) * se
            lo, hi = pred * math.exp(-h), pred * math.exp(h)
        table.append(
            {
                "n": float(n), "observed": obs, "predicted": pred, "predicted_lo": lo, "predicted_hi": hi,
                "relative_error": (pred - obs) / obs, "inside_band": bool(lo <= obs <= hi),
            }
        )
    mare = float(np.mean([abs(r["relative_error"]) for r in table]))
    return ExtrapolationCheck(
        learner=learner, holdout_sizes=held.tolist(), table=table, mean_abs_relative_error=mare, fit=fit
    )


# ----------------------------------------------------------------------------------------------------
# capacity_readout
# ----------------------------------------------------------------------------------------------------
_WIDTH_RE = re.compile(r"-w(\d+(?:\.\d+)?)$")

CAPACITY_BETWEEN = "between"
CAPACITY_TOO_SMALL = "approximation-limited"
CAPACITY_TOO_LARGE = "variance-limited"
CAPACITY_FLAT = "no clear difference"


@dataclass
class CapacityReadout(ResultMixin):
    """At each n, which width multiplier does best and where the rule's width (multiplier 1) sits.

    ``table`` rows: ``n``, ``best_multiplier``, ``best_error``, ``rule_error``, ``status`` (one of
    ``"between"``: narrower nets do worse and wider nets do worse, so the rule's width sits between the
    approximation-limited and the variance-limited regimes; ``"approximation-limited"``: a wider net does
    better, the rule's width is too small; ``"variance-limited"``: a narrower net does better, the rule's
    width is too large; ``"no clear difference"``), and ``reason``. Differences are paired over the repeats
    that both widths ran and count when their Student-t interval at ``level`` excludes 0.
    """

    multipliers: list
    margin: float | None
    table: list
    level: float = 0.95

    def to_frame(self):
        """One row per n."""
        import pandas as pd

        return pd.DataFrame(self.table)

    def __str__(self) -> str:
        return "\n".join(f"n={r['n']:g}: best multiplier {r['best_multiplier']:g}; {r['reason']}" for r in self.table)


def _multiplier_of(name):
    m = _WIDTH_RE.search(str(name))
    return float(m.group(1)) if m else None


def capacity_readout(rows, *, metric="test_mse", level=0.95, margin=None) -> CapacityReadout:
    """Read a width sweep: at each n, the best width multiplier and where multiplier 1 sits.

    The multiplier of each row is taken from a ``width_multiplier`` column when present, else from a
    learner name ending in ``-w<number>`` (``"net-w0.5"``, ``"net-w1"``, ``"net-w2"``).

    Parameters
    ----------
    rows : pandas.DataFrame
        Campaign rows with ``learner``, ``n``, ``repeat`` and ``metric``.
    metric : str, default "test_mse"
    level : float, default 0.95
        A paired difference (over the repeats both widths ran) counts when its ``level`` Student-t interval
        excludes 0.
    margin : float, optional
        Use ``margin`` standard errors instead of the Student quantile.

    Returns
    -------
    CapacityReadout

    References
    ----------
    .. [1] Chen, Jiang, Liao, Zhao, Information and Inference 11 (2022): the width that balances
       approximation and variance grows like n^(d/(2s+d)).
    """
    import pandas as pd

    owner = "capacity_readout"
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    if margin is not None:
        margin = check_float(margin, "margin", owner=owner, low=0.0)
    if not isinstance(rows, pd.DataFrame) or len(rows) == 0:
        raise ValueError(f"{owner}: rows is empty or not a DataFrame; pass the campaign rows of a width sweep.")
    missing = [c for c in ("learner", "n", "repeat", metric) if c not in rows.columns]
    if missing:
        raise ValueError(f"{owner}: rows is missing column(s) {missing}; got {list(rows.columns)}.")
    df = rows.copy()
    if "status" in df.columns:
        df = df[df["status"].astype(str) == "ok"]
    if "width_multiplier" in df.columns:
        df["_m"] = pd.to_numeric(df["width_multiplier"], errors="coerce")
    else:
        df["_m"] = [_multiplier_of(v) for v in df["learner"]]
    df = df[df["_m"].notna()]
    mults = sorted(df["_m"].unique().tolist())
    if len(mults) < 2 or 1.0 not in mults:
        raise ValueError(
            f"{owner}: need rows at width multiplier 1 (the rule's width) and at least one other; found "
            f"{mults}. Name learners like 'net-w0.5', 'net-w1', 'net-w2' or add a 'width_multiplier' column."
        )
    if np.any(df[metric].to_numpy(dtype=float) <= 0):
        raise ValueError(f"{owner}: errors must be positive; column {metric!r} has values <= 0.")
    stats = df.groupby(["n", "_m"])[metric].agg(["mean", "std", "count"]).reset_index()
    stats["se"] = stats["std"].fillna(0.0) / np.sqrt(stats["count"])
    table = []
    for n, g in stats.groupby("n"):
        g = g.set_index("_m")
        best_m = float(g["mean"].idxmin())
        row = {"n": float(n), "best_multiplier": best_m, "best_error": float(g["mean"].min())}
        if 1.0 not in g.index:
            row.update(rule_error=float("nan"), status="no rule width", reason="no run at multiplier 1 at this n.")
            table.append(row)
            continue
        r_mean = g.loc[1.0, "mean"]
        row["rule_error"] = float(r_mean)

        at_n = df[df["n"] == n]
        rule_by_rep = at_n[at_n["_m"] == 1.0].groupby("repeat")[metric].mean()

        def sig(m):
            """+1 if multiplier m is clearly worse than the rule's width, -1 clearly better, 0 unclear.
            Paired over the repeats both widths ran (they share data and test set): mean difference against
            t_{R-1} (or ``margin``) times its standard error."""
            other = at_n[at_n["_m"] == m].groupby("repeat")[metric].mean()
            d = (other - rule_by_rep).dropna().to_numpy(dtype=float)
            if d.size < 2:
                return 0
            diff = float(d.mean())
            se = float(d.std(ddof=1) / math.sqrt(d.size))
            crit = t_quantile(level, d.size - 1) if margin is None else margin
            if abs(diff) <= crit * se:
                return 0
            return 1 if diff > 0 else -1

        smaller = [m for m in g.index if m < 1.0]
        larger = [m for m in g.index if m > 1.0]
        better_small = [m for m in smaller if sig(m) < 0]
        better_large = [m for m in larger if sig(m) < 0]
        worse_small = bool(smaller) and all(sig(m) > 0 for m in smaller)
        worse_large = bool(larger) and all(sig(m) > 0 for m in larger)
        if better_large and not better_small:
            status = CAPACITY_TOO_SMALL
            reason = (
                f"wider nets (multiplier {', '.join(f'{m:g}' for m in better_large)}) do clearly better: the rule's "
                "width is approximation-limited (too small) here."
            )
        elif better_small and not better_large:
            status = CAPACITY_TOO_LARGE
            reason = (
                f"narrower nets (multiplier {', '.join(f'{m:g}' for m in better_small)}) do clearly better: the "
                "rule's width is variance-limited (too large) here."
            )
        elif worse_small and worse_large:
            status = CAPACITY_BETWEEN
            reason = (
                "narrower nets do worse (approximation-limited) and wider nets do worse (variance-limited): the "
                "rule's width sits between the two."
            )
        else:
            status = CAPACITY_FLAT
            reason = (
                "no width differs clearly from multiplier 1 (paired over repeats) on both sides; "
                "more repeats would sharpen the comparison."
            )
        row.update(status=status, reason=reason)
        table.append(row)
    return CapacityReadout(multipliers=[float(m) for m in mults], margin=margin, table=table, level=level)
