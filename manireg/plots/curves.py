"""Learning-curve figures: every repeat's point, per-size means, fitted and predicted lines, flagged cells."""

from __future__ import annotations

import numpy as np

__all__ = ["plot_learning_curves", "plot_local_slopes"]

_LIMITED = ("step_cap", "time_cap")


def _axes(ax, figsize=(6.4, 4.6)):
    import matplotlib.pyplot as plt

    if ax is None:
        fig, ax = plt.subplots(figsize=figsize)
    else:
        fig = ax.figure
    return fig, ax


def _plain_log_ticks(ax):
    """Label only the decades of a log axis (minor labels like 3x10^2 collide on short ranges)."""
    from matplotlib.ticker import NullFormatter

    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.yaxis.set_minor_formatter(NullFormatter())


def _fit_label(fit) -> str:
    lo, hi = fit.interval
    if not np.isfinite(fit.exponent):
        return f"{fit.learner}: no exponent ({fit.verdict})"
    return f"{fit.learner}: slope {fit.exponent:.2f} [{lo:.2f}, {hi:.2f}], {fit.verdict}"


def plot_learning_curves(rows, fits=None, *, metric: str = "test_mse", ax=None, show_predicted: bool = True, title: str | None = None):
    """Held-out error against n on log-log axes.

    Parameters
    ----------
    rows : DataFrame of campaign rows (columns learner, n, repeat, ``metric``, status, stop_reason, late_best).
    fits : ExponentTable, dict of ExponentFit or None
        Fitted curves to draw; each legend entry carries the exponent, its interval and its verdict.
    show_predicted : draw the predicted slope 2s/(2s+d) (from the fit) anchored at the smallest size.
    """
    fig, ax = _axes(ax)
    import matplotlib.pyplot as plt

    ok = rows[rows.get("status", "ok") == "ok"] if "status" in rows else rows
    learners = list(dict.fromkeys(ok["learner"]))
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    fit_map = {} if fits is None else (dict(fits.fits) if hasattr(fits, "fits") else dict(fits))
    for i, learner in enumerate(learners):
        c = colours[i % len(colours)]
        sub = ok[ok["learner"] == learner]
        vals = sub[metric].to_numpy(dtype=float)
        good = np.isfinite(vals) & (vals > 0)
        ax.scatter(sub["n"][good], vals[good], s=12, alpha=0.45, color=c, edgecolors="none")
        limited = np.zeros(len(sub), bool)
        if "stop_reason" in sub:
            limited |= sub["stop_reason"].isin(_LIMITED).to_numpy()
        if "late_best" in sub:
            limited |= sub["late_best"].fillna(False).astype(bool).to_numpy()
        if limited.any():
            ax.scatter(sub["n"][limited & good], vals[limited & good], s=46, marker="x", color="crimson", linewidths=1.2,
                       label="optimisation-limited cell" if i == 0 or not ax.get_legend_handles_labels()[1].count("optimisation-limited cell") else None)
        means = sub[good].groupby("n")[metric].mean()
        fit = fit_map.get(learner)
        label = _fit_label(fit) if fit is not None else learner
        ax.plot(means.index, means.values, "o", color=c, ms=5, label=label)
        if fit is not None and np.isfinite(fit.exponent):
            grid = np.geomspace(fit.n_range[0], fit.n_range[1], 100)
            ax.plot(grid, fit.predict(grid), "-", color=c, lw=1.6)
            if fit.floor and fit.floor > 0:
                ax.axhline(fit.floor, color=c, lw=0.8, ls=":", alpha=0.7)
            if show_predicted and fit.predicted_exponent is not None:
                b = float(np.mean(fit.predicted_exponent))
                n0 = float(means.index[0])
                excess0 = max(float(means.values[0]) - fit.floor, 1e-300)
                ax.plot(grid, fit.floor + excess0 * (grid / n0) ** (-b), "--", color=c, lw=1.0, alpha=0.8,
                        label=f"{learner}: predicted slope {b:.2f}")
    ax.set_xscale("log")
    ax.set_yscale("log")
    _plain_log_ticks(ax)
    ax.set_xlabel("training samples n")
    ax.set_ylabel({"test_mse": "held-out MSE", "test_mse_clean": "MSE against the noise-free target"}.get(metric, metric))
    ax.set_title(title or "Learning curves")
    ax.grid(True, which="both", alpha=0.25)
    ax.legend(fontsize=7, loc="best")
    return fig


def plot_local_slopes(fits, ax=None):
    """Local slopes between successive sizes for each fit, with the fitted exponent's interval as a band."""
    fig, ax = _axes(ax, figsize=(6.4, 3.6))
    fit_list = list(fits.fits.values()) if hasattr(fits, "fits") else list(fits)
    for fit in fit_list:
        if not fit.local_slopes:
            continue
        mid = [np.sqrt(s["n_lo"] * s["n_hi"]) for s in fit.local_slopes]
        slope = [s["slope"] for s in fit.local_slopes]
        line, = ax.plot(mid, slope, "o-", label=fit.learner)
        if np.all(np.isfinite(fit.interval)):
            ax.axhspan(fit.interval[0], fit.interval[1], color=line.get_color(), alpha=0.12)
    ax.set_xscale("log")
    _plain_log_ticks(ax)
    ax.set_xlabel("n (geometric midpoint of successive sizes)")
    ax.set_ylabel("local slope of the excess error")
    ax.set_title("Local slopes (a single power law keeps them level)")
    ax.grid(True, alpha=0.3)
    if fit_list:
        ax.legend(fontsize=7)
    return fig
