"""Resolution check. Source: nearest-neighbour spacing ~ n^(-1/d) (REFERENCES.md, "nearest-neighbour
scale"); sphere reach = radius (REFERENCES.md); the ratio rule 0.25 is a documented working rule."""

import numpy as np
import pytest

from manireg.data.manifolds import sphere
from manireg.geometry.resolution import resolution_check


def test_dense_sphere_is_dense_enough():
    chk = resolution_check(sphere(4000, 2, seed=0).points, 2, reach=1.0)
    assert chk.dense_enough and "Dense enough" in chk.verdict
    assert chk.chart_radius == pytest.approx(0.25)
    assert chk.samples_needed == chk.n_points


def test_sparse_sample_and_samples_needed_follow_n_to_minus_one_over_d():
    # spacing ~ n^(-1/d): the advised n makes spacing/radius about the 0.25 rule
    small = resolution_check(sphere(200, 2, seed=1).points, 2, reach=1.0)
    assert not small.dense_enough and "Too sparse" in small.verdict
    assert small.samples_needed > 200
    big = resolution_check(sphere(int(small.samples_needed * 1.5), 2, seed=2).points, 2, reach=1.0)
    assert big.spacing_to_radius < 0.3


def test_reach_estimated_when_missing():
    chk = resolution_check(sphere(2000, 2, seed=0).points, 2)
    assert 0.5 < chk.reach < 1.3 and chk.to_dict()["verdict"]


def test_bad_input():
    X = sphere(100, 2, seed=0).points
    with pytest.raises(ValueError, match="'chart_radius' parameter"):
        resolution_check(X, 2, chart_radius=0.0)
    with pytest.raises(ValueError, match="'reach' parameter"):
        resolution_check(X, 2, reach=-1.0)
    with pytest.raises(ValueError, match="must be 2-D"):
        resolution_check(np.arange(5.0), 1, reach=1.0)
