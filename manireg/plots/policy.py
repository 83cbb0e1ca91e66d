"""Policy-campaign figures (regret curves, overlap, the learned policy on a 2-D view) and report sections.

Every number drawn comes from :mod:`manireg.curves.policy` results (``PolicyResult`` rows, its
``overlap()``, a ``PolicyMap``); nothing is recomputed here.
"""

from __future__ import annotations

import numpy as np

from ._common import new_axes
from .curves import plot_learning_curves

__all__ = ["plot_regret_curves", "plot_overlap", "plot_policy_map", "plot_value_estimates", "policy_sections"]


def plot_regret_curves(rows, fits=None, *, ax=None, title=None):
    """Regret against n on log-log axes, each learner's fitted exponent with its interval and verdict in the
    legend. No predicted slope is drawn (no verified reference rate; docs/policy.md)."""
    ok = rows[(rows["status"] == "ok") & rows["regret"].notna()] if "regret" in rows else rows.iloc[:0]
    fig = plot_learning_curves(ok, fits, metric="regret", ax=ax, show_predicted=False,
                               title=title or "Regret of the learned policies")
    fig.axes[0].set_ylabel("regret on the test rows (exact)")
    return fig


def plot_value_estimates(rows, *, optimal_value=None, ax=None):
    """Doubly robust value estimates of the learned policies (mean over repeats, +- 2 mean standard errors)."""
    fig, ax = new_axes(ax, (6.4, 4.2))
    ok = rows[(rows["status"] == "ok") & rows["value_estimate"].notna()]
    for learner, sub in ok.groupby("learner"):
        g = sub.groupby("n")
        m, se = g["value_estimate"].mean(), g["value_se"].mean()
        ax.errorbar(m.index, m.values, yerr=2 * se.values, fmt="o-", ms=4, capsize=3, label=str(learner))
    if optimal_value is not None:
        ax.axhline(optimal_value, color="k", lw=0.9, ls="--", label="optimal policy (true value)")
    ax.set_xscale("log")
    ax.set_xlabel("training samples n")
    ax.set_ylabel("value estimate on the test rows")
    ax.set_title("Value of the learned policies")
    ax.grid(True, alpha=0.3)
    if len(ok) or optimal_value is not None:
        ax.legend(fontsize=7)
    return fig


def plot_overlap(overlap: dict, *, ax=None):
    """Histogram of the propensities of the taken actions (largest size), with the clipping level and the
    effective sample size per size in the title."""
    fig, ax = new_axes(ax, (6.4, 3.8))
    edges = np.asarray(overlap.get("edges") or np.linspace(0, 1, 21))
    if overlap.get("sizes"):
        counts = np.asarray(overlap["counts"][-1], dtype=float)
        ax.bar(edges[:-1], counts, width=np.diff(edges), align="edge", color="#4c72b0", alpha=0.8,
               label=f"n = {overlap['sizes'][-1]} (all repeats; {overlap.get('source') or 'estimated'} propensities)")
        ess = ", ".join(f"{n}: {f:.0%}" for n, f in zip(overlap["sizes"], overlap["ess_fraction"]))
        ax.set_title(f"Overlap: propensities of the actions taken\neffective sample size / n by size: {ess}", fontsize=9)
    else:
        ax.set_title("Overlap: no finished cells yet", fontsize=9)
    clip = overlap.get("clip")
    if clip:
        share = overlap["clipped_share"][-1] if overlap.get("clipped_share") else 0.0
        ax.axvline(clip, color="crimson", lw=1.0, ls="--", label=f"clip {clip:g} ({share:.1%} of rows below)")
    ax.set_xlim(0, 1)
    ax.set_xlabel("propensity e(a_i | x_i)")
    ax.set_ylabel("rows")
    ax.grid(True, alpha=0.3)
    if ax.get_legend_handles_labels()[1]:
        ax.legend(fontsize=7)
    return fig


