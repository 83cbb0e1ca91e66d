"""Evidence cells behind a curve's verdict, and a diagnosis in words for every curve without a single exponent.

A flag is a guess: a net stopped at its step cap, or whose best validation step came late, *may* be limited by
the optimiser. The evidence cells test it. They are extra cells of the same campaign, on the same points and
seeds as the cell they check, stored under their own learner labels so that they never enter the main curve:

``"<learner> budget x2"``, ``"<learner> budget x4"`` (the budget check)
    The cell retrained with 2 and 4 times the step budget (:class:`manireg.theory.sizing.TrainingBudget`
    ``multiplier``). At every size the flagged cells are checked (up to ``budget_repeats`` per size); at the
    smallest and the largest size, which decide the verdict, unflagged cells fill up to ``budget_repeats``
    (the sample of the others; first repeats first, no randomness). A cell whose error falls by more than the
    seed spread at its n (the standard deviation of the main curve's error over repeats at that n) with the
    larger budget is **optimisation-limited**. A curve with such a cell at its smallest or largest size gets
    the verdict ``"optimisation-limited"`` (:data:`manireg.curves.fitting.VERDICT_OPTIMISATION_LIMITED`).
``"<learner> width x2"`` (the capacity check)
    The cell retrained with twice the width (and twice ``width_max``, so the doubling is real where the width
    rule was clipped) at a few sizes. A cell whose error falls by more than the seed spread is
    **capacity-limited**.

Two per-cell columns are derived from the stored rows (no training): ``width_capped`` (the width rule hit
``width_max``, :func:`manireg.theory.sizing.width_capped`) and ``train_to_noise`` (training MSE over the noise
variance: well below 1 the net interpolates its noise, well above 1 it under-fits).

References
----------
.. [1] L. Prechelt, "Early stopping - but when?", Neural Networks: Tricks of the Trade (1998).
.. [2] J. Hestness et al., arXiv:1712.00409 (2017) (learning curves limited by model size and budget).
"""

from __future__ import annotations

import dataclasses
import json
import math
from dataclasses import dataclass, field

import numpy as np

from manireg._results import ResultMixin

__all__ = ["EvidenceSettings", "LearnerEvidence", "Diagnosis", "DIAGNOSES", "evidence_name", "evidence_cells",
           "evidence_rows", "add_cell_columns", "summarise_evidence", "gate_verdict", "diagnose"]

#: The checks and the label of their cells (``{learner}`` is the checked learner's name).
CHECK_LABELS = {"budget": "{learner} budget x{factor:g}", "capacity": "{learner} width x{factor:g}"}

#: Causes a diagnosis can name, with their headline.
DIAGNOSES = {
    "optimiser": "limited by the optimiser",
    "capacity": "limited by capacity",
    "noise floor": "limited by the noise floor",
    "log factor": "a power law with a log factor",
    "pre-asymptotic": "pre-asymptotic",
    "undecided": "undecided at this precision",
    "too little data": "too little data",
}


def evidence_name(learner, check, factor) -> str:
    """The learner label of an evidence cell, e.g. ``evidence_name("net", "budget", 2) == "net budget x2"``."""
    return CHECK_LABELS[check].format(learner=learner, factor=float(factor))


@dataclass(frozen=True)
class EvidenceSettings:
    """Which evidence cells a campaign adds.

    Attributes
    ----------
    budget_factors : tuple of float, default=(2, 4)
        Multipliers of the step budget of the budget check.
    budget_repeats : int, default=2
        Cells checked per size and net learner: the flagged ones, and at the smallest and largest size
        unflagged ones up to this number.
    capacity_factor : float, default=2
        Width multiplier of the capacity check.
    capacity_sizes : int, default=2
        Sizes of the capacity check: the largest ones (where a width cap and a short budget bite first).
    capacity_repeats : int, default=1
        Repeats of the capacity check per size.
    """

    budget_factors: tuple = (2.0, 4.0)
    budget_repeats: int = 2
    capacity_factor: float = 2.0
    capacity_sizes: int = 2
    capacity_repeats: int = 1

    def __post_init__(self):
        bad = [f for f in self.budget_factors if not (isinstance(f, (int, float)) and f > 1)]
        if bad or not self.budget_factors:
            raise ValueError(f"the 'budget_factors' parameter of EvidenceSettings must be numbers > 1, e.g. (2, 4); "
                             f"got {self.budget_factors!r}.")
        for name in ("budget_repeats", "capacity_sizes", "capacity_repeats"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, int) or v < 0:
                raise ValueError(f"the '{name}' parameter of EvidenceSettings must be an int >= 0; got {v!r}.")
        if not (isinstance(self.capacity_factor, (int, float)) and self.capacity_factor > 1):
            raise ValueError(f"the 'capacity_factor' parameter of EvidenceSettings must be a number > 1; got "
                             f"{self.capacity_factor!r}.")


