"""A 2-D view of the data for looking at charts, local dimension or the target.

:func:`embed_2d` draws one of two views, both for looking only (they distort distances and densities, and
no number manireg reports is computed from them):

- ``"spectral"`` (the default): a Laplacian eigenmap [2]_ -- the two leading non-trivial eigenvectors of
  the normalised graph Laplacian of the k-nearest-neighbour graph, with self-tuning Gaussian weights
  [3]_. It needs one neighbour query and one sparse eigenproblem, about a second on 5,000 rows, so it
  costs a fraction of the geometry read-out.
- ``"umap"``: UMAP [1]_ (umap-learn) with a fixed seed; it separates clusters better. umap-learn compiles
  its numba kernels on first use in every process (tens of seconds) and, with a seed, runs
  single-threaded; its fit on a few thousand rows alone took longer than the rest of the read-out
  (docs/cli.md). If umap-learn cannot be imported, this view falls back to the first two principal
  components with a warning.

References
----------
.. [1] McInnes, L., Healy, J., Melville, J. "UMAP: Uniform Manifold Approximation and Projection for
   Dimension Reduction." arXiv:1802.03426 (2018).
.. [2] Belkin, M., Niyogi, P. "Laplacian eigenmaps for dimensionality reduction and data representation."
   Neural Computation 15 (2003).
.. [3] Zelnik-Manor, L., Perona, P. "Self-tuning spectral clustering." NIPS 17 (2004).
:func:`embed_2d` runs UMAP (umap-learn) with a fixed seed. The view is for looking only: UMAP distorts
distances and densities, and no number manireg reports is computed from it. With a seed UMAP runs
single-threaded (umap-learn gives up parallelism to be reproducible), so it is slower than an unseeded run.
If umap-learn cannot be imported, the view falls back to the first two principal components with a warning.

References
----------
.. [1] McInnes, L., Healy, J., Melville, J. "UMAP: Uniform Manifold Approximation and Projection for
   Dimension Reduction." arXiv:1802.03426 (2018).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import check_choice, check_float, check_int, check_points, warn

__all__ = ["Embedding2D", "embed_2d", "VIEW_METHODS"]

#: The views :func:`embed_2d` draws; the first is the default.
VIEW_METHODS = ("spectral", "umap")


@dataclass
class Embedding2D(ResultMixin):
    """2-D coordinates of every row of ``X`` for plotting.

    Attributes
    ----------
    coords : (n, 2) array (left out of ``to_dict``; ``to_frame`` gives columns x, y).
    method : "spectral", "umap" or "pca" (the fallback when umap-learn cannot be imported).
    n_neighbors, min_dist, random_state : settings used (``min_dist`` only matters to UMAP).
    note : reminder that the view is for viewing only.
    """

    coords: np.ndarray = field(repr=False)
    method: str
    n_neighbors: int
    min_dist: float
    random_state: int | None
    note: str = "for viewing only: distances and densities in this view are distorted; no reported number uses it"
    _skip_in_dict = ("coords",)

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame({"x": self.coords[:, 0], "y": self.coords[:, 1]})


def _pca_2d(X: np.ndarray) -> np.ndarray:
    Xc = X - X.mean(axis=0)
    _, _, vt = np.linalg.svd(Xc, full_matrices=False)
    comps = vt[:2]
    # fix signs so the result is deterministic
    signs = np.sign(comps[np.arange(comps.shape[0]), np.argmax(np.abs(comps), axis=1)])
    out = Xc @ (comps * signs[:, None]).T
    if out.shape[1] < 2:
        out = np.hstack([out, np.zeros((out.shape[0], 2 - out.shape[1]))])
    return out


def _spectral_2d(X: np.ndarray, k: int, random_state, owner: str) -> np.ndarray:
    """Laplacian eigenmap [2]_ of the k-NN graph with self-tuning weights [3]_ (duplicates share a point)."""
    import warnings

    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components
    from sklearn.manifold import spectral_embedding

    from .neighbors import kneighbors

    graph = kneighbors(X, k, method="exact", owner=owner, warn_duplicates=False)
    m, dist, idx = graph.n_points, graph.distances, graph.indices
    # self-tuning scale: each point's distance to its k-th neighbour [3]_; w_ij = exp(-d_ij^2 / (s_i s_j))
    scale = np.maximum(dist[:, -1], np.finfo(float).tiny)
    w = np.exp(-dist**2 / (scale[:, None] * scale[idx]))
    W = sp.csr_matrix((w.ravel(), (np.repeat(np.arange(m), graph.k), idx.ravel())), shape=(m, m))
    W = W.maximum(W.T)
    n_parts = connected_components(W, directed=False)[0]
    if n_parts > 1:
        warn(
            f"{owner}: the {k}-nearest-neighbour graph of the view has {n_parts} separate parts; the spectral "
            "view may draw them on top of each other. Raise n_neighbors or use the UMAP view (view='umap', "
            "--view umap)."
        )
    if m <= 3:  # too few points for two non-trivial eigenvectors: the principal components will do
        return _pca_2d(graph.points)[graph.inverse]
    seed = 0 if random_state is None else random_state
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*not fully connected.*")  # said above, in our words
        E = spectral_embedding(W, n_components=2, random_state=seed, eigen_solver="arpack", drop_first=True)
    E = np.asarray(E, dtype=np.float64)
    # unit variance per axis: the eigenvectors' own scale (about 1/sqrt(m)) means nothing on a plot's axes
    E = (E - E.mean(axis=0)) / np.where(E.std(axis=0) > 0, E.std(axis=0), 1.0)
    return E[graph.inverse]


def embed_2d(X, random_state=0, n_neighbors: int = 15, *, min_dist: float = 0.1, metric: str = "euclidean",
             method: str = "spectral") -> Embedding2D:
    """Seeded 2-D view of ``X`` (for viewing only): a Laplacian eigenmap (default) or UMAP.

    Parameters
    ----------
    X : (n, D) array
    random_state : int
        Seed; the same seed gives the same view (UMAP then runs single-threaded).
    n_neighbors : int >= 2
        Neighbourhood size of the graph both views start from: small values keep local detail, large
        values the global layout (5 to 50 is the useful range). Clipped to n - 1.
    min_dist : float in [0, 1]
        How tightly UMAP packs points (small: tight clumps, large: even spread); unused by the spectral view.
    metric : str
        Any metric umap-learn accepts (UMAP view); the spectral view uses Euclidean distances.
    method : {"spectral", "umap"}, default="spectral"
        ``"spectral"``: Laplacian eigenmap of the k-nearest-neighbour graph [2]_ [3]_, about a second on
        5,000 rows. ``"umap"``: UMAP [1]_, better at separating clusters, but its just-in-time compilation
        and seeded single-threaded fit cost more than the rest of the geometry read-out.

    Returns
    -------
    Embedding2D

    References
    ----------
    .. [1] McInnes, L., Healy, J., Melville, J. arXiv:1802.03426 (2018).
    .. [2] Belkin, M., Niyogi, P. Neural Computation 15 (2003).
    .. [3] Zelnik-Manor, L., Perona, P. NIPS 17 (2004).
    """
    owner = "embed_2d"
    X = check_points(X, owner=owner, min_samples=3)
    n_neighbors = check_int(n_neighbors, "n_neighbors", owner=owner, low=2)
    min_dist = check_float(min_dist, "min_dist", owner=owner, low=0.0, high=1.0)
    method = check_choice(method, "method", owner=owner, choices=VIEW_METHODS)
    if random_state is not None:
        random_state = check_int(random_state, "random_state", owner=owner, low=0)
    k = min(n_neighbors, X.shape[0] - 1)
    if method == "spectral":
        if metric != "euclidean":
            raise ValueError(
                f"the 'metric' parameter of {owner} must be 'euclidean' for method='spectral'; got {metric!r}. "
                "Use method='umap' for another metric."
            )
        return Embedding2D(_spectral_2d(X, k, random_state, owner), "spectral", k, min_dist, random_state)
    try:
        import umap
    except Exception as exc:  # noqa: BLE001 - any import failure (numba, llvmlite) means "no UMAP"
        warn(
            f"{owner}: umap-learn could not be imported ({exc}); showing the first two principal components "
            "instead. Install umap-learn for the UMAP view: pip install umap-learn."
        )
        return Embedding2D(_pca_2d(X), "pca", k, min_dist, random_state)
    import warnings

    with warnings.catch_warnings():
        # umap warns that a seed disables parallelism: that is the documented, intended behaviour here
        warnings.filterwarnings("ignore", message=".*n_jobs.*overridden.*")
        model = umap.UMAP(
            n_components=2, n_neighbors=k, min_dist=min_dist, metric=metric, random_state=random_state, n_jobs=1,
        )
        coords = model.fit_transform(X)
    return Embedding2D(np.asarray(coords, dtype=np.float64), "umap", k, min_dist, random_state)
