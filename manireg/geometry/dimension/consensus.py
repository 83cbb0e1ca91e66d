"""The one-call dimension report: every estimator on one neighbour query, the profile and a consensus."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..._results import ResultMixin
from ..._validation import DataValidationError, check_float, check_int, check_points, make_rng, warn
from ..neighbors import collapse_duplicates, kneighbors
from ._base import DimensionEstimate, _bootstrap_mean_ratio, _percentile
from .mle import _mle_bootstrap, mle_dimension
from .twonn import twonn_dimension
from .local_pca import local_pca_dimension
from .correlation import correlation_dimension
from .profile import DimensionProfile, _check_estimators, _make_profile, _n_distinct, _profile_scales

__all__ = ["DimensionReport", "estimate_dimension"]


_ESTIMATOR_NAMES = ("mle", "twonn", "lpca", "corr")


@dataclass
class DimensionReport(ResultMixin):
    """Result of :func:`estimate_dimension`: per-estimator values, a consensus and the profile."""

    estimates: list
    consensus: float
    consensus_rule: str
    plateau: tuple
    plateau_values: dict
    n_samples: int
    n_distinct: int
    n_duplicates: int
    n_features: int
    warnings: list
    profile: DimensionProfile | None = field(default=None, repr=False)

    def to_dict(self) -> dict:
        out = super().to_dict()
        out["profile"] = None if self.profile is None else self.profile.to_dict()
        return out

    def to_frame(self):
        """One row per estimator: estimator, dimension, lower, upper, interval_kind."""
        import pandas as pd

        return pd.DataFrame([{"estimator": e.estimator, "dimension": e.dimension, "lower": e.lower,
                              "upper": e.upper, "interval_kind": e.interval_kind} for e in self.estimates])

    def __str__(self) -> str:
        lines = [f"Intrinsic dimension of {self.n_samples} points in R^{self.n_features}"
                 + (f" ({self.n_duplicates} duplicate rows collapsed)" if self.n_duplicates else ""),
                 f"{'estimator':<10} {'dimension':>10} {'interval':>22}  kind"]
        for e in self.estimates:
            iv = "-" if not np.isfinite(e.lower) else f"[{e.lower:.2f}, {e.upper:.2f}]"
            lines.append(f"{e.estimator:<10} {e.dimension:>10.2f} {iv:>22}  {e.interval_kind}")
        lines.append(f"consensus: {self.consensus:.2f} ({self.consensus_rule})")
        lines.append(f"plateau: k = {self.plateau[0]}..{self.plateau[1]}")
        for w in self.warnings:
            lines.append(f"warning: {w}")
        return "\n".join(lines)


def estimate_dimension(
    X,
    *,
    estimators=("mle", "twonn", "lpca", "corr"),
    k_min: int = 10,
    k_max: int = 20,
    n_neighbors: int = 20,
    scales=None,
    n_boot: int = 200,
    level: float = 0.95,
    disagreement: float = 0.25,
    neighbor_method: str = "auto",
    seed: int = 0,
) -> DimensionReport:
    """Estimate the intrinsic dimension with several estimators, a profile and a consensus.

    One neighbour query (the largest k among ``k_max``, ``n_neighbors`` and ``scales``) serves the MLE,
    TwoNN, local PCA and the profile. The correlation dimension uses pair distances of a seeded subsample
    of at most 3000 points (see :func:`correlation_dimension`).

    Consensus rule: the profile's plateau is the window of three consecutive scales where the MLE profile is
    flattest; each profiled estimator (MLE, TwoNN, local PCA among ``estimators``) contributes the mean of
    its profile values with scale inside the plateau (TwoNN: its rows in the plateau, else its full-data
    value); the consensus is the median of those contributions. The correlation dimension is reported but
    not in the consensus (it works at larger scales).

    Warnings (in ``warnings``; a Python warning is also emitted): duplicates collapsed; estimators in the
    consensus differ by more than ``disagreement`` times the consensus; the consensus exceeds
    2 log10(n), the largest dimension a sample of n points can resolve (Eckmann & Ruelle 1992).

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
    estimators : subset of ("mle", "twonn", "lpca", "corr")
    k_min, k_max : MLE neighbour range.
    n_neighbors : local PCA neighbourhood size.
    scales : profile scales (see :func:`dimension_profile`).
    n_boot, level : bootstrap replicates and level for intervals.
    disagreement : float > 0
        Relative spread that triggers the disagreement warning.
    neighbor_method : {"auto", "exact", "approximate"}
    seed : int

    Returns
    -------
    DimensionReport

    References
    ----------
    .. [1] E. Levina and P. J. Bickel, NIPS 17 (2004); D. J. C. MacKay and Z. Ghahramani (2005).
    .. [2] E. Facco et al., Sci. Rep. 7, 12140 (2017); F. Denti et al., Sci. Rep. 12, 20005 (2022).
    .. [3] P. Grassberger and I. Procaccia, Phys. Rev. Lett. 50, 346 (1983).
    .. [4] J.-P. Eckmann and D. Ruelle, "Fundamental limitations for estimating dimensions and Lyapunov
       exponents in dynamical systems", Physica D 56, 185-187 (1992).
    """
    owner = "estimate_dimension"
    estimators = _check_estimators(estimators, owner, _ESTIMATOR_NAMES)
    k_min = check_int(k_min, "k_min", owner=owner, low=3)
    k_max = check_int(k_max, "k_max", owner=owner, low=3)
    if k_min > k_max:
        raise ValueError(f"{owner} needs k_min <= k_max; got k_min={k_min}, k_max={k_max}. Swap them.")
    n_neighbors = check_int(n_neighbors, "n_neighbors", owner=owner, low=2)
    n_boot = check_int(n_boot, "n_boot", owner=owner, low=0)
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    disagreement = check_float(disagreement, "disagreement", owner=owner, low=0.0, low_open=True)
    rng = make_rng(seed)
    X = check_points(X, owner=owner, min_samples=4)
    m = _n_distinct(X)
    prof_est = tuple(e for e in estimators if e in ("mle", "twonn", "lpca"))
    ks = _profile_scales(scales, m, owner) if prof_est else []
    need = max([2] + ks + ([k_max] if "mle" in estimators else []) + ([n_neighbors] if "lpca" in estimators else []))
    if prof_est and m > 16:
        need = max(need, 16)
    if need >= m:
        raise DataValidationError(
            f"{owner}: the estimators need {need} neighbours per point but X has only {m} distinct point(s). "
            "Pass more points or lower k_max, n_neighbors and scales."
        )
    graph = kneighbors(X, need, method=neighbor_method, random_state=seed, owner=owner) if prof_est else None
    warn_list = []
    n_dup = graph.n_duplicates if graph is not None else int(X.shape[0] - m)
    if n_dup:
        warn_list.append(f"{n_dup} exact duplicate row(s) collapsed before estimation.")
    estimates = []
    p_common = {"n_boot": n_boot, "level": level}
    if "mle" in estimators:
        d, _, _ = mle_dimension(graph, k_min, k_max)
        iv = _mle_bootstrap(graph.distances, {"k_min": k_min, "k_max": k_max, "aggregate": "harmonic",
                                              "unbiased": False, **p_common}, rng)
        estimates.append(DimensionEstimate("mle", d, iv[0], iv[1], "bootstrap over points", X.shape[0], n_dup,
                                           {"k_min": k_min, "k_max": k_max}))
    if "twonn" in estimators:
        d, iv, _ = twonn_dimension(graph, method="mle", discard_fraction=0.1, level=level)
        estimates.append(DimensionEstimate("twonn", d, iv[0], iv[1], "Gamma (exact for the MLE)", X.shape[0], n_dup,
                                           {"method": "mle", "discard_fraction": 0.1}))
    if "lpca" in estimators:
        local = local_pca_dimension(graph, n_neighbors).astype(float)
        iv = _percentile(_bootstrap_mean_ratio(local, n_boot, rng), level) if n_boot else (math.nan, math.nan)
        estimates.append(DimensionEstimate("lpca", float(local.mean()), iv[0], iv[1], "bootstrap over points",
                                           X.shape[0], n_dup, {"n_neighbors": n_neighbors, "rule": "variance"}))
    if "corr" in estimators:
        pts = graph.points if graph is not None else collapse_duplicates(X)[0]
        d, r_range, *_ = correlation_dimension(pts, seed=seed)
        estimates.append(DimensionEstimate("corr", d, math.nan, math.nan, "none", X.shape[0], n_dup,
                                           {"r_min": r_range[0], "r_max": r_range[1], "max_points": 3000}))

    profile = None
    plateau = (math.nan, math.nan)
    plateau_values = {}
    if prof_est:
        profile = _make_profile(graph, X.shape[0], ks, prof_est, n_boot, level, seed, "variance", 0.95)
        plateau = profile.plateau
        for e in prof_est:
            mask = profile.rows(e)
            sc, dv = profile.scale[mask], profile.dimension[mask]
            inside = (sc >= plateau[0]) & (sc <= plateau[1])
            if inside.any():
                plateau_values[e] = float(np.mean(dv[inside]))
            elif e == "twonn":
                plateau_values[e] = float(dv[0])
        values = np.array(list(plateau_values.values()))
        consensus = float(np.median(values))
        rule = (f"median over {', '.join(plateau_values)} of each estimator's mean profile value at scales "
                f"k = {plateau[0]}..{plateau[1]} (the flattest window of the {profile.plateau_estimator} profile)")
        warn_list.extend(profile.notes)
    else:
        values = np.array([e.dimension for e in estimates])
        consensus = float(np.median(values))
        rule = "median of the estimates (no profile: only the correlation dimension was asked for)"
    if values.size > 1 and (values.max() - values.min()) > disagreement * consensus:
        warn_list.append(f"estimators disagree: values range from {values.min():.2f} to {values.max():.2f}, more "
                         f"than {disagreement:.0%} of the consensus {consensus:.2f}; read the profile before "
                         "trusting one number.")
    limit = 2.0 * math.log10(X.shape[0])
    if consensus > limit:
        warn_list.append(f"too few points for this dimension: {X.shape[0]} points resolve dimensions up to about "
                         f"2 log10(n) = {limit:.1f}, and the consensus is {consensus:.2f}; the value is likely an "
                         "underestimate.")
    for w in warn_list[1 if n_dup else 0:]:  # the neighbour layer already warned about duplicates
        warn(f"{owner}: {w}")
    return DimensionReport(estimates, consensus, rule, plateau, plateau_values, int(X.shape[0]), int(m), int(n_dup),
                           int(X.shape[1]), warn_list, profile)