def _flagged(row) -> bool:
    from manireg.curves.fitting import OPTIMISATION_CAPS

    late = row.get("late_best")
    return str(row.get("stop_reason")) in OPTIMISATION_CAPS or (late is not None and late == late and bool(late))


def _evidence_spec(spec, check, factor):
    from manireg.curves.learners import LearnerSpec

    p = dict(spec.params)
    if check == "budget":
        p["budget_multiplier"] = float(p.get("budget_multiplier", 1.0)) * float(factor)
    else:
        p["width_multiplier"] = float(p.get("width_multiplier", 1.0)) * float(factor)
        c = dict(p.get("constants") or {})
        from manireg.theory.sizing import SizingConstants

        c["width_max"] = int(math.ceil(factor * c.get("width_max", SizingConstants().width_max)))
        p["constants"] = c
    return LearnerSpec(spec.kind, name=evidence_name(spec.name, check, factor), params=p)


def evidence_cells(cells, rows, data, settings=None) -> list:
    """The evidence cells of a campaign whose main ``cells`` have the stored ``rows`` (only net learners of
    kind ``"net"`` are checked; a cell not yet finished is not checked).

    Each evidence cell has the checked cell's n, repeat and seed (so the same points) and a configuration
    that adds ``{"evidence": {"check", "factor", "of", "learner"}}`` to the checked cell's, with the learner
    replaced: its key differs from every main cell's.
    """
    from manireg.curves.learners import make_learner
    from manireg.curves.sweep import Cell, _hash

    st = EvidenceSettings() if settings is None else settings
    ok = rows[rows["status"].astype(str) == "ok"] if len(rows) and "status" in rows else rows
    by_key = {r["key"]: r for r in ok.to_dict(orient="records")} if len(ok) else {}
    out = []
    nets = [l for l in data.learners if l.kind == "net"]
    for spec in nets:
        mine = [c for c in cells if c.learner.name == spec.name and c.key in by_key]
        sizes = sorted({c.n for c in mine})
        checks = []
        ends = {sizes[0], sizes[-1]} if sizes else set()
        for n in sizes:
            at_n = sorted((c for c in mine if c.n == n), key=lambda c: c.repeat)
            flagged = [c for c in at_n if _flagged(by_key[c.key])][: st.budget_repeats]
            rest = [c for c in at_n if c not in flagged]
            if n in ends and st.budget_repeats:  # the ends decide the verdict: at least one cell each, flagged or not
                chosen = flagged + rest[: max(0, st.budget_repeats - len(flagged))]
            else:
                chosen = flagged
            checks += [("budget", f, c) for f in st.budget_factors for c in chosen]
        for n in sizes[::-1][: st.capacity_sizes]:
            at_n = sorted((c for c in mine if c.n == n), key=lambda c: c.repeat)
            checks += [("capacity", st.capacity_factor, c) for c in at_n[: st.capacity_repeats]]
        specs = {}
        for check, factor, c in checks:
            k = (check, float(factor))
            if k not in specs:
                es = _evidence_spec(spec, check, factor)
                specs[k] = (es, make_learner(es).resolve(data))
            es, resolved = specs[k]
            config = dict(c.config)
            config["learner"] = {"kind": es.kind, "name": es.name, "params": resolved}
            config["evidence"] = {"check": check, "factor": float(factor), "of": c.key, "learner": spec.name}
            out.append(Cell(es, c.n, c.repeat, c.seed, _hash(config), c.campaign, config))
    return out


