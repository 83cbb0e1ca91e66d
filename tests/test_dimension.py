"""Intrinsic-dimension estimators: recovery on known manifolds, agreement with scikit-dimension, bad input,
and the scikit-learn estimator contract."""

import math
import warnings

import numpy as np
import pytest
from sklearn.base import clone
from sklearn.exceptions import NotFittedError

from manireg._validation import DataValidationError
from manireg.data.manifolds import graph_manifold, helix, rendered_objects, sphere, swiss_roll, torus
from manireg.geometry.dimension import (
    CorrelationDimension,
    DimensionEstimate,
    LocalPCADimension,
    MLEDimension,
    TwoNNDimension,
    correlation_dimension,
    mle_dimension,
    twonn_from_ratios,
)
from manireg.geometry.neighbors import kneighbors

ESTIMATORS = [MLEDimension, TwoNNDimension, LocalPCADimension, CorrelationDimension]


def _fit_all(X):
    return {
        "mle": MLEDimension(n_boot=0).fit(X).dimension_,
        "twonn": TwoNNDimension().fit(X).dimension_,
        "lpca": LocalPCADimension(n_boot=0).fit(X).dimension_,
        "corr": CorrelationDimension().fit(X).dimension_,
    }


# ---------------------------------------------------------------------------------------------------------
# recovery of d on manifolds of known dimension
# ---------------------------------------------------------------------------------------------------------
# The calibrated consensus of estimate_dimension on generators of known d, n = 1000 (one calibration table
# per reference serves them all). Tolerance: the stated goal, within 0.5 of d for d <= 3 and 10 % of d above
# (the same goal as on scikit-dimension's benchmark manifolds, tests/test_dimension_calibration.py).
# Reference family: sets without an edge (spheres, the torus, the closed helix) are calibrated on d-sphere
# samples, sets with an edge (the default) on d-ball samples; the default report's interval spans both
# (test_interval_spans_both_reference_families). The raw estimators are checked against scikit-dimension
# on the same data below (test_*_matches_skdim).
CASES = [
    ("sphere d=1", lambda: sphere(1000, 1, ambient_dim=10, seed=1), "sphere"),
    ("sphere d=2", lambda: sphere(1000, 2, ambient_dim=10, seed=1), "sphere"),
    ("sphere d=5", lambda: sphere(1000, 5, ambient_dim=10, seed=1), "sphere"),
    ("sphere d=8", lambda: sphere(1000, 8, ambient_dim=12, seed=1), "sphere"),
    ("torus", lambda: torus(1000, seed=1), "sphere"),
    ("helix", lambda: helix(1000, seed=1), "sphere"),
    ("swiss roll", lambda: swiss_roll(1000, seed=1), "ball"),
    ("graph d=4 D=50", lambda: graph_manifold(1000, 4, 50, frequency=0.5, seed=1), "ball"),
    ("graph d=6 D=100", lambda: graph_manifold(1000, 6, 100, frequency=0.5, seed=1), "ball"),
    ("rendered d=2", lambda: rendered_objects(1000, 2, seed=1), "ball"),
]


@pytest.mark.parametrize("label,make,reference", CASES, ids=[c[0] for c in CASES])
def test_recovers_known_dimension(label, make, reference):
    from manireg.geometry.dimension import estimate_dimension

    s = make()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rep = estimate_dimension(s.points, estimators=("mle", "twonn"), n_boot=0, seed=0, reference=reference)
    d = s.dimension
    tol = 0.5 if d <= 3 else 0.1 * d
    assert abs(rep.consensus - d) <= tol, f"{label}: consensus {rep.consensus:.3f} (raw {rep.raw_consensus:.3f}), d = {d}"


def test_interval_spans_both_reference_families():
    # with the default reference (d-ball) a 5-sphere is read about 10 % high (no edge to correct for); the
    # interval must be wider than the gap between the two reference families, which the sampling part
    # alone (measured +-0.05 here) is not
    from manireg.geometry.dimension import estimate_dimension

    X = sphere(1000, 5, ambient_dim=10, seed=1).points
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rep = estimate_dimension(X, estimators=("mle", "twonn"), n_boot=1, seed=0)
        alt = estimate_dimension(X, estimators=("mle", "twonn"), n_boot=0, seed=0, reference="sphere")
    assert rep.consensus > alt.consensus + 0.2  # the families differ on a set without an edge
    assert rep.consensus_upper - rep.consensus_lower > rep.consensus - alt.consensus
    assert rep.consensus_lower < alt.consensus + 0.1
    assert "sphere-calibrated" in rep.interval_kind


