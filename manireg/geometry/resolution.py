"""Is the sample dense enough for the tangent-space picture?

The chart picture needs many points per chart: the typical spacing between neighbouring samples must be
small against the chart radius (itself below half the reach), or a "chart" holds a handful of points and
its PCA plane is noise. :func:`resolution_check` compares the median nearest-neighbour distance with the
chart radius and the reach, says in plain words whether the sample resolves the charts, and estimates how
many samples would, from the nearest-neighbour scaling spacing ~ n^(-1/d).

The working rule ``spacing / chart_radius <= 0.25`` (about four sample spacings across a chart radius, so a
d-dimensional ball holds on the order of 4^d points) is common practice, not a theorem.

References
----------
.. [1] Niyogi, P., Smale, S., Weinberger, S. Discrete Comput. Geom. 39 (2008) (chart radius below half the
   reach; sample density needed for the tangent picture).
.. [2] Penrose, M. D., Yukich, J. E. "Laws of large numbers and nearest neighbor distances." In *Advances
   in Directional and Linear Statistics* (2011) (nearest-neighbour distances scale like n^(-1/d)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._results import ResultMixin
from .._validation import check_float, check_points
from .tangent import RADIUS_FACTOR, resolve_dimension
from .neighbors import index_seed, kneighbors

__all__ = ["ResolutionCheck", "resolution_check", "MAX_SPACING_RATIO"]

#: Working rule: the median nearest-neighbour distance should be at most this fraction of the chart radius.
MAX_SPACING_RATIO = 0.25


@dataclass
class ResolutionCheck(ResultMixin):
    """Sample spacing against the chart radius and the reach, with a verdict.

    Attributes
    ----------
    n_points : distinct points.
    dimension : d.
    spacing : median distance of a point to its nearest neighbour.
    chart_radius, reach : the scales compared against (``reach`` may be None when only a radius was given).
    spacing_to_radius : spacing / chart_radius; the working rule wants <= ``max_ratio``.
    spacing_to_reach : spacing / reach (None without a reach).
    max_ratio : the working-rule threshold (0.25).
    dense_enough : whether spacing_to_radius <= max_ratio.
    samples_needed : about how many samples would meet the rule, n * (ratio / max_ratio)^d from
        spacing ~ n^(-1/d) (equal to n_points when already dense enough).
    verdict : the same in plain words.
    """

    n_points: int
    dimension: int
    spacing: float
    chart_radius: float
    reach: float | None
    spacing_to_radius: float
    spacing_to_reach: float | None
    max_ratio: float
    dense_enough: bool
    samples_needed: float
    verdict: str


def resolution_check(X, dimension=None, reach=None, chart_radius=None, *, max_ratio: float = MAX_SPACING_RATIO,
                     random_state=0) -> ResolutionCheck:
    """Compare the typical nearest-neighbour spacing with the chart radius and the reach.

    Parameters
    ----------
    X : (n, D) array
    dimension : int or None
        Intrinsic dimension d (``None``: consensus of ``estimate_dimension``).
    reach : float > 0, optional
        Known or estimated reach. When neither ``reach`` nor ``chart_radius`` is given the reach is estimated
        with :func:`manireg.geometry.reach.estimate_reach`.
    chart_radius : float > 0, optional
        Chart radius. Default ``0.25 * reach`` (the recommended radius of the reach estimate).
    max_ratio : float in (0, 1]
        Working rule: dense enough when median spacing <= ``max_ratio`` * chart radius (default 0.25,
        common practice).
    random_state : int
        Seed of the dimension estimate (when ``dimension`` is None), of the reach estimate (when neither
        ``reach`` nor ``chart_radius`` is given) and of the approximate neighbour index (large samples).

    Returns
    -------
    ResolutionCheck

    References
    ----------
    .. [1] Niyogi, P., Smale, S., Weinberger, S. Discrete Comput. Geom. 39 (2008).
    .. [2] Penrose, M. D., Yukich, J. E. (2011), nearest-neighbour distance scaling n^(-1/d).

    Examples
    --------
    >>> from manireg.data.manifolds import sphere
    >>> chk = resolution_check(sphere(2000, 2, seed=0).points, 2, reach=1.0)
    >>> chk.dense_enough
    True
    """
    owner = "resolution_check"
    X = check_points(X, owner=owner, min_samples=3)
    seed = index_seed(random_state)
    d, _ = resolve_dimension(X, dimension, owner=owner, n_features=X.shape[1], seed=seed)
    max_ratio = check_float(max_ratio, "max_ratio", owner=owner, low=0.0, high=1.0, low_open=True)
    if reach is not None:
        reach = check_float(reach, "reach", owner=owner, low=0.0, low_open=True) if np.isfinite(reach) else float(reach)
        if not reach > 0:
            raise ValueError(f"the 'reach' parameter of {owner} must be > 0 (or inf for flat data); got {reach!r}.")
    if chart_radius is not None:
        chart_radius = check_float(chart_radius, "chart_radius", owner=owner, low=0.0, low_open=True)
    graph = kneighbors(X, 1, owner=owner, random_state=seed)
    spacing = float(np.median(graph.distances[:, 0]))
    m = graph.n_points
    if chart_radius is None:
        if reach is None:
            from .reach import estimate_reach

            reach = estimate_reach(X, d, random_state=random_state).reach
        chart_radius = RADIUS_FACTOR * reach
        if not np.isfinite(chart_radius):
            Pc = graph.points - graph.points.mean(axis=0)
            chart_radius = float(np.sqrt(np.max(np.einsum("ij,ij->i", Pc, Pc))))
    ratio = spacing / chart_radius
    to_reach = None if reach is None or not np.isfinite(reach) else spacing / reach
    ok = ratio <= max_ratio
    needed = float(m) if ok else float(m) * (ratio / max_ratio) ** d
    if ok:
        verdict = (
            f"Dense enough: the median nearest-neighbour spacing ({spacing:.3g}) is {ratio:.2f} of the chart "
            f"radius ({chart_radius:.3g}), within the working rule of {max_ratio:g}; charts hold enough points "
            "for their tangent planes."
        )
    else:
        big = needed > 1e12
        verdict = (
            f"Too sparse for the tangent-space picture: the median nearest-neighbour spacing ({spacing:.3g}) is "
            f"{ratio:.2f} of the chart radius ({chart_radius:.3g}); the working rule wants at most {max_ratio:g}. "
            f"With spacing ~ n^(-1/{d}) that needs about {needed:.2g} samples instead of {m}"
            + (" - out of reach, so read the charts and the reach as coarse." if big else ".")
        )
    return ResolutionCheck(
        n_points=int(m),
        dimension=int(d),
        spacing=spacing,
        chart_radius=float(chart_radius),
        reach=None if reach is None else float(reach),
        spacing_to_radius=float(ratio),
        spacing_to_reach=None if to_reach is None else float(to_reach),
        max_ratio=float(max_ratio),
        dense_enough=bool(ok),
        samples_needed=float(math.ceil(needed)) if np.isfinite(needed) else float("inf"),
        verdict=verdict,
    )