def evidence_rows(rows):
    """Split stored rows into (main rows, evidence rows); evidence rows gain ``check``, ``factor``,
    ``checked_learner`` and ``checked_key`` (from their configuration)."""
    if not len(rows) or "config_json" not in rows:
        return rows, rows.iloc[:0]
    ev = [json.loads(s).get("evidence") if isinstance(s, str) and s else None for s in rows["config_json"]]
    mask = np.array([e is not None for e in ev], dtype=bool)
    main = rows[~mask].reset_index(drop=True)
    extra = rows[mask].reset_index(drop=True).copy()
    chosen = [e for e in ev if e is not None]
    extra["check"] = [e["check"] for e in chosen]
    extra["factor"] = [float(e["factor"]) for e in chosen]
    extra["checked_learner"] = [e["learner"] for e in chosen]
    extra["checked_key"] = [e["of"] for e in chosen]
    return main, extra


def add_cell_columns(rows, noise_variance=None):
    """Add ``width_capped`` (net rows: did the width rule hit ``width_max``?) and ``train_to_noise`` (training MSE
    over ``noise_variance``) to a copy of ``rows``; both are derived from the stored row and its configuration."""
    from manireg.theory.sizing import SizingConstants, width_capped

    rows = rows.copy()
    capped = []
    for cfg, n in zip(rows["config_json"] if "config_json" in rows else [None] * len(rows), rows["n"]):
        try:
            c = json.loads(cfg) if isinstance(cfg, str) and cfg else {}
            learner = c.get("learner") or {}
            if learner.get("kind") not in ("net", "net_classifier"):
                capped.append(None)
                continue
            params = learner.get("params") or {}
            consts = SizingConstants(**(params.get("constants") or {}))
            capped.append(width_capped(int(n), float(c["dimension"]), float(c["smoothness"]), consts,
                                       float(params.get("width_multiplier", 1.0))))
        except (KeyError, TypeError, ValueError):
            capped.append(None)
    rows["width_capped"] = capped
    if noise_variance is not None and noise_variance > 0 and "train_mse" in rows:
        rows["train_to_noise"] = rows["train_mse"].astype(float) / float(noise_variance)
    else:
        rows["train_to_noise"] = np.nan
    return rows


@dataclass
class LearnerEvidence(ResultMixin):
    """The evidence cells of one learner, read against its main curve.

    Attributes
    ----------
    learner : str
    budget : list of dict
        One per checked cell: ``n``, ``repeat``, ``flagged`` (the main cell was flagged), ``error`` (main),
        ``errors`` (factor -> error with that budget), ``spread`` (seed spread at n), ``change`` (main error
        minus the best larger-budget error), ``limited`` (``change > spread``).
    capacity : list of dict
        The same for the capacity check (``errors`` keyed by the width factor).
    limited_sizes, capacity_limited_sizes : list of int
        Sizes with at least one optimisation- / capacity-limited cell.
    capped_sizes : list of int
        Sizes where the width rule hit ``width_max``.
    flagged : int
        Main cells flagged as possibly optimisation-limited; ``flagged_checked`` of them were retrained.
    train_to_noise : list of dict
        ``n`` and the mean training MSE over the noise variance.
    metric : str
    """

    learner: str
    budget: list = field(default_factory=list)
    capacity: list = field(default_factory=list)
    limited_sizes: list = field(default_factory=list)
    capacity_limited_sizes: list = field(default_factory=list)
    capped_sizes: list = field(default_factory=list)
    flagged: int = 0
    flagged_checked: int = 0
    train_to_noise: list = field(default_factory=list)
    metric: str = "test_mse"

    @property
    def checked(self) -> bool:
        """True when the budget check ran for this learner."""
        return bool(self.budget)

    def limited_at_ends(self, sizes) -> list:
        """Optimisation-limited sizes among the smallest and the largest of ``sizes``."""
        if not len(sizes):
            return []
        ends = {int(min(sizes)), int(max(sizes))}
        return sorted(ends & set(self.limited_sizes))

    def to_frame(self):
        import pandas as pd

        recs = []
        for check, items in (("budget", self.budget), ("capacity", self.capacity)):
            for it in items:
                rec = {"check": check, **{k: v for k, v in it.items() if k != "errors"}}
                for f, e in it["errors"].items():
                    rec[f"error x{float(f):g}"] = e
                recs.append(rec)
        return pd.DataFrame(recs)


