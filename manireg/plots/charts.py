"""Figures for the chart geometry: spectra, N(r), reach and curvature histograms, the 2-D view.

Every function takes result objects (plus ``ax=``) and returns the matplotlib Figure; nothing is
recomputed here.
"""

from __future__ import annotations

import numpy as np

from .. import style
from ._common import log_ticks, new_axes, styled

__all__ = [
    "plot_spectra",
    "plot_chart_counts",
    "plot_reach",
    "plot_curvature",
    "plot_embedding",
]


def _axes(ax):
    return new_axes(ax, (5.2, 3.7))


def _chart_cmap():
    """A categorical map of our own colours for chart labels (learners, estimators, reserve)."""
    from matplotlib.colors import ListedColormap

    colours = [v["color"] for v in style.LEARNER_STYLES.values()]
    colours += [v["color"] for k, v in style.ESTIMATOR_STYLES.items() if k != "consensus"]
    colours += [v["color"] for v in style.RESERVE_STYLES]
    return ListedColormap(colours, name="manireg_charts")


def _target_cmap():
    """Diverging blue to warm orange through a light neutral (a blue-orange axis stays apart under
    red-green colour-vision deficiency)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("manireg_target", ["#1d3675", "#6f8fc9", "#f1eee8", "#e5a05a", "#9a4a12"])


@styled
def plot_spectra(summary, *, ax=None):
    """Explained-variance spectra of the charts: median and 10-90% band per component, d marked.

    Parameters
    ----------
    summary : AtlasSummary (``ChartAtlas.summary()``)
    ax : matplotlib Axes, optional
    """
    fig, ax = _axes(ax)
    S = np.asarray(summary.spectra)
    comps = np.arange(1, S.shape[1] + 1)
    med = np.median(S, axis=0)
    lo, hi = np.quantile(S, [0.1, 0.9], axis=0)
    ax.fill_between(comps, lo, hi, **style.reference_line("band", style.ACCENT), label="10-90% of charts")
    ax.plot(comps, med, "-", marker="o", ms=4, color=style.ACCENT, label="median")
    ax.axvline(summary.dimension + 0.5, **style.reference_line("truth"), label=f"d = {summary.dimension} (used)")
    ax.set_yscale("log")
    positive = S[S > 0]
    if positive.size:  # numerically zero ratios (beyond the neighbourhood's rank) would stretch the axis to 1e-30
        ax.set_ylim(bottom=max(positive.min(), 1e-6 * positive.max()) / 2)
    ax.set_xlabel("principal component")
    ax.set_ylabel("explained variance ratio")
    ax.set_title(f"{summary.n_charts} charts, radius {style.fmt_number(summary.radius)}")
    ax.legend()
    return fig


@styled
def plot_chart_counts(counts, *, ax=None):
    """N(r) against r on log-log axes with the fitted line over the fit range.

    The legend gives the dimension-like slope -d log N / d log r (positive, about d on a manifold) as a
    diagnostic: it has no interval.

    Parameters
    ----------
    counts : ChartCounts
    ax : matplotlib Axes, optional
    """
    fig, ax = _axes(ax)
    r = np.asarray(counts.radii)
    N = np.asarray(counts.counts)
    mask = np.asarray(counts.fit_mask, dtype=bool)
    ax.loglog(r, N, "o", mfc="none", color=style.MUTED, label="N(r)")
    ax.loglog(r[mask], N[mask], "o", color=style.ACCENT, label="in the fit range")
    if np.isfinite(counts.slope) and mask.any():
        rr = np.geomspace(r[mask].min(), r[mask].max(), 20)
        ax.loglog(rr, np.exp(counts.intercept) * rr**counts.slope, **style.reference_line("fit", style.ACCENT),
                  label=f"dimension-like slope {-counts.slope:.2f} (diagnostic, no interval)")
    log_ticks(ax)
    ax.set_xlabel("chart radius r")
    ax.set_ylabel("charts needed N(r)")
    ax.legend()
    return fig


@styled
def plot_reach(reach, *, ax=None, bins: int = 40, chart_radius=None):
    """Histogram of the per-point reach values, with the reported reach and the chart radius.

    Parameters
    ----------
    reach : ReachEstimate
    ax : matplotlib Axes, optional
    chart_radius : float, AtlasSummary or ChartAtlas, optional
        The chart radius actually used (``GeometrySummary.atlas``, or its ``radius``). Without it the line
        is the radius the reach suggests (``reach.recommended_radius``) and is labelled so.
    """
    fig, ax = _axes(ax)
    v = np.asarray(reach.per_point)
    v = v[np.isfinite(v)]
    if v.size:
        hi = np.quantile(v, 0.95)
        ax.hist(np.clip(v, None, hi), bins=bins, color=style.ACCENT, alpha=0.55, label="per-point minimum (clipped at 95%)")
    label = "infimum" if reach.quantile is None else f"{reach.quantile:g}-quantile"
    used = getattr(chart_radius, "radius_", getattr(chart_radius, "radius", chart_radius))
    if np.isfinite(reach.reach):
        ax.axvline(reach.reach, color=style.INK, lw=1.5, label=f"reach ({label}) {style.fmt_number(reach.reach)}")
    if used is not None and np.isfinite(float(used)):
        ax.axvline(float(used), **style.reference_line("predicted", "#a0523a"), label=f"chart radius used {style.fmt_number(used)}")
    elif np.isfinite(reach.recommended_radius):
        ax.axvline(reach.recommended_radius, **style.reference_line("predicted", "#a0523a"),
                   label=f"radius the reach suggests ({reach.radius_factor:g} x reach) {style.fmt_number(reach.recommended_radius)}")
    ax.set_xlabel("|y - x|^2 / (2 dist(y - x, T_x))")
    ax.set_ylabel("base points")
    ax.legend()
    return fig


@styled
def plot_curvature(curvature, *, ax=None, bins: int = 40):
    """Histogram of the largest principal curvature over landmarks, with its quartiles.

    Parameters
    ----------
    curvature : CurvatureReport
    ax : matplotlib Axes, optional
    """
    fig, ax = _axes(ax)
    c = np.asarray(curvature.curvatures)
    ax.hist(c, bins=bins, color=style.ACCENT, alpha=0.55)
    for key, ls, name in (("q25", (0, (1.2, 2.4)), "quartiles"), ("q50", "-", "median"), ("q75", (0, (1.2, 2.4)), None)):
        ax.axvline(curvature.quantiles[key], color=style.INK, ls=ls, lw=1.1, label=name)
    ax.set_xlabel("largest principal curvature")
    ax.set_ylabel("landmarks")
    ax.set_title(f"median {style.fmt_number(curvature.median)}, 1/q95 = {style.fmt_number(curvature.curvature_radius)}")
    ax.legend()
    return fig


@styled
def plot_embedding(embedding, values=None, *, kind: str = "target", ax=None, s: float = 4.0):
    """The 2-D view coloured by chart, local dimension or target (for viewing only).

    Parameters
    ----------
    embedding : Embedding2D
    values : (n,) array, optional
        What to colour by: ``ChartAtlas.assignments_`` (kind="chart"), per-point local dimension estimates
        (kind="dimension") or the target y (kind="target").
    kind : {"chart", "dimension", "target"}
        Picks the colour map and the colour-bar label.
    ax : matplotlib Axes, optional
    """
    if kind not in ("chart", "dimension", "target"):
        raise ValueError(f"the 'kind' parameter of plot_embedding must be 'chart', 'dimension' or 'target'; got {kind!r}.")
    fig, ax = _axes(ax)
    xy = np.asarray(embedding.coords)
    if values is None:
        ax.scatter(xy[:, 0], xy[:, 1], s=s, color=style.ACCENT)
    else:
        v = np.asarray(values)
        if v.shape[0] != xy.shape[0]:
            raise ValueError(
                f"plot_embedding: 'values' has {v.shape[0]} entries but the embedding has {xy.shape[0]} points; "
                "pass one value per row of X."
            )
        # cividis: a map designed to read the same under red-green colour-vision deficiency
        cmap = {"chart": _chart_cmap, "dimension": lambda: "cividis", "target": _target_cmap}[kind]()
        if kind == "chart":
            v = np.mod(v, cmap.N)  # chart labels cycle through the categorical colours
        limits = {"vmin": -0.5, "vmax": cmap.N - 0.5} if kind == "chart" else {}
        sc = ax.scatter(xy[:, 0], xy[:, 1], c=v, s=s, cmap=cmap, **limits)
        if kind != "chart":
            fig.colorbar(sc, ax=ax, label={"dimension": "local dimension", "target": "target"}[kind])
    ax.set_xticks([])
    ax.set_yticks([])
    ax.grid(False)
    ax.set_title(f"{embedding.method.upper()} view (for viewing only)")
    return fig
