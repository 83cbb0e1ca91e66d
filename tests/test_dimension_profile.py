"""Dimension profile, the one-call report, interval coverage and the figures."""

import json
import warnings

import numpy as np
import pytest

from manireg._validation import DataValidationError
from manireg.data.manifolds import graph_manifold, sphere
from manireg.geometry.dimension import (
    DimensionProfile,
    DimensionReport,
    MLEDimension,
    TwoNNDimension,
    dimension_profile,
    estimate_dimension,
)


def test_profile_shape_and_one_query(count_queries):
    X = sphere(1200, 3, ambient_dim=6, seed=0).points
    prof = dimension_profile(X, n_boot=50, seed=0)
    assert count_queries == [64]  # one query with the largest default scale (doublings up to n / 10)
    frame = prof.to_frame()
    assert set(frame.estimator) == {"mle", "twonn", "lpca"}
    assert list(frame[frame.estimator == "mle"].scale) == [4, 8, 16, 32, 64]
    # the generalised ratio has a value at every scale of the profile, plus TwoNN itself at scale 2
    assert list(frame[frame.estimator == "twonn"].scale) == [2, 4, 8, 16, 32, 64]
    assert (frame.lower <= frame.dimension + 1e-12).all() and (frame.dimension <= frame.upper + 1e-12).all()
    for _, g in frame.groupby("estimator"):
        assert np.all(np.diff(g.sort_values("scale").radius) > 0)
    json.dumps(prof.to_dict())  # JSON-ready


def test_profile_twonn_row_at_scale_two_is_twonn():
    # scale 2 is TwoNN's likelihood N / sum log(T2/T1) (Facco et al., Sci. Rep. 7:12140, 2017): closed form
    # on the same neighbour distances
    from manireg.geometry.neighbors import kneighbors

    X = sphere(800, 2, ambient_dim=5, seed=4).points
    prof = dimension_profile(X, scales=(8,), estimators=("twonn",), n_boot=0)
    dist = kneighbors(X, 8).distances
    log_mu = np.log(dist[:, 1] / dist[:, 0])
    assert prof.dimension[0] == pytest.approx(log_mu.size / log_mu.sum(), rel=1e-12)


def test_profile_noise_sets_the_window():
    # ambient noise lifts the small-scale estimates toward D (Facco et al. 2017; Denti et al. 2022): the
    # window found on the profile must start above the noise scale, and the small-scale value must exceed
    # the window's (so the test fails if noise were not seen)
    X = sphere(2000, 2, ambient_dim=10, noise=0.02, seed=1).points
    prof = dimension_profile(X, estimators=("twonn",), n_boot=0)
    d = prof.dimension
    assert d[0] > 3 and np.isfinite(prof.noise_scale)
    assert prof.window[0] > prof.noise_scale
    inside = (prof.scale >= prof.window[0]) & (prof.scale <= prof.window[1])
    assert np.all(np.abs(d[inside] - 2) < 0.5)


def test_profile_bad_input():
    X = sphere(50, 2, seed=0).points
    with pytest.raises(DataValidationError, match="largest scale k=80 needs more than 80 distinct points; X has 50"):
        dimension_profile(X, scales=(10, 80))
    with pytest.raises(ValueError, match="'estimators' parameter of dimension_profile must be a non-empty subset"):
        dimension_profile(X, estimators=("mle", "danco"))
    with pytest.raises(ValueError, match="'scales' parameter of dimension_profile must be an int >= 3; got 2"):
        dimension_profile(X, scales=(2, 10))
    with pytest.raises(ValueError, match="'level' parameter of dimension_profile"):
        dimension_profile(X, level=1.0)


# ---------------------------------------------------------------------------------------------------------
# coverage over seeds
# ---------------------------------------------------------------------------------------------------------
SEEDS = range(300, 320)