def _paired(main, extra, metric, check, spreads):
    out = []
    sub = extra[extra["check"] == check]
    if not len(sub):
        return out
    ok = sub[sub["status"].astype(str) == "ok"] if "status" in sub else sub
    base = main.set_index("key")
    for key, g in ok.groupby("checked_key"):
        if key not in base.index:
            continue
        r = base.loc[key]
        n = int(r["n"])
        e0 = float(r[metric])
        errs = {float(f): float(v) for f, v in zip(g["factor"], g[metric])}
        best = min(errs.values())
        spread = spreads.get(n, float("nan"))
        change = e0 - best
        out.append({"n": n, "repeat": int(r["repeat"]), "flagged": bool(_flagged(r.to_dict())), "error": e0,
                    "errors": errs, "spread": spread, "change": change,
                    "limited": bool(np.isfinite(spread) and change > spread)})
    return sorted(out, key=lambda d: (d["n"], d["repeat"]))


def summarise_evidence(rows, evidence, *, metric="test_mse", noise_variance=None) -> dict:
    """Learner -> :class:`LearnerEvidence` for every net learner of ``rows`` (main rows, status ok) with the
    evidence rows ``evidence`` (from :func:`evidence_rows`; may be empty or None)."""
    import pandas as pd

    out = {}
    if rows is None or not len(rows):
        return out
    main = rows[rows["status"].astype(str) == "ok"] if "status" in rows else rows
    extra = evidence if evidence is not None and len(evidence) else pd.DataFrame(columns=["check", "checked_learner"])
    if "width_capped" not in main or "train_to_noise" not in main:
        main = add_cell_columns(main, noise_variance)
    for name, g in main.groupby(main["learner"].astype(str)):
        is_net = g["steps"].notna().any() if "steps" in g else False
        if not is_net:
            continue
        spreads = {int(n): float(np.std(v.to_numpy(float), ddof=1)) if len(v) > 1 else float("nan")
                   for n, v in g.groupby("n")[metric]}
        mine = extra[extra["checked_learner"].astype(str) == name] if len(extra) else extra
        budget = _paired(g, mine, metric, "budget", spreads) if len(mine) else []
        capacity = _paired(g, mine, metric, "capacity", spreads) if len(mine) else []
        flags = [bool(_flagged(r)) for r in g.to_dict(orient="records")]
        capped = sorted({int(n) for n, c in zip(g["n"], g["width_capped"]) if c is True or c == 1})
        t2n = []
        if g["train_to_noise"].notna().any():
            t2n = [{"n": int(n), "train_to_noise": float(v.mean())} for n, v in g.groupby("n")["train_to_noise"]]
        out[name] = LearnerEvidence(
            learner=name, budget=budget, capacity=capacity,
            limited_sizes=sorted({b["n"] for b in budget if b["limited"]}),
            capacity_limited_sizes=sorted({b["n"] for b in capacity if b["limited"]}),
            capped_sizes=capped, flagged=int(sum(flags)), flagged_checked=int(sum(b["flagged"] for b in budget)),
            train_to_noise=t2n, metric=metric)
    return out


def gate_verdict(fit, ev):
    """The fit with the verdict ``"optimisation-limited"`` when the budget check found an optimisation-limited
    cell at the smallest or largest fitted size (a fit with too little data keeps its verdict); otherwise the
    fit unchanged, its reason extended with what the budget check found."""
    from manireg.curves.fitting import VERDICT_INSUFFICIENT, VERDICT_OPTIMISATION_LIMITED

    if ev is None or not ev.checked:
        return fit
    sizes = [s for s in fit.sizes if fit.n_range[0] <= s <= fit.n_range[1]] or fit.sizes
    ends = ev.limited_at_ends(sizes)
    found = _budget_words(ev)
    if ends and fit.verdict != VERDICT_INSUFFICIENT:
        reason = (f"the budget check found optimisation-limited cells at the end(s) n = "
                  f"{', '.join(str(n) for n in ends)} of the curve: {found} The curve's shape there reflects the "
                  f"training budget, not n (verdict before the check: {fit.verdict}: {fit.verdict_reason})")
        return dataclasses.replace(fit, verdict=VERDICT_OPTIMISATION_LIMITED, verdict_reason=reason)
    return dataclasses.replace(fit, verdict_reason=fit.verdict_reason + " Budget check: " + found)


