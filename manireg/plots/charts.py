"""Figures for the chart geometry: spectra, N(r), reach and curvature histograms, the 2-D view.

Every function takes result objects (plus ``ax=``) and returns the matplotlib Figure; nothing is
recomputed here.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "plot_spectra",
    "plot_chart_counts",
    "plot_reach",
    "plot_curvature",
    "plot_embedding",
]


def _axes(ax):
    if ax is None:
        import matplotlib.pyplot as plt

        fig, ax = plt.subplots(figsize=(5.0, 3.6))
        return fig, ax
    return ax.figure, ax


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
    ax.fill_between(comps, lo, hi, alpha=0.3, label="10-90% of charts")
    ax.plot(comps, med, "o-", label="median")
    ax.axvline(summary.dimension + 0.5, color="k", ls="--", lw=1, label=f"d = {summary.dimension}")
    ax.set_yscale("log")
    positive = S[S > 0]
    if positive.size:  # numerically zero ratios (beyond the neighbourhood's rank) would stretch the axis to 1e-30
        ax.set_ylim(bottom=max(positive.min(), 1e-6 * positive.max()) / 2)
    ax.set_xlabel("principal component")
    ax.set_ylabel("explained variance ratio")
    ax.set_title(f"{summary.n_charts} charts, radius {summary.radius:.3g}")
    ax.legend(fontsize=8)
    return fig


def plot_chart_counts(counts, *, ax=None):
    """N(r) against r on log-log axes with the fitted line over the fit range.

    Parameters
    ----------
    counts : ChartCounts
    ax : matplotlib Axes, optional
    """
    fig, ax = _axes(ax)
    r = np.asarray(counts.radii)
    N = np.asarray(counts.counts)
    mask = np.asarray(counts.fit_mask, dtype=bool)
    ax.loglog(r, N, "o", mfc="none", label="N(r)")
    ax.loglog(r[mask], N[mask], "o", label="in fit")
    if np.isfinite(counts.slope) and mask.any():
        rr = np.geomspace(r[mask].min(), r[mask].max(), 20)
        ax.loglog(rr, np.exp(counts.intercept) * rr**counts.slope, "-", label=f"slope {counts.slope:.2f}")
    from matplotlib.ticker import NullFormatter

    ax.xaxis.set_minor_formatter(NullFormatter())  # minor labels like 3x10^-1 collide
    ax.set_xlabel("chart radius r")
    ax.set_ylabel("number of charts N(r)")
    ax.legend(fontsize=8)
    return fig


def plot_reach(reach, *, ax=None, bins: int = 40):
    """Histogram of the per-point reach values, with the reported reach and the recommended radius.

    Parameters
    ----------
    reach : ReachEstimate
    ax : matplotlib Axes, optional
    """
    fig, ax = _axes(ax)
    v = np.asarray(reach.per_point)
    v = v[np.isfinite(v)]
    if v.size:
        hi = np.quantile(v, 0.95)
        ax.hist(np.clip(v, None, hi), bins=bins, alpha=0.7, label="per-point minimum (clipped at 95%)")
    label = "infimum" if reach.quantile is None else f"{reach.quantile:g}-quantile"
    if np.isfinite(reach.reach):
        ax.axvline(reach.reach, color="k", lw=1.5, label=f"reach ({label}) {reach.reach:.3g}")
        ax.axvline(reach.recommended_radius, color="C3", ls="--", lw=1, label=f"chart radius {reach.recommended_radius:.3g}")
    ax.set_xlabel("|y - x|^2 / (2 dist(y - x, T_x))")
    ax.set_ylabel("base points")
    ax.legend(fontsize=8)
    return fig


def plot_curvature(curvature, *, ax=None, bins: int = 40):
    """Histogram of the largest principal curvature over landmarks, with its quartiles.

    Parameters
    ----------
    curvature : CurvatureReport
    ax : matplotlib Axes, optional
    """
    fig, ax = _axes(ax)
    c = np.asarray(curvature.curvatures)
    ax.hist(c, bins=bins, alpha=0.7)
    for key, ls in (("q25", ":"), ("q50", "-"), ("q75", ":")):
        ax.axvline(curvature.quantiles[key], color="k", ls=ls, lw=1)
    ax.set_xlabel("largest principal curvature")
    ax.set_ylabel("landmarks")
    ax.set_title(f"median {curvature.median:.3g}, 1/q95 = {curvature.curvature_radius:.3g}")
    return fig


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
        ax.scatter(xy[:, 0], xy[:, 1], s=s, color="C0")
    else:
        v = np.asarray(values)
        if v.shape[0] != xy.shape[0]:
            raise ValueError(
                f"plot_embedding: 'values' has {v.shape[0]} entries but the embedding has {xy.shape[0]} points; "
                "pass one value per row of X."
            )
        cmap = {"chart": "tab20", "dimension": "viridis", "target": "coolwarm"}[kind]
        sc = ax.scatter(xy[:, 0], xy[:, 1], c=v, s=s, cmap=cmap)
        if kind != "chart":
            fig.colorbar(sc, ax=ax, label={"dimension": "local dimension", "target": "target"}[kind])
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_title(f"{embedding.method.upper()} view (for viewing only)")
    return fig