def test_mle_bias_grows_with_dimension():
    # Levina & Bickel (NIPS 2004) and Gomtsyan et al. (arXiv:1904.06151): the MLE falls below d as d grows
    low = MLEDimension(n_boot=0).fit(sphere(1500, 2, seed=3).points).dimension_
    high = MLEDimension(n_boot=0).fit(sphere(1500, 8, seed=3).points).dimension_
    assert abs(low - 2) < 0.1
    assert 8 - high > 0.3


def test_mle_formula_on_a_hand_example():
    # one point with neighbour distances 1, 2, 4: m_3 = (k-1) / sum_{j<k} log(T_k/T_j) = 2 / (log 4 + log 2)
    class G:
        distances = np.array([[1.0, 2.0, 4.0]])

    d, by_k, local = mle_dimension(G, 3, 3)
    assert d == pytest.approx(2 / (math.log(4) + math.log(2)))
    d_unb, _, _ = mle_dimension(G, 3, 3, unbiased=True)  # (k-2) normalisation (REFERENCES.md, derived)
    assert d_unb == pytest.approx(1 / (math.log(4) + math.log(2)))


def test_twonn_on_exact_pareto_ratios():
    # mu ~ Pareto(d): log mu ~ Exponential(d) (Facco et al. 2017); the MLE (N-1)/sum log mu is unbiased
    rng = np.random.default_rng(0)
    mu = np.exp(rng.exponential(1 / 4.0, 20000))
    d, (lo, hi), n_used = twonn_from_ratios(mu, method="mle", discard_fraction=0.0)
    assert n_used == 20000 and lo < 4.0 < hi and abs(d - 4.0) < 0.1
    d_lin, _, _ = twonn_from_ratios(mu, method="linear", discard_fraction=0.1)
    assert abs(d_lin - 4.0) < 0.15
    # censoring the largest 10 % keeps the MLE unbiased (Type-II censored exponential sample)
    d_cens, _, n_keep = twonn_from_ratios(mu, method="mle", discard_fraction=0.1)
    assert n_keep == 18000 and abs(d_cens - 4.0) < 0.1


def test_correlation_dimension_of_a_plane():
    # uniform points on a flat square: C(r) ~ r^2 away from the edges (Grassberger & Procaccia 1983)
    rng = np.random.default_rng(0)
    X = np.zeros((3000, 5))
    X[:, :2] = rng.uniform(size=(3000, 2))
    d, (lo, hi), log_r, log_c, n_used = correlation_dimension(X, seed=0)
    assert abs(d - 2) < 0.1 and 0 < lo < hi and n_used == 3000


def test_local_pca_on_flat_subspace_and_gap_rule():
    rng = np.random.default_rng(1)
    X = rng.uniform(size=(800, 3)) @ np.linalg.qr(rng.normal(size=(10, 3)))[0].T  # flat 3-d subspace of R^10
    assert LocalPCADimension(n_boot=0).fit(X).dimension_ == pytest.approx(3.0, abs=0.05)
    assert LocalPCADimension(rule="gap", n_boot=0).fit(X).dimension_ == pytest.approx(3.0, abs=0.05)


# ---------------------------------------------------------------------------------------------------------
# agreement with scikit-dimension on the same data
# ---------------------------------------------------------------------------------------------------------
skdim = pytest.importorskip("skdim")


@pytest.fixture(scope="module")
def digits():
    # sklearn.datasets.load_digits: the 8x8 UCI optical-recognition digits (1797 x 64), shipped with sklearn
    from sklearn.datasets import load_digits

    return load_digits().data


@pytest.mark.parametrize("make", [lambda: sphere(1500, 3, ambient_dim=8, seed=2).points,
                                  lambda: graph_manifold(1500, 5, 40, frequency=0.5, seed=2).points],
                         ids=["sphere3", "graph5"])
def test_mle_matches_skdim(make):
    # skdim.id.MLE(): 20 neighbours, local (k-1)/sum_{j<=k} log(T_k/T_j), combined by comb="mle", i.e. the
    # harmonic mean 1/mean(1/m(x)) (REFERENCES.md; skdim source). Ours with k_min = k_max = 20 is the same.
    X = make()
    ours = MLEDimension(k_min=20, k_max=20, n_boot=0).fit(X).dimension_
    theirs = skdim.id.MLE().fit(X).dimension_
    assert ours == pytest.approx(theirs, rel=1e-6)


