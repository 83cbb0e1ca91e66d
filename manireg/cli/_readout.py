"""The campaign read-out on the command line: one core call (:meth:`CampaignResult.read_out`), printed, and the
same result handed to the report."""

from __future__ import annotations

from ._common import UsageError, captured_warnings, say, warn

__all__ = ["read_out", "report_parts"]


def read_out(result, *, floor, target_error=None, smoothness_range=None, allow_unverified=False, seed=0):
    """Fit every learner, compare each with its own reference rate, check extrapolation, plan; print it all and
    return the parts of the report."""
    from ..theory import sizing_table

    say("\nfitting exponents (interval over repeats, curve-model comparison, window scan) ...")
    try:
        with captured_warnings():
            ro = result.read_out(floor=floor, target_error=target_error, smoothness=smoothness_range,
                                 allow_unverified=allow_unverified, seed=seed)
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    say(f"floor: {ro.floor_note}")
    for f in ro.fits:
        say()
        say(str(f))
        say("  against theory: " + str(ro.theory[f.learner]))
    if ro.plan is not None:
        say()
        say("plan: " + str(ro.plan))
    if ro.plan_note:
        say(ro.plan_note.replace("allow_unverified=True", "--allow-unverified"))
    for w in ro.warnings:
        warn(w)
    sizing = sizing_table(sorted(set(int(n) for n in result.rows["n"])), result.dimension, result.smoothness,
                          result.ambient_dim)
    checks = [c for c in ro.extrapolation.values() if not isinstance(c, str)]
    return {"fits": ro.fits, "theory": ro.theory, "extrapolation": checks, "plan": ro.plan, "plan_note": ro.plan_note,
            "sizing": sizing}


def report_parts(result, floor, settings: dict) -> dict:
    """Settings of the report that every command records the same way."""
    from ..curves.floors import describe_floor

    return {**settings, "floor": describe_floor(floor), "dimension": result.dimension,
            "dimension_source": result.dimension_source, "dimension_interval": result.dimension_interval,
            "smoothness": result.smoothness, "noise_estimate": result.noise_estimate,
            "noise_estimate_interval": result.noise_estimate_interval, "store": result.store_path,
            "campaign": result.name}
