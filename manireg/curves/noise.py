"""Noise-variance estimates from the data, for the error floor of a learning curve.

With ``y = f(x) + eps``, ``Var(eps) = sigma^2``, the test MSE of any learner against noisy targets cannot
fall below ``sigma^2``: it is the floor ``c`` of ``err = a n^-b + c``. Two nearest-neighbour estimators
of ``sigma^2`` are given here; both read the noise off pairs of close points, and both are biased upwards
when ``f`` varies a lot between neighbours (a rough target, few points, a high intrinsic dimension).

References
----------
.. [1] L. Devroye, L. Györfi, G. Lugosi and H. Walk, "A nearest neighbor estimate of the residual
   variance", Electron. J. Statist. 12 (2018).
.. [2] A. Stefánsson, N. Končar and A. J. Jones, "A note on the Gamma test", Neural Computing &
   Applications 5 (1997).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_choice, check_int, check_points, check_target

__all__ = ["NoiseLevel", "NoiseEstimate", "noise_variance"]

_METHODS = ("first_neighbor", "gamma")

BIAS_NOTE = (
    "The first-neighbour estimate is biased upwards by half the mean squared change of the target between "
    "neighbours, about L^2 r^(2 min(s,1)) for a Hölder-s target with typical neighbour distance r ~ n^(-1/d), "
    "i.e. n^(-2 min(s,1)/d): small on a smooth target with many points, large on a rough target, at small n or "
    "in high intrinsic dimension. The Gamma estimate (the default) extrapolates the semivariance over k "
    "neighbours to zero distance, which removes the part of the bias linear in the squared distance; for "
    "s < 1 a remainder is left (docs/fitting.md measures it)."
)


@dataclass
class NoiseLevel(ResultMixin):
    """What a campaign keeps of a noise-variance estimate: the value, its interval and the method (the part a
    fit's floor needs; a :class:`NoiseEstimate` gives one with :meth:`NoiseEstimate.level`)."""

    value: float
    interval: tuple | None = None
    method: str = ""

    def __str__(self) -> str:
        iv = "" if self.interval is None else f" [{self.interval[0]:.4g}, {self.interval[1]:.4g}]"
        return f"{self.value:.4g}{iv}" + (f" ({self.method})" if self.method else "")


@dataclass
class NoiseEstimate(ResultMixin):
    """A noise-variance estimate.

    Attributes
    ----------
    value : float
        Estimated ``sigma^2`` (clipped at 0 for the Gamma regression, whose raw intercept can be negative).
    method : str
        ``"first_neighbor"`` or ``"gamma"``.
    n_samples : int
        Rows used.
    k : int
        Neighbours used (1 for the first-neighbour estimator).
    raw_value : float
        The estimate before clipping.
    slope : float or None
        Gamma method: slope of semivariance against mean squared neighbour distance (roughness of ``f``).
    mean_sq_distance : float
        Mean squared distance to the first neighbour (the scale at which ``f`` is compared).
    n_duplicates : int
        Rows of ``X`` that repeat an earlier row (they pair at distance zero, which helps the estimate).
    bias_note : str
        When and why the estimate is biased upwards.
    interval : tuple
        ``value +- t_{G-1} se``: jackknife over ``G`` random groups of points (Gamma method); for the
        first-neighbour method the same over its per-point terms.
    se : float
        The jackknife standard error.
    """

    value: float
    method: str
    n_samples: int
    k: int
    raw_value: float
    slope: float | None
    mean_sq_distance: float
    n_duplicates: int
    bias_note: str = BIAS_NOTE
    interval: tuple = (float("nan"), float("nan"))
    se: float = float("nan")

    def level(self) -> NoiseLevel:
        """The value, interval and method (what a campaign stores)."""
        iv = None if self.interval is None else (float(self.interval[0]), float(self.interval[1]))
        return NoiseLevel(float(self.value), iv, self.method)

    def __str__(self) -> str:
        lo, hi = self.interval
        return (
            f"noise variance {self.value:.4g} [{lo:.4g}, {hi:.4g}] ({self.method}, n = {self.n_samples})"
            + ("; an upper estimate: biased upwards on rough targets and at small n." if self.method ==
               "first_neighbor" else "; bias extrapolated away to zero neighbour distance.")
        )


def _neighbor_rows(X, k, owner):
    """Nearest rows (self excluded) of every row of X: (distances (n, k), indices (n, k)) into X's rows.

    Uses the shared neighbour layer, which collapses duplicate points; duplicate rows are expanded back so
    that a row's copies come first, at distance zero.
    """
    from manireg.geometry.neighbors import kneighbors

    n = X.shape[0]
    graph = kneighbors(X, k, method="exact", owner=owner, warn_duplicates=False)
    inv = np.asarray(graph.inverse)
    if graph.n_duplicates == 0:
        # distinct points are the rows in first-seen order; with no duplicates that is the identity
        rep = np.empty(graph.n_points, dtype=np.int64)
        rep[inv] = np.arange(n)
        return graph.distances[inv], rep[graph.indices[inv]], 0
    groups = [[] for _ in range(graph.n_points)]
    for row, g in enumerate(inv):
        groups[g].append(row)
    D = np.empty((n, k))
    I = np.empty((n, k), dtype=np.int64)
    for row in range(n):
        g = inv[row]
        cand = [(0.0, r) for r in groups[g] if r != row]
        for dist, j in zip(graph.distances[g], graph.indices[g]):
            if len(cand) >= k:
                break
            cand.extend((float(dist), r) for r in groups[j])
        cand = cand[:k]
        D[row] = [c[0] for c in cand]
        I[row] = [c[1] for c in cand]
    return D, I, int(graph.n_duplicates)


def _power_intercept(gam, D2, qs=np.linspace(0.05, 1.0, 20)) -> float:
    """Intercept of ``gamma_j = sigma^2 + A m_j(q)``, ``m_j(q) = mean_i D2_ij^q``, ``A >= 0``, best q on a grid
    (least squares over the neighbour ranks j); clipped at 0."""
    best = (np.inf, 0.0)
    for q in qs:
        m = (D2**q).mean(axis=0)
        if np.ptp(m) == 0:
            continue
        A = np.c_[np.ones_like(m), m]
        coef, *_ = np.linalg.lstsq(A, gam, rcond=None)
        if coef[1] < 0:
            continue
        r = gam - A @ coef
        ssr = float(r @ r)
        if ssr < best[0]:
            best = (ssr, float(coef[0]))
    return max(best[1], 0.0)


def noise_variance(X, y, method="gamma", *, k=10, level=0.95, n_groups=20, seed=0) -> NoiseEstimate:
    """Estimate the noise variance ``sigma^2`` of ``y = f(x) + eps`` from nearest neighbours.

    ``"gamma"`` (default) and ``"first_neighbor"``. ``"first_neighbor"`` is the estimator analysed by Devroye, Györfi, Lugosi and Walk (2018),

    ``sigma^2_hat = (1 / 2n) sum_i (y_i - y_{N(i)})^2``,

    with ``N(i)`` the nearest neighbour of ``x_i``. It is consistent with no smoothness assumption, and its
    bias is half the mean squared change of ``f`` between neighbours, which shrinks like ``n^(-2s/d)`` for
    a Hölder-``s`` target on a ``d``-dimensional set.

    ``"gamma"`` is the Gamma test (Stefánsson, Končar and Jones, 1997): for ``j = 1..k`` it computes the
    semivariance ``gamma_j = (1/2n) sum_i (y_i - y_{N_j(i)})^2`` and the mean squared neighbour distance
    ``delta_j = (1/n) sum_i |x_i - x_{N_j(i)}|^2``, regresses ``gamma`` on ``delta`` and returns the intercept
    (the semivariance extrapolated to distance zero), which removes the first-order part of the bias.

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
        Inputs (duplicate rows pair at distance zero).
    y : array of shape (n_samples,)
        Targets.
    method : {"first_neighbor", "gamma"}
        Estimator.
    k : int, default 10
        Neighbours for the Gamma regression (the power fit of the interval's lower end uses up to 30) (ignored by ``"first_neighbor"``).
    level : float, default 0.95
        Level of the interval.
    n_groups : int, default 20
        Random groups of points for the jackknife interval.
    seed : int, default 0
        Seed of the grouping.

    Returns
    -------
    NoiseEstimate
        ``value`` plus a ``bias_note``: both estimators are biased upwards on rough targets and at small n;
        read the value as an upper estimate of the floor.

    Raises
    ------
    ValueError
        Bad shapes, NaN, fewer than 3 rows, an unknown method.

    References
    ----------
    .. [1] L. Devroye, L. Györfi, G. Lugosi and H. Walk, "A nearest neighbor estimate of the residual
       variance", Electron. J. Statist. 12 (2018).
    .. [2] A. Stefánsson, N. Končar and A. J. Jones, "A note on the Gamma test", Neural Computing &
       Applications 5 (1997).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(size=(2000, 1))
    >>> y = np.sin(2 * np.pi * X[:, 0]) + 0.1 * rng.standard_normal(2000)
    >>> est = noise_variance(X, y)
    >>> 0.008 < est.value < 0.012
    True
    """
    owner = "noise_variance"
    check_choice(method, "method", owner=owner, choices=_METHODS)
    X = check_points(X, owner=owner, min_samples=3)
    y = check_target(y, X.shape[0], owner=owner)
    n = X.shape[0]
    from manireg._validation import make_rng
    from manireg.curves.fitting import jackknife_se, t_quantile

    # jackknife groups are blocks of neighbourhoods (cells of random landmarks), not scattered points: a
    # point's noise enters the terms of its neighbours too, and random groups would split those pairs
    G = max(2, min(int(n_groups), n // 5))
    lm = X[make_rng(seed).choice(n, size=G, replace=False)]
    d2 = (X**2).sum(1)[:, None] - 2 * X @ lm.T + (lm**2).sum(1)[None, :]
    groups = np.argmin(d2, axis=1)
    G = int(groups.max()) + 1
    present = np.unique(groups)
    if method == "first_neighbor":
        D, I, n_dup = _neighbor_rows(X, 1, owner)
        terms = (y - y[I[:, 0]]) ** 2 / 2
        raw = float(np.sum(terms) / n)
        loo = np.array([terms[groups != g].mean() for g in present])
        G = present.size
        se = float(jackknife_se(loo))
        h = t_quantile(level, G - 1) * se
        return NoiseEstimate(
            value=raw, method=method, n_samples=n, k=1, raw_value=raw, slope=None,
            mean_sq_distance=float(np.mean(D[:, 0] ** 2)), n_duplicates=n_dup,
            interval=(max(0.0, raw - h), raw + h), se=se,
        )
    elif method == "gamma":
        k = check_int(k, "k", owner=owner, low=2, high=n - 1)
        D, I, n_dup = _neighbor_rows(X, max(k, min(30, n - 1)), owner)
        G_all = (y[:, None] - y[I]) ** 2 / 2  # (n, K)
        D2_all = D**2
        G_terms, D2 = G_all[:, :k], D2_all[:, :k]

        def intercept(mask):
            gam = G_terms[mask].mean(axis=0)
            dlt = D2[mask].mean(axis=0)
            if np.ptp(dlt) == 0:
                return 0.0, float(gam.mean()), dlt
            sl, ic = np.polyfit(dlt, gam, 1)
            return float(sl), float(ic), dlt

        slope, raw, dlt = intercept(np.ones(n, bool))
        loo = np.array([intercept(groups != g)[1] for g in present])
        G = present.size
        se = float(jackknife_se(loo))
        h = t_quantile(level, G - 1) * se
        value = float(max(raw, 0.0))
        # The straight-line extrapolation in delta assumes E(f(x) - f(x'))^2 ~ |x - x'|^2 (s >= 1); a rougher
        # target (s < 1) bends the semivariance like |x - x'|^(2s) and the line overestimates the intercept.
        # The power fit gamma_j = sigma^2 + A mean_i |x_i - x_N_j(i)|^(2q) over q in (0, 1] removes that bias
        # where the neighbour distances span enough scales and undershoots where they do not, so it is
        # reported as the interval's lower end: the floor is "somewhere in [power fit, line]" (measured on
        # the generators in docs/fitting.md).
        lower = _power_intercept(G_all.mean(axis=0), D2_all)
        return NoiseEstimate(
            value=value, method=method, n_samples=n, k=k, raw_value=float(raw),
            slope=float(slope), mean_sq_distance=float(dlt[0]), n_duplicates=n_dup,
            interval=(max(0.0, min(raw - h, lower)), max(raw + h, value)), se=se,
        )
    else:  # pragma: no cover - check_choice already refused
        raise ValueError(f"the 'method' parameter of {owner} must be one of {_METHODS}; got {method!r}.")
