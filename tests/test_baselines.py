"""Baselines against the reference library (scikit-learn) and their rate rules."""

import math

import numpy as np
import pytest
from sklearn.neighbors import KNeighborsRegressor

from manireg.curves.baselines import kernel_bandwidth, kernel_ridge_penalty, kernel_ridge_regress, knn_k, knn_regress


@pytest.mark.parametrize("k", [1, 5, 17])
def test_knn_matches_sklearn(k):
    rng = np.random.default_rng(k)
    X, Q = rng.normal(size=(300, 6)), rng.normal(size=(80, 6))
    y = np.sin(X[:, 0]) + rng.normal(size=300)
    ref = KNeighborsRegressor(n_neighbors=k).fit(X, y).predict(Q)
    np.testing.assert_allclose(knn_regress(X, y, Q, k), ref, rtol=1e-12, atol=1e-12)


def test_knn_rule():
    assert knn_k(256, 3, 1) == math.ceil(256 ** 0.4) == 10
    assert knn_k(8192, 3, 1) == 37
    assert knn_k(5, 1, 10) == 5  # clipped to n


def test_knn_bad_k():
    X = np.zeros((5, 2))
    with pytest.raises(ValueError, match="'k' parameter of knn_regress must be an int in \\[1, 5\\]; got 6"):
        knn_regress(X, np.zeros(5), X, 6)


def test_kernel_ridge_matches_sklearn():
    from sklearn.kernel_ridge import KernelRidge

    rng = np.random.default_rng(0)
    X, Q = rng.normal(size=(200, 4)), rng.normal(size=(50, 4))
    y = np.cos(X[:, 1]) + 0.1 * rng.normal(size=200)
    h = kernel_bandwidth(X, 2, 1)
    lam = kernel_ridge_penalty(200, 2, 1)
    ref = KernelRidge(alpha=200 * lam, kernel="rbf", gamma=1 / (2 * h * h)).fit(X, y - y.mean()).predict(Q) + y.mean()
    np.testing.assert_allclose(kernel_ridge_regress(X, y, Q, bandwidth=h, penalty=lam), ref, rtol=1e-6, atol=1e-8)


def test_nystroem_close_to_exact():
    rng = np.random.default_rng(1)
    X, Q = rng.uniform(size=(600, 2)), rng.uniform(size=(100, 2))
    y = np.sin(3 * X[:, 0])
    kw = dict(bandwidth=0.2, penalty=1e-4)
    exact = kernel_ridge_regress(X, y, Q, **kw)
    approx = kernel_ridge_regress(X, y, Q, max_exact=300, seed=0, **kw)
    assert np.sqrt(np.mean((exact - approx) ** 2)) < 0.02


def test_bandwidth_shrinks_with_n():
    rng = np.random.default_rng(2)
    X = rng.normal(size=(2000, 3))
    assert kernel_bandwidth(X[:2000], 3, 1) < kernel_bandwidth(X[:200], 3, 1)
