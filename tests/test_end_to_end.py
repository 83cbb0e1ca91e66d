"""End to end on a sphere with a target of known Hölder order: campaign -> fit -> verdict -> plan."""

import warnings

import numpy as np
import pytest

from manireg.curves import LearnerSpec, Campaign
from manireg.curves.fitting import VERDICTS, VERDICT_MEASURED
from manireg.data import make_regression, sphere
from manireg.theory import ambient_exponent, regression_exponent


@pytest.fixture(scope="module")
def knn_result():
    # S^2 in R^10, lacunary target of Hölder order s = 0.5, label noise sd 0.3
    reg = make_regression(sphere(17000, 2, ambient_dim=10, seed=0), 0.5, noise_std=0.3, seed=1)
    campaign = Campaign.from_regression_sample(reg, sizes=[200, 400, 800, 1600, 3200, 6400, 12800], repeats=5,
                                         learners=["knn"], test_size=3000)
    return campaign.run(progress=False)


@pytest.mark.parametrize("metric,floor", [("test_mse_clean", None), ("test_mse", 0.09)])
def test_knn_exponent_consistent_with_knn_theory(knn_result, metric, floor):
    # k-NN regression with k ~ n^(2s/(2s+d)) attains n^(-2s/(2s+d)) for Hölder s <= 1 when d > 2s
    # (Györfi, Kohler, Krzyzak, Walk, "A Distribution-Free Theory of Nonparametric Regression", 2002, Thm 6.2
    # and its Hölder extension; from memory), with d the intrinsic dimension on a manifold (Kpotufe, NIPS 2011).
    # Against the noise-free target (floor 0) and against the noisy one with the true noise variance 0.3^2.
    fit = knn_result.fit("knn", metric=metric, floor=floor)
    predicted = regression_exponent(2, 0.5)  # 1/3
    assert fit.verdict == VERDICT_MEASURED, fit.verdict_reason
    assert abs(fit.exponent - predicted) < 0.06
    assert fit.interval[0] < fit.exponent < fit.interval[1]
    # and nowhere near the ambient exponent 2s/(2s+D) for D = 10 (about 0.09)
    assert fit.interval[0] > 2 * ambient_exponent(10, 0.5)
    # the implied dimension (given s) brackets the true d = 2 within a band
    lo, hi = fit.implied_dimension
    assert 1.4 < lo <= hi < 2.6


@pytest.mark.parametrize("floor", ["estimate", "fit"])
def test_floor_from_the_data_never_measures_a_wrong_exponent(knn_result, floor):
    # the campaign's noise estimate brackets the true variance 0.09 (its interval runs from the power-law to
    # the straight-line extrapolation of the local differences); a floor taken from it either gives a measured
    # exponent near the kNN rate 1/3 (Györfi et al. 2002, as above) or a verdict that is not "measured"
    lo, hi = knn_result.noise_estimate_interval
    assert lo <= 0.09 <= hi
    fit = knn_result.fit("knn", floor=floor)
    predicted = regression_exponent(2, 0.5)
    assert fit.verdict != VERDICT_MEASURED or abs(fit.exponent - predicted) < 0.06, fit.verdict_reason
    assert fit.interval[0] <= fit.exponent <= fit.interval[1]


def test_plan_from_measured_knn_curve_inverts_it(knn_result):
    fit = knn_result.fit("knn", metric="test_mse_clean", floor=None)
    target = float(fit.predict(25600))
    plan = knn_result.plan(target, "knn", fit=fit)
    assert plan.n_required == pytest.approx(25600, rel=1e-6)
    assert plan.interval[0] < 25600 < plan.interval[1] and plan.extrapolated


def test_network_exponent_reported_with_interval_and_verdict():
    # the network's exponent, whatever it is, comes with an interval and a verdict; never asserted equal to theory
    reg = make_regression(sphere(3000, 2, ambient_dim=10, seed=2), 0.5, noise_std=0.3, seed=3)
    net = LearnerSpec("net", params={"max_steps": 600, "min_steps": 100, "patience_steps": 200})
    campaign = Campaign.from_regression_sample(reg, sizes=[100, 200, 400, 800, 1600], repeats=3, learners=[net], test_size=800)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # fewer than 5 repeats warns
        fit = campaign.run(progress=False).fit("net", floor="estimate")
    from scipy.stats import t

    assert np.all(np.isfinite(fit.interval)) and fit.interval[0] <= fit.exponent <= fit.interval[1]
    # 3 repeats: Student t with 2 degrees of freedom (scipy.stats, the reference library) times the standard
    # error, and the reason says why the interval is wide
    lo, hi = fit.interval
    assert (hi - lo) / 2 == pytest.approx(t.ppf(0.975, 2) * fit.standard_error, rel=1e-9)
    assert "wide for a reason" in fit.verdict_reason
    # 100..1600 is 1.2 decades: enough range, so a verdict other than "measured" must name another cause
    assert fit.verdict in VERDICTS
    if fit.verdict != VERDICT_MEASURED:
        assert any(w in fit.verdict_reason for w in ("floor is unsure", "beaten", "flattens", "steepens",
                                                     "not shown equivalent")), fit.verdict_reason
    text = str(fit)
    assert "interval" in text and "verdict" in text and fit.verdict_reason in text
