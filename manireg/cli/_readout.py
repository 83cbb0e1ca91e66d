"""The campaign read-out on the command line: the core fits, checks and plan, printed; parts for the report."""

from __future__ import annotations

import math

from ._common import UsageError, captured_warnings, say

__all__ = ["read_out", "report_parts"]


def read_out(result, *, floor, target_error=None, smoothness_range=None, allow_unverified=False, seed=0):
    """Fit every learner, check extrapolation, plan; print them; return the parts of the report."""
    from ..curves import extrapolation_check, plan_samples
    from ..theory import sizing_table

    try:
        kw = result.fit_settings(floor=floor, smoothness=smoothness_range or result.smoothness, seed=seed)
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    with captured_warnings():
        fits = result.fit_all(**kw)
        checks = [extrapolation_check(result.rows, f.learner, **kw) for f in fits if f.n_sizes >= 4]
        measured = [f for f in fits if f.verdict == "measured"]
        usable = [f for f in fits if math.isfinite(f.exponent) and f.exponent > 0]
        pool = measured or (usable if allow_unverified else [])
        plan, note = None, None
        if not pool:
            note = ("No plan: no learner's curve earned a measured exponent over this range (see the verdicts); "
                    "pass --allow-unverified to plan from an unverified curve anyway.")
        else:
            best = min(pool, key=lambda f: f.mean_errors[-1])
            target = target_error
            if target is None:  # default: halve the excess error at the largest size
                target = best.floor + 0.5 * (float(best.predict(best.n_range[1])) - best.floor)
            try:
                plan = result.plan(target, best.learner, fit=best, allow_unverified=allow_unverified)
            except ValueError as exc:
                note = f"No plan for target error {target:.4g}: {exc}"
            if plan is not None and target_error is None:
                note = "Target error not given: the plan halves the fitted excess error at the largest measured size."
        say()
        for f in fits:
            say(str(f))
        if plan is not None:
            say()
            say("plan: " + str(plan))
        if note:
            say(note)
    sizing = sizing_table(sorted(set(int(n) for n in result.rows["n"])), result.dimension, result.smoothness,
                          result.ambient_dim)
    return {"fits": fits, "extrapolation": checks, "plan": plan, "plan_note": note, "sizing": sizing}


def report_parts(result, floor, settings: dict) -> dict:
    """Settings of the report that every command records the same way."""
    from ..curves.floors import describe_floor

    return {**settings, "floor": describe_floor(floor), "dimension": result.dimension,
            "dimension_source": result.dimension_source, "smoothness": result.smoothness,
            "noise_estimate": result.noise_estimate, "store": result.store_path, "campaign": result.name}
