"""Learning-curve figures: every repeat's point, per-size means, fitted and predicted lines, flagged cells."""

from __future__ import annotations

import numpy as np

from .. import style
from ._common import log_ticks, new_axes, styled

__all__ = ["plot_learning_curves", "plot_local_slopes", "fit_legend_label"]

_LIMITED = ("step_cap", "time_cap")
_LIMITED_LABEL = "stopped at the step or time limit, or best step late"


def fit_legend_label(fit) -> str:
    """Legend text of a fitted curve: the learner, the exponent with its interval and the verdict."""
    return f"{fit.learner}: {style.exponent_text(fit)}"


def _fit_map(fits):
    if fits is None:
        return {}
    if hasattr(fits, "fits"):
        return dict(fits.fits)
    if isinstance(fits, dict):
        return dict(fits)
    return {f.learner: f for f in fits}


@styled
def plot_learning_curves(rows, fits=None, *, metric: str = "test_mse", ax=None, show_predicted: bool = True,
                         show_ambient: bool = True, title: str | None = None):
    """Held-out error against n on log-log axes.

    Colours and markers are the learners' fixed ones (:func:`manireg.style.learner_style`), so a learner
    looks the same whatever else is drawn.

    Parameters
    ----------
    rows : DataFrame of campaign rows (columns learner, n, repeat, ``metric``, status, stop_reason, late_best).
    fits : ExponentTable, dict or list of ExponentFit, or None
        Fitted curves to draw; each legend entry reads "exponent 0.52 [0.47, 0.57], measured".
    show_predicted : draw the predicted exponent 2s/(2s+d) of each fit, anchored at its smallest size.
    show_ambient : draw the ambient exponent 2s/(2s+D) once (it is the same for every learner), anchored at
        the mean error of the smallest size.
    """
    fig, ax = new_axes(ax, (6.6, 4.6))
    ok = rows[rows["status"] == "ok"] if "status" in rows else rows
    learners = list(dict.fromkeys(ok["learner"]))
    fit_map = _fit_map(fits)
    limited_drawn = False
    ambient_drawn = False
    for learner in learners:
        st = style.learner_style(learner)
        c = st["color"]
        sub = ok[ok["learner"] == learner]
        vals = sub[metric].to_numpy(dtype=float)
        good = np.isfinite(vals) & (vals > 0)
        ax.scatter(sub["n"][good], vals[good], s=11, alpha=0.4, color=c, marker=st["marker"], edgecolors="none")
        limited = np.zeros(len(sub), bool)
        if "stop_reason" in sub:
            limited |= sub["stop_reason"].isin(_LIMITED).to_numpy()
        if "late_best" in sub:
            limited |= sub["late_best"].astype("boolean").fillna(False).astype(bool).to_numpy()
        if (limited & good).any():
            m = style.LIMITED_MARK
            ax.scatter(sub["n"][limited & good], vals[limited & good], s=m["size"], marker=m["marker"], color=m["color"],
                       linewidths=m["linewidth"], label=None if limited_drawn else _LIMITED_LABEL, zorder=4)
            limited_drawn = True
        means = sub[good].groupby("n")[metric].mean()
        if not len(means):
            continue
        fit = fit_map.get(learner)
        label = fit_legend_label(fit) if fit is not None else learner
        ax.plot(means.index, means.values, linestyle="none", marker=st["marker"], color=c, ms=6,
                markeredgecolor="white", markeredgewidth=0.6, label=label, zorder=3)
        if fit is None or not np.isfinite(fit.exponent):
            continue
        grid = np.geomspace(fit.n_range[0], fit.n_range[1], 100)
        ax.plot(grid, fit.predict(grid), **style.reference_line("fit", c))
        if fit.floor and fit.floor > 0:
            ax.axhline(fit.floor, **style.reference_line("floor", c))
        n0 = float(means.index[0])
        excess0 = max(float(means.values[0]) - (fit.floor or 0.0), 1e-300)
        if show_predicted and fit.predicted_exponent is not None:
            b = float(np.mean(fit.predicted_exponent))
            ax.plot(grid, fit.floor + excess0 * (grid / n0) ** (-b), **style.reference_line("predicted", c),
                    label=f"{learner}: {style.predicted_text(fit.predicted_exponent)}")
        if show_ambient and not ambient_drawn and fit.ambient_exponent is not None:
            b = float(np.mean(fit.ambient_exponent))
            D = f" (D = {fit.ambient_dim})" if fit.ambient_dim is not None else ""
            ax.plot(grid, fit.floor + excess0 * (grid / n0) ** (-b), **style.reference_line("ambient"),
                    label=f"ambient exponent {b:.3f}{D}")
            ambient_drawn = True
    ax.set_xscale("log")
    ax.set_yscale("log")
    log_ticks(ax)
    ax.set_xlabel("training samples n")
    ax.set_ylabel({"test_mse": "test error (MSE, held out)"}.get(metric, style.plain_label(metric)))
    ax.set_title(title or "Learning curves")
    if ax.get_legend_handles_labels()[1]:  # below the axes: the curves fill the plot area
        ax.legend(loc="upper left", bbox_to_anchor=(0.0, -0.13), ncol=1, borderaxespad=0.0)
    return fig


@styled
def plot_local_slopes(fits, ax=None):
    """Local slopes between successive sizes (a diagnostic, no interval) with each fit's exponent interval
    as a band; slopes are positive when the error falls, like the exponent."""
    fig, ax = new_axes(ax, (6.6, 3.8))
    fit_list = list(_fit_map(fits).values())
    for fit in fit_list:
        if not fit.local_slopes:
            continue
        st = style.learner_style(fit.learner)
        mid = [np.sqrt(s["n_lo"] * s["n_hi"]) for s in fit.local_slopes]
        slope = [s["slope"] for s in fit.local_slopes]
        ax.plot(mid, slope, "-", color=st["color"], marker=st["marker"], ms=5,
                label=f"{fit.learner}: local slope (diagnostic, no interval)")
        if np.all(np.isfinite(fit.interval)):
            ax.axhspan(fit.interval[0], fit.interval[1], **style.reference_line("band", st["color"]),
                       label=f"{fit.learner}: {style.exponent_text(fit)}")
    ax.set_xscale("log")
    log_ticks(ax, "x")
    ax.set_xlabel("n (geometric midpoint of successive sizes)")
    ax.set_ylabel("local slope of the excess error")
    ax.set_title("Local slopes (diagnostic): a single power law stays in the band")
    if ax.get_legend_handles_labels()[1]:
        ax.legend(loc="upper left", bbox_to_anchor=(0.0, -0.17), ncol=1, borderaxespad=0.0)
    return fig