def test_twonn_gamma_interval_coverage_on_exact_ratios():
    # d * T ~ Gamma(N', 1) exactly for Pareto ratios (Facco et al. 2017; Denti et al. 2022): draw the
    # ratios from the law itself (mu = U^(-1/d)), 400 runs. Coverage of a 95 % interval over 400 runs has
    # sd sqrt(0.95 * 0.05 / 400) = 0.011; we accept 0.92..0.98 (about 2.7 sd each side, binomial).
    from manireg.geometry.dimension import twonn_from_ratios

    rng = np.random.default_rng(11)
    hits = 0
    for _ in range(400):
        d = 4.0
        mu = rng.uniform(size=300) ** (-1.0 / d)
        _, (lo, hi), _ = twonn_from_ratios(mu, discard_fraction=0.0)
        hits += lo <= d <= hi
    assert 0.92 <= hits / 400 <= 0.98, hits


def test_mle_bootstrap_targets_the_estimator_not_d():
    # The MLE bootstrap resamples per-point log-distance sums as if points were independent. Two honest
    # limits, measured here and documented in docs/dimension.md:
    # 1. overlapping neighbourhoods make the sums positively correlated, so the interval is narrower than
    #    the seed-to-seed spread (about 0.5-0.75 of it on spheres, n = 1000);
    # 2. it carries no estimator bias: on S^5 the MLE sits near 4.86 (REFERENCES.md, Gomtsyan et al.,
    #    arXiv:1904.06151: 4.86 for d=5 in D=10 at n=1000), so the interval rarely covers 5.
    # We therefore test what it does target: the interval is centred on the seed-mean of the estimator
    # (covers it for most seeds) and its width is of the order of the true spread.
    values, intervals = [], []
    for s in SEEDS:
        est = MLEDimension(n_boot=200, random_state=s).fit(sphere(1000, 5, seed=s).points)
        values.append(est.dimension_)
        intervals.append(est.interval_)
    values, intervals = np.array(values), np.array(intervals)
    mean, sd = values.mean(), values.std(ddof=1)
    assert 4.7 < mean < 4.97  # biased low, as published
    covers_mean = np.sum((intervals[:, 0] <= mean) & (mean <= intervals[:, 1]))
    covers_d = np.sum((intervals[:, 0] <= 5) & (5 <= intervals[:, 1]))
    assert covers_mean >= 12  # narrower than the spread, so below the nominal 19
    assert covers_d <= 8  # the bias is real: documented, not hidden
    ratio = np.mean(intervals[:, 1] - intervals[:, 0]) / 3.92 / sd
    assert 0.3 < ratio < 1.2


# ---------------------------------------------------------------------------------------------------------
# estimate_dimension
# ---------------------------------------------------------------------------------------------------------
def test_report_on_a_torus_like_set(count_queries):
    X = graph_manifold(1500, 3, 20, frequency=0.5, seed=5).points
    rep = estimate_dimension(X, n_boot=50, seed=0)
    assert count_queries == [128]  # the neighbour layer is queried once (largest default scale at n = 1500)
    assert isinstance(rep, DimensionReport) and isinstance(rep.profile, DimensionProfile)
    assert abs(rep.consensus - 3) < 0.5  # goal: within 0.5 of d for d <= 3
    assert rep.consensus_lower <= rep.consensus <= rep.consensus_upper
    assert "calibrated" in rep.consensus_rule and "window" in rep.consensus_rule
    assert rep.n_samples == 1500 and rep.n_duplicates == 0 and rep.n_features == 20
    frame = rep.to_frame()
    assert list(frame.estimator) == ["mle", "twonn", "lpca", "corr"]
    d = rep.to_dict()
    json.dumps(d)
    assert d["estimates"][3]["lower"] is None  # no interval for the correlation dimension: None, not NaN
    text = str(rep)
    assert "consensus" in text and "twonn" in text and "window: k =" in text


def test_report_warns_on_duplicates_and_disagreement():
    X = sphere(600, 2, ambient_dim=5, noise=0.05, seed=1).points
    X = np.vstack([X, X[:30]])
    with pytest.warns(UserWarning) as record:
        rep = estimate_dimension(X, n_boot=0, disagreement=0.01)
    messages = " ".join(str(w.message) for w in record)
    assert "collapsed 30 exact duplicate" in messages and "estimators disagree" in messages
    assert rep.n_duplicates == 30 and rep.n_distinct == 600
    assert any("disagree" in w for w in rep.warnings) and np.isfinite(rep.consensus)


