"""One self-contained HTML report per campaign (figures embedded as PNG) and a ``summary.json`` beside it.

The report draws only from result objects (their ``to_dict()``/``to_frame()`` and the figure functions in
:mod:`manireg.plots`); it never recomputes a number.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
import json
import os
import platform
from dataclasses import dataclass, field

from ._results import to_jsonable

__all__ = ["ReportSection", "package_versions", "write_report", "compose_report", "exponent_table_frame", "ASYMPTOTIC_NOTE"]

ASYMPTOTIC_NOTE = (
    "Predicted rates are asymptotic statements: the theory bounds the error by C n^(-2s/(2s+d)) times log "
    "factors for n large enough, with constants it does not give. A predicted slope is a reference line, not a "
    "forecast of the error at any particular n, and an observed exponent is quoted only with its interval and "
    "its verdict."
)


@dataclass
class ReportSection:
    """A titled part of the report: paragraphs, tables (DataFrames) and figures (name, Figure)."""

    title: str
    paragraphs: list = field(default_factory=list)
    tables: list = field(default_factory=list)  # (caption, DataFrame)
    figures: list = field(default_factory=list)  # (name, matplotlib Figure, caption)


def package_versions() -> dict:
    """Versions of Python and the packages a campaign's numbers depend on."""
    from importlib import metadata

    out = {"python": platform.python_version()}
    for name in ("manireg", "numpy", "scipy", "scikit-learn", "torch", "pandas", "umap-learn", "matplotlib"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight")
    return buf.getvalue()


def _table_html(frame, max_rows: int = 60) -> str:
    shown = frame.head(max_rows)
    text = shown.to_html(index=False, float_format=lambda v: f"{v:.4g}", na_rep="-", border=0, classes="tbl", escape=True)
    if len(frame) > max_rows:
        text += f"<p class='note'>{len(frame) - max_rows} more rows in summary.json.</p>"
    return text


_CSS = """
body{font-family:system-ui,-apple-system,Segoe UI,sans-serif;max-width:1100px;margin:2em auto;color:#222;line-height:1.45}
h1{font-size:1.6em}h2{border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:1.8em}
table.tbl{border-collapse:collapse;font-size:.85em;margin:.6em 0}table.tbl td,table.tbl th{padding:.2em .6em;border-bottom:1px solid #eee;text-align:right}
table.tbl th{background:#f4f4f4}figure{margin:1em 0}figcaption{font-size:.85em;color:#555}
.note{font-size:.9em;color:#555}.warn{background:#fff4e0;border-left:4px solid #e0a030;padding:.4em .8em}
"""


def write_report(out_dir: str, title: str, sections: list, summary: dict, *, save_png: bool = True) -> dict:
    """Write ``report.html`` (self-contained), ``summary.json`` and (optionally) ``figures/*.png``.

    Returns a dict with the paths written. ``summary`` must be JSON-ready (NaN is written as null).
    """
    os.makedirs(out_dir, exist_ok=True)
    fig_dir = os.path.join(out_dir, "figures")
    if save_png:
        os.makedirs(fig_dir, exist_ok=True)
    import matplotlib.pyplot as plt

    parts = [f"<!doctype html><html><head><meta charset='utf-8'><title>{html.escape(title)}</title>",
             f"<style>{_CSS}</style></head><body>", f"<h1>{html.escape(title)}</h1>",
             f"<p class='note'>Written {_dt.datetime.now().isoformat(timespec='seconds')} by manireg. "
             "Numbers: summary.json beside this file.</p>",
             f"<p class='warn'>{html.escape(ASYMPTOTIC_NOTE)}</p>"]
    figure_files = []
    for sec in sections:
        parts.append(f"<h2>{html.escape(sec.title)}</h2>")
        for p in sec.paragraphs:
            cls = " class='warn'" if p.startswith("Warning") or p.startswith("Not measured") else ""
            parts.append(f"<p{cls}>{html.escape(p)}</p>")
        for caption, frame in sec.tables:
            if caption:
                parts.append(f"<p><b>{html.escape(caption)}</b></p>")
            parts.append(_table_html(frame))
        for name, fig, caption in sec.figures:
            data = _png(fig)
            plt.close(fig)
            fname = f"{name}.png"
            if save_png:
                with open(os.path.join(fig_dir, fname), "wb") as fh:
                    fh.write(data)
            figure_files.append(fname)
            b64 = base64.b64encode(data).decode("ascii")
            parts.append(f"<figure id='fig-{html.escape(name)}'><img alt='{html.escape(caption)}' src='data:image/png;base64,{b64}' style='max-width:100%'>"
                         f"<figcaption>{html.escape(caption)}</figcaption></figure>")
    parts.append("</body></html>")
    html_path = os.path.join(out_dir, "report.html")
    with open(html_path, "w", encoding="utf-8") as fh:
        fh.write("\n".join(parts))
    summary = dict(to_jsonable(summary))
    summary["figures"] = figure_files
    summary.setdefault("note", ASYMPTOTIC_NOTE)
    json_path = os.path.join(out_dir, "summary.json")
    with open(json_path, "w", encoding="utf-8") as fh:
        json.dump(summary, fh, indent=2, allow_nan=False)
    return {"html": html_path, "summary": json_path, "figures": [os.path.join(fig_dir, f) for f in figure_files] if save_png else []}


def _text(v) -> str:
    """A value for a report table: floats with 4 significant digits, everything else as text."""
    if isinstance(v, float):
        return f"{v:.4g}"
    return str(v)


def _theory_span(t):
    if t is None:
        return None
    lo, hi = t
    return f"{lo:.3f}" if lo == hi else f"{lo:.3f} to {hi:.3f}"


def exponent_table_frame(fits):
    """The exponent table of the report: per learner the observed exponent with its interval and verdict
    beside the predicted, ambient and implied values (never an exponent alone)."""
    import pandas as pd

    rows = []
    for f in fits:
        lo, hi = f.interval
        rows.append({
            "learner": f.learner,
            "observed exponent": f.exponent,
            f"{int(round(100 * f.level))}% interval": f"[{lo:.3f}, {hi:.3f}]",
            "verdict": f.verdict,
            "predicted 2s/(2s+d)": _theory_span(f.predicted_exponent),
            "ambient 2s/(2s+D)": _theory_span(f.ambient_exponent),
            "implied d (given s)": None if f.implied_dimension is None else f"{f.implied_dimension[0]:.3g} to {f.implied_dimension[1]:.3g}",
            "implied s (given d)": None if f.implied_smoothness is None else f"{f.implied_smoothness[0]:.3g} to {f.implied_smoothness[1]:.3g}",
            "floor": f"{f.floor:.3g} ({f.floor_source})",
            "repeats": f.n_repeats,
        })
    return pd.DataFrame(rows)


def compose_report(*, title: str, data: dict, geometry=None, sizing=None, campaign=None, fits=None, plan=None,
                   plan_note: str | None = None, extrapolation=None, settings: dict | None = None,
                   true_dimension=None):
    """Turn finished result objects into report sections and the JSON summary.

    Parameters
    ----------
    data : dict describing the data (source, n, D, target, and for synthetic data the known d, s, noise).
    geometry : GeometrySummary or a dict from its ``to_dict()`` (a store holds the dict; then only tables).
    sizing : SizingTable, optional
    campaign : CampaignResult, optional
    fits : ExponentTable, optional
    plan : SamplePlan, optional; ``plan_note`` says why there is none.
    extrapolation : list of ExtrapolationCheck, optional
    settings : dict of settings and seeds.

    Returns
    -------
    (sections, summary) for :func:`write_report`.
    """
    import pandas as pd

    from . import plots

    sections = []
    summary = {"title": title, "data": data, "settings": settings or {}, "versions": package_versions()}

    sec = ReportSection("Data")
    sec.tables.append(("", pd.DataFrame([(k, _text(v)) for k, v in data.items()], columns=["item", "value"])))
    sections.append(sec)

    if geometry is not None:
        sec = ReportSection("Geometry")
        if isinstance(geometry, dict):
            summary["geometry"] = geometry
            dim = geometry.get("dimension") or {}
            sec.paragraphs.append(
                f"Intrinsic dimension (consensus): {dim.get('consensus')} ({dim.get('consensus_rule')}). "
                "Rebuilt from a store: the geometry figures are in the original report; run `manireg geometry` to redraw them.")
            est = pd.DataFrame(dim.get("estimates") or [])
            if len(est):
                sec.tables.append(("Dimension estimates", est))
            res = geometry.get("resolution") or {}
            if res.get("verdict"):
                sec.paragraphs.append(f"Resolution: {res['verdict']}")
        else:
            summary["geometry"] = geometry.to_dict()
            sec.paragraphs.append(f"Resolution: {geometry.resolution.verdict}")
            for w in geometry.dimension.warnings:
                sec.paragraphs.append(f"Warning: {w}")
            sec.tables.append(("Dimension estimates (intervals: see the kind column)", geometry.dimension.to_frame()))
            sec.tables.append(("Key figures", geometry.to_frame()))
            sec.figures.append(("dimension_profile", plots.plot_dimension_profile(geometry.dimension, true_dimension=true_dimension),
                                "Dimension estimate against neighbourhood scale, with interval bands; noise lifts small scales, curvature large ones."))
            sec.figures.append(("dimension_estimates", plots.plot_dimension_estimates(geometry.dimension, true_dimension=true_dimension),
                                "Per-estimator values with intervals and the consensus."))
            sec.figures.append(("chart_spectra", plots.plot_spectra(geometry.atlas),
                                "Explained-variance spectra of the charts (local PCA): d leading components carry the variance where the tangent picture holds."))
            sec.figures.append(("chart_counts", plots.plot_chart_counts(geometry.chart_counts),
                                "Charts needed N(r) against radius r; the slope is about -d on a manifold."))
            if geometry.reach is not None:
                sec.figures.append(("reach", plots.plot_reach(geometry.reach),
                                    "Per-point reach values (tangent-based estimator); the estimate is their infimum or the chosen quantile."))
            sec.figures.append(("curvature", plots.plot_curvature(geometry.curvature),
                                "Largest principal curvature at the chart centres."))
            if geometry.embedding is not None:
                rows = getattr(geometry.embedding, "rows", None)
                if geometry.target is not None:
                    vals = geometry.target if rows is None else geometry.target[rows]
                    sec.figures.append(("view_target", plots.plot_embedding(geometry.embedding, vals, kind="target"),
                                        "2-D view (UMAP, for viewing only) coloured by the target."))
                charts = geometry.assignments if rows is None else geometry.assignments[rows]
                sec.figures.append(("view_charts", plots.plot_embedding(geometry.embedding, charts, kind="chart"),
                                    "2-D view (UMAP, for viewing only) coloured by chart."))
        sections.append(sec)

    if sizing is not None:
        sec = ReportSection("Network sizing")
        sec.paragraphs.append(
            f"Rule for d = {sizing.d:g}, s = {sizing.s:g}, D = {sizing.input_dim}: depth ~ log n, width ~ n^(d/(2s+d)), "
            "nonzero weights ~ n^(d/(2s+d)) log n; constants and bounds are those of SizingConstants.")
        sec.tables.append(("", sizing.to_frame()))
        sec.paragraphs.extend(f"{k}: {v}" for k, v in sizing.specs[-1].rules.items())
        sec.figures.append(("sizing", plots.plot_sizing(sizing), "Parameter count and predicted error against n."))
        summary["sizing"] = sizing.to_frame().to_dict(orient="records")
        sections.append(sec)

    if campaign is not None:
        sec = ReportSection("Learning curves")
        rows = campaign.rows
        ok = rows[rows["status"] == "ok"] if "status" in rows else rows
        failed = rows[rows["status"] == "failed"] if "status" in rows else rows.iloc[:0]
        sec.paragraphs.append(
            f"{len(ok)} finished cells ({len(failed)} failed) over sizes {sorted(set(int(v) for v in ok['n']))}, "
            f"learners {sorted(set(ok['learner']))}; d = {campaign.dimension:g} ({campaign.dimension_source}), s = {campaign.smoothness:g}, D = {campaign.ambient_dim}.")
        if len(failed):
            sec.tables.append(("Failed cells", failed[["learner", "n", "repeat", "error"]]))
        summary["campaign"] = campaign.to_dict()
        summary["rows"] = ok.drop(columns=[c for c in ("config_json",) if c in ok]).to_dict(orient="records")
        if fits is not None and len(fits):
            for f in fits:
                text = f"{f.learner}: {f.verdict}. {f.verdict_reason}"
                sec.paragraphs.append(text if f.verdict == "measured" else "Not measured - " + text)
            sec.tables.append(("Exponents (observed with interval and verdict; predicted; ambient; implied)", exponent_table_frame(fits)))
            slopes = [dict(learner=f.learner, **s) for f in fits for s in f.local_slopes]
            if slopes:
                sec.tables.append(("Local slopes between successive sizes", pd.DataFrame(slopes)))
            limited = [dict(learner=f.learner, **c) for f in fits for c in f.optimisation_limited]
            sec.tables.append(("Optimisation-limited cells (stopped at a cap, or best step late in the budget)",
                               pd.DataFrame(limited) if limited else pd.DataFrame({"none": []})))
            summary["exponents"] = {f.learner: f.to_dict() for f in fits}
            summary["optimisation_limited"] = limited
            sec.figures.append(("learning_curves", plots.plot_learning_curves(rows, fits),
                                "Held-out MSE against n: every repeat (small dots), size means, fitted curve (solid), predicted slope (dashed), fitted floor (dotted), optimisation-limited cells (x)."))
            sec.figures.append(("local_slopes", plots.plot_local_slopes(fits),
                                "Local slopes of the excess error; a single power law keeps them level inside the interval band."))
            if "test_mse_clean" in ok and ok["test_mse_clean"].notna().any():
                sec.figures.append(("learning_curves_clean", plots.plot_learning_curves(rows, None, metric="test_mse_clean", show_predicted=False,
                                                                                     title="Error against the noise-free target"),
                                    "MSE against the noise-free target (synthetic data only): label noise removed."))
        sections.append(sec)

    if plan is not None or plan_note:
        sec = ReportSection("Sample-size plan")
        if plan is not None:
            sec.paragraphs.append(str(plan))
            summary["plan"] = plan.to_dict()
        if plan_note:
            sec.paragraphs.append(plan_note)
            summary["plan_note"] = plan_note
        sections.append(sec)

    if extrapolation:
        sec = ReportSection("Extrapolation check")
        sec.paragraphs.append("Each curve is refitted without its largest size and asked to predict it.")
        sec.tables.append(("", pd.concat([e.to_frame() for e in extrapolation], ignore_index=True)))
        summary["extrapolation"] = [e.to_dict() for e in extrapolation]
        sections.append(sec)

    sec = ReportSection("Settings, seeds and versions")
    sec.tables.append(("Settings", pd.DataFrame([(k, _text(v)) for k, v in (settings or {}).items()], columns=["setting", "value"])))
    sec.tables.append(("Versions", pd.DataFrame(list(summary["versions"].items()), columns=["package", "version"])))
    sections.append(sec)
    return sections, summary
