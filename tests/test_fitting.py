"""Tests of manireg.curves.fitting: exponent recovery, bootstrap coverage, verdicts and bad input.

Synthetic curves are ``err = a n^-b * exp(noise * z) + c`` per (size, repeat) with z standard normal, so the
true exponent and floor are known. Run this file as a script to measure the bootstrap coverage quoted in
docs/fitting.md:

    python tests/test_fitting.py
"""

from __future__ import annotations

import sys

import numpy as np
import pandas as pd
import pytest

from manireg.curves.fitting import (
    VERDICT_INSUFFICIENT,
    VERDICT_MEASURED,
    VERDICT_NOT_POWER_LAW,
    ExponentFit,
    ExponentTable,
    fit_all,
    fit_exponent,
    fit_power_law,
    local_slopes,
)

SIZES = np.geomspace(100, 10_000, 7).round().astype(int)


def make_curve(b=0.5, a=1.0, c=0.0, sizes=SIZES, repeats=8, noise=0.1, seed=0, learner="net", kink=None):
    """Campaign rows of a synthetic learning curve with known exponent ``b`` and floor ``c``.

    ``kink=(n_k, b2)`` switches the exponent to ``b2`` above ``n_k`` (continuous curve).
    """
    rng = np.random.default_rng(seed)
    rows = []
    for r in range(repeats):
        for n in sizes:
            if kink is None:
                clean = a * n ** (-b)
            else:
                nk, b2 = kink
                clean = a * n ** (-b) if n <= nk else a * nk ** (-b) * (n / nk) ** (-b2)
            err = clean * np.exp(noise * rng.standard_normal()) + c
            rows.append({"learner": learner, "n": int(n), "repeat": r, "test_mse": err, "status": "ok"})
    return pd.DataFrame(rows)


# ---------------------------------------------------------------------------------------------------
# fit_power_law and local_slopes
# ---------------------------------------------------------------------------------------------------
def test_fit_power_law_exact_loglog():
    n = np.array([100.0, 1000.0, 10000.0])
    fit = fit_power_law(n, 2.0 * n**-0.4)
    assert fit.model == "loglog"
    assert fit.b == pytest.approx(0.4, abs=1e-10)
    assert fit.a == pytest.approx(2.0, rel=1e-10)
    assert fit.c == 0.0
    assert np.allclose(fit.residuals, 0.0, atol=1e-12)


def test_fit_power_law_known_floor_drops_points_below_floor():
    n = np.geomspace(100, 10_000, 6)
    err = 3.0 * n**-0.7 + 0.01
    err_with_low = np.append(err, 0.005)  # below the floor: must be dropped with a reason
    fit = fit_power_law(np.append(n, 20_000), err_with_low, floor=0.01)
    assert fit.model == "excess"
    assert fit.b == pytest.approx(0.7, abs=1e-8)
    assert len(fit.dropped) == 1 and "floor" in fit.dropped[0]["reason"]


def test_fit_power_law_fitted_floor_recovers_all_three():
    n = np.geomspace(100, 100_000, 10)
    err = 2.0 * n**-0.6 + 0.002
    fit = fit_power_law(n, err, floor="fit")
    assert fit.model == "floor_fit"
    assert fit.b == pytest.approx(0.6, abs=0.01)
    assert fit.c == pytest.approx(0.002, rel=0.05)
    assert fit.a == pytest.approx(2.0, rel=0.1)


def test_loglog_without_floor_flattens_slope():
    # "floor bias" (REFERENCES.md, derived): a log-log fit without the floor underestimates b near c.
    n = np.geomspace(100, 10_000, 7)
    err = n**-0.5 + 0.005
    assert fit_power_law(n, err).b < 0.45


