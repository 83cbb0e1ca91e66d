"""Boundary checks: inputs a silent cast would get wrong are refused with a message that names the fix."""

import numpy as np
import pytest
import scipy.sparse

from manireg._validation import DataValidationError, check_points, check_target
from manireg import TwoNNDimension, noise_variance


def test_sparse_points_are_refused_with_the_dense_fix():
    X = scipy.sparse.random(50, 4, density=0.5, format="csr", random_state=0)
    with pytest.raises(DataValidationError, match=r"sparse matrix .*toarray\(\)"):
        check_points(X)


def test_complex_points_are_refused_not_truncated():
    X = np.ones((10, 3)) + 1j * np.arange(30).reshape(10, 3)
    with pytest.raises(DataValidationError, match="imaginary part"):
        check_points(X)
    with pytest.raises(DataValidationError, match="imaginary part"):
        check_target(np.ones(10) * (1 + 2j), 10)


def test_public_entry_point_uses_the_same_check():
    X = scipy.sparse.eye(20, format="csr")
    with pytest.raises(DataValidationError, match="sparse"):
        TwoNNDimension().fit(X)
    with pytest.raises(DataValidationError, match="imaginary"):
        noise_variance(np.random.default_rng(0).normal(size=(40, 2)), np.ones(40) * 1j)


def test_real_input_passes_unchanged():
    X = np.arange(12, dtype=np.float32).reshape(6, 2)
    out = check_points(X)
    assert out.dtype == np.float64 and np.array_equal(out, X)
