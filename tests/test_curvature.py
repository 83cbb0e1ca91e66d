"""Largest principal curvature against closed forms.

Source: a sphere of radius r has every principal curvature 1/r; a circle of radius r has curvature 1/r;
on a torus of revolution with tube radius r and R - r > r the curvature across the tube is 1/r everywhere and
the other one, |cos v / (R + r cos v)|, is at most 1/(R - r) < 1/r, so the largest is 1/r (textbook
differential geometry, e.g. do Carmo, Riemannian Geometry, ch. 6).
"""

import numpy as np
import pytest

from manireg.data.manifolds import sphere, torus
from manireg.geometry.curvature import estimate_curvature


@pytest.mark.parametrize("d, r", [(1, 0.5), (2, 2.0), (3, 1.0)])
def test_sphere_curvature_is_one_over_radius(d, r):
    # Source: principal curvatures of a d-sphere of radius r are all 1/r.
    smp = sphere(3000, d, radius=r, ambient_dim=d + 3, seed=0)
    rep = estimate_curvature(smp.points, d, n_landmarks=60)
    assert rep.median == pytest.approx(1.0 / r, rel=0.1)
    assert rep.quantiles["q05"] > 0.8 / r and rep.quantiles["q95"] < 1.2 / r
    assert rep.curvature_radius == pytest.approx(r, rel=0.2)


def test_torus_largest_curvature_is_tube():
    # Source: on a torus of revolution the principal curvature across the tube is 1/r everywhere.
    smp = torus(3000, major_radius=3.0, minor_radius=1.0, seed=0)
    rep = estimate_curvature(smp.points, 2, n_landmarks=60)
    assert rep.median == pytest.approx(1.0, rel=0.15)


def test_landmarks_and_noise():
    smp = sphere(1500, 2, radius=1.0, ambient_dim=5, noise=0.02, seed=1)
    rep = estimate_curvature(smp.points, 2, landmarks=np.arange(0, 1500, 50))
    assert rep.n_landmarks == 30 and np.all(np.isfinite(rep.curvatures))
    assert "curvatures" not in rep.to_dict() and len(rep.to_frame()) == 30


@pytest.mark.parametrize(
    "X, kwargs, match",
    [
        (np.array([[0.0, 1.0, 2.0], [np.nan, 2.0, 1.0], [1.0, 1.0, 0.0]]), {}, "non-finite"),
        (np.arange(10.0), {}, "must be 2-D"),
        (np.random.default_rng(0).normal(size=(60, 3)), {"n_neighbors": 4}, "'n_neighbors' parameter"),
        (np.random.default_rng(0).normal(size=(60, 3)), {"landmarks": [0, 99]}, "row indices"),
    ],
)
def test_bad_input(X, kwargs, match):
    with pytest.raises(ValueError, match=match):
        estimate_curvature(X, 2, **kwargs)
