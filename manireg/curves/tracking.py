"""Rate tracking: does a learner's exponent move with s and d as the theory predicts?

One campaign per (d, s) in one store (named ``track-d{d}-s{s}``): for each d one sample of the manifold in
the same ambient R^D, and on those same points bump targets (:mod:`manireg.data.targets`) of every s (the
same lattices and signs, only the amplitudes 2^(-j s) change). Every learner runs on every campaign; the
measured exponent of the noise-free test error (no floor to subtract) is set against each learner's
predicted exponent, and a weighted least-squares line ``measured = a + slope * predicted`` summarises the
relation: a slope of 1 means the learner follows the theory, 0 means its exponent does not move with s and d.

Predicted exponents (positive when the error falls):

* ``net`` and ``kernel_ridge``: 2s/(2s+d) (Stone 1982; Schmidt-Hieber 2020; Chen, Jiang, Liao, Zhao 2022);
* ``knn``: 2 min(s,1)/(2 min(s,1)+d), the rate of local averaging for general designs; for s > 1 the band
  up to 2 min(s,2)/(2 min(s,2)+d) (smooth density, no boundary) is kept in ``predicted_hi``
  (Györfi, Kohler, Krzyżak, Walk 2002, Thm 6.2 and Ch. 6).

References
----------
.. [1] C. J. Stone, Ann. Statist. 10 (1982).
.. [2] L. Györfi, M. Kohler, A. Krzyżak, H. Walk, *A Distribution-Free Theory of Nonparametric Regression*
   (2002).
.. [3] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
"""

from __future__ import annotations

import math
import os
import tempfile
from dataclasses import dataclass, field

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_choice, check_float, check_int

__all__ = ["TrackingResult", "track_rates", "predicted_band", "campaign_name", "DEFAULT_TRACKING"]

#: The default grid (6 campaigns, 4 sizes, 3 repeats): measured at 11 minutes for kNN and the net on a shared
#: 2-core machine under a load average near 9 (docs/theory.md, Rate tracking).
DEFAULT_TRACKING = {"dimensions": (2, 3), "smoothness": (0.5, 1.0, 2.0), "sizes": (250, 500, 1000, 2000),
                    "repeats": 3, "ambient_dim": 10, "test_size": 1000, "noise_std": 0.1}

_MANIFOLDS = ("sphere", "graph_manifold")


def campaign_name(d, s) -> str:
    """Name of the (d, s) campaign in a tracking store, e.g. ``track-d2-s1``."""
    return f"track-d{d:g}-s{s:g}"


def predicted_band(learner_kind: str, d: float, s: float) -> tuple:
    """(predicted, predicted_hi) exponent of a learner kind at (d, s); see the module docstring."""
    def rate(v):
        return 2.0 * v / (2.0 * v + d)

    if learner_kind == "knn":
        return rate(min(s, 1.0)), rate(min(s, 2.0))
    return rate(s), rate(s)


def _line_fit(x, y, se, level):
    """Weighted least squares y = a + b x (weights 1/se^2), the slope's standard error scaled by the reduced
    chi-square when it exceeds 1, and a t interval with n - 2 degrees of freedom (scipy.stats)."""
    from scipy.stats import t

    x, y, se = (np.asarray(v, dtype=float) for v in (x, y, se))
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(se) & (se > 0)
    x, y, w = x[ok], y[ok], 1.0 / se[ok] ** 2
    n = x.size
    if n < 3 or np.ptp(x) == 0:
        return {"slope": math.nan, "interval": (math.nan, math.nan), "intercept": math.nan, "n_points": int(n)}
    A = np.column_stack([np.ones(n), x])
    cov = np.linalg.inv(A.T @ (A * w[:, None]))
    a, b = cov @ (A.T @ (w * y))
    chi2 = float(np.sum(w * (y - a - b * x) ** 2) / (n - 2))
    se_b = math.sqrt(cov[1, 1] * max(chi2, 1.0))
    q = float(t.ppf(0.5 + level / 2, n - 2))
    return {"slope": float(b), "interval": (float(b - q * se_b), float(b + q * se_b)), "intercept": float(a),
            "n_points": int(n)}


@dataclass
class TrackingResult(ResultMixin):
    """Measured against predicted exponents over a grid of (d, s), per learner.

    Attributes
    ----------
    table : list of dict
        One row per (learner, d, s): ``campaign``, ``exponent``, ``exponent_lo``, ``exponent_hi``,
        ``verdict``, ``predicted_exponent``, ``predicted_hi`` (top of the kNN band for s > 1).
    slopes : dict
        Learner -> ``{"slope", "interval", "intercept", "n_points"}``: the line measured = a + slope *
        predicted (weights from the exponent intervals); slope 1 means the learner follows the theory.
    manifold, ambient_dim, dimensions, smoothness, sizes, repeats, store_path, level
        The grid and where its campaigns live.
    """

    table: list = field(repr=False)
    slopes: dict
    manifold: str
    ambient_dim: int
    dimensions: list
    smoothness: list
    sizes: list
    repeats: int
    store_path: str
    level: float = 0.95
    metric: str = "test_mse_clean"

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame(self.table)

    def __str__(self) -> str:
        pct = int(round(100 * self.level))
        lines = [f"rate tracking on {self.manifold} in R^{self.ambient_dim}: d in {self.dimensions}, s in "
                 f"{self.smoothness}, sizes {self.sizes[0]}..{self.sizes[-1]}, {self.repeats} repeats"]
        for r in self.table:
            band = "" if r["predicted_hi"] == r["predicted_exponent"] else f" to {r['predicted_hi']:.3f}"
            lines.append(f"  {r['learner']:>6} d={r['dimension']:g} s={r['smoothness']:g}: exponent {r['exponent']:.3f} "
                         f"[{r['exponent_lo']:.3f}, {r['exponent_hi']:.3f}] ({r['verdict']}), predicted "
                         f"{r['predicted_exponent']:.3f}{band}")
        for name, f in self.slopes.items():
            lo, hi = f["interval"]
            lines.append(f"  {name}: slope of measured on predicted {f['slope']:.2f} [{pct}% interval {lo:.2f}, {hi:.2f}] "
                         f"over {f['n_points']} campaigns (1 = follows the theory)")
        return "\n".join(lines)


