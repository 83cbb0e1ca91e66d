"""The learning-curve read-out as one core call: fits with verdicts, comparison with theory, extrapolation
checks and a plan. The CLI, the report and the curve panel only format its result.

The floor is picked in one place (:func:`manireg.curves.floors.choose_floor`, then
:func:`manireg.curves.fitting.floor_model`) and the working dimension is rounded in one place
(:func:`manireg.geometry.summary.working_dimension`).
"""

from __future__ import annotations

import math
import numbers
import warnings as _warnings
from dataclasses import dataclass, field

from manireg._results import ResultMixin
from manireg.curves.floors import DEFAULT_FLOOR, choose_floor

__all__ = ["ReadOut", "read_out", "learner_kind_of", "CLASSIFY_METRICS", "ClassificationReadOut",
           "classification_read_out", "classification_reference"]

#: Metrics a classification campaign fits (those with values in the rows), with the floor of each fit: the
#: error rate and the cross-entropy level off at the Bayes risk (unknown on real data: fitted); the excess risks
#: and the calibration error of a consistent classifier go to zero (no floor).
CLASSIFY_METRICS = {"test_error_rate": "fit", "excess_error_rate": None, "excess_logistic_risk": None,
                    "test_cross_entropy": "fit", "calibration_error": None}


def learner_kind_of(name, learner_kinds=None) -> str:
    """The learner's kind for its reference rate: from ``learner_kinds`` or from the name's prefix."""
    if learner_kinds and name in learner_kinds:
        return learner_kinds[name]
    low = str(name).lower()
    if low.startswith("knn"):
        return "knn"
    if low.startswith(("kernel", "krr")):
        return "kernel_ridge"
    return "net"


@dataclass
class ReadOut(ResultMixin):
    """Everything the CLI, report and panel show about a campaign's learning curves.

    Attributes
    ----------
    fits : ExponentTable
        One fit per learner, with interval, verdict, curve-model comparison and window scan.
    theory : dict
        Learner -> :class:`manireg.curves.comparison.TheoryComparison` (its own reference rate).
    extrapolation : dict
        Learner -> :class:`manireg.curves.planning.ExtrapolationCheck`, or a string saying why there is none.
    plan : SamplePlan or None
    plan_note : str
        Why there is no plan, or how the target was chosen.
    floor, floor_note : object, str
        The floor choice passed to the fits and in words.
    working_dimension : float
        The dimension the plan sizes its network with (:func:`manireg.geometry.summary.working_dimension`).
    diagnoses : dict
        Learner -> :class:`manireg.curves.evidence.Diagnosis` for every curve whose verdict is not
        "measured": the cause in words (optimiser, capacity, noise floor, log factor, pre-asymptotic) with
        its evidence.
    evidence : dict
        Learner -> :class:`manireg.curves.evidence.LearnerEvidence` (net learners): budget and capacity
        checks, sizes where the width rule hit ``width_max``, training MSE over the noise variance.
    capacity : list
        ``[(label, CapacityReadout or str)]`` for each group of nets that differ only in width
        (:func:`manireg.curves.capacity.capacity_by_depth`: paired over shared repeats); empty when no group
        has two widths.
    """

    fits: object
    theory: dict
    extrapolation: dict
    plan: object
    plan_note: str
    floor: object
    floor_note: str
    metric: str
    dimension: float
    dimension_interval: tuple | None
    smoothness: object
    ambient_dim: int | None
    working_dimension: float
    learner_kinds: dict
    warnings: list = field(default_factory=list)
    diagnoses: dict = field(default_factory=dict)
    evidence: dict = field(default_factory=dict)
    capacity: list = field(default_factory=list)

    def to_frame(self):
        """One row per learner: the fit's row plus the theory verdict and predicted interval."""
        frame = self.fits.to_frame()
        frame["theory_verdict"] = [self.theory[name].verdict for name in frame["learner"]]
        frame["predicted_lo"] = [self.theory[name].predicted_exponent[0] for name in frame["learner"]]
        frame["predicted_hi"] = [self.theory[name].predicted_exponent[1] for name in frame["learner"]]
        frame["diagnosis"] = [self.diagnoses[name].text if name in self.diagnoses else "" for name in frame["learner"]]
        return frame

    def __str__(self) -> str:
        lines = [f"floor: {self.floor_note}"]
        for f in self.fits:
            lines.append(str(f))
            lines.append("  theory: " + str(self.theory[f.learner]))
            if f.learner in self.diagnoses:
                lines.append("  diagnosis: " + self.diagnoses[f.learner].text)
        lines.append("plan: " + (str(self.plan) if self.plan is not None else "none"))
        if self.plan_note:
            lines.append(self.plan_note)
        return "\n".join(lines)