def test_local_slopes_constant_on_power_law_and_falling_into_floor():
    n = np.repeat(SIZES, 2).astype(float)
    ls = local_slopes(n, n**-0.5)
    assert np.allclose(ls["slope"], 0.5, atol=1e-10)
    flat = local_slopes(n, n**-0.5 + 0.01)
    assert flat["slope"].iloc[-1] < 0.3 < flat["slope"].iloc[0]
    assert np.allclose(local_slopes(n, n**-0.5 + 0.01, floor=0.01)["slope"], 0.5, atol=1e-10)


# ---------------------------------------------------------------------------------------------------
# fit_exponent: recovery, verdicts
# ---------------------------------------------------------------------------------------------------
def test_clean_power_law_is_measured_and_recovered():
    fit = fit_exponent(make_curve(b=0.5, seed=1), n_boot=400)
    assert isinstance(fit, ExponentFit)
    assert fit.verdict == VERDICT_MEASURED
    lo, hi = fit.interval
    assert lo < 0.5 < hi
    assert abs(fit.exponent - 0.5) < 0.03
    assert fit.n_repeats == 8 and fit.n_sizes == 7
    text = str(fit)
    assert "interval" in text and "verdict: measured" in text


@pytest.mark.parametrize("floor", ["fit", 0.002])
def test_floor_models_recover_exponent(floor):
    rows = make_curve(b=0.6, c=0.002, sizes=np.geomspace(100, 100_000, 8).round().astype(int), seed=2)
    fit = fit_exponent(rows, floor=floor, n_boot=200)
    assert abs(fit.exponent - 0.6) < 0.06
    assert fit.interval[0] - 0.02 < 0.6 < fit.interval[1] + 0.02
    if floor == "fit":
        assert fit.model == "floor_fit" and fit.floor == pytest.approx(0.002, rel=0.5)
    else:
        assert fit.model == "excess" and fit.floor_source == "given"


def test_floor_estimate_uses_noise_variance_and_requires_it():
    rows = make_curve(b=0.5, c=0.004, seed=3)
    fit = fit_exponent(rows, floor="estimate", noise_variance=0.004, n_boot=200)
    assert fit.floor == 0.004 and "noise" in fit.floor_source
    assert abs(fit.exponent - 0.5) < 0.05
    with pytest.raises(ValueError, match="noise_variance"):
        fit_exponent(rows, floor="estimate")


def test_unknown_floor_with_loglog_is_not_a_power_law_and_reports_slopes():
    rows = make_curve(b=0.5, c=0.01, seed=4)  # floor 0.01 = clean error at the largest n
    fit = fit_exponent(rows, floor=None, n_boot=400)
    assert fit.verdict == VERDICT_NOT_POWER_LAW
    assert "flattens" in fit.verdict_reason and "floor" in fit.verdict_reason
    slopes = [r["slope"] for r in fit.local_slopes]
    assert len(slopes) == 6 and slopes[-1] < slopes[0]
    # the same curve with its floor fitted is a power law again
    assert fit_exponent(rows, floor="fit", n_boot=200).verdict == VERDICT_MEASURED


def test_kink_is_not_a_power_law():
    rows = make_curve(b=0.8, kink=(1000, 0.3), seed=5)
    fit = fit_exponent(rows, n_boot=400)
    assert fit.verdict == VERDICT_NOT_POWER_LAW
    lower, upper = fit.subrange_fits
    assert lower.exponent > upper.exponent
    assert lower.interval[0] > upper.interval[1]


def test_less_than_a_decade_is_not_measured():
    rows = make_curve(sizes=np.array([1000, 2000, 4000, 8000]), seed=6)
    fit = fit_exponent(rows, n_boot=200)
    assert fit.verdict != VERDICT_MEASURED
    assert "decade" in fit.verdict_reason


def test_fewer_than_three_sizes_is_insufficient():
    rows = make_curve(sizes=np.array([100, 10_000]), seed=7)
    fit = fit_exponent(rows)
    assert fit.verdict == VERDICT_INSUFFICIENT
    assert np.isnan(fit.exponent)
    assert "insufficient" in str(fit)


