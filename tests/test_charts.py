"""ChartAtlas and chart counts against closed-form geometry.

Sources: the chart count of a circle (REFERENCES.md, derived, re-derived below); N(r) ~ r^(-d) on a
d-manifold (box-counting / covering numbers, Kolmogorov & Tikhomirov 1959); tangent spaces of a sphere and a
torus of revolution from their closed-form parametrisations (textbook geometry).
"""

import math

import numpy as np
import pytest
from scipy.linalg import subspace_angles

from manireg.data.manifolds import sphere, torus
from manireg.geometry.charts import ChartAtlas, chart_counts, farthest_point_sampling


def _true_tangent_sphere(smp, rows):
    # tangent of the d-sphere at u: orthogonal complement of u in R^(d+1), mapped by the embedding
    out = []
    for i in rows:
        u = smp.coords[i]
        q, _ = np.linalg.qr(np.column_stack([u, np.eye(len(u))]))
        out.append(smp.embedding @ q[:, 1 : len(u)])
    return out


def _true_tangent_torus(smp, rows):
    R, r = smp.params["major_radius"], smp.params["minor_radius"]
    out = []
    for i in rows:
        u, v = 2 * np.pi * smp.coords[i]
        du = np.array([-(R + r * np.cos(v)) * np.sin(u), (R + r * np.cos(v)) * np.cos(u), 0.0])
        dv = np.array([-r * np.sin(v) * np.cos(u), -r * np.sin(v) * np.sin(u), r * np.cos(v)])
        q, _ = np.linalg.qr(np.column_stack([du, dv]))
        out.append(smp.embedding @ q)
    return out


@pytest.mark.parametrize(
    "make, truth",
    [
        (lambda n: sphere(n, 2, radius=1.0, ambient_dim=5, seed=0), _true_tangent_sphere),
        (lambda n: torus(n, major_radius=3.0, minor_radius=1.0, ambient_dim=5, seed=0), _true_tangent_torus),
    ],
)
def test_tangent_angle_shrinks_with_n(make, truth):
    # Source: closed-form tangent spaces (sphere: complement of the position; torus: d/du, d/dv).
    angles = []
    for n in (400, 4000):
        smp = make(n)
        atlas = ChartAtlas(radius=0.4, dimension=2).fit(smp.points)
        true = truth(smp, atlas.landmark_indices_)
        a = [np.max(subspace_angles(atlas.tangent_bases_[i], true[i])) for i in range(atlas.n_charts_)]
        angles.append(np.median(a))
    assert angles[1] < angles[0]
    assert angles[1] < 0.1  # radians


def test_atlas_attributes_and_summary():
    smp = sphere(2000, 2, radius=1.0, ambient_dim=4, seed=1)
    atlas = ChartAtlas(radius=0.3, dimension=2).fit(smp.points)
    m = atlas.n_charts_
    assert atlas.landmarks_.shape == (m, 4)
    assert atlas.tangent_bases_.shape == (m, 4, 2)
    assert atlas.assignments_.shape == (2000,) and atlas.assignments_.max() == m - 1
    # balls of radius r around the landmarks cover every point
    d = np.linalg.norm(smp.points - atlas.landmarks_[atlas.assignments_], axis=1)
    assert d.max() <= 0.3 + 1e-12
    s = atlas.summary()
    assert s.tangent_share > 0.95
    # flatness ~ r / (4 rho) on a sphere (half the cap height r^2/(2 rho) over r): 0.075 here
    assert 0.03 < s.flatness_median < 0.15
    assert len(s.to_frame()) == m and "spectra" not in s.to_dict()


def test_default_radius_uses_reach_rule():
    # Source: sphere reach = radius (REFERENCES.md); default radius = 0.25 x estimated reach.
    smp = sphere(3000, 2, radius=1.0, ambient_dim=4, seed=2)
    atlas = ChartAtlas(dimension=2).fit(smp.points)
    assert atlas.reach_ is not None
    assert atlas.radius_ == pytest.approx(0.25 * atlas.reach_.reach)
    assert 0.15 < atlas.radius_ < 0.3


@pytest.mark.parametrize("rho, r", [(1.0, 0.3), (1.0, 0.1), (2.0, 0.25)])
def test_circle_chart_count(rho, r):
    # Derived (REFERENCES.md "chart count on a circle", re-derived): an r-net on a circle of radius rho has
    # landmarks more than chord r apart, so at most pi / arcsin(r / (2 rho)) of them (the reference value),
    # and covers it, so at least the covering number pi / (2 arcsin(r / (2 rho))).
    smp = sphere(4000, 1, radius=rho, seed=3)
    n = ChartAtlas(radius=r, dimension=1).fit(smp.points).n_charts_
    upper = math.ceil(math.pi / math.asin(r / (2 * rho)))
    lower = math.ceil(math.pi / (2 * math.asin(r / (2 * rho))))
    assert lower <= n <= upper


