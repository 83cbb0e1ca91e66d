"""The campaign read-out on the command line: one core call (:meth:`CampaignResult.read_out`), printed, and the
same result handed to the report."""

from __future__ import annotations

from ._common import UsageError, captured_warnings, say, warn

__all__ = ["read_out", "report_parts", "evidence_lines", "summary_lines"]


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
        for line in evidence_lines(ro, f.learner):
            say("  " + line)
    for label, cap in ro.capacity:
        say()
        say(f"capacity read-out ({label}; paired over shared repeats):")
        for line in str(cap).splitlines():
            say("  " + line)
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
            "sizing": sizing, "diagnoses": ro.diagnoses, "evidence": ro.evidence,
            "capacity": ro.capacity}


def evidence_lines(ro, learner) -> list:
    """The diagnosis of a curve (with its evidence) and the flags of its cells, as printed lines."""
    lines = []
    ev = ro.evidence.get(learner)
    if ev is not None and ev.capped_sizes:
        lines.append(f"width capped: the width rule hit width_max at n = {', '.join(str(n) for n in ev.capped_sizes)}")
    dg = ro.diagnoses.get(learner)
    if dg is not None:
        lines.append("diagnosis: " + dg.text)
        lines += ["  evidence: " + e for e in dg.evidence]
    elif ev is not None and ev.checked:
        from ..curves.evidence import _budget_words

        lines.append("budget check: " + _budget_words(ev))
    return lines


def summary_lines(parts) -> list:
    """One line per learner of the parts :func:`read_out` returns: exponent with interval, the fit's verdict,
    the consistency verdict against the learner's own reference rate, and the diagnosis's causes."""
    from ..style import exponent_text

    out = []
    for f in parts["fits"]:
        t = parts["theory"][f.learner]
        line = f"{f.learner}: {exponent_text(f, 3)}; theory: {t.verdict}"
        dg = parts["diagnoses"].get(f.learner)
        if dg is not None:
            line += f"; diagnosis: {', '.join(dg.causes)}"
        out.append(line)
    return out


def report_parts(result, floor, settings: dict) -> dict:
    """Settings of the report that every command records the same way."""
    from ..curves.floors import describe_floor

    return {**settings, "floor": describe_floor(floor), "dimension": result.dimension,
            "dimension_source": result.dimension_source, "dimension_interval": result.dimension_interval,
            "smoothness": result.smoothness, "noise_estimate": result.noise_estimate,
            "noise_estimate_interval": result.noise_estimate_interval, "store": result.store_path,
            "campaign": result.name}
