"""A 2-D view of the data for looking at charts, local dimension or the target.

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
from .._validation import check_float, check_int, check_points, warn

__all__ = ["Embedding2D", "embed_2d"]


@dataclass
class Embedding2D(ResultMixin):
    """2-D coordinates of every row of ``X`` for plotting.

    Attributes
    ----------
    coords : (n, 2) array (left out of ``to_dict``; ``to_frame`` gives columns x, y).
    method : "umap" or "pca" (the fallback).
    n_neighbors, min_dist, random_state : settings used.
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


def embed_2d(X, random_state=0, n_neighbors: int = 15, *, min_dist: float = 0.1, metric: str = "euclidean") -> Embedding2D:
    """Seeded UMAP view of ``X`` in two dimensions (for viewing only).

    Parameters
    ----------
    X : (n, D) array
    random_state : int
        Seed; the same seed gives the same view (UMAP then runs single-threaded).
    n_neighbors : int >= 2
        UMAP's neighbourhood size: small values keep local detail, large values the global layout
        (5 to 50 is the useful range). Clipped to n - 1.
    min_dist : float in [0, 1]
        How tightly UMAP packs points (small: tight clumps, large: even spread).
    metric : str
        Any metric umap-learn accepts.

    Returns
    -------
    Embedding2D

    References
    ----------
    .. [1] McInnes, L., Healy, J., Melville, J. arXiv:1802.03426 (2018).
    """
    owner = "embed_2d"
    X = check_points(X, owner=owner, min_samples=3)
    n_neighbors = check_int(n_neighbors, "n_neighbors", owner=owner, low=2)
    min_dist = check_float(min_dist, "min_dist", owner=owner, low=0.0, high=1.0)
    if random_state is not None:
        random_state = check_int(random_state, "random_state", owner=owner, low=0)
    k = min(n_neighbors, X.shape[0] - 1)
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
