"""Reach of the manifold behind a sample, by the tangent-based estimator.

The reach tau of a closed set M is the largest tau such that every point closer than tau to M has a unique
nearest point on M. For a C^2 submanifold it equals ([1]_, Theorem 4.18)

    tau = inf over p != q in M of |q - p|^2 / (2 dist(q - p, T_p M)),

and the sample estimator [2]_ takes the same infimum over pairs of sample points with estimated tangent
spaces. It sees both ways the reach can be small: strong curvature (near pairs) and bottlenecks (far pairs
across a narrow gap).

The pair scheme
---------------
All pairs cost O(n^2). Here the first point of a pair (the *base* point x, whose tangent space is used) runs
over a seeded random subsample of at most ``n_base`` points, and the second point y over all points, in
chunks of base points with numpy matrix products (the tangent components of all y - x for a chunk are one
matrix product of the stacked tangent bases with the data). The cost is O(n_base * n * (d + 1) * D); with the
default ``n_base = 2000`` that is about a tenth of an all-pairs pass at n = 20,000. The infimum is
approached at many base points at once (every point on a most-curved stretch, both ends of a bottleneck), so
the subsample rarely misses it; pass ``n_base=None`` for all points.

Pairs closer than ``exclusion`` times the distance from x to its ``n_neighbors``-th neighbour are left out:
inside the PCA neighbourhood the tangent error theta, not the geometry, sets the ratio (it behaves like
|y - x| / (2 theta) and goes to 0 with |y - x|), which would pull the infimum far below the reach.

Tangent spaces come from local PCA of each base point's ``n_neighbors`` nearest neighbours from the shared
neighbour layer (:func:`manireg.geometry.neighbors.kneighbors`).

References
----------
.. [1] Federer, H. "Curvature measures." Trans. Amer. Math. Soc. 93 (1959), 418-491.
.. [2] Aamari, E., Kim, J., Chazal, F., Michel, B., Rinaldo, A., Wasserman, L. "Estimating the reach of a
   manifold." Electron. J. Stat. 13 (2019), 1359-1399.
.. [3] Niyogi, P., Smale, S., Weinberger, S. Discrete Comput. Geom. 39 (2008) (charts below half the reach).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import DataValidationError, check_float, check_int, check_points, make_rng, warn
from .tangent import RADIUS_FACTOR, local_pca, representative_rows, resolve_dimension
from .neighbors import index_seed, kneighbors

__all__ = ["ReachEstimate", "estimate_reach", "reach_from_tangents", "default_reach_neighbors"]


def default_reach_neighbors(n_samples: int) -> int:
    """Neighbourhood size of the reach estimate's local PCA: sqrt(n) clipped to [20, 100] (see ``estimate_reach``)."""
    return int(min(100, max(20, round(float(np.sqrt(n_samples))))))


@dataclass
class ReachEstimate(ResultMixin):
    """A reach estimate with the pair that attains it.

    Attributes
    ----------
    reach : the reported value: ``infimum`` when ``quantile`` is None, else the ``quantile`` of the
        per-point values. ``inf`` when every examined pair lies in the tangent spaces (flat data); ``NaN``
        (with a warning) when the sample is so sparse that no pair passes the exclusion distance.
    infimum : the infimum over all pairs examined (the published estimator).
    quantile : the quantile used, or None.
    pair : (i, j) rows of ``X`` attaining ``infimum`` (i the base point whose tangent space was used).
    pair_distance : |x_j - x_i| for that pair; small means curvature set the value, large a bottleneck.
    recommended_radius : ``radius_factor`` * reach, a chart radius below half the reach.
    radius_factor : 0.25 (the theory needs r < reach / 2; the factor 2 more is a margin for the estimate).
    dimension, n_neighbors, n_base, exclusion : settings used.
    per_point : (n_base,) smallest ratio over partners of each base point (left out of ``to_dict``).
    base_indices : (n_base,) rows of ``X`` used as base points (left out of ``to_dict``).
    """

    reach: float
    infimum: float
    quantile: float | None
    pair: tuple
    pair_distance: float
    recommended_radius: float
    radius_factor: float
    dimension: int
    n_neighbors: int
    n_base: int
    exclusion: float
    per_point: np.ndarray = field(repr=False)
    base_indices: np.ndarray = field(repr=False)
    _skip_in_dict = ("per_point", "base_indices")

    def to_frame(self):
        """One row per base point: its row in X and its smallest ratio."""
        import pandas as pd

        return pd.DataFrame({"row": self.base_indices, "reach_value": self.per_point})


