"""Rate-tracking figure: each learner's measured exponents against its predicted ones, with the y = x line."""

from __future__ import annotations

import numpy as np

__all__ = ["plot_rate_tracking"]

_MARKERS = {2: "o", 3: "s", 4: "^", 5: "D", 1: "v"}


def plot_rate_tracking(result, *, ax=None, title: str | None = None):
    """Measured exponent (with its interval) against the predicted exponent, one colour per learner and one
    marker per d; the kNN band for s > 1 as a horizontal bar; y = x dashed; each learner's fitted slope in
    the legend. ``result`` is a :class:`manireg.curves.tracking.TrackingResult`."""
    import matplotlib.pyplot as plt

    if ax is None:
        fig, ax = plt.subplots(figsize=(5.6, 5.0))
    else:
        fig = ax.figure
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    rows = result.table
    learners = list(dict.fromkeys(r["learner"] for r in rows))
    for i, name in enumerate(learners):
        c = colours[i % len(colours)]
        mine = [r for r in rows if r["learner"] == name]
        f = result.slopes.get(name, {})
        lo, hi = f.get("interval", (np.nan, np.nan))
        label = f"{name}: slope {f.get('slope', np.nan):.2f} [{lo:.2f}, {hi:.2f}]"
        for j, r in enumerate(mine):
            x, y = r["predicted_exponent"], r["exponent"]
            ax.errorbar(x, y, yerr=[[y - r["exponent_lo"]], [r["exponent_hi"] - y]], color=c,
                        marker=_MARKERS.get(int(r["dimension"]), "o"), ms=6, capsize=3, ls="none",
                        label=label if j == 0 else None)
            if r["predicted_hi"] > x:
                ax.plot([x, r["predicted_hi"]], [y, y], color=c, lw=1, alpha=0.5)
            ax.annotate(f"d={r['dimension']:g}, s={r['smoothness']:g}", (x, y), textcoords="offset points",
                        xytext=(4, -10), fontsize=7, color=c)
    vals = [v for r in rows for v in (r["predicted_hi"], r["exponent_lo"], r["exponent_hi"]) if np.isfinite(v)]
    top = max(vals + [0.1]) * 1.1
    ax.plot([0, top], [0, top], "k--", lw=1, label="measured = predicted")
    ax.set_xlim(0, top)
    ax.set_ylim(min(0, min(vals + [0])), top)
    ax.set_xlabel("predicted exponent")
    ax.set_ylabel("measured exponent (noise-free test error)")
    ax.set_title(title or f"rate tracking: {result.manifold} in R^{result.ambient_dim}")
    ax.legend(fontsize=8, loc="upper left")
    fig.tight_layout()
    return fig
