"""Calibration of dimension estimates, the generalised ratio estimator and the block-jackknife intervals,
checked against closed forms and scikit-dimension's benchmark manifolds."""

import math
import warnings

import numpy as np
import pytest

from manireg.data.manifolds import sphere
from manireg.geometry.dimension import dimension_profile, estimate_dimension
from manireg.geometry.dimension.calibration import calibration_table
from manireg.geometry.dimension.gride import gride_dimension
from manireg.geometry.dimension.profile import find_window


# ---------------------------------------------------------------------------------------------------------
# the generalised ratio estimator against its closed-form law
# ---------------------------------------------------------------------------------------------------------
@pytest.mark.parametrize("d,n2", [(2, 2), (3, 8), (7, 32), (20, 16)])
def test_gride_recovers_d_from_exact_ratios(d, n2):
    # For a Poisson process of intensity rho in d dimensions the volumes V_j of the balls to the j-th
    # neighbour are Gamma(j) partial sums, so V_n1 / V_n2 ~ Beta(n1, n2 - n1) and mu = T_n2 / T_n1
    # = (V_n2 / V_n1)^(1/d) (Denti, Doimo, Laio, Mira, Sci. Rep. 12:20005, 2022, eq. 4-5).
    # The MLE's sd is about d / sqrt(N I), I >= 1 the Fisher information per ratio (I = 1 at n2 = 2);
    # with N = 20000 a tolerance of 4 d / sqrt(N) = 2.8 % is more than 4 sd.
    rng = np.random.default_rng(d * 100 + n2)
    N = 20000
    n1 = max(1, n2 // 2)
    b = rng.beta(n1, n2 - n1, N)
    log_mu = -np.log(b) / d
    est = gride_dimension(log_mu, n2)
    assert abs(est - d) < 4 * d / math.sqrt(N), est
    if n2 == 2:  # TwoNN's Pareto MLE N / sum log mu (Facco et al., Sci. Rep. 7:12140, 2017), closed form
        assert est == pytest.approx(N / log_mu.sum(), rel=1e-12)


# ---------------------------------------------------------------------------------------------------------
# the window
# ---------------------------------------------------------------------------------------------------------
def test_window_skips_noise_and_curvature_on_a_constructed_profile():
    # per-doubling changes: -50 %, -30 %, -15 %, +2.9 %, +2 %, +40 %: the window is 16..64, noise below 16,
    # curvature above 64 (the rule stated in find_window's docstring, applied by hand)
    k = [2, 4, 8, 16, 32, 64, 128]
    v = [8.0, 4.0, 2.8, 2.38, 2.45, 2.5, 3.5]
    lo, hi, noise, curv, note = find_window(k, v, tol=0.1)
    assert (lo, hi, noise, curv, note) == (16, 64, 8, 128, "")
    # falling by more than 10 % at every step: noise everywhere, read at the largest scale, said so
    lo, hi, noise, curv, note = find_window([4, 8, 16], [9.0, 6.0, 4.0])
    assert (lo, hi, noise) == (16, 16, 8) and "upper estimate" in note


# ---------------------------------------------------------------------------------------------------------
# calibration
# ---------------------------------------------------------------------------------------------------------
def test_calibration_table_is_cached_and_inverts_itself():
    t1 = calibration_table(1000, (4, 8, 16, 32, 64), seed=0)
    t2 = calibration_table(1000, (4, 8, 16, 32, 64), seed=0)
    assert t1 is t2  # lru_cache: the second call is free
    for est in ("mle", "twonn"):
        raw, grid = t1.curve(est, 16)
        # feeding the table's own raw values back gives the grid (linear interpolation is exact at the knots)
        keep = np.r_[True, np.diff(raw) > 1e-6]
        np.testing.assert_allclose(t1.calibrate(est, 16, raw[keep]), grid[keep], atol=1e-6)
        # the downward bias at higher d (Levina & Bickel 2004; Gomtsyan et al., arXiv:1904.06151): raw < d
        # at d = 20 by several units, and about unbiased at d = 1, 2 (closed-form MLE on a uniform segment
        # and disc; tolerance 3 sd = 3 d / sqrt(n (k - 1)))
        assert raw[list(grid).index(20)] < 17
        for d in (1, 2):
            assert abs(raw[list(grid).index(d)] - d) < 3 * d / math.sqrt(1000 * 15) + 0.05
    frame = t1.to_dict()
    assert frame["n_reference"] == 1000 and "d-ball" in frame["reference"]


BENCHMARK = ["M1_Sphere", "M9_Affine", "M12_Norm", "M10a_Cubic", "M10b_Cubic", "M2_Affine_3to5", "M4_Nonlinear",
             "M7_Roll", "M13a_Scurve"]


@pytest.fixture(scope="module")
def benchmark_data():
    skdim = pytest.importorskip("skdim")
    b = skdim.datasets.BenchmarkManifolds(random_state=0)
    out = {}
    for name in BENCHMARK:
        d, D, _ = b._dict_truth[name]
        out[name] = (d, b.generate(name=name, n=1000, dim=D, d=d))
    return out


@pytest.mark.parametrize("name", BENCHMARK)
def test_calibrated_consensus_on_benchmark_manifolds(benchmark_data, name):
    # scikit-dimension's benchmark manifolds (Campadelli et al. 2015; Hein & Audibert 2005) at n = 1000.
    # Goal: the calibrated consensus within 10 % of d (0.5 for d <= 3). Published raw MLE values with
    # Gomtsyan et al. (arXiv:1904.06151) are 15.2 for the 20-d affine space and the 20-d Gaussian: the raw
    # consensus must show that bias (below 0.85 d) while the calibrated one removes it.
    d, X = benchmark_data[name]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rep = estimate_dimension(X, estimators=("mle", "twonn"), n_boot=0, seed=0)
    tol = 0.5 if d <= 3 else 0.1 * d
    assert abs(rep.consensus - d) <= tol, f"{name}: calibrated {rep.consensus:.2f} vs d = {d}"
    if d >= 17:
        assert rep.raw_consensus < 0.85 * d


# ---------------------------------------------------------------------------------------------------------
# intervals over blocks of neighbourhoods
# ---------------------------------------------------------------------------------------------------------
def test_block_jackknife_se_matches_the_spread_over_independent_samples():
    # The interval's half-width / t quantile is a standard error; over independent samples (30 seeds) the
    # estimator's own sd is measured directly. A bootstrap over points ignores that neighbourhoods overlap
    # and comes out too narrow (measured 0.5-0.75 of the spread, docs/dimension.md); the block jackknife must
    # be within a factor 1.6 of the spread. The sd from 20 seeds has a relative sd of 1/sqrt(2 * 19) = 16 %,
    # so a factor 1.6 (log 0.47) is about 3 of those sd away (chi-square, common practice).
    from scipy.stats import t as student

    values, ses = [], []
    for s in range(20):
        X = sphere(400, 3, seed=700 + s).points
        prof = dimension_profile(X, scales=(8,), estimators=("mle",), n_boot=1, seed=s)
        values.append(prof.dimension[0])
        ses.append((prof.upper[0] - prof.lower[0]) / 2 / student.ppf(0.975, 19))
    ratio = np.mean(ses) / np.std(values, ddof=1)
    assert 1 / 1.6 < ratio < 1.6, ratio


def test_a_large_estimate_never_stops_the_geometry_read_out():
    # a 12-dimensional Gaussian cloud: the consensus is near 12, above the charts' default min_points (10),
    # which used to raise "min_points ... must exceed the dimension"; the charts now hold d + 1 points and
    # the summary says so
    from manireg.geometry import describe_geometry

    X = np.random.default_rng(0).standard_normal((800, 14))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        geo = describe_geometry(X, embed=False, n_boot=0, seed=0)
    assert geo.dimension_used >= 10
    assert "charts hold at least" in geo.dimension_source


def test_calibration_figure_draws_the_table():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from manireg.plots.dimension import plot_dimension_calibration

    table = calibration_table(1000, (4, 8, 16, 32, 64), seed=0)
    fig = plot_dimension_calibration(table, raw=13.6)
    ax = fig.axes[0]
    # the identity line, one curve per scale (4..64), and the two marker lines of the raw value
    assert len(ax.lines) == 1 + 5 + 2
    np.testing.assert_allclose(ax.lines[1].get_xdata(), table.d_grid)
    with pytest.raises(ValueError, match="needs a CalibrationTable or a DimensionReport"):
        plot_dimension_calibration(object())
    plt.close("all")
