"""Generators against their closed-form geometry."""

import numpy as np
import pytest

from manireg.data import graph_manifold, helix, render_pebble, rendered_objects, sphere, swiss_roll, torus


@pytest.mark.parametrize("d,D", [(1, 2), (2, 3), (3, 10), (5, 40)])
def test_sphere_norm_after_undoing_embedding(d, D):
    s = sphere(500, d, radius=2.5, ambient_dim=D, seed=1)
    native = s.points @ s.embedding  # undo the isometric embedding
    # the d-sphere of radius r is {x in R^(d+1): |x| = r} (definition)
    np.testing.assert_allclose(np.linalg.norm(native, axis=1), 2.5, rtol=1e-12)
    # the embedding is an isometry: its columns are orthonormal, and no component leaves their span
    np.testing.assert_allclose(s.embedding.T @ s.embedding, np.eye(d + 1), atol=1e-12)
    np.testing.assert_allclose(native @ s.embedding.T, s.points, atol=1e-12)
    assert (s.dimension, s.ambient_dim, s.reach) == (d, D, 2.5)


def test_sphere_is_uniform():
    # uniform on S^2: each coordinate of a unit vector is Uniform(-1, 1) (Archimedes' hat-box theorem)
    from scipy import stats

    s = sphere(4000, 2, seed=3)
    assert stats.kstest(s.points[:, 2], "uniform", args=(-1, 2)).pvalue > 1e-3


def test_torus_implicit_equation_and_reach():
    R, r = 3.0, 1.0
    s = torus(800, major_radius=R, minor_radius=r, seed=2)
    x, y, z = s.points.T
    # torus of revolution: (sqrt(x^2 + y^2) - R)^2 + z^2 = r^2 (textbook implicit equation)
    np.testing.assert_allclose((np.sqrt(x**2 + y**2) - R) ** 2 + z**2, r**2, atol=1e-10)
    # reach = min(r, R - r): the tube radius bounds the radius of curvature, and R - r is half the
    # hole's width; Federer 1959 defines reach, the closed form is textbook geometry (REFERENCES.md, derived)
    assert s.reach == min(r, R - r)
    s2 = torus(10, major_radius=1.5, minor_radius=1.0, seed=0)
    assert s2.reach == 0.5


def test_torus_rejects_horn_torus():
    with pytest.raises(ValueError, match="major_radius > minor_radius"):
        torus(10, major_radius=1.0, minor_radius=1.0)


def test_helix_equation_and_curvature():
    a, b = 1.5, 0.4
    s = helix(400, radius=a, pitch=b, seed=0)
    x, y, z = s.points.T
    np.testing.assert_allclose(x**2 + y**2, a**2, atol=1e-12)
    t = np.arctan2(y, x)
    # z = b t up to whole turns
    turns = (z / b - t) / (2 * np.pi)
    np.testing.assert_allclose(turns, np.round(turns), atol=1e-9)
    # curvature of (a cos t, a sin t, b t) is a / (a^2 + b^2) (standard differential geometry);
    # check it numerically from the parametrisation by the discrete second derivative of arc length
    tt = np.linspace(0, 1, 2001)
    c = np.column_stack([a * np.cos(tt), a * np.sin(tt), b * tt])
    ds = np.linalg.norm(np.diff(c, axis=0), axis=1).mean()
    kappa = np.linalg.norm(np.diff(c, 2, axis=0), axis=1).mean() / ds**2
    assert kappa == pytest.approx(a / (a**2 + b**2), rel=1e-3)
    assert s.params["curvature"] == pytest.approx(a / (a**2 + b**2))
    assert s.params["reach_upper_bound"] == pytest.approx((a**2 + b**2) / a)


def test_swiss_roll_shape():
    s = swiss_roll(300, seed=0)
    x, h, z = s.points.T
    t = np.sqrt(x**2 + z**2)  # radius equals the parameter t on (t cos t, h, t sin t)
    np.testing.assert_allclose(np.cos(t) * t, x, atol=1e-9)
    assert s.dimension == 2 and s.ambient_dim == 3


def test_graph_manifold_recovers_chart_and_rotation():
    s = graph_manifold(300, d=4, ambient_dim=40, seed=5)
    native = s.points @ s.embedding  # undo the rotation
    np.testing.assert_allclose(native[:, :4], s.coords, atol=1e-10)  # a graph: first d coordinates are t
    assert s.points.shape == (300, 40) and s.dimension == 4


def test_graph_manifold_flat_has_infinite_reach():
    s = graph_manifold(50, d=2, ambient_dim=5, amplitude=0.0, seed=0)
    assert s.reach == np.inf


def test_noise_is_added_with_stated_level():
    s = sphere(3000, 2, ambient_dim=20, noise=0.05, seed=0)
    resid = s.points - s.clean_points
    assert resid.std() == pytest.approx(0.05, rel=0.03)
    assert s.noise == 0.05


def test_same_seed_same_points():
    a = graph_manifold(100, 3, 20, seed=7).points
    b = graph_manifold(100, 3, 20, seed=7).points
    c = graph_manifold(100, 3, 20, seed=8).points
    np.testing.assert_array_equal(a, b)
    assert not np.allclose(a, c)


def test_rendered_images_smooth_and_injective():
    s = rendered_objects(600, d=3, size=24, seed=0)
    assert s.points.shape == (600, 576) and s.image_shape == (24, 24)
    u = s.coords
    # nearby parameters give nearby images: a small step in parameters moves the image a little
    base = render_pebble(u[:20], size=24).reshape(20, -1)
    step = render_pebble(np.clip(u[:20] + 1e-3, 0, 1), size=24).reshape(20, -1)
    far = render_pebble(np.clip(u[:20] + 1e-1, 0, 1), size=24).reshape(20, -1)
    d_small = np.linalg.norm(base - step, axis=1)
    d_far = np.linalg.norm(base - far, axis=1)
    assert np.all(d_small < 0.05 * d_far + 1e-9)
    # injective on the sampled range: image distance over parameter distance stays bounded below
    from scipy.spatial.distance import pdist

    ratio = pdist(s.points) / pdist(u)
    assert ratio.min() > 0.05 * np.median(ratio)


def test_rendered_images_local_pca_has_d_large_eigenvalues():
    # common practice: in a small neighbourhood the tangent directions carry most of the variance
    d = 3
    centre = np.full((1, d), 0.5)
    rng = np.random.default_rng(0)
    u = centre + rng.uniform(-0.005, 0.005, size=(200, d))
    imgs = render_pebble(u, size=32).reshape(200, -1)
    ev = np.linalg.svd(imgs - imgs.mean(0), compute_uv=False) ** 2
    frac = ev / ev.sum()
    assert frac[:d].sum() > 0.95
    assert frac[d - 1] > 10 * frac[d]


@pytest.mark.parametrize(
    "call,match",
    [
        (lambda: sphere(10, 0), "'d' parameter of sphere"),
        (lambda: sphere(10, 3, ambient_dim=3), "ambient_dim"),
        (lambda: sphere(10, 2, radius=-1), "'radius'"),
        (lambda: graph_manifold(10, d=5, ambient_dim=3), "ambient_dim"),
        (lambda: rendered_objects(10, d=7), "'d' parameter of rendered_objects"),
        (lambda: sphere(10, 2, noise=-0.1), "'noise'"),
        (lambda: sphere(10, 2, seed=-4), "seed"),
    ],
)
def test_bad_generator_arguments(call, match):
    with pytest.raises(ValueError, match=match):
        call()
