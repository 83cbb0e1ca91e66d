"""Figures for intrinsic-dimension results. They draw finished results and never recompute estimates."""

from __future__ import annotations

import numpy as np

__all__ = ["plot_dimension_profile", "plot_dimension_estimates"]

_COLORS = {"mle": "C0", "twonn": "C1", "lpca": "C2", "corr": "C3"}
_LABELS = {"mle": "MLE (Levina-Bickel)", "twonn": "TwoNN", "lpca": "local PCA", "corr": "correlation dim."}


def _axes(ax, figsize=(6.0, 4.0)):
    import matplotlib.pyplot as plt

    if ax is None:
        fig, ax = plt.subplots(figsize=figsize)
    return ax.figure, ax


def _profile_of(obj):
    profile = getattr(obj, "profile", obj)
    if profile is None or not hasattr(profile, "scale"):
        raise ValueError(
            "plot_dimension_profile needs a DimensionProfile or a DimensionReport that holds one; got "
            f"{type(obj).__name__} without a profile. Call dimension_profile(X) or estimate_dimension(X) first."
        )
    return profile


def plot_dimension_profile(profile_or_report, ax=None, *, true_dimension=None, x="scale"):
    """Dimension estimate against neighbourhood scale, one line per estimator, with interval bands.

    Parameters
    ----------
    profile_or_report : DimensionProfile or DimensionReport
    ax : matplotlib Axes, optional
        Drawn into when given; otherwise a new figure is made.
    true_dimension : float, optional
        Draws a reference line (for synthetic data with known d).
    x : {"scale", "radius"}
        Horizontal axis: neighbour count k (log scale) or median neighbour distance at that scale.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if x not in ("scale", "radius"):
        raise ValueError(f"x must be 'scale' or 'radius'; got {x!r}.")
    profile = _profile_of(profile_or_report)
    fig, ax = _axes(ax)
    names = list(dict.fromkeys(profile.estimator))
    for name in names:
        mask = profile.rows(name)
        xs = np.asarray(getattr(profile, x))[mask].astype(float)
        order = np.argsort(xs)
        xs = xs[order]
        d = np.asarray(profile.dimension)[mask][order]
        lo = np.asarray(profile.lower, dtype=float)[mask][order]
        hi = np.asarray(profile.upper, dtype=float)[mask][order]
        color = _COLORS.get(name)
        ax.plot(xs, d, "o-", color=color, label=_LABELS.get(name, name))
        if np.all(np.isfinite(lo)) and np.all(np.isfinite(hi)):
            ax.fill_between(xs, lo, hi, color=color, alpha=0.2, linewidth=0)
    if x == "scale" and all(np.isfinite(profile.plateau)):
        ax.axvspan(profile.plateau[0], profile.plateau[1], color="0.85", zorder=0, label="plateau")
    if true_dimension is not None:
        ax.axhline(true_dimension, color="k", linestyle="--", linewidth=1, label=f"true d = {true_dimension:g}")
    ax.set_xscale("log")
    if x == "scale":  # label the neighbour counts themselves; minor labels like 3x10^0 collide
        from matplotlib.ticker import NullFormatter

        ticks = np.unique(np.asarray(profile.scale, dtype=float))
        ax.set_xticks(ticks)
        ax.set_xticklabels([f"{t:g}" for t in ticks])
        ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("neighbour count k" if x == "scale" else "median neighbour distance")
    ax.set_ylabel("estimated dimension")
    ax.set_title(f"Dimension profile ({profile.level:.0%} bootstrap bands, n = {profile.n_samples})")
    ax.legend(loc="best", fontsize="small")
    return fig


def plot_dimension_estimates(report, ax=None, *, true_dimension=None):
    """Per-estimator values with their intervals (where the method gives one) and the consensus line.

    Parameters
    ----------
    report : DimensionReport
    ax : matplotlib Axes, optional
    true_dimension : float, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    estimates = getattr(report, "estimates", None)
    if not estimates:
        raise ValueError(
            "plot_dimension_estimates needs a DimensionReport with at least one estimate; got "
            f"{type(report).__name__}. Call estimate_dimension(X) first."
        )
    fig, ax = _axes(ax)
    pos = np.arange(len(estimates))
    for i, e in enumerate(estimates):
        color = _COLORS.get(e.estimator, "C7")
        ax.bar(i, e.dimension, color=color, alpha=0.6, width=0.6)
        if np.isfinite(e.lower) and np.isfinite(e.upper):
            ax.errorbar(i, e.dimension, yerr=[[e.dimension - e.lower], [e.upper - e.dimension]], color="k",
                        capsize=4, linewidth=1)
    ax.axhline(report.consensus, color="k", linewidth=1.5, label=f"consensus {report.consensus:.2f}")
    if true_dimension is not None:
        ax.axhline(true_dimension, color="k", linestyle="--", linewidth=1, label=f"true d = {true_dimension:g}")
    ax.set_xticks(pos)
    ax.set_xticklabels([_LABELS.get(e.estimator, e.estimator) for e in estimates], rotation=15)
    ax.set_ylabel("estimated dimension")
    ax.set_title(f"Intrinsic dimension by estimator (n = {report.n_samples})")
    ax.legend(loc="best", fontsize="small")
    return fig
