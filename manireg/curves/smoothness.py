"""Estimating the Hölder smoothness s of a regression target from the data, with an interval and its limits.

Two routes, both reading roughness off neighbouring points:

``"differences"`` (local differences, the statistics of the Gamma test)
    For neighbour ranks k and subsamples of the data, ``gamma = (1/2m) sum_i (y_i - y_{N_k(i)})^2`` is the
    noise variance plus half the mean squared change of the target between neighbours. For a target of
    Hölder order s whose order is sharp, that change at distance r is ``C r^(2 min(s, 1))``, so
    ``gamma = sigma^2 + A mean(r^(2 alpha))`` with ``alpha = min(s, 1)``. The fit profiles ``alpha`` over a
    grid (for each ``alpha`` a non-negative least-squares fit of ``sigma^2`` and ``A``) and keeps the best.
    The interval is a t interval (t with G - 1 degrees of freedom, scipy.stats) from the spread of the same
    estimate on G disjoint random parts of the data, scaled by 1/sqrt(G) and centred on the estimate from
    all the data.
``"knn"`` (a learning-curve exponent, given d)
    A kNN learning curve on nested subsets (k chosen on a validation split at each n, so no s is assumed),
    with the noise variance of the first route subtracted from the test error; the exponent b of the excess
    error gives ``s = b d / (2 (1 - b))`` (:func:`manireg.theory.rates.implied_smoothness`). The interval
    comes from per-repeat exponents (t interval over repeats) mapped through the same formula.

Limits (also in :attr:`SmoothnessEstimate.limits`):

* local differences see at most s = 1: for s >= 1 they return about 1 and the estimate is a lower bound
  (``saturated`` is set); kNN is limited the same way (its rate is 2s/(2s+d) only for s <= 1 in general);
* both assume the target's roughness holds at the scales the data resolve (pre-asymptotic curves, smooth
  targets with a few sharp features, or a target rough only below the neighbour spacing bias them);
* large label noise against the change of the target between neighbours makes the differences route
  uninformative (its interval is then wide);
* ambient noise on X makes neighbour distances too large at small scales and biases s downwards;
* the kNN route needs d; a wrong d moves s in proportion (s is linear in d).

References
----------
.. [1] A. Stefánsson, N. Končar and A. J. Jones, "A note on the Gamma test", Neural Computing &
   Applications 5 (1997).
.. [2] L. Györfi, M. Kohler, A. Krzyżak, H. Walk, *A Distribution-Free Theory of Nonparametric
   Regression*, Springer (2002), Thm 6.2.
.. [3] C. J. Stone, "Optimal global rates of convergence for nonparametric regression", Ann. Statist. 10
   (1982).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_choice, check_float, check_int, check_points, check_target, make_rng

__all__ = ["SmoothnessEstimate", "estimate_smoothness", "difference_smoothness", "knn_smoothness", "SMOOTHNESS_LIMITS"]

SMOOTHNESS_LIMITS = (
    "Local differences and kNN see at most s = 1: an estimate near 1 means s >= 1 (a lower bound). Both assume "
    "the target is rough at the scales the data resolve; large label noise widens the interval; ambient noise "
    "on X biases s downwards; the kNN route scales with the d it is given. The differences interval includes a "
    "systematic margin of 0.15 measured on the generators."
)

_ALPHAS = np.linspace(0.02, 1.5, 149)
#: Added to both ends of the differences interval: the estimator's systematic error on targets of known s
#: (bump family, s = 0.25..0.75, spheres and graph manifolds, n = 4000; docs/theory.md) reached 0.15 where
#: the statistical half-width was 0.05.
SYSTEMATIC_MARGIN = 0.15
_METHODS = ("differences", "knn", "both")


@dataclass
class SmoothnessEstimate(ResultMixin):
    """An estimate of the Hölder smoothness s of the target.

    Attributes
    ----------
    smoothness : float
        The estimate (``"both"``: the differences estimate when it is not saturated, else the larger).
    interval : tuple of float
        Interval at ``level``.
    level : float
    method : str
        ``"differences"``, ``"knn"`` or ``"both"``.
    saturated : bool
        The estimate is at the top of what the method can see (about 1): read it as ``s >= interval[0]``.
    noise_variance : float
        The noise variance the differences fit found (its ``sigma^2``).
    n_samples : int
    dimension : float or None
        The d given to the kNN route.
    parts : dict
        Per-method estimates and intervals (``{"differences": {...}, "knn": {...}}``).
    limits : str
        When the estimate can be wrong.
    """

    smoothness: float
    interval: tuple
    level: float
    method: str
    saturated: bool
    noise_variance: float
    n_samples: int
    dimension: float | None = None
    parts: dict = field(default_factory=dict)
    limits: str = SMOOTHNESS_LIMITS

    def __str__(self) -> str:
        pct = int(round(100 * self.level))
        lo, hi = self.interval
        text = f"smoothness s estimated {self.smoothness:.2f} [{pct}% interval {lo:.2f}, {hi:.2f}] ({self.method})"
        if self.saturated:
            text += "; at the top of what the method sees: read as s >= %.2f" % lo
        return text

    def to_frame(self):
        import pandas as pd

        rows = [{"method": m, **{k: v for k, v in p.items() if not isinstance(v, (list, tuple))},
                 "lo": p["interval"][0], "hi": p["interval"][1]} for m, p in self.parts.items()]
        return pd.DataFrame(rows)


def _t_quantile(level, dof):
    from scipy.stats import t

    return float(t.ppf(0.5 + level / 2, dof))


def _distinct(X, y):
    """Rows of X with duplicates dropped (the first copy's y kept): neighbour distances must be positive."""
    _, first = np.unique(X, axis=0, return_index=True)
    first = np.sort(first)
    return X[first], y[first]


def _difference_stats(X, y, ks, subsamples, rng):
    """(gamma, distances) per group: for each subsample size and neighbour rank k, the semivariance and the
    per-point distances to the k-th neighbour."""
    from manireg.geometry.neighbors import kneighbors

    groups = []
    n = X.shape[0]
    kmax = max(ks)
    for m in subsamples:
        idx = rng.permutation(n)[:m] if m < n else np.arange(n)
        if idx.size <= kmax + 1:
            continue
        Xs, ys = X[idx], y[idx]
        graph = kneighbors(Xs, kmax, method="exact", owner="estimate_smoothness", warn_duplicates=False)
        rows = np.asarray(graph.inverse)
        rep = np.empty(graph.n_points, dtype=np.int64)
        rep[rows] = np.arange(idx.size)
        for k in ks:
            nb = rep[graph.indices[:, k - 1]]
            own = rep
            r = graph.distances[:, k - 1]
            gamma = float(np.mean((ys[own] - ys[nb]) ** 2) / 2)
            groups.append((gamma, r))
    return groups


def _profile_fit(groups):
    """Best (alpha, sigma2, A) of gamma = sigma2 + A mean(r^(2 alpha)) over the alpha grid (sigma2, A >= 0)."""
    gam = np.array([g for g, _ in groups])
    logr = [np.log(np.maximum(r, 1e-300)) for _, r in groups]
    best = (np.inf, np.nan, np.nan, np.nan)
    for a in _ALPHAS:
        m = np.array([np.mean(np.exp(2 * a * lr)) for lr in logr])
        mc, gc = m - m.mean(), gam - gam.mean()
        A = max(float(mc @ gc / (mc @ mc)), 0.0) if mc @ mc > 0 else 0.0
        s2 = float(gam.mean() - A * m.mean())
        if s2 < 0:  # sigma^2 >= 0: refit A through the origin
            s2 = 0.0
            A = max(float(m @ gam / (m @ m)), 0.0)
        sse = float(np.sum((gam - s2 - A * m) ** 2))
        if sse < best[0]:
            best = (sse, float(a), s2, A)
    return best[1], best[2], best[3]


def difference_smoothness(X, y, *, ks=tuple(range(1, 17)), n_subsamples=1, n_parts=8, level=0.95,
                          margin=SYSTEMATIC_MARGIN, seed=0) -> dict:
    """The local-differences route (see the module docstring): ``{"smoothness", "interval", "saturated",
    "noise_variance", "parts"}``; ``smoothness`` estimates min(s, 1).

    Groups: neighbour ranks ``ks`` on the data (and on ``n_subsamples - 1`` random subsamples of a quarter,
    a sixteenth, ... of it, for a wider range of distances at the price of coarser scales). ``n_parts``
    disjoint random parts give the statistical half-width; ``margin`` is added on both sides for the
    systematic error measured on the generators (:data:`SYSTEMATIC_MARGIN`).
    """
    owner = "difference_smoothness"
    X = check_points(X, owner=owner, min_samples=16)
    y = check_target(y, X.shape[0], owner=owner)
    n_parts = check_int(n_parts, "n_parts", owner=owner, low=3)
    level = check_float(level, "level", owner=owner, low=0.5, high=0.999)
    X, y = _distinct(X, y)
    n = X.shape[0]
    n_parts = min(n_parts, n // 64)  # parts of at least 64 rows
    if n_parts < 3:
        raise ValueError(
            f"{owner} needs at least 192 distinct rows (3 parts of 64 for its interval); got {n}. "
            "Give s yourself (smoothness=...) or more data."
        )
    rng = make_rng(seed)

    def estimate(Xp, yp):
        m = Xp.shape[0]
        sub = [max(m // 4**i, 2 * max(ks) + 2) for i in range(n_subsamples)]
        return _profile_fit(_difference_stats(Xp, yp, ks, sub, rng))

    alpha, s2, _ = estimate(X, y)
    perm = rng.permutation(n)
    part_alphas = [estimate(X[p], y[p])[0] for p in np.array_split(perm, n_parts)]
    half = _t_quantile(level, n_parts - 1) * float(np.std(part_alphas, ddof=1)) / math.sqrt(n_parts)
    lo, hi = max(alpha - half - margin, 0.0), alpha + half + margin
    saturated = alpha >= 0.85
    return {"smoothness": alpha, "interval": (float(lo), float(hi)), "saturated": bool(saturated),
            "noise_variance": s2, "parts": [float(a) for a in part_alphas]}


def _knn_curve(X, y, sizes, test_idx, pool, rng, n_val):
    """Test MSE of kNN at each size (k chosen on a validation split of the training rows)."""
    from sklearn.neighbors import NearestNeighbors

    perm = rng.permutation(pool)
    errs = []
    for n in sizes:
        tr = perm[:n]
        fit, val = tr[n_val(n):], tr[: n_val(n)]
        kmax = max(1, min(len(fit), int(4 * math.sqrt(len(fit))) + 1))
        nn = NearestNeighbors(n_neighbors=kmax).fit(X[fit])
        idx = nn.kneighbors(X[val], return_distance=False)
        cum = np.cumsum(y[fit][idx], axis=1) / np.arange(1, kmax + 1)
        k = int(np.argmin(np.mean((cum - y[val][:, None]) ** 2, axis=0))) + 1
        nn = NearestNeighbors(n_neighbors=k).fit(X[tr])
        pred = y[tr][nn.kneighbors(X[test_idx], return_distance=False)].mean(axis=1)
        errs.append(float(np.mean((pred - y[test_idx]) ** 2)))
    return np.array(errs)


def knn_smoothness(X, y, dimension, *, noise_variance=None, sizes=None, repeats=5, test_fraction=0.2,
                   level=0.95, seed=0) -> dict:
    """The kNN-exponent route (see the module docstring): ``{"smoothness", "interval", "saturated",
    "exponent", "exponent_interval", "noise_variance", "sizes"}``.

    ``noise_variance`` is subtracted from the test error; by default the differences route's estimate.
    """
    from manireg.theory.rates import implied_smoothness

    owner = "knn_smoothness"
    X = check_points(X, owner=owner, min_samples=64)
    y = check_target(y, X.shape[0], owner=owner)
    d = check_float(dimension, "dimension", owner=owner, low=0.0, low_open=True)
    repeats = check_int(repeats, "repeats", owner=owner, low=2)
    rng = make_rng(seed)
    n = X.shape[0]
    test_idx = rng.permutation(n)[: max(50, int(test_fraction * n))]
    pool = np.setdiff1d(np.arange(n), test_idx)
    if sizes is None:
        sizes = np.unique(np.geomspace(min(100, len(pool) // 8), len(pool), 6).astype(int))
    sizes = np.asarray(sizes, dtype=int)
    if noise_variance is None:
        noise_variance = difference_smoothness(X[pool], y[pool], seed=seed)["noise_variance"]
    s2 = check_float(noise_variance, "noise_variance", owner=owner, low=0.0)
    slopes = []
    for _ in range(repeats):
        err = _knn_curve(X, y, sizes, test_idx, pool, rng, lambda m: max(1, m // 5))
        excess = np.maximum(err - s2, 1e-12)
        slopes.append(-np.polyfit(np.log(sizes), np.log(excess), 1)[0])
    b = float(np.mean(slopes))
    half = _t_quantile(level, repeats - 1) * float(np.std(slopes, ddof=1)) / math.sqrt(repeats)
    blo, bhi = b - half, b + half

    def to_s(v):
        v = min(max(v, 1e-6), 1 - 1e-6)
        return float(implied_smoothness(v, d))

    s_hat = to_s(b)
    return {"smoothness": s_hat, "interval": (to_s(blo), to_s(bhi)), "saturated": bool(s_hat >= 0.95),
            "exponent": b, "exponent_interval": (blo, bhi), "noise_variance": s2, "sizes": [int(v) for v in sizes]}


def estimate_smoothness(X, y, *, dimension=None, method="differences", level=0.95, seed=0) -> SmoothnessEstimate:
    """Estimate the Hölder smoothness s of ``y = f(X) + noise`` (see the module docstring for both routes).

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
    y : array of shape (n_samples,)
    dimension : float, optional
        Intrinsic dimension d; required by ``method="knn"`` and ``"both"``.
    method : {"differences", "knn", "both"}, default="differences"
    level : float, default=0.95
    seed : int

    Returns
    -------
    SmoothnessEstimate
        With ``saturated`` set when the estimate is at the top of what the method sees (s >= 1 possible),
        and ``limits`` in words.

    References
    ----------
    .. [1] Stefánsson, Končar and Jones (1997); Györfi, Kohler, Krzyżak, Walk (2002), Thm 6.2.
    """
    owner = "estimate_smoothness"
    check_choice(method, "method", owner=owner, choices=_METHODS)
    X = check_points(X, owner=owner, min_samples=16)
    y = check_target(y, X.shape[0], owner=owner)
    if method in ("knn", "both") and dimension is None:
        raise ValueError(
            f"the 'dimension' parameter of {owner} is required with method={method!r} (the kNN route reads s "
            "from an exponent given d); got None. Pass dimension= (e.g. from describe_geometry) or "
            "method='differences'."
        )
    parts = {}
    diff = difference_smoothness(X, y, level=level, seed=seed)
    if method in ("differences", "both"):
        parts["differences"] = diff
    if method in ("knn", "both"):
        parts["knn"] = knn_smoothness(X, y, dimension, noise_variance=diff["noise_variance"], level=level, seed=seed)
    if method == "both":
        main = parts["differences"] if not diff["saturated"] else max(parts.values(), key=lambda p: p["smoothness"])
    else:
        main = parts[method]
    return SmoothnessEstimate(
        smoothness=float(main["smoothness"]), interval=tuple(main["interval"]), level=float(level), method=method,
        saturated=bool(main["saturated"]), noise_variance=float(diff["noise_variance"]), n_samples=int(X.shape[0]),
        dimension=None if dimension is None else float(dimension), parts=parts,
    )