def track_rates(*, manifold="sphere", dimensions=None, smoothness=None, learners=("knn", "net"), ambient_dim=None,
                sizes=None, repeats=None, test_size=None, noise_std=None, store=None, seed=0, executor="inprocess",
                n_jobs=None, progress=False, level=0.95) -> TrackingResult:
    """Run (or resume) the rate-tracking campaigns and compare measured with predicted exponents.

    Parameters
    ----------
    manifold : {"sphere", "graph_manifold"}
        Generator of the points (one sample per d, in the same ambient R^D).
    dimensions, smoothness : sequences of numbers
        The grid of d and s (defaults in :data:`DEFAULT_TRACKING`).
    learners : sequence of str or LearnerSpec
        The same learners on every campaign.
    ambient_dim, sizes, repeats, test_size, noise_std : optional
        Defaults in :data:`DEFAULT_TRACKING`. Each sample has ``max(sizes) + test_size`` points.
    store : path, optional
        One store for every campaign (default: a new temporary file). Running again resumes.
    seed, executor, n_jobs, progress : passed to the campaigns.
    level : float
        Level of the slope's interval.

    Returns
    -------
    TrackingResult
    """
    from manireg.curves.campaign import Campaign
    from manireg.curves.fitting import fit_exponent
    from manireg.curves.learners import LearnerSpec
    from manireg.data import manifolds
    from manireg.data.targets import make_regression

    owner = "track_rates"
    cfg = dict(DEFAULT_TRACKING)
    for key, val in (("dimensions", dimensions), ("smoothness", smoothness), ("ambient_dim", ambient_dim),
                     ("sizes", sizes), ("repeats", repeats), ("test_size", test_size), ("noise_std", noise_std)):
        if val is not None:
            cfg[key] = val
    check_choice(manifold, "manifold", owner=owner, choices=_MANIFOLDS)
    dims = [check_int(int(v), "dimensions", owner=owner, low=1, high=8) for v in cfg["dimensions"]]
    ss = [check_float(v, "smoothness", owner=owner, low=0.0, low_open=True) for v in cfg["smoothness"]]
    D = check_int(int(cfg["ambient_dim"]), "ambient_dim", owner=owner, low=max(dims) + 1)
    sizes = sorted(int(v) for v in cfg["sizes"])
    test_size = check_int(int(cfg["test_size"]), "test_size", owner=owner, low=50)
    specs = [l if isinstance(l, LearnerSpec) else LearnerSpec(l) for l in learners]
    if store is None:
        store = os.path.join(tempfile.mkdtemp(prefix="manireg-track-"), "tracking.sqlite")
    n_total = sizes[-1] + test_size
    table = []
    for d in dims:
        gen = getattr(manifolds, manifold)
        sample = gen(n_total, d, ambient_dim=D, seed=seed + d) if manifold == "sphere" else gen(n_total, d, D, seed=seed + d)
        for s in ss:
            reg = make_regression(sample, s, noise_std=float(cfg["noise_std"]), seed=seed + 1000 + d)
            campaign = Campaign.from_regression_sample(reg, sizes=sizes, repeats=int(cfg["repeats"]), learners=specs,
                                                       test_size=test_size, seed=seed, name=campaign_name(d, s), store=store)
            result = campaign.run(executor=executor, n_jobs=n_jobs, progress=progress)
            for spec in specs:
                fit = fit_exponent(result.rows, spec.name, metric="test_mse_clean", floor=None, dimension=float(d),
                                   smoothness=float(s), ambient_dim=D)
                pred, pred_hi = predicted_band(spec.kind, d, s)
                table.append({"learner": spec.name, "kind": spec.kind, "dimension": float(d), "smoothness": float(s),
                              "campaign": campaign_name(d, s), "exponent": float(fit.exponent),
                              "exponent_lo": float(fit.interval[0]), "exponent_hi": float(fit.interval[1]),
                              "verdict": fit.verdict, "predicted_exponent": float(pred), "predicted_hi": float(pred_hi)})
    z = 1.959963984540054  # normal quantile of the exponent intervals' 95% level, to read a standard error
    slopes = {}
    for spec in specs:
        rows = [r for r in table if r["learner"] == spec.name]
        se = [max((r["exponent_hi"] - r["exponent_lo"]) / (2 * z), 1e-3) for r in rows]
        slopes[spec.name] = _line_fit([r["predicted_exponent"] for r in rows], [r["exponent"] for r in rows], se, level)
    path = store if isinstance(store, str) else getattr(store, "path", str(store))
    return TrackingResult(table=table, slopes=slopes, manifold=manifold, ambient_dim=D, dimensions=dims,
                          smoothness=ss, sizes=sizes, repeats=int(cfg["repeats"]), store_path=str(path), level=level)