def test_few_repeats_warn():
    rows = make_curve(repeats=3, seed=8)
    with pytest.warns(UserWarning, match="10 distinct resamples"):
        fit = fit_exponent(rows, n_boot=100)
    assert fit.warnings


def test_optimisation_limited_cells_are_named():
    rows = make_curve(seed=9)
    rows["stop_reason"] = "patience"
    rows.loc[(rows["n"] == SIZES[-1]) & (rows["repeat"] == 2), "stop_reason"] = "step_cap"
    rows["late_best"] = False
    rows.loc[(rows["n"] == SIZES[-2]) & (rows["repeat"] == 0), "late_best"] = True
    fit = fit_exponent(rows, n_boot=100)
    assert len(fit.optimisation_limited) == 2
    assert "optimisation-limited" in fit.verdict_reason
    assert f"n={SIZES[-1]} repeat 2" in fit.verdict_reason


def test_failed_rows_are_ignored():
    rows = make_curve(seed=10)
    bad = rows.iloc[:3].copy()
    bad["status"] = "failed"
    bad["test_mse"] = 1e6
    f1 = fit_exponent(rows, n_boot=100)
    f2 = fit_exponent(pd.concat([rows, bad]), n_boot=100)
    assert f1.exponent == pytest.approx(f2.exponent)


def test_theory_comparison_and_implied_values():
    fit = fit_exponent(make_curve(b=0.5, seed=11), smoothness=1.0, dimension=2, ambient_dim=10, n_boot=200)
    # 2s/(2s+d) = 0.5 at s=1, d=2; ambient 2/(2+10) = 1/6 (REFERENCES.md exponent table, derived)
    assert fit.predicted_exponent == pytest.approx((0.5, 0.5))
    assert fit.ambient_exponent == pytest.approx((1 / 6, 1 / 6))
    lo, hi = fit.interval
    # d = 2s(1-b)/b decreases in b; s = b d / (2(1-b)) increases in b (derived)
    assert fit.implied_dimension == pytest.approx((2 * (1 - hi) / hi, 2 * (1 - lo) / lo))
    assert fit.implied_smoothness == pytest.approx((2 * lo / (2 * (1 - lo)), 2 * hi / (2 * (1 - hi))))
    ranged = fit_exponent(make_curve(b=0.5, seed=11), smoothness=(1.0, 2.0), dimension=2, n_boot=100)
    assert ranged.predicted_exponent == pytest.approx((0.5, 2 / 3))


def test_to_dict_and_frame():
    fit = fit_exponent(make_curve(seed=12), n_boot=100)
    d = fit.to_dict()
    assert "boot_params" not in d and d["verdict"] == VERDICT_MEASURED
    assert fit.boot_params.shape == (100, 3)
    frame = fit.to_frame()
    assert list(frame[["exponent", "exponent_lo", "exponent_hi", "verdict"]].columns) == [
        "exponent", "exponent_lo", "exponent_hi", "verdict"
    ]


def test_fit_all_per_learner():
    rows = pd.concat([make_curve(b=0.5, learner="net", seed=13), make_curve(b=0.3, learner="knn", seed=14)])
    table = fit_all(rows, n_boot=100)
    assert isinstance(table, ExponentTable) and len(table) == 2
    frame = table.to_frame()
    assert set(frame["learner"]) == {"net", "knn"}
    assert abs(table["knn"].exponent - 0.3) < 0.05
    with pytest.raises(ValueError, match="learner"):
        fit_exponent(rows)  # two learners, none chosen


def test_n_range_restricts_sizes():
    fit = fit_exponent(make_curve(seed=15), n_range=(200, None), n_boot=100)
    assert fit.n_range[0] >= 200 and fit.n_sizes == 6