def reach_from_tangents(points: np.ndarray, base: np.ndarray, bases: np.ndarray, min_dist: np.ndarray, *, chunk_bytes: float = 64e6):
    """Per base point, the smallest |y - x|^2 / (2 dist(y - x, T_x)) over partners y with |y - x| >= min_dist.

    Parameters
    ----------
    points : (m, D) array (centred data are best for rounding)
    base : (b,) int rows of ``points`` used as x
    bases : (b, D, d) tangent bases at the base points (orthonormal columns)
    min_dist : (b,) smallest partner distance per base point

    Returns
    -------
    values : (b,) smallest ratio (inf when no partner qualifies or all are in the tangent space)
    partners : (b,) row of ``points`` attaining it (-1 when none)
    n_pairs : number of pairs that passed the distance cut

    References
    ----------
    .. [1] Aamari et al., Electron. J. Stat. 13 (2019).
    """
    m, D = points.shape
    b, _, d = bases.shape
    sq = np.einsum("ij,ij->i", points, points)
    values = np.full(b, np.inf)
    partners = np.full(b, -1, dtype=np.int64)
    n_pairs = 0
    step = max(1, int(chunk_bytes // (8.0 * (d + 1) * m)))
    for s in range(0, b, step):
        idx = base[s : s + step]
        c = idx.shape[0]
        xb = points[idx]  # (c, D)
        Tb = bases[s : s + step]  # (c, D, d)
        dist2 = sq[idx][:, None] + sq[None, :] - 2.0 * (xb @ points.T)  # (c, m)
        np.maximum(dist2, 0.0, out=dist2)
        Tflat = np.transpose(Tb, (0, 2, 1)).reshape(c * d, D)
        tan = (Tflat @ points.T).reshape(c, d, m)
        tan -= np.einsum("cdk,ck->cd", np.transpose(Tb, (0, 2, 1)), xb)[:, :, None]
        tan2 = np.einsum("cdm,cdm->cm", tan, tan)
        normal2 = np.maximum(dist2 - tan2, 0.0)
        # a normal part below 1e-7 of the distance is rounding: the pair lies in the tangent space (ratio inf)
        normal2[normal2 <= 1e-14 * dist2] = 0.0
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = dist2 / (2.0 * np.sqrt(normal2))
        ratio[~np.isfinite(ratio)] = np.inf
        ratio[dist2 < (min_dist[s : s + step] ** 2)[:, None]] = np.inf
        ratio[np.arange(c), idx] = np.inf
        qualified = dist2 >= (min_dist[s : s + step] ** 2)[:, None]
        qualified[np.arange(c), idx] = False
        n_pairs += int(qualified.sum())
        j = np.argmin(ratio, axis=1)
        values[s : s + step] = ratio[np.arange(c), j]
        partners[s : s + step] = np.where(np.isfinite(values[s : s + step]), j, -1)
    return values, partners, n_pairs


def estimate_reach(
    X,
    dimension=None,
    *,
    tangent_bases=None,
    n_neighbors: int | None = None,
    quantile: float | None = None,
    n_base: int | None = 2000,
    exclusion: float = 2.0,
    random_state=0,
) -> ReachEstimate:
    """Estimate the reach from a sample and its tangent spaces.

    Parameters
    ----------
    X : (n, D) array
    dimension : int or None
        Intrinsic dimension d (``None``: consensus of ``estimate_dimension``).
    tangent_bases : (n, D, d) array, optional
        Known or previously estimated tangent bases, one per row of ``X`` (orthonormal columns). Default:
        local PCA of the ``n_neighbors`` nearest neighbours. With exact tangents the estimator can only
        overestimate the reach [2]_.
    n_neighbors : int >= d + 1 or None
        Neighbourhood size of the local PCA (and the exclusion scale). ``None`` (default) uses
        ``default_reach_neighbors(n)`` = sqrt(n) clipped to [20, 100]. The rule: the local PCA's angle error
        theta is about kappa * h / sqrt(k) for a neighbourhood of k points and radius h, so at pair distance
        ``exclusion * h`` it biases the ratio down by a relative 2 / (exclusion * sqrt(k)); letting k grow
        with n makes that bias shrink as the sample grows (with a fixed k it would not).
    quantile : float in (0, 1) or None
        ``None`` reports the infimum over pairs (the published estimator). A value q reports the q-quantile of
        the per-point minima instead: with ambient noise the infimum is set by the noisiest pair and falls
        towards 0 as n grows, while a low quantile (0.05 to 0.1) stays near the reach of the underlying
        manifold. It is a robust variant, not part of the published estimator; it can overestimate the reach
        when only a few points sit on the most curved part.
    n_base : int or None
        Number of base points (seeded random subsample); ``None`` for all points.
    exclusion : float >= 0
        Default 2. Pairs closer than ``exclusion`` times the base point's ``n_neighbors``-th neighbour distance are
        skipped (see the module notes); 0 keeps every pair.
    random_state : int
        Seed of the base-point subsample, of the dimension estimate (when ``dimension`` is None) and of the
        approximate neighbour index (large samples).

    Returns
    -------
    ReachEstimate

    References
    ----------
    .. [1] Federer, H. Trans. Amer. Math. Soc. 93 (1959), Theorem 4.18.
    .. [2] Aamari, E., Kim, J., Chazal, F., Michel, B., Rinaldo, A., Wasserman, L. "Estimating the reach of a
       manifold." Electron. J. Stat. 13 (2019).
    .. [3] Niyogi, P., Smale, S., Weinberger, S. Discrete Comput. Geom. 39 (2008).

    Examples
    --------
    >>> from manireg.data.manifolds import sphere
    >>> est = estimate_reach(sphere(3000, 2, radius=2.0, seed=0).points, 2)
    >>> 1.5 < est.reach < 2.5
    True
    """
    owner = "estimate_reach"
    X = check_points(X, owner=owner, min_samples=3)
    if n_neighbors is None:
        n_neighbors = default_reach_neighbors(X.shape[0])
    n_neighbors = check_int(n_neighbors, "n_neighbors", owner=owner, low=2)
    exclusion = check_float(exclusion, "exclusion", owner=owner, low=0.0)
    if quantile is not None:
        quantile = check_float(quantile, "quantile", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    if n_base is not None:
        n_base = check_int(n_base, "n_base", owner=owner, low=1)
    seed = index_seed(random_state)
    d, _ = resolve_dimension(X, dimension, owner=owner, n_features=X.shape[1], seed=seed)
    if n_neighbors <= d:
        raise ValueError(
            f"the 'n_neighbors' parameter of {owner} must exceed the dimension ({d}) for a local PCA of d "
            f"directions; got {n_neighbors}. Use n_neighbors >= {max(d + 1, 2 * d)}."
        )
    graph = kneighbors(X, min(n_neighbors, X.shape[0] - 1), owner=owner, random_state=seed)
    n_neighbors = graph.k
    P = graph.points
    m = P.shape[0]
    rep = representative_rows(graph.inverse, m)
    rng = make_rng(random_state)
    if n_base is None or n_base >= m:
        base = np.arange(m)
    else:
        base = np.sort(rng.choice(m, size=n_base, replace=False))
    Pc = P - P.mean(axis=0)
    if tangent_bases is None:
        hoods = np.column_stack([base, graph.indices[base]])
        bases, _ = local_pca(Pc, hoods, d)
    else:
        tb = np.asarray(tangent_bases, dtype=np.float64)
        if tb.shape != (X.shape[0], X.shape[1], d) or not np.all(np.isfinite(tb)):
            raise DataValidationError(
                f"{owner}: tangent_bases must be a finite array of shape (n, D, d) = "
                f"({X.shape[0]}, {X.shape[1]}, {d}), one orthonormal basis per row of X; got shape {tb.shape}."
            )
        bases = tb[rep[base]]
    min_dist = exclusion * graph.distances[base, -1]
    values, partners, n_pairs = reach_from_tangents(Pc, base, bases, min_dist)
    if n_pairs == 0:
        warn(
            f"{owner}: no pair of points is farther apart than {exclusion:g} x the {n_neighbors}-th neighbour "
            "distance, so no pair could be examined; the sample is too sparse for the tangent spaces at this n "
            "and the reach is reported as NaN. Pass more samples, a smaller n_neighbors or exclusion=0 (which "
            "lets tangent errors pull the value down)."
        )
        values = np.full(base.shape[0], np.nan)
        reach = infimum = float("nan")
        pair = (-1, -1)
        pair_dist = float("nan")
    elif not np.any(np.isfinite(values)):
        infimum = float("inf")
        pair = (-1, -1)
        pair_dist = float("nan")
    else:
        a = int(np.argmin(values))
        infimum = float(values[a])
        pair = (int(rep[base[a]]), int(rep[partners[a]]))
        pair_dist = float(np.linalg.norm(P[partners[a]] - P[base[a]]))
    if n_pairs == 0:
        pass
    elif quantile is None:
        reach = infimum
    else:
        reach = float(np.quantile(values, quantile, method="lower"))
    return ReachEstimate(
        reach=reach,
        infimum=infimum,
        quantile=quantile,
        pair=pair,
        pair_distance=pair_dist,
        recommended_radius=RADIUS_FACTOR * reach,
        radius_factor=RADIUS_FACTOR,
        dimension=int(d),
        n_neighbors=int(n_neighbors),
        n_base=int(base.shape[0]),
        exclusion=float(exclusion),
        per_point=values,
        base_indices=rep[base],
    )
