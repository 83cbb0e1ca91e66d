"""Local charts: landmarks by farthest-point sampling, tangent bases by local PCA, chart counts N(r).

The approximation theory covers a d-manifold M in R^D with charts of radius r below half the reach, projects
each chart onto its tangent space and works in d coordinates there. :class:`ChartAtlas` builds that picture
for a sample: it picks landmarks by farthest-point sampling until balls of radius ``radius`` around them
cover the data, fits a tangent basis to each ball by local PCA and reports how flat each ball is.
:func:`chart_counts` gives the number of charts N(r) against r; on a d-manifold log N(r) falls with slope
about -d.

Neighbourhoods
--------------
k-nearest-neighbour neighbourhoods come from the shared layer :func:`manireg.geometry.neighbors.kneighbors`
(duplicates collapsed). The balls of radius r around the landmarks are found with
:meth:`sklearn.neighbors.NearestNeighbors.radius_neighbors`, queried at the landmarks only (a radius query
is not something the shared k-nearest-neighbour layer offers). All work is done on the distinct points;
per-row outputs (``assignments_``) are mapped back to the rows of ``X``.

References
----------
.. [1] Federer, H. "Curvature measures." Trans. Amer. Math. Soc. 93 (1959).
.. [2] Niyogi, P., Smale, S., Weinberger, S. "Finding the homology of submanifolds with high confidence
   from random samples." Discrete Comput. Geom. 39 (2008).
.. [3] Gonzalez, T. F. "Clustering to minimize the maximum intercluster distance." Theoret. Comput. Sci. 38
   (1985) (farthest-point sampling is a 2-approximation of the optimal r-cover).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from sklearn.base import BaseEstimator

from .._params import check_attributes, integer, real, seed
from .._results import ResultMixin
from .._validation import check_float, check_int, check_points, make_rng, warn
from .neighbors import index_seed, kneighbors
from .reach import default_reach_neighbors, estimate_reach
from .tangent import RADIUS_FACTOR, local_pca, representative_rows, resolve_dimension

__all__ = [
    "RADIUS_FACTOR",
    "ChartAtlas",
    "AtlasSummary",
    "ChartCounts",
    "chart_counts",
    "farthest_point_sampling",
    "local_pca",
    "resolve_dimension",
]

# --------------------------------------------------------------------------------------------- helpers
def _fps_core(points: np.ndarray, start: int, radius: float, max_landmarks: int | None = None):
    """Farthest-point sampling until the covering radius is <= ``radius``.

    Returns (landmark indices in order, covering radius after each landmark, nearest-landmark index of
    every point, distance of every point to its nearest landmark).
    """
    m = points.shape[0]
    sq = np.einsum("ij,ij->i", points, points)
    cap = m if max_landmarks is None else min(m, max_landmarks)
    order = [start]
    d2 = np.maximum(sq + sq[start] - 2.0 * (points @ points[start]), 0.0)
    d2[start] = 0.0
    nearest = np.zeros(m, dtype=np.int64)
    cover = []
    r2 = radius * radius
    while True:
        far = int(np.argmax(d2))
        h2 = float(d2[far])
        cover.append(math.sqrt(h2))
        if h2 <= r2 or len(order) >= cap:
            break
        order.append(far)
        new = np.maximum(sq + sq[far] - 2.0 * (points @ points[far]), 0.0)
        new[far] = 0.0
        closer = new < d2
        d2[closer] = new[closer]
        nearest[closer] = len(order) - 1
    return np.asarray(order, dtype=np.int64), np.asarray(cover), nearest, np.sqrt(d2)


def farthest_point_sampling(X, radius: float, *, random_state=0):
    """Landmarks by farthest-point sampling until balls of ``radius`` around them cover ``X``.

    Starts from a random point (seeded), then repeatedly adds the point farthest from the landmarks so far.
    The landmarks form an r-net: they are more than ``radius`` apart and every point lies within
    ``radius`` of one of them; their number is at most the packing number at ``radius`` and at least the
    covering number at ``radius``, so it is within a factor of the optimal cover (2-approximation of the
    covering radius [1]_).

    Parameters
    ----------
    X : (n, D) array
    radius : float > 0
    random_state : int, None or numpy Generator
        Seed of the start point.

    Returns
    -------
    landmarks : (N,) int array of row indices into ``X`` in selection order
    nearest : (n,) int array, the position (0..N-1) of each row's nearest landmark

    References
    ----------
    .. [1] Gonzalez, T. F. "Clustering to minimize the maximum intercluster distance." Theoret. Comput.
       Sci. 38 (1985).
    """
    X = check_points(X, owner="farthest_point_sampling", min_samples=1)
    radius = check_float(radius, "radius", owner="farthest_point_sampling", low=0.0, low_open=True)
    rng = make_rng(random_state)
    start = int(rng.integers(X.shape[0]))
    order, _, nearest, _ = _fps_core(X - X.mean(axis=0), start, radius)
    return order, nearest


# ------------------------------------------------------------------------------------------ results
@dataclass
class AtlasSummary(ResultMixin):
    """What a fitted :class:`ChartAtlas` found, ready for a report.

    Attributes
    ----------
    n_charts : number of charts (landmarks).
    radius : chart radius used; ``radius_rule`` says how it was chosen.
    dimension : d used for the tangent bases; ``dimension_source`` is "given" or "estimated".
    reach : the reach estimate behind the default radius (``None`` when the radius was given).
    n_points, n_duplicates : distinct points and collapsed duplicate rows.
    points_per_chart : min, median and max number of points in a ball.
    n_sparse_charts : charts whose ball held fewer than ``min_points`` points (their PCA used the
        landmark's ``min_points`` nearest neighbours instead).
    tangent_share : median over charts of the variance share of the d leading components (near 1 for a
        well-resolved chart of a d-manifold).
    flatness_median, flatness_max : largest normal residual in a ball (from the PCA plane through the
        ball's mean) divided by the radius: about r / (4 * rho) on a sphere of radius rho (half the cap
        height r^2 / (2 rho), over r); near 0 means the chart is flat at this radius.
    spectra, flatness, counts : per-chart arrays (left out of ``to_dict``; ``to_frame`` tabulates them).
    """

    n_charts: int
    radius: float
    radius_rule: str
    dimension: int
    dimension_source: str
    reach: float | None
    n_points: int
    n_duplicates: int
    points_per_chart: dict
    n_sparse_charts: int
    tangent_share: float
    flatness_median: float
    flatness_max: float
    spectra: np.ndarray = field(repr=False)
    flatness: np.ndarray = field(repr=False)
    counts: np.ndarray = field(repr=False)
    _skip_in_dict = ("spectra", "flatness", "counts")

    def to_frame(self):
        """One row per chart: point count, flatness and the explained-variance ratios."""
        import pandas as pd

        df = pd.DataFrame({"chart": np.arange(self.n_charts), "n_points": self.counts, "flatness": self.flatness})
        for j in range(self.spectra.shape[1]):
            df[f"ev{j + 1}"] = self.spectra[:, j]
        return df


@dataclass
class ChartCounts(ResultMixin):
    """Number of charts N(r) against radius r, and the slope of log N(r) against log r.

    On a d-manifold N(r) ~ C r^(-d) between the scale of the sample spacing and the scale of the whole
    set, so ``slope`` is about -d and ``dimension_estimate`` = -slope about d.

    Attributes
    ----------
    radii, counts : the radii (increasing) and N(r) at each.
    slope, intercept : least-squares line log N = intercept + slope * log r over the fit range.
    fit_range : (r_low, r_high) of the radii used; ``fit_mask`` marks them.
    fit_rule : how the range was chosen.
    n_points : distinct points.
    """

    radii: np.ndarray
    counts: np.ndarray
    slope: float
    intercept: float
    dimension_estimate: float
    fit_range: tuple
    fit_mask: np.ndarray
    fit_rule: str
    n_points: int

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame({"radius": self.radii, "n_charts": self.counts, "in_fit": self.fit_mask})


# ------------------------------------------------------------------------------------------ atlas
class ChartAtlas(BaseEstimator):
    """Cover the data with charts of radius r and fit a tangent space to each.

    Parameters
    ----------
    radius : float > 0 or None
        Chart radius. ``None`` (default) uses the rule: ``RADIUS_FACTOR`` (0.25) times the reach estimate of
        :func:`manireg.geometry.reach.estimate_reach` (the theory needs r < reach / 2; the factor 2 more is a
        margin for the estimate), but never below the median distance of a point to its ``min_points``-th
        nearest neighbour (so that a typical ball holds about ``min_points`` points; a warning says when
        this floor is used, i.e. the sample is too sparse for charts of half the reach) and never above
        the largest distance of a point from the centroid (flat data: a few charts cover it).
    dimension : int or None
        Intrinsic dimension d. ``None`` uses the consensus of
        :func:`manireg.geometry.dimension.estimate_dimension`.
    min_points : int >= 2
        Balls holding fewer points get their tangent basis from the landmark's ``min_points`` nearest
        neighbours instead (counted in ``n_sparse_charts``). Must exceed d.
    n_neighbors : int or None
        Neighbourhood size for the reach estimate behind the default radius (``None``: that estimate's
        rule, sqrt(n) clipped to [20, 100]).
    random_state : int
        Seed of the first landmark, of the reach estimate's base-point subsample, of the dimension estimate
        (when ``dimension`` is None) and of the approximate neighbour index (large samples).

    Attributes
    ----------
    radius_ : float, the radius used.
    dimension_ : int, d used.
    reach_ : ReachEstimate or None (only when the radius rule used it).
    n_charts_ : int
    landmark_indices_ : (n_charts,) row indices of ``X``.
    landmarks_ : (n_charts, D) landmark coordinates.
    assignments_ : (n,) chart of every row of ``X`` (its nearest landmark).
    members_ : list of arrays, rows of ``X`` (first copy of duplicates) in each ball.
    counts_ : (n_charts,) points per ball.
    tangent_bases_ : (n_charts, D, d), orthonormal columns.
    spectra_ : (n_charts, min(D, 10)) explained-variance ratios of the ball's PCA.
    flatness_ : (n_charts,) largest normal residual in the ball / radius.
    sparse_charts_ : (n_charts,) bool, balls with fewer than ``min_points`` points.

    References
    ----------
    .. [1] Niyogi, P., Smale, S., Weinberger, S. Discrete Comput. Geom. 39 (2008): balls of radius below
       half the reach project one-to-one onto the tangent space.
    .. [2] Aamari, E., Kim, J., Chazal, F., Michel, B., Rinaldo, A., Wasserman, L. "Estimating the reach of
       a manifold." Electron. J. Stat. 13 (2019).

    Examples
    --------
    >>> from manireg.data.manifolds import sphere
    >>> s = sphere(2000, 2, seed=0)
    >>> atlas = ChartAtlas(radius=0.3, dimension=2).fit(s.points)
    >>> atlas.n_charts_ > 10
    True
    """

    _owner = "ChartAtlas"
    _parameter_constraints = {
        "min_points": integer(2),
        "n_neighbors": integer(2, none=True),
        "radius": real(0.0, low_open=True, none=True),
        "dimension": integer(1, none=True),
        "random_state": seed(none=True, generator=True),
    }

    def __init__(self, *, radius=None, dimension=None, min_points=10, n_neighbors=None, random_state=0):
        self.radius = radius
        self.dimension = dimension
        self.min_points = min_points
        self.n_neighbors = n_neighbors
        self.random_state = random_state

    def fit(self, X, y=None):
        """Pick landmarks, build the balls and fit a tangent basis to each. Returns ``self``."""
        owner = self._owner
        p = check_attributes(self, self._parameter_constraints)
        X = check_points(X, owner=owner, min_samples=3)
        min_points = p["min_points"]
        seed = index_seed(p["random_state"])
        d, source = resolve_dimension(X, p["dimension"], owner=owner, n_features=X.shape[1], seed=seed)
        if min_points <= d and source != "given":
            # an estimated d must never stop the read-out: the balls grow to hold d + 1 points
            warn(f"{owner}: the estimated dimension {d} is not below min_points={min_points}; using "
                 f"min_points={d + 1} so that a chart's PCA can find {d} directions.", stacklevel=2)
            min_points = d + 1
        if min_points <= d:
            raise ValueError(
                f"the 'min_points' parameter of {owner} must exceed the dimension ({d}) so that a chart's PCA "
                f"can find d directions; got {min_points}. Raise min_points to at least {d + 1}."
            )
        n_neighbors = default_reach_neighbors(X.shape[0]) if p["n_neighbors"] is None else p["n_neighbors"]
        # one neighbour query serves the radius floor, sparse charts and the reach estimate (cached)
        k = min(max(min_points, n_neighbors), X.shape[0] - 1)
        graph = kneighbors(X, k, owner=owner, random_state=seed)
        P = graph.points
        m = P.shape[0]
        rep = representative_rows(graph.inverse, m)
        center = P.mean(axis=0)
        Pc = P - center
        extent = float(np.sqrt(np.max(np.einsum("ij,ij->i", Pc, Pc))))

        self.reach_ = None
        if p["radius"] is not None:
            radius = p["radius"]
            rule = "given"
        else:
            floor = float(np.median(graph.distances[:, min_points - 1]))
            self.reach_ = estimate_reach(X, d, n_neighbors=min(n_neighbors, k), random_state=p["random_state"])
            radius = RADIUS_FACTOR * self.reach_.reach
            rule = f"{RADIUS_FACTOR} x estimated reach"
            if np.isnan(radius):
                radius = 0.0  # no usable reach estimate: the floor below applies
            elif not np.isfinite(radius) or radius > extent:
                radius = extent
                rule = "largest distance from the centroid (reach estimate larger than the data)"
            if radius < floor:
                warn(
                    f"{owner}: {RADIUS_FACTOR} x the estimated reach ({radius:.4g}) is below the typical distance "
                    f"to the {min_points}-th neighbour ({floor:.4g}); the sample is too sparse for charts this "
                    f"small, so the radius is raised to {floor:.4g}. See resolution_check for how many samples "
                    "would be needed."
                )
                radius = floor
                rule = f"median distance to the {min_points}-th neighbour (reach rule too small for this n)"

        rng = make_rng(p["random_state"])
        start = int(rng.integers(m))
        order, _, nearest, _ = _fps_core(Pc, start, radius)
        n_charts = order.shape[0]

        from sklearn.neighbors import NearestNeighbors

        nn = NearestNeighbors(algorithm="brute").fit(Pc)
        balls = nn.radius_neighbors(Pc[order], radius=radius, return_distance=False)
        counts = np.array([b.shape[0] for b in balls], dtype=np.int64)
        sparse = counts < min_points
        hoods = []
        for i, b in enumerate(balls):
            if sparse[i]:
                hoods.append(np.concatenate([[order[i]], graph.indices[order[i], : min_points - 1]]))
            else:
                hoods.append(b)
        if sparse.any():
            warn(
                f"{owner}: {int(sparse.sum())} of {n_charts} charts hold fewer than min_points={min_points} points "
                f"at radius {radius:.4g}; their tangent bases come from the landmark's {min_points} nearest "
                "neighbours. Use a larger radius or more samples."
            )
        bases, spectra = local_pca(Pc, hoods, d)
        flat = np.empty(n_charts)
        for i, h in enumerate(hoods):
            diff = Pc[h] - Pc[h].mean(axis=0)
            normal = diff - (diff @ bases[i]) @ bases[i].T
            flat[i] = float(np.sqrt(np.max(np.einsum("ij,ij->i", normal, normal)))) / radius

        self.radius_ = radius
        self.radius_rule_ = rule
        self.dimension_ = d
        self.dimension_source_ = source
        self.n_features_in_ = X.shape[1]
        self.n_points_ = m
        self.n_duplicates_ = graph.n_duplicates
        self.n_charts_ = n_charts
        self.landmark_indices_ = rep[order]
        self.landmarks_ = P[order].copy()
        self.assignments_ = nearest[graph.inverse]
        self.members_ = [rep[b] for b in balls]
        self.counts_ = counts
        self.tangent_bases_ = bases
        self.spectra_ = spectra
        self.flatness_ = flat
        self.sparse_charts_ = sparse
        return self

    def _check_fitted(self):
        if not hasattr(self, "n_charts_"):
            raise RuntimeError(f"this {self._owner} is not fitted yet; call fit(X) first.")

    def summary(self) -> AtlasSummary:
        """The fitted atlas as an :class:`AtlasSummary`."""
        self._check_fitted()
        d = self.dimension_
        share = self.spectra_[:, :d].sum(axis=1)
        return AtlasSummary(
            n_charts=int(self.n_charts_),
            radius=float(self.radius_),
            radius_rule=self.radius_rule_,
            dimension=int(d),
            dimension_source=self.dimension_source_,
            reach=None if self.reach_ is None else float(self.reach_.reach),
            n_points=int(self.n_points_),
            n_duplicates=int(self.n_duplicates_),
            points_per_chart={
                "min": int(self.counts_.min()),
                "median": float(np.median(self.counts_)),
                "max": int(self.counts_.max()),
            },
            n_sparse_charts=int(self.sparse_charts_.sum()),
            tangent_share=float(np.median(share)),
            flatness_median=float(np.median(self.flatness_)),
            flatness_max=float(np.max(self.flatness_)),
            spectra=self.spectra_.copy(),
            flatness=self.flatness_.copy(),
            counts=self.counts_.copy(),
        )


# ------------------------------------------------------------------------------------- chart counts
def chart_counts(X, radii=None, *, fit_range=None, min_count=8, max_fraction=0.05, random_state=0) -> ChartCounts:
    """Number of farthest-point charts N(r) needed to cover ``X`` at each radius, and the slope of log N(r).

    One farthest-point ordering serves all radii: N(r) is the number of landmarks taken before the covering
    radius first drops to r or below. On a d-manifold, between the sample-spacing scale and the size of the
    whole set, N(r) ~ C r^(-d), so the least-squares slope of log N against log r is about -d.

    Parameters
    ----------
    X : (n, D) array
    radii : increasing positive floats, optional
        Default: 12 radii spaced geometrically from the median distance to the 10th nearest neighbour to
        half the largest distance from the centroid.
    fit_range : (r_low, r_high), optional
        Radii used in the slope fit. Default rule: radii with N(r) >= ``min_count`` (at larger radii a few
        balls see the global shape, not the local dimension) and N(r) <= ``max_fraction`` * n (at smaller
        radii balls hold a handful of points and N(r) saturates at n).
    min_count : int
        Lower count of the default fit range.
    max_fraction : float in (0, 1]
        Upper count of the default fit range, as a fraction of the number of distinct points.
    random_state : int
        Seed of the first landmark and of the approximate neighbour index (large samples).

    Returns
    -------
    ChartCounts

    References
    ----------
    .. [1] Kolmogorov, A. N., Tikhomirov, V. M. "epsilon-entropy and epsilon-capacity of sets in function
       spaces." Uspekhi Mat. Nauk 14 (1959) (covering numbers; the box-counting dimension).
    .. [2] Gonzalez, T. F. Theoret. Comput. Sci. 38 (1985) (farthest-point sampling).
    """
    owner = "chart_counts"
    X = check_points(X, owner=owner, min_samples=3)
    min_count = check_int(min_count, "min_count", owner=owner, low=1)
    max_fraction = check_float(max_fraction, "max_fraction", owner=owner, low=0.0, high=1.0, low_open=True)
    graph = kneighbors(X, min(10, X.shape[0] - 1), owner=owner, warn_duplicates=False,
                       random_state=index_seed(random_state))
    P = graph.points
    m = P.shape[0]
    Pc = P - P.mean(axis=0)
    extent = float(np.sqrt(np.max(np.einsum("ij,ij->i", Pc, Pc))))
    if radii is None:
        lo = float(np.median(graph.distances[:, -1]))
        hi = max(0.5 * extent, 1.01 * lo)
        radii = np.geomspace(lo, hi, 12)
    else:
        radii = np.asarray(radii, dtype=np.float64).ravel()
        if radii.size < 2 or not np.all(np.isfinite(radii)) or np.any(radii <= 0):
            raise ValueError(
                f"the 'radii' parameter of {owner} must hold at least two finite radii > 0; got {radii!r}. "
                "Pass e.g. np.geomspace(0.05, 1.0, 12)."
            )
        radii = np.sort(radii)
    rng = make_rng(random_state)
    start = int(rng.integers(m))
    _, cover, _, _ = _fps_core(Pc, start, float(radii[0]))
    # cover[i] is the covering radius with i + 1 landmarks (non-increasing)
    counts = np.array([int(np.argmax(cover <= r)) + 1 if np.any(cover <= r) else m for r in radii])
    if fit_range is None:
        mask = (counts >= min_count) & (counts <= max_fraction * m)
        rule = f"radii with {min_count} <= N(r) <= {max_fraction} * n"
        if mask.sum() < 3:
            mask = (counts >= 2) & (counts < m)
            rule = "radii with 2 <= N(r) < n (default range had fewer than 3 radii; read the slope with care)"
            warn(
                f"{owner}: fewer than 3 radii have {min_count} <= N(r) <= {max_fraction} * n; the slope is fitted on "
                "all radii with 2 <= N(r) < n. Pass more radii or more samples."
            )
    else:
        lo, hi = (float(v) for v in fit_range)
        if not (0 < lo < hi):
            raise ValueError(
                f"the 'fit_range' parameter of {owner} must be (r_low, r_high) with 0 < r_low < r_high; "
                f"got {fit_range!r}."
            )
        mask = (radii >= lo) & (radii <= hi)
        rule = "given"
    if mask.sum() >= 2:
        A = np.column_stack([np.ones(int(mask.sum())), np.log(radii[mask])])
        coef, *_ = np.linalg.lstsq(A, np.log(counts[mask]), rcond=None)
        intercept, slope = float(coef[0]), float(coef[1])
        frange = (float(radii[mask].min()), float(radii[mask].max()))
    else:
        intercept = slope = float("nan")
        frange = (float("nan"), float("nan"))
    return ChartCounts(
        radii=radii,
        counts=counts,
        slope=slope,
        intercept=intercept,
        dimension_estimate=-slope,
        fit_range=frange,
        fit_mask=mask,
        fit_rule=rule,
        n_points=int(m),
    )