# ---------------------------------------------------------------------------------------------------
# bootstrap coverage
# ---------------------------------------------------------------------------------------------------
def coverage(n_curves=200, repeats=8, b=0.5, noise=0.1, n_boot=500, floor=None, c=0.0, seed0=1000, level=0.95):
    """Fraction of simulated curves whose bootstrap interval contains the true exponent."""
    hits = 0
    for i in range(n_curves):
        rows = make_curve(b=b, c=c, repeats=repeats, noise=noise, seed=seed0 + i)
        fit = fit_exponent(rows, floor=floor, n_boot=n_boot, seed=i, level=level)
        hits += fit.interval[0] <= b <= fit.interval[1]
    return hits / n_curves


def test_bootstrap_coverage_near_nominal():
    # Percentile bootstrap over repeats: common practice (REFERENCES.md, "resampling"). With 8 repeats the
    # resampling variance is (R-1)/R of the true one, so slight under-coverage is expected.
    cov = coverage(n_curves=200, repeats=8, n_boot=500)
    assert 0.85 <= cov <= 0.99


# ---------------------------------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------------------------------
def test_empty_rows():
    with pytest.raises(ValueError, match="empty"):
        fit_exponent(pd.DataFrame(columns=["learner", "n", "repeat", "test_mse"]))


def test_missing_columns():
    with pytest.raises(ValueError, match="missing column"):
        fit_exponent(make_curve().drop(columns=["repeat"]))


def test_unknown_learner():
    with pytest.raises(ValueError, match="unknown learner 'mlp'"):
        fit_exponent(make_curve(), "mlp")


def test_non_positive_errors():
    rows = make_curve()
    rows.loc[0, "test_mse"] = 0.0
    with pytest.raises(ValueError, match="must be positive"):
        fit_exponent(rows)
    with pytest.raises(ValueError, match="must be positive"):
        fit_power_law([10, 100, 1000], [0.1, -0.01, 0.001])


def test_bad_floor_option():
    with pytest.raises(ValueError, match="'floor' parameter"):
        fit_exponent(make_curve(), floor="guess")
    with pytest.raises(ValueError, match="'floor' parameter"):
        fit_power_law([10, 100, 1000], [0.1, 0.01, 0.001], floor="guess")


def measured_rate(n_curves=200, n_boot=500, seed0=5000, **curve_kw):
    """Fraction of simulated curves whose verdict is "measured" (log-log fit, no floor)."""
    hits = 0
    for i in range(n_curves):
        fit = fit_exponent(make_curve(seed=seed0 + i, **curve_kw), n_boot=n_boot, seed=i)
        hits += fit.verdict == VERDICT_MEASURED
    return hits / n_curves


if __name__ == "__main__":  # measure the coverage and verdict figures quoted in docs/fitting.md
    import warnings

    warnings.simplefilter("ignore")
    for label, kw in [
        ("clean power law b=0.5, 8 repeats", {}),
        ("clean power law b=0.5, 3 repeats", dict(repeats=3)),
        ("unknown floor c=0.003 (30% of the error at n=10^4)", dict(c=0.003)),
        ("unknown floor c=0.01 (equal to it)", dict(c=0.01)),
        ("kink b 0.8 -> 0.3 at n=1000", dict(b=0.8, kink=(1000, 0.3))),
        ("kink b 0.6 -> 0.4 at n=1000", dict(b=0.6, kink=(1000, 0.4))),
    ]:
        print(f"verdict 'measured' rate, {label}: {measured_rate(**kw):.3f} over 200 curves")
    for label, kw in [
        ("loglog, 8 repeats", dict(repeats=8)),
        ("loglog, 3 repeats", dict(repeats=3)),
        ("loglog, 12 repeats", dict(repeats=12)),
        ("known floor c=0.003, 8 repeats", dict(repeats=8, floor=0.003, c=0.003)),
        ("fitted floor c=0.003, 8 repeats", dict(repeats=8, floor="fit", c=0.003, n_curves=100, n_boot=300)),
    ]:
        kw = {"n_curves": 200, "n_boot": 500, **kw}
        print(f"{label}: coverage of 95% interval = {coverage(**kw):.3f} over {kw['n_curves']} curves")
    sys.exit(0)
