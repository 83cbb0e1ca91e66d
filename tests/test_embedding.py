"""embed_2d: the spectral view recovers a circle's angle, both views are reproducible with a seed, PCA
fallback without umap-learn; plots draw from results."""

import sys

import numpy as np
import pytest

from manireg.data.manifolds import sphere
from manireg.geometry.embedding import embed_2d


@pytest.mark.slow  # umap-learn compiles its numba kernels on first use (about 25 s on an idle 2-core machine)
def test_same_seed_same_view():
    X = sphere(150, 2, ambient_dim=5, seed=0).points
    a = embed_2d(X, random_state=3, n_neighbors=10, method="umap")
    b = embed_2d(X, random_state=3, n_neighbors=10, method="umap")
    assert a.method == "umap" and a.coords.shape == (150, 2)
    assert np.allclose(a.coords, b.coords)
    assert list(a.to_frame().columns) == ["x", "y"] and "coords" not in a.to_dict()


def test_pca_fallback_warns(monkeypatch):
    monkeypatch.setitem(sys.modules, "umap", None)  # makes `import umap` fail
    X = sphere(100, 2, ambient_dim=5, seed=0).points
    with pytest.warns(UserWarning, match="umap-learn could not be imported"):
        e = embed_2d(X, method="umap")
    assert e.method == "pca" and e.coords.shape == (100, 2)


def test_spectral_view_of_a_circle_is_its_angle():
    # The first non-trivial eigenfunctions of the Laplacian on a circle are cos t and sin t (closed form),
    # and the graph Laplacian of a uniform sample converges to it (Belkin & Niyogi 2003): up to a rotation
    # or reflection the view must be (cos t, sin t). A view that scrambles the order scores near 0.
    from scipy.linalg import orthogonal_procrustes

    rng = np.random.default_rng(0)
    t = np.sort(rng.uniform(0, 2 * np.pi, 600))
    Q, _ = np.linalg.qr(rng.normal(size=(6, 6)))
    X = np.column_stack([np.cos(t), np.sin(t), np.zeros((600, 4))]) @ Q.T
    e = embed_2d(X, random_state=0)
    assert e.method == "spectral" and e.coords.shape == (600, 2)
    truth = np.column_stack([np.cos(t), np.sin(t)])
    V = e.coords / e.coords.std(axis=0)
    R, _ = orthogonal_procrustes(V, truth / truth.std(axis=0))
    corr = [np.corrcoef((V @ R)[:, j], truth[:, j])[0, 1] for j in range(2)]
    assert min(corr) > 0.95, corr


def test_spectral_view_is_reproducible_and_maps_duplicates_together():
    X = sphere(300, 2, ambient_dim=5, seed=1).points
    X = np.vstack([X, X[:10]])  # ten exact duplicates
    a, b = embed_2d(X, random_state=2), embed_2d(X, random_state=2)
    np.testing.assert_array_equal(a.coords, b.coords)
    np.testing.assert_array_equal(a.coords[-10:], a.coords[:10])
    assert np.all(np.isfinite(a.coords))
    with pytest.raises(ValueError, match="'method' parameter of embed_2d"):
        embed_2d(X, method="tsne")
    with pytest.raises(ValueError, match="method='umap' for another metric"):
        embed_2d(X, metric="cosine")


def test_spectral_view_warns_on_separate_parts():
    rng = np.random.default_rng(0)
    X = np.vstack([rng.normal(size=(100, 3)), 100.0 + rng.normal(size=(100, 3))])
    with pytest.warns(UserWarning, match="2 separate parts"):
        e = embed_2d(X, n_neighbors=5)
    assert e.coords.shape == (200, 2)


def test_bad_input():
    with pytest.raises(ValueError, match="'n_neighbors' parameter"):
        embed_2d(sphere(50, 2, seed=0).points, n_neighbors=1)


def test_figures_from_results():
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    from manireg.geometry.charts import ChartAtlas, chart_counts
    from manireg.geometry.curvature import estimate_curvature
    from manireg.geometry.reach import estimate_reach
    from manireg.plots.charts import plot_chart_counts, plot_curvature, plot_embedding, plot_reach, plot_spectra

    X = sphere(600, 2, ambient_dim=4, seed=0).points
    atlas = ChartAtlas(radius=0.4, dimension=2).fit(X)
    figs = [
        plot_spectra(atlas.summary()),
        plot_chart_counts(chart_counts(X)),
        plot_reach(estimate_reach(X, 2)),
        plot_curvature(estimate_curvature(X, 2, n_landmarks=20)),
    ]
    monkey_view = type("E", (), {"coords": X[:, :2], "method": "pca"})()
    figs.append(plot_embedding(monkey_view, atlas.assignments_, kind="chart"))
    figs.append(plot_embedding(monkey_view, X[:, 0], kind="target"))
    assert all(isinstance(f, Figure) for f in figs)
    with pytest.raises(ValueError, match="'kind' parameter"):
        plot_embedding(monkey_view, kind="colour")