@pytest.mark.parametrize("d, n, tol", [(1, 3000, 0.25), (2, 4000, 0.3), (3, 12000, 0.5)])
def test_chart_count_slope_is_minus_d(d, n, tol):
    # Source: covering numbers of a d-manifold scale like r^(-d) (Kolmogorov & Tikhomirov 1959).
    smp = sphere(n, d, radius=1.0, ambient_dim=d + 2, seed=4)
    cc = chart_counts(smp.points, np.geomspace(0.1, 0.6, 10) if d > 1 else np.geomspace(0.02, 0.5, 12))
    assert abs(cc.slope + d) < tol, cc.slope
    assert np.all(np.diff(cc.counts) <= 0)
    assert len(cc.to_frame()) == len(cc.radii)


def test_noise_spectra_stay_finite():
    smp = sphere(2000, 2, radius=1.0, ambient_dim=6, noise=0.05, seed=5)
    atlas = ChartAtlas(dimension=2).fit(smp.points)
    assert np.all(np.isfinite(atlas.spectra_)) and np.all(np.isfinite(atlas.flatness_))
    assert atlas.summary().tangent_share > 0.6


def test_fps_is_seeded():
    X = sphere(500, 2, seed=0).points
    a, _ = farthest_point_sampling(X, 0.4, random_state=1)
    b, _ = farthest_point_sampling(X, 0.4, random_state=1)
    assert np.array_equal(a, b)


def test_duplicates_are_collapsed_with_warning():
    X = sphere(300, 2, seed=0).points
    X = np.vstack([X, X[:20]])
    with pytest.warns(UserWarning, match="duplicate"):
        atlas = ChartAtlas(radius=0.5, dimension=2).fit(X)
    assert atlas.assignments_.shape == (320,)
    assert np.array_equal(atlas.assignments_[300:], atlas.assignments_[:20])


@pytest.mark.parametrize(
    "X, kwargs, match",
    [
        (np.array([[0.0, 1.0, 2.0], [np.nan, 2.0, 1.0], [1.0, 1.0, 0.0]]), {}, "non-finite"),
        (np.arange(10.0), {}, "must be 2-D"),
        (np.zeros((2, 3)), {}, "at least 3"),
        (np.zeros((30, 3)), {}, "same point"),
        (np.random.default_rng(0).normal(size=(50, 3)), {"radius": 0.0}, "'radius' parameter"),
        (np.random.default_rng(0).normal(size=(50, 3)), {"radius": -1.0}, "'radius' parameter"),
        (np.random.default_rng(0).normal(size=(50, 3)), {"min_points": 2}, "'min_points' parameter"),
    ],
)
def test_bad_input(X, kwargs, match):
    with pytest.raises(ValueError, match=match):
        ChartAtlas(dimension=2, **{"radius": 0.5, **kwargs}).fit(X)


def test_chart_counts_bad_radii():
    with pytest.raises(ValueError, match="'radii' parameter"):
        chart_counts(sphere(100, 1, seed=0).points, [0.1, -0.2])


def test_init_only_stores():
    a = ChartAtlas(radius=-5)  # no check until fit
    assert a.radius == -5
    with pytest.raises(RuntimeError, match="not fitted"):
        a.summary()


@pytest.mark.parametrize("call", ["atlas", "chart_counts", "reach", "curvature", "resolution"])
def test_seed_reaches_the_neighbour_layer(call):
    # the neighbour layer caches each graph under (data fingerprint, method, seed): after a call with
    # seed 7 every graph it asked for must carry 7, not a hard-coded 0
    from manireg.geometry import neighbors
    from manireg.geometry.curvature import estimate_curvature
    from manireg.geometry.reach import estimate_reach
    from manireg.geometry.resolution import resolution_check

    X = sphere(300, 2, seed=0).points
    run = {
        "atlas": lambda: ChartAtlas(radius=0.5, dimension=2, random_state=7).fit(X),
        "chart_counts": lambda: chart_counts(X, random_state=7),
        "reach": lambda: estimate_reach(X, 2, random_state=7),
        "curvature": lambda: estimate_curvature(X, 2, n_landmarks=20, random_state=7),
        "resolution": lambda: resolution_check(X, 2, random_state=7),
    }[call]
    neighbors.clear_cache()
    run()
    seeds = {key[2] for key in neighbors._CACHE}
    assert seeds == {7}