def test_report_warns_when_too_few_points_for_d():
    # Eckmann & Ruelle (Physica D 56, 1992): n points resolve dimensions up to about 2 log10 n (from memory)
    X = np.random.default_rng(0).normal(size=(100, 12))
    with pytest.warns(UserWarning, match="too few points for this dimension"):
        warnings.filterwarnings("ignore", message=".*estimators disagree")
        rep = estimate_dimension(X, estimators=("mle", "twonn"), scales=(10, 20), n_boot=0)
    assert any("2 log10(n)" in w for w in rep.warnings)


def test_report_bad_input():
    with pytest.raises(DataValidationError, match="largest scale k=80 needs more than 80 distinct points; X has 40"):
        estimate_dimension(sphere(40, 2, seed=0).points, scales=(10, 80))
    with pytest.raises(DataValidationError, match="need 60 neighbours per point but X has only 40 distinct"):
        estimate_dimension(sphere(40, 2, seed=0).points, scales=(5, 10), k_max=60)
    with pytest.raises(ValueError, match="'estimators' parameter of estimate_dimension"):
        estimate_dimension(sphere(40, 2, seed=0).points, estimators=())
    with pytest.raises(DataValidationError, match="non-finite"):
        estimate_dimension(np.full((30, 3), np.nan))


# ---------------------------------------------------------------------------------------------------------
# figures
# ---------------------------------------------------------------------------------------------------------
def test_figures_draw_results():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from manireg.plots.dimension import plot_dimension_estimates, plot_dimension_profile

    X = sphere(600, 2, ambient_dim=4, seed=3).points
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rep = estimate_dimension(X, n_boot=20, scales=(5, 10, 20, 40))
    fig = plot_dimension_profile(rep, true_dimension=2)
    ax = fig.axes[0]
    assert len(ax.lines) >= 4 and ax.get_xscale() == "log"
    fig2, ax2 = plt.subplots()
    assert plot_dimension_profile(rep.profile, ax=ax2, x="radius") is fig2
    fig3 = plot_dimension_estimates(rep, true_dimension=2)
    assert len(fig3.axes[0].patches) == 4
    with pytest.raises(ValueError, match="needs a DimensionProfile or a DimensionReport"):
        plot_dimension_profile(object())
    plt.close("all")


# ---------------------------------------------------------------------------------------------------------
# the consensus under ambient noise
# ---------------------------------------------------------------------------------------------------------
def _diameter(X):
    from scipy.spatial.distance import pdist

    return pdist(X[:1000]).max()


NOISY = [
    # (label, generator of clean points, d, noise as a fraction of the diameter)
    ("curved 2-D sheet in R^40", lambda nz: graph_manifold(2000, 2, 40, noise=nz, seed=1), 2, 0.005),
    ("curved 2-D sheet in R^40", lambda nz: graph_manifold(2000, 2, 40, noise=nz, seed=1), 2, 0.0075),
    ("3-sphere in R^30", lambda nz: sphere(2000, 3, ambient_dim=30, noise=nz, seed=1), 3, 0.005),
    ("5-d graph manifold in R^40", lambda nz: graph_manifold(2000, 5, 40, frequency=0.5, noise=nz, seed=1), 5,
     0.0075),
]


@pytest.mark.parametrize("label,make,d,frac", NOISY, ids=[f"{c[0]} {c[3]:.2%}" for c in NOISY])
def test_consensus_under_ambient_noise(label, make, d, frac):
    # Gaussian noise of `frac` times the diameter in every coordinate: its length sqrt(D) * sigma exceeds the
    # neighbour spacing, so small-scale estimates rise toward D. Goal: the consensus within 0.5 of d for
    # d <= 3 and within 15 % for d = 5 (seed 1, n = 2000). TwoNN (the profile's scale 2) must show the noise
    # (more than 0.5 above d), so the test fails if the data were too clean to matter.
    diam = _diameter(make(0.0).points)
    X = make(frac * diam).points
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rep = estimate_dimension(X, n_boot=0, seed=0)
    tol = 0.5 if d <= 3 else 0.15 * d
    assert abs(rep.consensus - d) <= tol, f"{label}: consensus {rep.consensus:.2f}, d = {d}"
    prof = rep.profile
    assert prof.dimension[prof.rows("twonn") & (prof.scale == 2)][0] > d + 0.5