def _budget_words(ev) -> str:
    factors = sorted({f for b in ev.budget for f in b["errors"]})
    fx = " and ".join(f"{f:g}x" for f in factors)
    lim = [b for b in ev.budget if b["limited"]]
    head = (f"{len(ev.budget)} cell(s) retrained with {fx} the steps ({ev.flagged_checked} of the {ev.flagged} "
            f"flagged cell(s) among them)")
    if not lim:
        return head + "; none moved by more than the seed spread at its n, so the flags were not optimisation limits."
    cells = "; ".join(f"n={b['n']} repeat {b['repeat']}: {b['error']:.4g} -> {min(b['errors'].values()):.4g} "
                      f"(spread {b['spread']:.2g})" for b in lim[:4])
    more = "" if len(lim) <= 4 else f" and {len(lim) - 4} more"
    return head + f"; {len(lim)} moved by more than the seed spread: {cells}{more}."


@dataclass
class Diagnosis(ResultMixin):
    """Why a curve does not earn a single exponent, in words, with its evidence.

    Attributes
    ----------
    learner : str
    verdict : str
        The (gated) verdict of the fit.
    causes : list of str
        Keys of :data:`DIAGNOSES`, the leading cause first.
    text : str
        One sentence per cause.
    evidence : list of str
        The numbers behind each cause.
    """

    learner: str
    verdict: str
    causes: list
    text: str
    evidence: list = field(default_factory=list)

    def __str__(self) -> str:
        return f"{self.learner}: {self.text}"


