"""Largest principal curvature at landmarks, from a quadratic fit of the normal residuals.

Near a point x0 of a C^2 d-manifold, with tangent coordinates u = T^T (y - x0), the manifold is the graph of
its normal offset

    N(u) = (1/2) II(u, u) + o(|u|^2),

where II is the second fundamental form (a symmetric bilinear map into the normal space). The principal
curvatures in a unit normal direction n are the eigenvalues of the shape operator <n, II(., .)>, so the
largest principal curvature over all normal directions is

    kappa_max = max over unit tangent v of |II(v, v)|.

Here II is fitted by least squares: the normal part of y - x0 (after a local PCA tangent basis T) is
regressed on [1, u_i, u_i u_j (i <= j)] (the constant and linear terms absorb the offset and tilt of the
estimated tangent plane), and the maximum over v is found by a few fixed-point ascent steps from many
seeded starts. On a sphere of radius r, kappa_max = 1/r everywhere, and 1/kappa_max bounds the reach from
above (reach <= 1 / max curvature, [1]_).

Neighbourhoods come from the shared layer :func:`manireg.geometry.neighbors.kneighbors`.

References
----------
.. [1] Federer, H. "Curvature measures." Trans. Amer. Math. Soc. 93 (1959).
.. [2] do Carmo, M. P. *Riemannian Geometry*, Birkhauser (1992), ch. 6 (the second fundamental form).
.. [3] Cazals, F., Pouget, M. "Estimating differential quantities using polynomial fitting of osculating
   jets." Comput. Aided Geom. Design 22 (2005).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import DataValidationError, check_int, check_points, make_rng
from .tangent import local_pca, representative_rows, resolve_dimension
from .neighbors import index_seed, kneighbors

__all__ = ["CurvatureReport", "estimate_curvature", "second_fundamental_form", "max_principal_curvature"]

QUANTILES = (0.05, 0.25, 0.5, 0.75, 0.95)


@dataclass
class CurvatureReport(ResultMixin):
    """Distribution over landmarks of the largest principal curvature.

    Attributes
    ----------
    quantiles : {"q05": ..., "q25": ..., "q50": ..., "q75": ..., "q95": ...} of kappa_max over landmarks.
    median : the median kappa_max.
    max : the largest kappa_max over landmarks (sensitive to noise; prefer ``quantiles['q95']``).
    curvature_radius : 1 / q95, a robust upper bound for the reach from curvature alone (bottlenecks can
        make the reach smaller still).
    dimension, n_neighbors, n_landmarks : settings used.
    curvatures : (n_landmarks,) kappa_max per landmark (left out of ``to_dict``).
    landmark_indices : rows of ``X`` used as landmarks (left out of ``to_dict``).
    """

    quantiles: dict
    median: float
    max: float
    curvature_radius: float
    dimension: int
    n_neighbors: int
    n_landmarks: int
    curvatures: np.ndarray = field(repr=False)
    landmark_indices: np.ndarray = field(repr=False)
    _skip_in_dict = ("curvatures", "landmark_indices")

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame({"row": self.landmark_indices, "max_curvature": self.curvatures})


def _design(u: np.ndarray) -> np.ndarray:
    """Columns [1, u_1..u_d, u_i u_j for i <= j]."""
    k, d = u.shape
    cols = [np.ones((k, 1)), u]
    for i in range(d):
        for j in range(i, d):
            cols.append((u[:, i] * u[:, j])[:, None])
    return np.hstack(cols)


def second_fundamental_form(offsets: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """Least-squares second fundamental form at a point from the offsets y - x0 of its neighbours.

    Parameters
    ----------
    offsets : (k, D) array of y - x0
    basis : (D, d) tangent basis (orthonormal columns)

    Returns
    -------
    H : (D, d, d) array, symmetric in the last two axes: II(v, w) = H @ v @ w (a vector in R^D, normal
        to the fitted tangent plane up to the fit's error).

    References
    ----------
    .. [1] Cazals, F., Pouget, M. Comput. Aided Geom. Design 22 (2005).
    """
    D, d = basis.shape
    u = offsets @ basis
    normal = offsets - u @ basis.T
    A = _design(u)
    coef, *_ = np.linalg.lstsq(A, normal, rcond=None)  # (p, D)
    H = np.zeros((D, d, d))
    c = 1 + d
    for i in range(d):
        for j in range(i, d):
            if i == j:
                H[:, i, i] = 2.0 * coef[c]
            else:
                H[:, i, j] = coef[c]
                H[:, j, i] = coef[c]
            c += 1
    return H


def max_principal_curvature(H: np.ndarray, *, n_starts: int = 16, n_iter: int = 30, rng=None) -> float:
    """max over unit v of |II(v, v)| for a second fundamental form ``H`` of shape (D, d, d)."""
    D, d, _ = H.shape
    if d == 1:
        return float(np.linalg.norm(H[:, 0, 0]))
    # reduce the normal space to the span of the fitted quadratic forms (at most d(d+1)/2 directions)
    flat = H.reshape(D, d * d)
    U, s, _ = np.linalg.svd(flat, full_matrices=False)
    keep = s > 1e-12 * max(s[0], 1e-300)
    if not np.any(keep):
        return 0.0
    Hr = np.einsum("Da,Dij->aij", U[:, keep], H)  # (q, d, d)
    rng = make_rng(0 if rng is None else rng)
    starts = [np.eye(d)[i] for i in range(d)]
    for a in range(Hr.shape[0]):
        w, V = np.linalg.eigh(Hr[a])
        starts.append(V[:, np.argmax(np.abs(w))])
    g = rng.standard_normal((n_starts, d))
    starts.extend(g / np.linalg.norm(g, axis=1, keepdims=True))
    V = np.array(starts)  # (s, d)
    for _ in range(n_iter):
        q = np.einsum("aij,si,sj->sa", Hr, V, V)  # II(v, v) in reduced coordinates
        step = np.einsum("sa,aij,sj->si", q, Hr, V)  # half the gradient of |II(v,v)|^2 / 4
        step = step + 1e-3 * np.linalg.norm(q, axis=1, keepdims=True) * V  # small shift for monotone ascent
        norm = np.linalg.norm(step, axis=1, keepdims=True)
        ok = norm[:, 0] > 0
        V[ok] = step[ok] / norm[ok]
    q = np.einsum("aij,si,sj->sa", Hr, V, V)
    return float(np.max(np.linalg.norm(q, axis=1)))


def estimate_curvature(
    X,
    dimension=None,
    *,
    landmarks=None,
    n_landmarks: int = 200,
    n_neighbors: int | None = None,
    random_state=0,
) -> CurvatureReport:
    """Largest principal curvature at landmarks, by a least-squares fit of the second fundamental form.

    Parameters
    ----------
    X : (n, D) array
    dimension : int or None
        Intrinsic dimension d (``None``: consensus of ``estimate_dimension``).
    landmarks : int array, optional
        Rows of ``X`` to evaluate at (e.g. ``ChartAtlas.landmark_indices_``). Default: ``n_landmarks`` rows
        drawn at random (seeded).
    n_landmarks : int
        Number of random landmarks when ``landmarks`` is not given.
    n_neighbors : int or None
        Points per quadratic fit. Default ``max(30, 4 p)`` with p = 1 + d + d(d+1)/2 coefficients per normal
        coordinate, so the fit is well over-determined. Too small a neighbourhood lets noise dominate; too
        large a one lets third-order terms in.
    random_state : int
        Seed of the landmark draw, of the ascent starts, of the dimension estimate (when ``dimension`` is
        None) and of the approximate neighbour index (large samples).

    Returns
    -------
    CurvatureReport

    References
    ----------
    .. [1] do Carmo, M. P. *Riemannian Geometry*, Birkhauser (1992).
    .. [2] Cazals, F., Pouget, M. Comput. Aided Geom. Design 22 (2005).

    Examples
    --------
    >>> from manireg.data.manifolds import sphere
    >>> rep = estimate_curvature(sphere(3000, 2, radius=2.0, seed=0).points, 2)
    >>> 0.4 < rep.median < 0.6
    True
    """
    owner = "estimate_curvature"
    X = check_points(X, owner=owner, min_samples=3)
    seed = index_seed(random_state)
    d, _ = resolve_dimension(X, dimension, owner=owner, n_features=X.shape[1], seed=seed)
    p = 1 + d + d * (d + 1) // 2
    k = max(30, 4 * p) if n_neighbors is None else check_int(n_neighbors, "n_neighbors", owner=owner, low=2)
    if k < p + 1:
        raise ValueError(
            f"the 'n_neighbors' parameter of {owner} must be at least {p + 1} for a quadratic fit in d = {d} "
            f"coordinates ({p} coefficients); got {k}. Use n_neighbors >= {4 * p}."
        )
    graph = kneighbors(X, k, owner=owner, random_state=seed)
    P = graph.points
    m = P.shape[0]
    rep = representative_rows(graph.inverse, m)
    rng = make_rng(random_state)
    if landmarks is None:
        n_landmarks = check_int(n_landmarks, "n_landmarks", owner=owner, low=1)
        lm = np.sort(rng.choice(m, size=min(n_landmarks, m), replace=False))
    else:
        rows = np.asarray(landmarks).ravel()
        if rows.size == 0 or not np.issubdtype(rows.dtype, np.integer) or rows.min() < 0 or rows.max() >= X.shape[0]:
            raise DataValidationError(
                f"{owner}: landmarks must be a non-empty array of row indices into X (0..{X.shape[0] - 1}); "
                f"got {landmarks!r}."
            )
        lm = graph.inverse[rows]
    hoods = np.column_stack([lm, graph.indices[lm]])
    bases, _ = local_pca(P, hoods, d)
    curv = np.empty(lm.shape[0])
    for i, x0 in enumerate(lm):
        offsets = P[graph.indices[x0]] - P[x0]
        H = second_fundamental_form(offsets, bases[i])
        curv[i] = max_principal_curvature(H, rng=rng)
    qs = np.quantile(curv, QUANTILES)
    quant = {f"q{int(round(q * 100)):02d}": float(v) for q, v in zip(QUANTILES, qs)}
    q95 = quant["q95"]
    return CurvatureReport(
        quantiles=quant,
        median=float(np.median(curv)),
        max=float(np.max(curv)),
        curvature_radius=float(1.0 / q95) if q95 > 0 else float("inf"),
        dimension=int(d),
        n_neighbors=int(k),
        n_landmarks=int(lm.shape[0]),
        curvatures=curv,
        landmark_indices=rep[lm],
    )
