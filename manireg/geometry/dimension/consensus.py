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
from .calibration import CALIBRATED_ESTIMATORS, CalibrationTable, calibration_table
from .profile import (DEFAULT_BLOCKS, DimensionProfile, _build, _check_estimators, _guide, _jackknife, _n_distinct,
                      _profile_from_graph, _profile_scales, _value, find_window)

__all__ = ["DimensionReport", "estimate_dimension"]


_ESTIMATOR_NAMES = ("mle", "twonn", "lpca", "corr")
#: Scales of the window whose calibrated guide value is within this fraction of the window's lowest value
#: are the ones the consensus is read at.
READ_TOLERANCE = 0.05


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
    consensus_lower: float = math.nan
    consensus_upper: float = math.nan
    interval_kind: str = "none"
    raw_consensus: float = math.nan
    used: list = field(default_factory=list)
    disagreeing: dict = field(default_factory=dict)
    noise_scale: float = math.nan
    curvature_scale: float = math.nan
    calibration: CalibrationTable | None = field(default=None, repr=False)
    consensus_se: float = math.nan

    @property
    def window(self) -> tuple:
        """The scales the consensus is read on (between the noise and the curvature scale)."""
        return self.plateau

    def to_dict(self) -> dict:
        out = super().to_dict()
        out["profile"] = None if self.profile is None else self.profile.to_dict()
        out["calibration"] = None if self.calibration is None else self.calibration.to_dict()
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
        iv = (f" [{self.consensus_lower:.2f}, {self.consensus_upper:.2f}]" if np.isfinite(self.consensus_lower)
              else "")
        lines.append(f"consensus: {self.consensus:.2f}{iv} ({self.consensus_rule})")
        lines.append(f"window: k = {self.plateau[0]}..{self.plateau[1]}"
                     + (f" (noise below k = {self.noise_scale:.0f})" if np.isfinite(self.noise_scale) else "")
                     + (f" (curvature above k = {self.curvature_scale:.0f})" if np.isfinite(self.curvature_scale)
                        else ""))
        for name, v in self.disagreeing.items():
            lines.append(f"left out: {name} reads {v:.2f} in the window")
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
    calibrate: bool = True,
    reference: str | None = None,
    n_blocks: int = DEFAULT_BLOCKS,
) -> DimensionReport:
    """Estimate the intrinsic dimension with several estimators, a profile and a consensus.

    One neighbour query (the largest k among ``k_max``, ``n_neighbors`` and ``scales``) serves the MLE,
    TwoNN, local PCA and the profile. The correlation dimension uses pair distances of a seeded subsample
    of at most 3000 points (see :func:`correlation_dimension`).

    Consensus rule, in four steps (``consensus_rule`` says it in words):

    1. Calibration (``calibrate=True``): each MLE and generalised-ratio ("twonn") profile value is mapped
       to the d whose uniform d-ball sample, drawn with the same number of points and read at the same
       neighbour count, gives the same raw value (:func:`~manireg.geometry.dimension.calibration.calibration_table`;
       the table is ``calibration``). This removes the downward bias of neighbour estimates at higher d.
    2. Window: :func:`~manireg.geometry.dimension.profile.find_window` on the calibrated profile of the
       guide ("twonn", else "mle", else "lpca"): the scales above the noise scale (below it the profile falls
       as the noise lifts small-scale estimates toward D) and below the curvature scale.
    3. Each profiled estimator with a value at every window scale contributes its mean calibrated value
       there; estimators with no value at some window scale are not used (local PCA stops at k = 64).
    4. Contributions within ``disagreement`` (relative) of the guide's are averaged into the consensus; the
       others are named in ``disagreeing`` and in a warning, not averaged in.

    Interval (``n_boot`` > 0): delete-one-block jackknife of the whole rule (the window and the read scales
    found again on every replicate, the estimators held)
    over k-means cells of the points (m // (3 k) of them for the largest scale k read, between 4 and
    ``n_blocks``), with a Student t quantile
    (:func:`~manireg.geometry.dimension.profile.neighbourhood_blocks`); ``consensus_lower``,
    ``consensus_upper``. The correlation dimension is reported but not in the consensus.

    Warnings (in ``warnings``; a Python warning is also emitted): duplicates collapsed; estimators left out
    of the consensus; noise at every scale; the consensus exceeds 2 log10(n), the largest dimension a sample
    of n points can resolve (Eckmann & Ruelle 1992).

    Parameters
    ----------
    X : array of shape (n_samples, n_features)
    estimators : subset of ("mle", "twonn", "lpca", "corr")
    k_min, k_max : MLE neighbour range (the per-estimator row of ``estimates``).
    n_neighbors : local PCA neighbourhood size (the per-estimator row).
    scales : profile scales (see :func:`dimension_profile`).
    n_boot, level : bootstrap replicates of the per-estimator rows (0: no intervals at all) and the level.
    disagreement : float > 0
        Relative distance from the guide beyond which an estimator is left out of the consensus.
    neighbor_method : {"auto", "exact", "approximate"}
    seed : int
    calibrate : bool
        Map profile values through the calibration table (``raw_consensus`` is the same rule without it).
    n_blocks : int >= 2
        Blocks of the jackknife intervals.

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
    .. [5] H. R. Kuensch, Ann. Statist. 17 (1989) (jackknife over blocks of dependent data).
    """
    owner = "estimate_dimension"
    estimators = _check_estimators(estimators, owner, _ESTIMATOR_NAMES)
    k_min = check_int(k_min, "k_min", owner=owner, low=3)
    k_max = check_int(k_max, "k_max", owner=owner, low=3)
    if k_min > k_max:
        raise ValueError(f"{owner} needs k_min <= k_max; got k_min={k_min}, k_max={k_max}. Swap them.")
    n_neighbors = check_int(n_neighbors, "n_neighbors", owner=owner, low=2)
    n_boot = check_int(n_boot, "n_boot", owner=owner, low=0)
    n_blocks = check_int(n_blocks, "n_blocks", owner=owner, low=2)
    level = check_float(level, "level", owner=owner, low=0.0, high=1.0, low_open=True, high_open=True)
    disagreement = check_float(disagreement, "disagreement", owner=owner, low=0.0, low_open=True)
    rng = make_rng(seed)
    X = check_points(X, owner=owner, min_samples=4)
    m = _n_distinct(X)
    prof_est = tuple(e for e in estimators if e in ("mle", "twonn", "lpca"))
    ks = _profile_scales(scales, m, owner) if prof_est else []
    need = max([2] + ks + ([k_max] if "mle" in estimators else []) + ([n_neighbors] if "lpca" in estimators else []))
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

    profile, table = None, None
    plateau = (math.nan, math.nan)
    plateau_values, disagreeing, used = {}, {}, []
    lower = upper = raw_consensus = noise = curv = se = math.nan
    kind = "none"
    if prof_est:
        prof, values, labels = _profile_from_graph(graph, ks, prof_est, n_boot, level, seed, n_blocks=n_blocks)
        if calibrate and any(e in CALIBRATED_ESTIMATORS for e in prof_est) and max(ks) < min(m, 3000):
            table = calibration_table(m, ks, ambient_dim=X.shape[1], seed=seed, reference=reference,
                                      estimators=tuple(e for e in CALIBRATED_ESTIMATORS if e in prof_est))

        def cal(name, k, v):
            return table.calibrate(name, k, v) if table is not None and table.has(name, k) else v

        calibrated = np.array([cal(e, k, v) for e, k, v in zip(prof["estimator"], prof["scale"], prof["dimension"])])
        guide = _guide(prof_est)
        gmask = np.asarray([e == guide for e in prof["estimator"]]) & (prof["scale"] >= 3 if guide == "twonn"
                                                                      else True)
        g_sc = prof["scale"][gmask]

        def reading(g_val_k):
            """Window and read scales from the guide's calibrated values at the scales g_sc."""
            lo_k, hi_k, noise, curv, note = find_window(g_sc, g_val_k)
            in_win = (g_sc >= lo_k) & (g_sc <= hi_k)
            low = np.nanmin(g_val_k[in_win])
            # read where the guide is within READ_TOLERANCE of its lowest window value: noise lifts the small
            # scales of the window, curvature of a folded set the large ones
            ks_read = [int(k) for k, v in zip(g_sc[in_win], g_val_k[in_win]) if v <= (1 + READ_TOLERANCE) * low]
            return lo_k, hi_k, noise, curv, note, ks_read

        lo_k, hi_k, noise, curv, note, need_ks = reading(calibrated[gmask])
        if note:
            warn_list.append(note)
        plateau = (int(lo_k), int(hi_k))
        win = {e: [k for (name, k) in values if name == e and lo_k <= k <= hi_k] for e in prof_est}
        contributions = {}
        for e in prof_est:
            if e == guide or set(need_ks) <= set(win[e]):
                rows = [i for i, (name, k) in enumerate(zip(prof["estimator"], prof["scale"]))
                        if name == e and k in need_ks]
                contributions[e] = float(np.mean(calibrated[rows]))
        missing = [e for e in prof_est if e not in contributions]
        g_val = contributions[guide]
        used = [e for e, v in contributions.items() if abs(v - g_val) <= disagreement * g_val]
        disagreeing = {e: v for e, v in contributions.items() if e not in used}
        plateau_values = contributions

        def stat(mask, calib=True, tab=None, rewindow=False):
            tab = table if tab is None else tab

            def c(e, k, v):
                return tab.calibrate(e, k, v) if calib and tab is not None and tab.has(e, k) else v

            ks_read = need_ks
            if rewindow:  # the whole rule on the subset: window and read scales found again
                g = np.array([c(guide, k, _value(guide, k, values[(guide, int(k))][mask])) for k in g_sc])
                ks_read = reading(g)[-1]
                ks_read = [k for k in ks_read if all((e, k) in values for e in used)] or need_ks
            vals = []
            for e in used:
                vals.append(np.mean([c(e, k, _value(e, k, values[(e, k)][mask])) for k in ks_read]))
            return float(np.mean(vals))

        everything = np.ones(graph.n_points, dtype=bool)
        if labels is not None:
            blocks = labels.for_scale(max(need_ks))
            consensus, lower, upper, se, q = _jackknife(lambda mask: stat(mask, rewindow=True), blocks, level)
            consensus = stat(everything)
            kind = f"jackknife over {int(blocks.max()) + 1} blocks of neighbourhoods, t quantile"
            if table is not None and np.isfinite(se):
                # the calibration's own uncertainty: the same rule calibrated on the second reference family
                # (with an edge / without one); the interval spans both calibrated values
                alt_ref = "sphere" if (reference or "ball") != "sphere" else "ball"
                alt = calibration_table(m, ks, ambient_dim=X.shape[1], seed=seed, reference=alt_ref,
                                        estimators=tuple(table.values))
                other = stat(everything, tab=alt)
                lower, upper = min(consensus, other) - q * se, max(consensus, other) + q * se
                kind += f", widened to the {alt_ref}-calibrated value {other:.2f}"
        else:
            consensus = stat(everything)
        raw_consensus = stat(everything, calib=False)
        rule = (f"mean over {', '.join(used)} of each estimator's {'calibrated ' if table is not None else ''}"
                f"profile values at k = {', '.join(map(str, need_ks))} (in the window k = {lo_k:.0f}..{hi_k:.0f} of "
                f"the {guide} profile between the noise and the curvature scales, where it is within "
                f"{READ_TOLERANCE:.0%} of its lowest value)")
        if disagreeing:
            rule += "; left out: " + ", ".join(f"{e} ({v:.2f})" for e, v in disagreeing.items())
            warn_list.append(f"estimators disagree: {', '.join(disagreeing)} read "
                             f"{', '.join(f'{v:.2f}' for v in disagreeing.values())} in the window k = "
                             f"{lo_k:.0f}..{hi_k:.0f}, more than {disagreement:.0%} from the {guide} value "
                             f"{g_val:.2f}; they are left out of the consensus. Read the profile before trusting "
                             "one number.")
        if missing:
            rule += "; no values in the window: " + ", ".join(missing)
        if table is not None:
            rule += f"; calibrated on reference samples ({table.reference}, {table.n_reference} points)"
        profile = _build(prof, level, n_boot, seed, X.shape[0], graph.n_duplicates, plateau, guide, [],
                         calibrated if table is not None else None, noise, curv, note)
    else:
        values = np.array([e.dimension for e in estimates])
        consensus = raw_consensus = float(np.median(values))
        rule = "median of the estimates (no profile: only the correlation dimension was asked for)"
    D = int(X.shape[1])
    if consensus > D:  # calibration extrapolates past the ambient dimension: no set of points has d > D
        warn_list.append(f"the calibrated consensus {consensus:.2f} exceeds the ambient dimension D = {D}; it is "
                         f"capped at {D} (the points fill their space at these scales).")
        consensus = float(D)
        lower, upper = min(lower, D), min(upper, D) if np.isfinite(upper) else upper
    limit = 2.0 * math.log10(X.shape[0])
    if consensus > limit:
        warn_list.append(f"too few points for this dimension: {X.shape[0]} points resolve dimensions up to about "
                         f"2 log10(n) = {limit:.1f}, and the consensus is {consensus:.2f}; read it with its "
                         "interval and the calibration.")
    for w in warn_list[1 if n_dup else 0:]:  # the neighbour layer already warned about duplicates
        warn(f"{owner}: {w}")
    return DimensionReport(estimates, float(consensus), rule, plateau, plateau_values, int(X.shape[0]), int(m),
                           int(n_dup), int(X.shape[1]), warn_list, profile, float(lower), float(upper), kind,
                           float(raw_consensus), used, disagreeing, float(noise), float(curv), table, float(se))
