"""The shared neighbour layer."""

import numpy as np
import pytest
from sklearn.neighbors import NearestNeighbors

from manireg.geometry.neighbors import clear_cache, collapse_duplicates, kneighbors


def test_exact_matches_sklearn():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(300, 6))
    g = kneighbors(X, 7, method="exact")
    # reference library: scikit-learn's NearestNeighbors, self removed
    d, i = NearestNeighbors(n_neighbors=8).fit(X).kneighbors(X)
    np.testing.assert_allclose(g.distances, d[:, 1:], rtol=1e-12)
    np.testing.assert_array_equal(g.indices, i[:, 1:])
    assert g.method == "exact" and g.n_duplicates == 0


def test_duplicates_collapsed_and_reported():
    rng = np.random.default_rng(1)
    X = rng.normal(size=(100, 3))
    Xd = np.vstack([X, X[:10], X[:2]])
    with pytest.warns(UserWarning, match="collapsed 12 exact duplicate"):
        g = kneighbors(Xd, 5)
    assert g.n_duplicates == 12 and g.n_points == 100
    assert g.distances.min() > 0
    np.testing.assert_array_equal(g.points[g.inverse], Xd)


def test_collapse_keeps_first_seen_order():
    X = np.array([[2.0], [1.0], [2.0], [3.0]])
    pts, inv, ndup = collapse_duplicates(X)
    np.testing.assert_array_equal(pts[:, 0], [2.0, 1.0, 3.0])
    np.testing.assert_array_equal(inv, [0, 1, 0, 2])
    assert ndup == 1


def test_single_repeated_point():
    with pytest.raises(ValueError, match="all 5 rows of X are the same point"):
        kneighbors(np.ones((5, 3)), 2)


def test_too_few_points_for_k():
    with pytest.raises(ValueError, match="20 neighbours were asked for but X has only 10 distinct"):
        kneighbors(np.random.default_rng(0).normal(size=(10, 2)), 20)


def test_nan_and_1d_input():
    X = np.random.default_rng(0).normal(size=(10, 2))
    X[3, 1] = np.nan
    with pytest.raises(ValueError, match=r"1 non-finite value\(s\).*\(3, 1\)"):
        kneighbors(X, 2)
    with pytest.raises(ValueError, match="reshape"):
        kneighbors(np.arange(10.0), 2)


def test_cache_shares_one_query():
    clear_cache()
    X = np.random.default_rng(2).normal(size=(200, 4))
    g20 = kneighbors(X, 20)
    g5 = kneighbors(X, 5)
    assert g5.points is g20.points  # served from the cached graph
    np.testing.assert_array_equal(g5.distances, g20.distances[:, :5])


def test_approximate_close_to_exact():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(1500, 5))
    ex = kneighbors(X, 10, method="exact")
    ap = kneighbors(X, 10, method="approximate", random_state=0)
    assert ap.method == "approximate"
    # recall of the approximate graph against the exact one (common practice: > 0.9 for NN-descent here)
    hits = np.mean([len(set(a) & set(b)) / 10 for a, b in zip(ap.indices, ex.indices)])
    assert hits > 0.9


def test_bad_k_and_method():
    X = np.random.default_rng(0).normal(size=(10, 2))
    with pytest.raises(ValueError, match="'k' parameter of kneighbors must be an int >= 1; got 0"):
        kneighbors(X, 0)
    with pytest.raises(ValueError, match="'method' parameter"):
        kneighbors(X, 2, method="fast")


def test_knn_regression_on_the_approximate_index_agrees_with_exact():
    # reference: exact brute-force search (scikit-learn NearestNeighbors) on the same data. The campaign cell's
    # layout: queries = the training rows themselves (answered from the index's own graph), then new rows
    # (searched in the index).
    from manireg.curves.baselines import knn_regress
    from manireg.data.manifolds import sphere
    from manireg.geometry.neighbors import query_neighbors

    rng = np.random.default_rng(5)
    X = sphere(3000, d=2, ambient_dim=10, seed=5).points
    y = np.sin(3 * X[:, 0]) + X[:, 1] + 0.1 * rng.standard_normal(3000)
    tr, te = slice(0, 2500), slice(2500, 3000)
    Q = np.vstack([X[tr], X[te]])
    k = 12
    exact = knn_regress(X[tr], y[tr], Q, k, method="exact")
    approx = knn_regress(X[tr], y[tr], Q, k, method="approximate", random_state=0)
    found = query_neighbors(X[tr], Q, k, method="approximate", self_rows=2500, recall_queries=500)
    truth = NearestNeighbors(n_neighbors=k).fit(X[tr]).kneighbors(Q, return_distance=False)
    assert found.method == "approximate" and found.recall_queries == 500
    # the training rows list themselves first, as exact search does
    np.testing.assert_array_equal(found.indices[:2500, 0], np.arange(2500))
    share = np.mean([len(set(a) & set(b)) / k for a, b in zip(found.indices, truth)])
    assert share >= 0.95 and abs(found.recall - share) < 0.03  # recall goal of the index (common practice)
    # predictions: a missed neighbour is replaced by the next one out, so the means move by little; the test
    # error of the two agrees within 5 % (our tolerance for a baseline's curve; its interval is wider)
    err = lambda p: np.mean((p[2500:] - y[te]) ** 2)  # noqa: E731
    assert abs(err(approx) - err(exact)) <= 0.05 * err(exact)
    assert np.mean(np.isclose(approx, exact)) >= 0.9


def test_float32_rows_that_begin_with_the_reference_are_the_search_stack(monkeypatch):
    """A large campaign kNN cell reads its rows once, in float32, the fitted rows first: the approximate search
    then builds its graph on that very array (no float64 copy, no second float32 stack), and the predictions
    equal the float64 path's up to the rare query searched exactly (sklearn's brute force in either type)."""
    import pynndescent

    from manireg.curves.baselines import knn_regress
    from manireg.data.manifolds import sphere

    rng = np.random.default_rng(6)
    X = sphere(2000, d=2, ambient_dim=10, seed=6).points
    y = np.sin(3 * X[:, 0]) + 0.1 * rng.standard_normal(2000)
    Q32 = X.astype(np.float32)
    seen = []
    real = pynndescent.NNDescent.__init__

    def spy(self, data, *a, **kw):
        seen.append(data)
        return real(self, data, *a, **kw)

    monkeypatch.setattr(pynndescent.NNDescent, "__init__", spy)
    p32 = knn_regress(Q32[:1500], y[:1500], Q32, 10, method="approximate")
    p64 = knn_regress(X[:1500], y[:1500], X, 10, method="approximate")
    assert seen[0] is Q32 and seen[1] is not X
    np.testing.assert_array_equal(seen[0], seen[1])  # the same float32 values either way
    assert np.mean(p32 == p64) >= 0.99