def read_out(rows, *, dimension, dimension_interval=None, smoothness, ambient_dim=None, noise_estimate=None,
             floor=DEFAULT_FLOOR, target_error=None, learner_kinds=None, seed=0, metric="test_mse", level=0.95,
             allow_unverified=False, evidence=None, noise_variance=None) -> ReadOut:
    """Fit every learner, compare each with its own reference rate, check extrapolation and plan.

    Parameters
    ----------
    rows : pandas.DataFrame
        Campaign rows.
    dimension : float
        Intrinsic dimension estimate ``d`` (rounded once, by :func:`working_dimension`, for sizing).
    dimension_interval : (low, high), optional
        The estimate's interval, carried into each predicted exponent.
    smoothness : float or (low, high)
        Hölder order ``s`` of the target, or a range.
    ambient_dim : int, optional
        Ambient dimension ``D``.
    noise_estimate : float or NoiseEstimate, optional
        The campaign's noise estimate (needed by ``floor="estimate"``; bounds ``floor="fit"``).
    floor : None, "fit", "estimate" or float, default=DEFAULT_FLOOR ("fit")
        See :func:`choose_floor`.
    target_error : float, optional
        The plan's target; default: halve the fitted excess error at the largest measured size.
    learner_kinds : dict, optional
        Learner name -> kind ("net", "knn", "kernel_ridge"); default from the name.
    seed, metric, level, allow_unverified
        Passed on.
    evidence : dict, optional
        Learner -> :class:`~manireg.curves.evidence.LearnerEvidence`
        (:meth:`CampaignResult.evidence_summary`): the budget check gates the verdicts
        (:func:`~manireg.curves.evidence.gate_verdict`) and every check feeds the diagnoses.
    noise_variance : float, optional
        The known label-noise variance (synthetic data); else the noise estimate's value is used for the
        noise-floor diagnosis.

    Returns
    -------
    ReadOut
    """
    from .comparison import compare_with_theory
    from .fitting import fit_all
    from .planning import extrapolation_check, plan_samples

    fl, nv, note = choose_floor(floor, metric, noise_estimate)
    fit_kw = dict(floor=fl, noise_variance=nv, metric=metric, level=level, seed=seed)
    from manireg.geometry.summary import working_dimension

    d_work = working_dimension(dimension)
    caught_msgs = []
    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always")
        fits = fit_all(rows, **fit_kw)
        checks = {}
        for f in fits:
            if f.n_sizes >= 4:
                try:
                    checks[f.learner] = extrapolation_check(rows, f.learner, **fit_kw)
                except ValueError as exc:
                    checks[f.learner] = f"no extrapolation check: {exc}"
            else:
                checks[f.learner] = "no extrapolation check: fewer than 4 sizes"
    caught_msgs = sorted({str(w.message) for w in caught})
    from .evidence import diagnose, gate_verdict

    evidence = dict(evidence or {})
    for name in list(fits.fits):
        fits.fits[name] = gate_verdict(fits.fits[name], evidence.get(name))
    kinds = {f.learner: learner_kind_of(f.learner, learner_kinds) for f in fits}
    theory = {
        f.learner: compare_with_theory(f, dimension, smoothness, ambient_dim, learner_kind=kinds[f.learner],
                                       dimension_interval=dimension_interval)
        for f in fits
    }
    if noise_variance is None and noise_estimate is not None:
        noise_variance = getattr(noise_estimate, "value", noise_estimate)
    nv_metric = noise_variance if metric == "test_mse" else None
    diagnoses = {}
    for f in fits:
        dg = diagnose(f, evidence.get(f.learner), theory=theory[f.learner], noise_variance=nv_metric)
        if dg is not None:
            diagnoses[f.learner] = dg
    plan, plan_note = None, ""
    measured = [f for f in fits if f.verdict == "measured"]
    pool = measured or ([f for f in fits if math.isfinite(f.exponent) and f.exponent > 0] if allow_unverified else [])
    if not pool:
        plan_note = ("No plan: no learner's curve earned a measured exponent over this range (see the verdicts); "
                     "allow_unverified=True plans from an unverified curve anyway.")
    else:
        best = min(pool, key=lambda f: f.mean_errors[-1])
        target = target_error
        if target is None:
            target = best.floor + 0.5 * (float(best.predict(best.n_range[1])) - best.floor)
            plan_note = "Target error not given: the plan halves the fitted excess error at the largest measured size."
        s_one = smoothness if isinstance(smoothness, numbers.Real) else None
        try:
            plan = plan_samples(best, target, allow_unverified=allow_unverified, dimension=d_work,
                                smoothness=s_one, ambient_dim=ambient_dim)
        except ValueError as exc:
            plan_note = f"No plan for target error {target:.4g}: {exc}"
    from manireg.curves.capacity import capacity_by_depth

    return ReadOut(
        fits=fits, theory=theory, extrapolation=checks, plan=plan, plan_note=plan_note, floor=fl, floor_note=note,
        metric=metric, dimension=float(dimension), dimension_interval=None if dimension_interval is None else
        tuple(float(v) for v in dimension_interval), smoothness=smoothness, ambient_dim=ambient_dim,
        working_dimension=d_work, learner_kinds=kinds, warnings=caught_msgs, diagnoses=diagnoses, evidence=evidence,
        capacity=capacity_by_depth(rows, metric=metric, level=level, swept_only=True),
    )