def diagnose(fit, ev=None, *, theory=None, noise_variance=None):
    """A :class:`Diagnosis` of a fit whose verdict is not "measured" (None for a measured one).

    Causes, each only with its evidence: the optimiser (budget-check cells that moved), capacity (2x-width
    cells that moved; widths clipped at ``width_max`` are named as a possible cause), the noise floor (the
    error at the largest sizes within a factor 1.5 of the noise variance, sizes dropped at the floor, or a
    fitted floor preferred on held-out sizes), a log factor (the power law x log model preferred on held-out
    sizes), pre-asymptotic (a bend with none of the above: the sub-range exponents and, with ``theory``, which
    half is nearer the predicted exponent). A curve with no bend and no verdict is undecided at this precision.
    """
    from manireg.curves.fitting import VERDICT_INSUFFICIENT, VERDICT_MEASURED

    if fit.verdict == VERDICT_MEASURED:
        return None
    causes, text, evidence = [], [], []
    if fit.verdict == VERDICT_INSUFFICIENT:
        return Diagnosis(fit.learner, fit.verdict, ["too little data"], f"{DIAGNOSES['too little data']}: "
                         f"{fit.verdict_reason}", [])
    if ev is not None and ev.limited_sizes:
        causes.append("optimiser")
        lim = [b for b in ev.budget if b["limited"]]
        text.append(f"{DIAGNOSES['optimiser']}: more steps lowered the error beyond the seed spread at n = "
                    f"{', '.join(str(n) for n in ev.limited_sizes)}.")
        evidence += [f"budget check n={b['n']} repeat {b['repeat']}: {fit.metric} {b['error']:.4g} -> "
                     + ", ".join(f"{e:.4g} (x{f:g})" for f, e in sorted(b['errors'].items()))
                     + f"; seed spread {b['spread']:.3g}" for b in lim]
    elif ev is not None and ev.checked:
        evidence.append("budget check: " + _budget_words(ev))
    elif ev is not None and ev.flagged:
        evidence.append(f"{ev.flagged} cell(s) are flagged as possibly optimisation-limited but the budget check "
                        "has not run (evidence=True in Python, --evidence on the command line).")
    if ev is not None and ev.capacity_limited_sizes:
        causes.append("capacity")
        lim = [b for b in ev.capacity if b["limited"]]
        text.append(f"{DIAGNOSES['capacity']}: twice the width lowered the error beyond the seed spread at n = "
                    f"{', '.join(str(n) for n in ev.capacity_limited_sizes)}"
                    + (f" (the width rule hit width_max from n = {ev.capped_sizes[0]})." if ev.capped_sizes else "."))
        evidence += [f"capacity check n={b['n']} repeat {b['repeat']}: {fit.metric} {b['error']:.4g} -> "
                     f"{min(b['errors'].values()):.4g} with 2x width; seed spread {b['spread']:.3g}" for b in lim]
    elif ev is not None and ev.capacity:
        evidence.append("capacity check: twice the width moved no checked cell by more than the seed spread (n = "
                        + ", ".join(str(b["n"]) for b in ev.capacity) + ").")
    if ev is not None and ev.capped_sizes and "capacity" not in causes:
        evidence.append(f"the width rule hit width_max at n = {', '.join(str(n) for n in ev.capped_sizes)} "
                        "(the nets there are narrower than the rule asks).")
    means = np.asarray(fit.mean_errors, float)
    floor_hit = []
    if noise_variance is not None and noise_variance > 0 and fit.metric == "test_mse" and means.size:
        ratio = float(means[-1] / noise_variance)
        if ratio < 1.5:
            floor_hit.append(f"mean {fit.metric} at n = {fit.sizes[-1]:g} is {means[-1]:.4g}, {ratio:.2f} x the noise "
                             f"variance {noise_variance:.4g}")
    if fit.dropped:
        floor_hit.append(f"{len(fit.dropped)} size(s) at or below the floor were dropped")
    if fit.preferred_model == "power law + floor":
        floor_hit.append("a power law with a refitted floor predicts held-out sizes best")
    if floor_hit:
        causes.append("noise floor")
        text.append(f"{DIAGNOSES['noise floor']}: the error is close to what the label noise allows at the largest "
                    "sizes, so what is left to learn is small against the scatter.")
        evidence += floor_hit
    if fit.preferred_model == "power law x log":
        causes.append("log factor")
        cv = {m["model"]: m["loso_error"] for m in fit.model_comparison}
        text.append(f"{DIAGNOSES['log factor']}: a n^-b (log n)^p predicts held-out sizes better than a single power "
                    "law; the theory's rates carry log factors, which bend a curve over a short range.")
        evidence.append(f"leave-one-size-out error: power law x log {cv.get('power law x log', float('nan')):.3g}, "
                        f"power law {cv.get('power law', float('nan')):.3g}")
    bends = bool(fit.equivalence.get("different")) or fit.preferred_model == "broken power law"
    if fit.subrange_fits and len(fit.subrange_fits) == 2:
        lo, up = fit.subrange_fits
        halves = f"lower half {lo.exponent:.3f}, upper half {up.exponent:.3f}"
    else:
        lo = up = None
        halves = ""
    if (bends or fit.preferred_model == "broken power law") and not causes:
        causes.append("pre-asymptotic")
        trend = "flattens" if (up is not None and up.exponent < lo.exponent) else "steepens"
        t = (f"{DIAGNOSES['pre-asymptotic']}: the curve {trend} ({halves}) with no sign of the optimiser, capacity "
             "or the noise floor behind it: the range does not yet show the asymptotic rate")
        if theory is not None and lo is not None and getattr(theory, "predicted_exponent", None) is not None:
            p = float(np.mean(theory.predicted_exponent))
            nearer = "upper" if abs(up.exponent - p) < abs(lo.exponent - p) else "lower"
            t += f"; the {nearer} half is nearer the predicted exponent {p:.3f}"
        text.append(t + ".")
        if fit.local_slopes:
            evidence.append("local slopes: " + ", ".join(f"{s['slope']:.2f}" for s in fit.local_slopes))
    if not causes:
        causes.append("undecided")
        text.append(f"{DIAGNOSES['undecided']}: no bend is shown and no single exponent either; more repeats or "
                    "more sizes would decide.")
        if halves:
            evidence.append(halves)
    if ev is not None and ev.train_to_noise:
        last = ev.train_to_noise[-1]
        word = ("interpolates its noise" if last["train_to_noise"] < 0.5 else
                "under-fits" if last["train_to_noise"] > 2.0 else "fits to about the noise level")
        evidence.append(f"training MSE / noise variance at n = {last['n']}: {last['train_to_noise']:.2f} (the net {word})")
    return Diagnosis(fit.learner, fit.verdict, causes, " ".join(text), evidence)