@pytest.mark.parametrize("make", [lambda: sphere(1500, 3, ambient_dim=8, seed=2).points,
                                  lambda: graph_manifold(1500, 5, 40, frequency=0.5, seed=2).points],
                         ids=["sphere3", "graph5"])
def test_twonn_matches_skdim(make):
    # skdim.id.TwoNN(): discard the largest 10 % of mu, fit -log(1 - i/N) on log mu through the origin
    # (Facco et al. 2017 recipe) = our method="linear"; its method="mle" with discard 0.1 is the same
    # censored MLE as ours.
    X = make()
    ours = TwoNNDimension(method="linear").fit(X).dimension_
    theirs = skdim.id.TwoNN().fit(X).dimension_
    assert ours == pytest.approx(theirs, rel=1e-6)
    ours_mle = TwoNNDimension(method="mle").fit(X).dimension_
    theirs_mle = skdim.id.TwoNN(method="mle").fit(X).dimension_
    assert ours_mle == pytest.approx(theirs_mle, rel=1e-6)


def test_local_pca_close_to_skdim_pointwise():
    # skdim.id.lPCA(ver="ratio", alphaRatio=0.95).fit_pw(n_neighbors=20) counts components reaching 95 % of
    # the variance of each point's 20 neighbours (without the point); ours adds the point itself, so the
    # means agree closely but not exactly.
    X = graph_manifold(600, 3, 20, frequency=0.5, seed=4).points
    ours = LocalPCADimension(n_neighbors=20, n_boot=0).fit(X).dimension_
    theirs = np.mean(skdim.id.lPCA(ver="ratio", alphaRatio=0.95).fit_pw(X, n_neighbors=20).dimension_pw_)
    assert abs(ours - theirs) < 0.15


def test_digits_agree_with_skdim(digits):
    X = digits
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the digits hold no exact duplicates, but be robust to a warning
        ours_mle = MLEDimension(k_min=20, k_max=20, n_boot=0).fit(X).dimension_
        ours_twonn = TwoNNDimension(method="linear").fit(X).dimension_
    theirs_mle = skdim.id.MLE().fit(X).dimension_
    theirs_twonn = skdim.id.TwoNN().fit(X).dimension_
    # same neighbours, same formulas: agreement to rounding
    assert ours_mle == pytest.approx(theirs_mle, rel=1e-3)
    assert ours_twonn == pytest.approx(theirs_twonn, rel=1e-3)
    # and the digits are far below their 64 pixels (common practice puts them near 10 to 15)
    assert 5 < ours_mle < 20 and 5 < ours_twonn < 20


# ---------------------------------------------------------------------------------------------------------
# bad and awkward input
# ---------------------------------------------------------------------------------------------------------
def test_duplicates_are_collapsed_with_a_warning():
    X = sphere(500, 2, seed=0).points
    Xd = np.vstack([X, X[:50]])
    for cls in (MLEDimension, TwoNNDimension, LocalPCADimension):
        with pytest.warns(UserWarning, match="collapsed 50 exact duplicate"):
            est = cls().fit(Xd)
        assert np.isfinite(est.dimension_) and est.n_duplicates_ == 50
        if hasattr(est, "local_dimension_"):
            assert est.local_dimension_.shape == (550,)
            np.testing.assert_array_equal(est.local_dimension_[500:], est.local_dimension_[:50])
    with pytest.warns(UserWarning, match="collapsed 50 exact duplicate"):
        est = CorrelationDimension().fit(Xd)
    assert np.isfinite(est.dimension_)


def test_single_repeated_point_is_an_error():
    X = np.ones((30, 4))
    for cls in ESTIMATORS[:3]:
        with pytest.raises(DataValidationError, match="same point"):
            cls().fit(X)
    with pytest.raises(DataValidationError, match="nonzero pair distance"):
        with pytest.warns(UserWarning):
            CorrelationDimension().fit(X)


