"""Figures for intrinsic-dimension results. They draw finished results and never recompute estimates."""

from __future__ import annotations

import numpy as np

from .. import style
from ._common import new_axes, styled

__all__ = ["plot_dimension_profile", "plot_dimension_estimates", "plot_dimension_calibration"]


def _axes(ax, figsize=(6.2, 4.0)):
    return new_axes(ax, figsize)


def _profile_of(obj):
    profile = getattr(obj, "profile", obj)
    if profile is None or not hasattr(profile, "scale"):
        raise ValueError(
            "plot_dimension_profile needs a DimensionProfile or a DimensionReport that holds one; got "
            f"{type(obj).__name__} without a profile. Call dimension_profile(X) or estimate_dimension(X) first."
        )
    return profile


@styled
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
        st = style.estimator_style(name)
        color = st["color"]
        ax.plot(xs, d, "-", marker=st["marker"], ms=5, color=color, label=st["label"])
        if np.all(np.isfinite(lo)) and np.all(np.isfinite(hi)):
            ax.fill_between(xs, lo, hi, **style.reference_line("band", color))
    if x == "scale" and all(np.isfinite(profile.plateau)):
        ax.axvspan(profile.plateau[0], profile.plateau[1], color="#eceef2", zorder=0, label="window")
    if true_dimension is not None:
        ax.axhline(true_dimension, **style.reference_line("truth"), label=f"true d = {style.fmt_number(true_dimension)}")
    ax.set_xscale("log")
    if x == "scale":  # label the neighbour counts themselves; minor labels like 3x10^0 collide
        from matplotlib.ticker import NullFormatter

        ticks = np.unique(np.asarray(profile.scale, dtype=float))
        ax.set_xticks(ticks)
        ax.set_xticklabels([f"{t:g}" for t in ticks])
        ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("neighbour count k" if x == "scale" else "median neighbour distance")
    ax.set_ylabel("estimated dimension")
    ax.set_title(f"Dimension profile, n = {profile.n_samples}\n({profile.level:.0%} bands: "
                 f"{getattr(profile, 'interval_kind', 'bootstrap')})", fontsize=9)
    ax.legend(loc="best")
    return fig


@styled
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
        st = style.estimator_style(e.estimator)
        ax.bar(i, e.dimension, color=st["color"], alpha=0.55, width=0.6, edgecolor=st["color"], linewidth=1.2)
        ax.plot([i], [e.dimension], linestyle="none", marker=st["marker"], color=st["color"], ms=7,
                markeredgecolor="white", markeredgewidth=0.7)
        if np.isfinite(e.lower) and np.isfinite(e.upper):
            ax.errorbar(i, e.dimension, yerr=[[e.dimension - e.lower], [e.upper - e.dimension]], color=style.INK,
                        capsize=4, linewidth=1)
    cons = style.estimator_style("consensus")
    ax.axhline(report.consensus, color=cons["color"], linewidth=1.5, label=f"consensus {style.fmt_number(report.consensus)}")
    if true_dimension is not None:
        ax.axhline(true_dimension, **style.reference_line("truth"), label=f"true d = {style.fmt_number(true_dimension)}")
    ax.set_xticks(pos)
    ax.set_xticklabels([style.estimator_style(e.estimator)["short"] for e in estimates])
    ax.grid(False, axis="x")
    ax.set_ylabel("estimated dimension")
    ax.set_title(f"Intrinsic dimension by estimator (n = {report.n_samples})")
    ax.legend(loc="best")
    return fig


@styled
def plot_dimension_calibration(table_or_report, ax=None, *, estimator="mle", scales=None, raw=None):
    """The calibration curves: raw estimate against the true d of the reference samples, one line per scale.

    Parameters
    ----------
    table_or_report : CalibrationTable or DimensionReport (its ``calibration``)
    ax : matplotlib Axes, optional
    estimator : {"mle", "twonn"}
        Which estimator's curves to draw ("twonn": the generalised ratio at each scale).
    scales : sequence of int, optional
        Scales to draw (default: all of the table's, TwoNN's scale 2 included).
    raw : float, optional
        A raw estimate to mark with its calibrated value (dotted lines), e.g. a report's ``raw_consensus``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    table = getattr(table_or_report, "calibration", table_or_report)
    if table is None or not hasattr(table, "d_grid"):
        raise ValueError(
            "plot_dimension_calibration needs a CalibrationTable or a DimensionReport that holds one; got "
            f"{type(table_or_report).__name__} without a calibration. Call estimate_dimension(X) (calibrate=True) "
            "or calibration_table(n, scales) first."
        )
    if estimator not in table.values:
        raise ValueError(f"estimator must be one of {tuple(table.values)}; got {estimator!r}.")
    fig, ax = _axes(ax)
    ks = [k for k in (table.scales if scales is None else scales) if k in table.scales]
    if estimator == "mle":
        ks = [k for k in ks if k >= 3]
    grid = np.asarray(table.d_grid, dtype=float)
    ax.plot(grid, grid, color="#999999", linewidth=1.0, linestyle="--", label="no bias")
    cmap = __import__("matplotlib").colormaps["viridis"]
    for i, k in enumerate(ks):
        ref, _ = table.curve(estimator, k)
        ax.plot(grid, ref, marker="o", markersize=3, color=cmap(i / max(len(ks) - 1, 1)), label=f"k = {k}")
    if raw is not None and ks:
        k = ks[len(ks) // 2]
        d = table.calibrate(estimator, k, raw)
        ax.axhline(raw, color="#c0392b", linestyle=":", linewidth=1.0)
        ax.axvline(d, color="#c0392b", linestyle=":", linewidth=1.0, label=f"raw {raw:.2f} -> {d:.2f} (k = {k})")
    ax.set_xlabel("true dimension d of the reference sample")
    ax.set_ylabel(f"raw {estimator} estimate")
    ax.set_title(f"Calibration ({table.reference}, n = {table.n_reference})")
    ax.legend(fontsize=8)
    return fig