def plot_policy_map(pmap, *, fig=None):
    """The learned policy's action on the 2-D principal-component view of the test covariates, beside the
    optimal action (synthetic data)."""
    import matplotlib.pyplot as plt

    panels = 2 if pmap.optimal is not None else 1
    if fig is None:
        fig, axes = plt.subplots(1, panels, figsize=(5.2 * panels, 4.4), squeeze=False)
        axes = axes[0]
    else:
        axes = fig.subplots(1, panels, squeeze=False)[0]
    cmap = plt.get_cmap("tab10")
    shown = [(pmap.actions, f"learned ({pmap.learner}, n = {pmap.n}, repeat {pmap.repeat})")]
    if pmap.optimal is not None:
        shown.append((pmap.optimal, "optimal"))
    for ax, (acts, title) in zip(axes, shown):
        for a, name in enumerate(pmap.action_names):
            sel = acts == a
            ax.scatter(pmap.view[sel, 0], pmap.view[sel, 1], s=6, color=cmap(a % 10), label=f"action {name}")
        ax.set_title(title, fontsize=9)
        ax.set_xlabel("component 1")
        ax.set_ylabel("component 2")
        ax.legend(fontsize=7, markerscale=2)
    note = f"2-D view: first two principal components ({pmap.explained:.0%} of the variance)"
    if pmap.agreement is not None:
        note += f"; learned = optimal on {pmap.agreement:.0%} of the points"
    fig.suptitle(note, fontsize=9)
    return fig


def policy_sections(result, fits=None, policy_map=None):
    """Report sections (:class:`manireg.report.ReportSection`) of a policy campaign: settings and overlap,
    regret curves with exponents and verdicts, value estimates, and the learned policy's map."""
    import pandas as pd

    from ..report import ReportSection, exponent_table_frame

    out = []
    sec = ReportSection("Policy campaign")
    sec.paragraphs.append(
        f"{result.n_actions} actions ({', '.join(result.action_names)}); {result.folds}-fold cross-fitting of the "
        f"reward models and the propensities ({result.propensity_source}); propensity clipping "
        f"{'at ' + format(result.clip, 'g') if result.clip else 'off'}. Regret is measured for the greedy policy "
        "on the fixed test rows" + (" exactly, from the true mean rewards." if result.truth else
                                   "; it needs the true mean rewards, which a table does not have, so only the "
                                   "doubly robust value estimates are shown."))
    ov = result.overlap()
    if ov["sizes"]:
        sec.tables.append(("Overlap diagnostics (mean over repeats)", pd.DataFrame({
            "n": ov["sizes"], "min propensity": ov["min"], "effective sample size": ov["ess"],
            "ESS / n": ov["ess_fraction"], "clipped share": ov["clipped_share"]})))
        sec.figures.append(("policy_overlap", plot_overlap(ov), "Propensities of the actions taken"))
    out.append(sec)
    if result.truth:
        sec = ReportSection("Regret curves")
        sec.paragraphs.append(
            "No reference rate is drawn: the regret guarantees and lower bounds we know of for policy learning are "
            "recalled, not verified against the papers with their conditions; the measured exponent is shown "
            "alone, with its interval and verdict.")
        if fits is not None and len(fits):
            sec.tables.append(("Regret exponents", exponent_table_frame(fits).drop(
                columns=["predicted exponent 2s/(2s+d)", "ambient exponent 2s/(2s+D)", "implied d (given s)", "implied s (given d)"])))
        for name, why in (result.unfitted() if hasattr(result, "unfitted") else {}).items():
            sec.paragraphs.append(f"Not measured for {name}: {why}")
        sec.figures.append(("policy_regret", plot_regret_curves(result.rows, fits), "Regret against n"))
        out.append(sec)
    sec = ReportSection("Value estimates")
    sec.tables.append(("Per learner and size (mean over repeats)", result.value_table()))
    sec.figures.append(("policy_value", plot_value_estimates(result.rows, optimal_value=result.optimal_value),
                        "Doubly robust value estimates, +- 2 standard errors"))
    out.append(sec)
    if policy_map is not None:
        sec = ReportSection("Learned policy")
        sec.figures.append(("policy_map", plot_policy_map(policy_map), "The learned policy on a 2-D view of the covariates"))
        out.append(sec)
    return out