def test_fewer_points_than_neighbours_is_an_error():
    X = sphere(15, 2, seed=0).points
    with pytest.raises(DataValidationError, match="20 neighbours were asked for but X has only 15"):
        MLEDimension().fit(X)
    with pytest.raises(DataValidationError, match="Pass at least 21 distinct points or lower k"):
        LocalPCADimension(n_neighbors=20).fit(X)


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_nonfinite_input_is_an_error(bad):
    X = sphere(100, 2, seed=0).points
    X[3, 1] = bad
    for cls in ESTIMATORS:
        with pytest.raises(DataValidationError, match=r"non-finite value\(s\) \(NaN or inf\) at index \(3, 1\)"):
            cls().fit(X)


def test_one_dimensional_input_is_an_error():
    for cls in ESTIMATORS:
        with pytest.raises(DataValidationError, match=r"must be 2-D .* X.reshape\(-1, 1\)"):
            cls().fit(np.arange(50.0))


def test_a_line_in_one_column_works():
    X = np.random.default_rng(0).uniform(size=(400, 1))
    assert MLEDimension(n_boot=0).fit(X).dimension_ == pytest.approx(1.0, abs=0.1)
    assert TwoNNDimension().fit(X).dimension_ == pytest.approx(1.0, abs=0.2)
    assert LocalPCADimension(n_boot=0).fit(X).dimension_ == 1.0


@pytest.mark.parametrize(
    "est,match",
    [
        (MLEDimension(k_min=2), r"'k_min' parameter of MLEDimension must be an int >= 3; got 2"),
        (MLEDimension(k_min=12, k_max=10), r"k_min <= k_max; got k_min=12, k_max=10"),
        (MLEDimension(aggregate="geometric"), r"'aggregate' parameter of MLEDimension must be one of"),
        (MLEDimension(unbiased="yes"), r"'unbiased' parameter of MLEDimension must be a bool"),
        (TwoNNDimension(method="ols"), r"'method' parameter of TwoNNDimension must be one of 'mle', 'linear'"),
        (TwoNNDimension(discard_fraction=1.0), r"'discard_fraction' parameter of TwoNNDimension"),
        (LocalPCADimension(variance=1.5), r"'variance' parameter of LocalPCADimension"),
        (LocalPCADimension(rule="elbow"), r"'rule' parameter of LocalPCADimension must be one of"),
        (CorrelationDimension(quantiles=(0.5, 0.1)), r"'quantiles' parameter of CorrelationDimension"),
        (CorrelationDimension(r_min=2.0, r_max=1.0), r"r_min < r_max"),
        (MLEDimension(random_state=-1), r"'random_state' parameter of MLEDimension"),
    ],
)
def test_bad_parameters_are_reported_at_fit(est, match):
    X = sphere(200, 2, seed=0).points
    with pytest.raises(ValueError, match=match):
        est.fit(X)


# ---------------------------------------------------------------------------------------------------------
# scikit-learn estimator contract
# ---------------------------------------------------------------------------------------------------------
@pytest.mark.parametrize("cls", ESTIMATORS, ids=lambda c: c.__name__)
def test_sklearn_contract(cls):
    est = cls()
    params = est.get_params()
    assert params and all(hasattr(est, k) for k in params)
    other = clone(est)
    assert other.get_params() == params and other is not est
    key = next(iter(params))
    est.set_params(**{key: params[key]})
    with pytest.raises(NotFittedError):
        est.summary()
    X = sphere(300, 2, seed=0).points
    assert est.fit(X) is est
    assert est.get_params() == params  # fit never rewrites hyperparameters
    s = est.summary()
    assert isinstance(s, DimensionEstimate) and np.isfinite(s.dimension) and s.to_dict()["estimator"] == est._name
    with pytest.raises(TypeError):
        cls(3)  # keyword-only


def test_local_values_map_back_to_rows():
    X = sphere(400, 2, seed=5).points
    mle = MLEDimension(n_boot=0).fit(X)
    assert mle.local_dimension_.shape == (400,) and np.all(np.isfinite(mle.local_dimension_))
    assert mle.dimension_by_k_.shape == (11,)
    assert np.array_equal(LocalPCADimension(n_boot=0).fit_transform(X),
                          LocalPCADimension(n_boot=0).fit(X).local_dimension_)


def test_estimators_share_one_neighbour_query(count_queries):
    calls = count_queries
    X = sphere(700, 3, seed=11).points
    MLEDimension(n_boot=0).fit(X)
    TwoNNDimension().fit(X)
    LocalPCADimension(n_neighbors=15, n_boot=0).fit(X)
    assert calls == [20]
    assert kneighbors(X, 5).k == 5 and calls == [20]