@dataclass
class ClassificationReadOut(ResultMixin):
    """The read-out of a classification campaign: exponents of every learner on every metric with values.

    Attributes
    ----------
    fits : dict
        Metric -> list of :class:`manireg.curves.fitting.ExponentFit` (floors of :data:`CLASSIFY_METRICS`).
    failures : dict
        Metric -> {learner: why there is no fit}.
    reference : dict
        The reference exponent of the excess logistic risk (:func:`classification_reference`).
    """

    fits: dict
    failures: dict
    reference: dict

    def to_frame(self):
        import pandas as pd

        frames = []
        for metric, fits in self.fits.items():
            for fit in fits:
                f = fit.to_frame()
                if "metric" not in f:
                    f.insert(0, "metric", metric)
                frames.append(f)
        return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def classification_reference(smoothness, dimension) -> dict:
    """The reference exponent of the excess logistic risk at ``smoothness`` and ``dimension``, with its source,
    conditions and scope (:func:`manireg.theory.classification.logistic_excess_risk_exponent`)."""
    from manireg.theory.classification import (LOGISTIC_RATE_CONDITIONS, LOGISTIC_RATE_SOURCE,
                                               logistic_excess_risk_exponent)

    return {"metric": "excess_logistic_risk", "formula": "s / (2s + 2 max(s, d))", "smoothness": float(smoothness),
            "dimension": float(dimension),
            "predicted_exponent": float(logistic_excess_risk_exponent(float(smoothness), max(float(dimension), 1.0))),
            "source": LOGISTIC_RATE_SOURCE, "conditions": LOGISTIC_RATE_CONDITIONS,
            "scope": ("an upper bound, up to log factors, stated for convolutional residual networks: it is not a "
                      "prediction for the fully connected net, the k-nearest-neighbour classifier or the logistic "
                      "baseline, and a measured exponent above it does not contradict it")}


def classification_read_out(rows, *, smoothness, dimension, learners=None, seed=0, level=0.95
                            ) -> ClassificationReadOut:
    """Exponents with intervals and verdicts of every learner on each classification metric that has values,
    with the floors of :data:`CLASSIFY_METRICS`, and the logistic reference exponent. The CLI, the report and
    the curve panel only format it."""
    from manireg.curves.fitting import fit_exponent

    ok = rows[rows["status"] == "ok"] if "status" in rows else rows
    if learners is None:
        learners = sorted(ok["learner"].astype(str).unique()) if len(ok) else []
    fits, failures = {}, {}
    for metric, floor in CLASSIFY_METRICS.items():
        if metric not in ok or not ok[metric].notna().any():
            continue
        fits[metric], failures[metric] = [], {}
        for learner in learners:
            try:
                fits[metric].append(fit_exponent(rows, learner, metric=metric, floor=floor, seed=seed, level=level))
            except ValueError as exc:
                failures[metric][learner] = str(exc)
    return ClassificationReadOut(fits, failures, classification_reference(smoothness, dimension))
