"""embed_2d: reproducible with a seed, PCA fallback without umap-learn; plots draw from results."""

import sys

import numpy as np
import pytest

from manireg.data.manifolds import sphere
from manireg.geometry.embedding import embed_2d


@pytest.mark.slow  # umap-learn compiles its numba kernels on first use (about 25 s on an idle 2-core machine)
def test_same_seed_same_view():
    X = sphere(150, 2, ambient_dim=5, seed=0).points
    a = embed_2d(X, random_state=3, n_neighbors=10)
    b = embed_2d(X, random_state=3, n_neighbors=10)
    assert a.method == "umap" and a.coords.shape == (150, 2)
    assert np.allclose(a.coords, b.coords)
    assert list(a.to_frame().columns) == ["x", "y"] and "coords" not in a.to_dict()


def test_pca_fallback_warns(monkeypatch):
    monkeypatch.setitem(sys.modules, "umap", None)  # makes `import umap` fail
    X = sphere(100, 2, ambient_dim=5, seed=0).points
    with pytest.warns(UserWarning, match="umap-learn could not be imported"):
        e = embed_2d(X)
    assert e.method == "pca" and e.coords.shape == (100, 2)


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
