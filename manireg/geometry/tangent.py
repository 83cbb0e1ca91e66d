"""Tangent spaces shared by charts, reach and curvature: local PCA, the dimension they use, row mapping.

:mod:`manireg.geometry.charts`, :mod:`manireg.geometry.reach`, :mod:`manireg.geometry.curvature` and
:mod:`manireg.geometry.resolution` all fit tangent bases to neighbourhoods, resolve the intrinsic dimension
d the same way and map distinct points back to rows of ``X``; those helpers live here so that none of those
modules imports another for them.

References
----------
.. [1] Jolliffe, I. T. *Principal Component Analysis*, 2nd ed., Springer (2002).
"""

from __future__ import annotations

import numpy as np

from .._validation import check_int

__all__ = ["RADIUS_FACTOR", "N_SPECTRUM", "local_pca", "representative_rows", "resolve_dimension"]

#: The default chart radius is this fraction of the estimated reach: the theory needs r < reach / 2, and the
#: extra factor 2 is a margin for the error of the reach estimate.
RADIUS_FACTOR = 0.25

#: Number of explained-variance components kept per chart in ``spectra_`` (at most D).
N_SPECTRUM = 10


def resolve_dimension(X, dimension, *, owner: str, n_features: int, seed=0) -> tuple[int, str]:
    """Return (d, source): the given ``dimension`` checked, or the consensus of ``estimate_dimension``.

    ``seed`` seeds the estimate (its bootstrap, subsample and neighbour index) when d is not given.

    The dimension estimate is imported lazily: a caller that passes d does not load it (nor scikit-learn).
    """
    if dimension is not None:
        d = check_int(dimension, "dimension", owner=owner, low=1)
        if d >= n_features:
            raise ValueError(
                f"the 'dimension' parameter of {owner} must be smaller than the number of features of X "
                f"({n_features}) for a tangent/normal split; got {d}. Pass the intrinsic dimension d < D."
            )
        return d, "given"
    try:
        from .dimension import estimate_dimension
    except ImportError as exc:  # pragma: no cover - depends on the dimension module being present
        raise ValueError(
            f"{owner}: no 'dimension' was given and the dimension estimate is not available ({exc}). "
            "Pass dimension=d explicitly."
        ) from None
    report = estimate_dimension(X, seed=seed)
    d = int(round(float(report.consensus)))
    d = max(1, min(d, n_features - 1))
    return d, "estimated"


def local_pca(points: np.ndarray, neighborhoods, dimension: int, *, n_spectrum: int | None = None, chunk: int = 256):
    """Tangent bases and explained-variance spectra by PCA of each neighbourhood.

    Each neighbourhood is centred at its mean; the tangent basis is spanned by the ``dimension`` leading
    principal directions.

    Parameters
    ----------
    points : (m, D) array
    neighborhoods : (b, k) int array (equal sizes, done in batched chunks) or a list of int arrays
    dimension : int
        d, the number of tangent directions kept.
    n_spectrum : int, optional
        Number of explained-variance ratios kept per neighbourhood (default ``min(D, 10)``); missing
        entries (neighbourhoods with fewer points than components) are 0.

    Returns
    -------
    bases : (b, D, d) array with orthonormal columns
    spectra : (b, n_spectrum) array of explained-variance ratios (each row sums to at most 1)

    References
    ----------
    .. [1] Jolliffe, I. T. *Principal Component Analysis*, 2nd ed., Springer (2002).
    """
    D = points.shape[1]
    ns = min(D, N_SPECTRUM) if n_spectrum is None else min(D, n_spectrum)
    if isinstance(neighborhoods, np.ndarray) and neighborhoods.ndim == 2:
        b = neighborhoods.shape[0]
        bases = np.empty((b, D, dimension))
        spectra = np.zeros((b, ns))
        for s in range(0, b, chunk):
            nb = points[neighborhoods[s : s + chunk]]  # (c, k, D)
            nb = nb - nb.mean(axis=1, keepdims=True)
            _, sv, vt = np.linalg.svd(nb, full_matrices=False)
            bases[s : s + chunk] = np.transpose(vt[:, :dimension, :], (0, 2, 1))
            ev = sv**2
            tot = ev.sum(axis=1, keepdims=True)
            tot[tot == 0] = 1.0
            r = ev / tot
            q = min(ns, r.shape[1])
            spectra[s : s + chunk, :q] = r[:, :q]
        return bases, spectra
    b = len(neighborhoods)
    bases = np.empty((b, D, dimension))
    spectra = np.zeros((b, ns))
    for i, idx in enumerate(neighborhoods):
        nb = points[np.asarray(idx)]
        nb = nb - nb.mean(axis=0)
        _, sv, vt = np.linalg.svd(nb, full_matrices=False)
        if vt.shape[0] < dimension:  # fewer points than d: complete the basis arbitrarily but orthonormally
            q, _ = np.linalg.qr(np.vstack([vt, np.eye(D)[: dimension]]).T)
            bases[i] = q[:, :dimension]
        else:
            bases[i] = vt[:dimension].T
        ev = sv**2
        tot = ev.sum()
        r = ev / tot if tot > 0 else ev
        q = min(ns, r.shape[0])
        spectra[i, :q] = r[:q]
    return bases, spectra


def representative_rows(inverse: np.ndarray, m: int) -> np.ndarray:
    """First original row of every distinct point.

    ``inverse`` maps each row of ``X`` to its distinct point (``NeighborGraph.inverse``); the result maps each
    of the ``m`` distinct points back to the first row of ``X`` that holds it, so per-point outputs can name
    rows of ``X``.
    """
    rep = np.empty(m, dtype=np.int64)
    rows = np.arange(inverse.shape[0])
    rep[inverse[::-1]] = rows[::-1]
    return rep
