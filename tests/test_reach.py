"""Reach estimate against closed forms.

Closed forms (REFERENCES.md, "Reach, charts, tangent spaces"): the reach of a circle or d-sphere of radius r
is r; of a torus of revolution with tube-centre radius R > tube radius r it is min(r, R - r) (textbook
geometry; the reach as an infimum is Federer 1959, Thm 4.18; the sample estimator is Aamari, Kim, Chazal,
Michel, Rinaldo, Wasserman, Electron. J. Stat. 13 (2019)).
"""

import numpy as np
import pytest

from manireg.data.manifolds import graph_manifold, sphere, torus
from manireg.geometry.reach import estimate_reach

CASES = {
    # name: generator(n, seed) -> ManifoldSample; truth is sample.reach (closed form)
    "circle": lambda n, s: sphere(n, 1, radius=1.0, ambient_dim=5, seed=s),
    "sphere": lambda n, s: sphere(n, 2, radius=2.0, ambient_dim=6, seed=s),
    "torus": lambda n, s: torus(n, major_radius=3.0, minor_radius=1.0, ambient_dim=5, seed=s),
}


@pytest.mark.parametrize("name", list(CASES))
def test_reach_close_to_closed_form_and_improves_with_n(name):
    # Source: circle/sphere reach = radius, torus min(r, R - r) (REFERENCES.md; Federer 1959).
    errors = []
    for n in (600, 6000):
        smp = CASES[name](n, 1)
        est = estimate_reach(smp.points, smp.dimension)
        errors.append(abs(est.reach / smp.reach - 1.0))
        assert np.isfinite(est.reach)
        assert est.recommended_radius == pytest.approx(0.25 * est.reach)
        i, j = est.pair
        assert 0 <= i < n and 0 <= j < n and i != j
    assert errors[1] < 0.2, f"{name}: relative error {errors[1]:.3f} at n=6000"
    if name != "torus":  # on the torus small samples overestimate (sparse inner side) and errors can cancel
        assert errors[1] < errors[0], f"{name}: error did not shrink with n: {errors}"


def test_torus_bottleneck_is_found():
    # Source: torus of revolution R = 1.5, r = 1: reach min(r, R - r) = 0.5 (REFERENCES.md, derived).
    smp = torus(6000, major_radius=1.5, minor_radius=1.0, ambient_dim=4, seed=2)
    est = estimate_reach(smp.points, 2)
    assert abs(est.reach / 0.5 - 1.0) < 0.25


def test_exact_tangents_never_underestimate_the_sphere():
    # Source: Aamari et al. 2019: with exact tangents the sample estimator can only overestimate.
    smp = sphere(1500, 2, radius=1.5, seed=3)
    p = smp.points
    # tangent basis of the 2-sphere at p: orthonormal complement of p in R^3
    bases = np.empty((len(p), 3, 2))
    for i, x in enumerate(p):
        q, _ = np.linalg.qr(np.column_stack([x, np.eye(3)]))
        bases[i] = q[:, 1:3]
    est = estimate_reach(p, 2, tangent_bases=bases, exclusion=0.0)
    assert est.reach >= 1.5 * (1 - 1e-3)  # rounding at the closest pairs
    assert est.reach < 1.5 * 1.01


def test_noise_degrades_gracefully_and_quantile_is_more_stable():
    # Source: sphere reach = radius = 1 (REFERENCES.md, closed form). Noise lowers the infimum of the per-point
    # values; a low quantile of them should stay closer to the truth, on every seed, and neither may leave the
    # band from half the true reach to 10% above it (a collapse to the noise scale, 0.02, or an estimate above
    # the truth would fail).
    for seed in (0, 1, 2):
        smp = sphere(2000, 2, radius=1.0, ambient_dim=5, noise=0.02, seed=seed)
        e_inf = estimate_reach(smp.points, 2)
        e_q = estimate_reach(smp.points, 2, quantile=0.05)
        assert np.all(np.isfinite(e_q.per_point))
        for est in (e_inf, e_q):
            assert 0.5 < est.reach < 1.1, (seed, est.reach)
        assert abs(e_q.reach - 1.0) < abs(e_inf.reach - 1.0), seed


def test_flat_data_has_infinite_reach():
    # Source: an affine subspace has infinite reach (REFERENCES.md).
    smp = graph_manifold(800, 2, 5, amplitude=0.0, seed=0)
    assert estimate_reach(smp.points, 2).reach == np.inf


def test_result_to_dict_and_frame():
    smp = sphere(500, 2, seed=0)
    est = estimate_reach(smp.points, 2, n_base=100)
    d = est.to_dict()
    assert "per_point" not in d and d["n_base"] == 100
    assert len(est.to_frame()) == 100


@pytest.mark.parametrize(
    "X, kwargs, match",
    [
        (np.array([[0.0, 1.0], [np.nan, 2.0], [1.0, 1.0]]), {}, "non-finite"),
        (np.arange(10.0), {}, "must be 2-D"),
        (np.zeros((2, 3)), {}, "at least 3"),
        (np.zeros((30, 3)), {}, "same point"),
        (np.random.default_rng(0).normal(size=(50, 3)), {"quantile": 1.5}, "'quantile' parameter"),
        (np.random.default_rng(0).normal(size=(50, 3)), {"n_neighbors": 2}, "must exceed the dimension"),
        (np.random.default_rng(0).normal(size=(50, 3)), {"exclusion": -1.0}, "'exclusion' parameter"),
    ],
)
def test_bad_input(X, kwargs, match):
    with pytest.raises(ValueError, match=match):
        estimate_reach(X, 2, **kwargs)


def test_dimension_must_be_below_ambient():
    with pytest.raises(ValueError, match="must be smaller than the number of features"):
        estimate_reach(np.random.default_rng(0).normal(size=(50, 3)), 3)


def test_too_sparse_sample_warns_and_gives_nan():
    X = np.random.default_rng(0).normal(size=(25, 10))
    with pytest.warns(UserWarning, match="too sparse"):
        est = estimate_reach(X, 2, n_neighbors=20, exclusion=10.0)
    assert np.isnan(est.reach)
