"""One self-contained HTML report per campaign (figures embedded as PNG) and a ``summary.json`` beside it.

The report draws only from result objects (their ``to_dict()``/``to_frame()`` and the figure functions in
:mod:`manireg.plots`); it never recomputes a number. Colours, verdict badges, column names and number
formats come from :mod:`manireg.style`.
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

from . import style
from ._results import to_jsonable

__all__ = ["ReportSection", "package_versions", "write_report", "compose_report", "exponent_table_frame",
           "theory_table_frame", "classification_table_frame", "ASYMPTOTIC_NOTE", "CLASSIFICATION_NOTE"]

ASYMPTOTIC_NOTE = (
    "Predicted rates are asymptotic statements: the theory bounds the error by C n^(-2s/(2s+d)) times log "
    "factors for n large enough, with constants it does not give. A predicted exponent is a reference line, not "
    "a forecast of the error at any particular n, and a measured exponent is quoted only with its interval and "
    "its verdict."
)

CLASSIFICATION_NOTE = (
    "Reference rates are asymptotic statements: the excess logistic risk is bounded by C n^(-s/(2s+2 max(s,d))) "
    "times log factors for n large enough, for convolutional residual networks, with constants the theory does "
    "not give. The reference exponent is a reference line, not a forecast, and a measured exponent is quoted "
    "only with its interval and its verdict."
)


@dataclass
class ReportSection:
    """A titled part of the report: paragraphs, tables (DataFrames) and figures (name, Figure)."""

    title: str
    paragraphs: list = field(default_factory=list)
    tables: list = field(default_factory=list)  # (caption, DataFrame)
    figures: list = field(default_factory=list)  # (name, matplotlib Figure, caption)
    verdicts: list = field(default_factory=list)  # (learner, verdict, exponent text, reason): shown with badges


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


_PERCENT_COLUMNS = ("relative_error",)


def _is_num(v) -> bool:
    return style._is_number(v) and not isinstance(v, bool)


def _cell(col, v, numeric_column: bool) -> tuple:
    """(html, css class) of one table cell; numbers align right only in all-number columns."""
    if col == "verdict":
        return style.badge_html(v), "lbl nw"
    if col in _PERCENT_COLUMNS and _is_num(v) and v == v:
        return html.escape(f"{100 * v:+.1f}%"), "num"
    text = style.fmt_value(v)
    if numeric_column:
        return html.escape(text), "num"
    return html.escape(text), ("lbl nw" if len(text) <= 24 else "lbl")


def _table_html(frame, max_rows: int = 60) -> str:
    """A table with plain column names (:func:`manireg.style.plain_label`) and formatted numbers."""
    if frame is None or len(frame) == 0:
        return "<p class='mr-none'>none</p>"
    shown = frame.head(max_rows)
    cols = list(shown.columns)
    numeric = {c: all(_is_num(v) or v is None for v in shown[c]) and any(_is_num(v) for v in shown[c]) for c in cols}
    head = "".join(f"<th class='{'num' if numeric[c] else 'lbl'}'>{html.escape(style.plain_label(c))}</th>" for c in cols)
    body = []
    for rec in shown.itertuples(index=False, name=None):
        cells = [_cell(c, v, numeric[c]) for c, v in zip(cols, rec)]
        body.append("<tr>" + "".join(f"<td class='{cls}'>{text}</td>" for text, cls in cells) + "</tr>")
    text = f"<div class='mr-scroll'><table class='mr-table'><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table></div>"
    if len(frame) > max_rows:
        text += f"<p class='mr-note'>{len(frame) - max_rows} more rows in summary.json.</p>"
    return text


def _css() -> str:
    band = "".join(f"{v['color']} {100 * i / 5:.0f}% {100 * (i + 1) / 5:.0f}%," for i, v in enumerate(style.LEARNER_STYLES.values()))
    return f"""
:root{{--ink:{style.INK};--paper:{style.PAPER};--muted:{style.MUTED};--rule:{style.RULE};--accent:{style.ACCENT};
--warn:{style.WARNING};--warn-bg:{style.STATUS['paused_bg']};--error:{style.ERROR}}}
*{{box-sizing:border-box}}
body{{margin:0;background:var(--paper);color:var(--ink);font:15px/1.5 "Source Sans 3","Fira Sans","DejaVu Sans",sans-serif}}
.mr-band{{background:#1b2538;color:#eef1f6;padding:1.1em 2em 1.2em;border-bottom:5px solid;border-image:linear-gradient(90deg,{band[:-1]}) 1}}
.mr-band .mr-mark{{font:600 .78em/1 "DejaVu Sans Mono",monospace;letter-spacing:.18em;text-transform:uppercase;color:#a9b6cc}}
.mr-band h1{{margin:.25em 0 .6em;font-size:1.45em;font-weight:600;letter-spacing:.01em}}
.mr-band dl{{display:flex;flex-wrap:wrap;gap:.4em 2.2em;margin:0}}
.mr-band dl div{{min-width:8em}}.mr-band dt{{font-size:.72em;text-transform:uppercase;letter-spacing:.12em;color:#a9b6cc}}
.mr-band dd{{margin:0;font-size:.92em;color:#ffffff}}
main{{max-width:1080px;margin:0 auto;padding:1.2em 2em 3em}}
section{{margin:1.6em 0 0;padding-top:.2em}}
h2{{display:flex;align-items:baseline;gap:.6em;font-size:1.12em;margin:0 0 .6em;color:var(--ink)}}
h2 .mr-num{{font:600 .8em "DejaVu Sans Mono",monospace;color:#fff;background:var(--accent);padding:.1em .45em;border-radius:2px}}
h2::after{{content:"";flex:1;border-bottom:1px dashed var(--rule)}}
p{{margin:.45em 0;max-width:72em}}
.mr-caption{{font-weight:600;font-size:.9em;margin:1em 0 .3em;color:#34404f}}
.mr-note{{font-size:.88em;color:var(--muted)}}.mr-none{{color:var(--muted);font-style:italic}}
.mr-warn{{background:var(--warn-bg);border-left:3px solid var(--warn);padding:.45em .9em;border-radius:0 3px 3px 0}}
.mr-scroll{{overflow-x:auto}}
table.mr-table{{border-collapse:collapse;font-size:.86em;margin:.2em 0 .8em;background:#fff;border:1px solid var(--rule)}}
.mr-table th{{text-align:left;font-weight:600;padding:.35em .75em;border-bottom:2px solid var(--ink);background:#f1efe9;vertical-align:bottom;max-width:11em}}
.mr-table th.num{{text-align:right}}
.mr-table td{{padding:.3em .75em;border-top:1px solid #ebe8e1;vertical-align:top}}
.mr-table td.num{{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}}
.mr-table td.lbl{{text-align:left}}.mr-table td.nw{{white-space:nowrap}}
.mr-verdicts{{list-style:none;padding:0;margin:.5em 0 1em}}
.mr-verdicts li{{display:grid;grid-template-columns:12em 1fr;gap:.2em 1em;padding:.45em .2em;border-top:1px solid #ebe8e1}}
.mr-verdicts .mr-who{{font-weight:600}}.mr-verdicts .mr-why{{grid-column:2;font-size:.9em;color:var(--muted)}}
.mr-badge{{display:inline-flex;align-items:center;gap:.35em;padding:.05em .55em .05em .25em;border:1.5px solid;border-radius:3px;
background:#fff;font-size:.86em;font-weight:600;white-space:nowrap}}
.mr-badge-icon{{flex:none}}
figure{{margin:1.2em 0;background:#fff;border:1px solid var(--rule);padding:.8em;display:inline-block;max-width:100%}}
figure img{{display:block;max-width:100%}}
figcaption{{font-size:.86em;color:var(--muted);border-top:1px solid #ebe8e1;margin-top:.6em;padding-top:.45em;max-width:60em}}
"""


def _header_items(summary: dict, campaign_name=None, header=None) -> list:
    """(label, text) pairs of the header band: data, campaign, date, versions; missing ones are left out."""
    items = []
    data = summary.get("data") or {}
    if data.get("source"):
        items.append(("data", str(data["source"])))
    if campaign_name is None:
        part = summary.get("campaign")
        if isinstance(part, dict) and part.get("name"):
            campaign_name = part["name"]
    if campaign_name:
        items.append(("campaign", str(campaign_name)))
    items.append(("written", _dt.datetime.now().strftime("%Y-%m-%d %H:%M")))
    versions = summary.get("versions") or {}
    shown = [f"{name} {versions[name]}" for name in ("manireg", "numpy", "torch") if versions.get(name)]
    if shown:
        items.append(("versions", " \u00b7 ".join(shown)))
    for k, v in (header or {}).items():
        items = [(a, b) for a, b in items if a != k]
        if v is not None:
            items.append((k, str(v)))
    return items


def write_report(out_dir: str, title: str, sections: list, summary: dict, *, save_png: bool = True,
                 campaign_name: str | None = None, header: dict | None = None) -> dict:
    """Write ``report.html`` (self-contained), ``summary.json`` and (optionally) ``figures/*.png``.

    The page opens with a header band: data source, campaign name, date and the manireg, numpy and torch
    versions, taken from ``summary`` (``campaign_name`` and ``header`` override or add entries; an entry
    with no value is left out). Returns a dict with the paths written. ``summary`` must be JSON-ready (NaN
    is written as null).
    """
    os.makedirs(out_dir, exist_ok=True)
    fig_dir = os.path.join(out_dir, "figures")
    if save_png:
        os.makedirs(fig_dir, exist_ok=True)
    import matplotlib.pyplot as plt

    band = "".join(f"<div><dt>{html.escape(k)}</dt><dd>{html.escape(v)}</dd></div>"
                   for k, v in _header_items(summary, campaign_name, header))
    parts = [f"<!doctype html><html lang='en'><head><meta charset='utf-8'><title>{html.escape(title)}</title>",
             "<meta name='viewport' content='width=device-width,initial-scale=1'>",
             f"<style>{_css()}</style></head><body>",
             f"<header class='mr-band'><div class='mr-mark'>manireg report</div><h1>{html.escape(title)}</h1>"
             f"<dl>{band}</dl></header><main>",
             "<p class='mr-note'>Every number on this page is also in summary.json beside this file.</p>",
             f"<p class='mr-warn'>{html.escape(summary.get('note') or ASYMPTOTIC_NOTE)}</p>"]
    figure_files = []
    for i, sec in enumerate(sections, start=1):
        parts.append(f"<section><h2><span class='mr-num'>{i:02d}</span>{html.escape(sec.title)}</h2>")
        for p in sec.paragraphs:
            cls = " class='mr-warn'" if p.startswith("Warning") or p.startswith("Not measured") else ""
            parts.append(f"<p{cls}>{html.escape(p)}</p>")
        if sec.verdicts:
            items = "".join(
                f"<li><span class='mr-who'>{html.escape(str(who))}</span><span>{style.badge_html(verdict)} "
                f"{html.escape(text)}</span><span class='mr-why'>{html.escape(reason)}</span></li>"
                for who, verdict, text, reason in sec.verdicts)
            parts.append(f"<ul class='mr-verdicts'>{items}</ul>")
        for caption, frame in sec.tables:
            if caption:
                parts.append(f"<p class='mr-caption'>{html.escape(caption)}</p>")
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
            parts.append(f"<figure id='fig-{html.escape(name)}'><img alt='{html.escape(caption)}' src='data:image/png;base64,{b64}'>"
                         f"<figcaption>{html.escape(caption)}</figcaption></figure>")
        parts.append("</section>")
    parts.append("</main></body></html>")
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


def _theory_span(t):
    if t is None:
        return "none"
    lo, hi = t
    return f"{lo:.3f}" if lo == hi else f"{lo:.3f} to {hi:.3f}"


def _implied(t, none_when) -> str:
    if t is None or none_when(t):
        return "none"
    return f"{style.fmt_number(t[0])} to {style.fmt_number(t[1])}"


def exponent_table_frame(fits):
    """The exponent table of the report: per learner the measured exponent with its interval and verdict
    beside the predicted, ambient and implied values (never an exponent alone). Values are formatted text;
    an implied value that does not exist (an exponent of 1 or more) reads "none", as in ``str(fit)``."""
    import math

    import pandas as pd

    rows = []
    for f in fits:
        lo, hi = f.interval
        rows.append({
            "learner": f.learner,
            "exponent": style.fmt_number(f.exponent),
            f"{int(round(100 * f.level))}% interval": style.fmt_interval(lo, hi),
            "verdict": f.verdict,
            "predicted exponent 2s/(2s+d)": _theory_span(f.predicted_exponent),
            "ambient exponent 2s/(2s+D)": _theory_span(f.ambient_exponent),
            "implied d (given s)": _implied(f.implied_dimension, lambda t: t[1] == 0.0),
            "implied s (given d)": _implied(f.implied_smoothness, lambda t: t[0] == math.inf),
            "error floor": f"{style.fmt_number(f.floor)} ({f.floor_source})",
            "repeats": f.n_repeats,
        })
    return pd.DataFrame(rows)


def _key_figures(frame):
    """The geometry's key figures with the N(r) slope given as a positive dimension-like diagnostic."""
    frame = frame.copy()
    for i, q in enumerate(frame["quantity"]):
        if q == "N(r) slope":
            v = frame.at[frame.index[i], "value"]
            frame.at[frame.index[i], "quantity"] = "N(r) dimension-like slope (diagnostic, no interval)"
            frame.at[frame.index[i], "value"] = None if v is None else -float(v)
    return frame


def _estimates(frame):
    """Dimension estimates with the estimators' full names."""
    frame = frame.copy()
    if "estimator" in frame:
        frame["estimator"] = [style.estimator_style(e)["label"] for e in frame["estimator"]]
    return frame


def _items(mapping: dict, key: str):
    import pandas as pd

    return pd.DataFrame([(style.plain_label(k), style.fmt_value(v)) for k, v in mapping.items()], columns=[key, "value"])


def theory_table_frame(fits, theory):
    """One row per learner: measured exponent with interval and verdict, the learner's reference rate, its
    predicted interval, and the comparison's verdict with its reason."""
    import pandas as pd

    rows = []
    for f in fits:
        c = theory.get(f.learner)
        if c is None:
            continue
        p = c.predicted_exponent
        rows.append({
            "learner": f.learner,
            "exponent": style.exponent_text(f, 3),
            "reference rate": c.formula,
            "predicted exponent": style.fmt_interval(p[0], p[1]) if p[0] != p[1] else style.fmt_number(p[0]),
            "comparison": c.verdict,
            "why": c.reason,
            "source": c.source,
        })
    return pd.DataFrame(rows)


def classification_table_frame(metric_fits: dict):
    """One row per metric and learner: the measured exponent with its interval and verdict, the floor and the
    repeats (values are formatted text)."""
    import pandas as pd

    rows = []
    for metric, fits in metric_fits.items():
        for f in fits:
            lo, hi = f.interval
            rows.append({
                "metric": style.plain_label(metric),
                "learner": f.learner,
                "exponent": style.fmt_number(f.exponent),
                f"{int(round(100 * f.level))}% interval": style.fmt_interval(lo, hi),
                "verdict": f.verdict,
                "error floor": f"{style.fmt_number(f.floor)} ({f.floor_source})",
                "repeats": f.n_repeats,
            })
    return pd.DataFrame(rows)


def _classification_parts(sec, summary, rows, metric_fits, reference):
    """The classification part of the learning-curves section: per metric the verdicts, one table, one figure;
    the reference exponent of the excess logistic risk with its source, conditions and scope."""

    from . import plots

    for metric, fits in metric_fits.items():
        for f in fits:
            sec.verdicts.append((f"{f.learner} ({style.plain_label(metric)})", f.verdict, style.exponent_text(f, 3),
                                 f.verdict_reason))
    sec.tables.append(("Exponents of the classification metrics (measured, with interval and verdict)",
                       classification_table_frame(metric_fits)))
    summary["classification_exponents"] = {m: {f.learner: f.to_dict() for f in fits} for m, fits in metric_fits.items()}
    limited = [dict(metric=m, learner=f.learner, **c) for m, fits in metric_fits.items() for f in fits
               for c in f.optimisation_limited]
    summary["optimisation_limited"] = limited
    if reference:
        b = reference["predicted_exponent"]
        sec.paragraphs.append(
            f"Reference exponent of the excess logistic risk: {reference['formula']} = {style.fmt_number(b)} at "
            f"s = {style.fmt_number(reference['smoothness'])}, d = {style.fmt_number(reference['dimension'])} "
            f"({reference['source']}). Conditions: {reference['conditions']}. Scope: {reference['scope']}.")
        if "excess_logistic_risk" not in metric_fits:
            sec.paragraphs.append(
                "The excess logistic risk needs the exact class probabilities and is not measured on these data; "
                "the test cross-entropy's exponent with a fitted floor (the unknown Bayes risk) is the closest "
                "measured quantity.")
        summary["classification_reference"] = reference
    for metric, fits in metric_fits.items():
        label = style.plain_label(metric)
        sec.figures.append((f"learning_curves_{metric}",
                            plots.plot_learning_curves(rows, fits, metric=metric, show_predicted=False, show_ambient=False,
                                                       title=f"Learning curves: {label}"),
                            f"{label[0].upper()}{label[1:]} against n: every repeat (small marks), size means (large "
                            "marks), fitted curve (solid), fitted floor (dash-dot), optimisation-limited cells (x)."))


def _capacity_parts(sec, summary, capacity):
    """The capacity read-out of nets that ran several widths (a table per depth group, or why there is none)."""
    for label, cap in capacity or []:
        if isinstance(cap, str):
            sec.paragraphs.append(f"Capacity read-out ({label}): {cap}")
            continue
        sec.tables.append((f"Capacity read-out ({label}): the best width multiplier at each n and where the rule's "
                           "width sits, from paired differences over the repeats both widths ran", cap.to_frame()))
    if capacity:
        summary["capacity"] = {label: (cap if isinstance(cap, str) else cap.to_dict()) for label, cap in capacity}


def _evidence_parts(sec, summary, diagnoses, evidence):
    """The diagnoses and the evidence cells of the learning-curves section (tables and summary entries)."""
    import pandas as pd

    if diagnoses:
        sec.tables.append(("Diagnosis of each curve without a single exponent (cause in words, with its evidence)",
                           pd.DataFrame([{"learner": d.learner, "verdict": d.verdict, "causes": ", ".join(d.causes),
                                          "diagnosis": d.text, "evidence": "; ".join(d.evidence)}
                                         for d in diagnoses.values()])))
        summary["diagnoses"] = {name: d.to_dict() for name, d in diagnoses.items()}
    if evidence:
        frames = []
        for name, ev in evidence.items():
            fr = ev.to_frame()
            if len(fr):
                fr.insert(0, "learner", name)
                frames.append(fr)
        if frames:
            sec.tables.append(("Evidence cells: the budget check (2x and 4x the steps) and the capacity check (2x width) "
                               "against the seed spread at each n", pd.concat(frames, ignore_index=True)))
        capped = [(name, ev.capped_sizes) for name, ev in evidence.items() if ev.capped_sizes]
        if capped:
            sec.paragraphs.append("Width capped: " + "; ".join(
                f"{name}: the width rule hit width_max at n = {', '.join(str(n) for n in sizes)}" for name, sizes in capped))
        summary["evidence"] = {name: ev.to_dict() for name, ev in evidence.items()}


def compose_report(*, title: str, data: dict, geometry=None, sizing=None, campaign=None, fits=None, plan=None,
                   plan_note: str | None = None, extrapolation=None, settings: dict | None = None,
                   true_dimension=None, theory=None, classification=None, classification_reference=None,
                   diagnoses=None, evidence=None, capacity=None):
    """Turn finished result objects into report sections and the JSON summary of a campaign.

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
    classification : dict {metric: list of ExponentFit}, optional
        Fits of a classification campaign, one list per metric column (``test_error_rate``, ...): the
        learning-curves section shows each with interval and verdict and one figure per metric, and
        ``summary["classification_exponents"]`` holds them.
    classification_reference : dict, optional
        The reference exponent of the excess logistic risk (keys formula, smoothness, dimension,
        predicted_exponent, source, conditions, scope), shown and kept as ``summary["classification_reference"]``.
    diagnoses : dict, optional
        Learner -> :class:`manireg.curves.evidence.Diagnosis` (:attr:`ReadOut.diagnoses`): why a curve has no
        single exponent, shown as a table and kept as ``summary["diagnoses"]``.
    evidence : dict, optional
        Learner -> :class:`manireg.curves.evidence.LearnerEvidence`: the budget and capacity checks, shown as a
        table and kept as ``summary["evidence"]``.
    capacity : list, optional
        ``[(label, CapacityReadout or str)]`` of ``ReadOut.capacity``: one table per group of nets that ran
        several widths, kept as ``summary["capacity"]``.

    Returns
    -------
    (sections, summary) for :func:`write_report`.
    """
    import pandas as pd

    from . import plots

    sections = []
    summary = {"title": title, "data": data, "settings": settings or {}, "versions": package_versions()}

    sec = ReportSection("Data")
    sec.tables.append(("", _items(data, "item")))
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
                sec.tables.append(("Dimension estimates", _estimates(est)))
            res = geometry.get("resolution") or {}
            if res.get("verdict"):
                sec.paragraphs.append(f"Resolution: {res['verdict']}")
        else:
            summary["geometry"] = geometry.to_dict()
            sec.paragraphs.append(f"Resolution: {geometry.resolution.verdict}")
            for w in geometry.dimension.warnings:
                sec.paragraphs.append(f"Warning: {w}")
            sec.tables.append(("Dimension estimates (how each interval was made: see the interval column)",
                               _estimates(geometry.dimension.to_frame())))
            sec.tables.append(("Key figures", _key_figures(geometry.to_frame())))
            sec.figures.append(("dimension_profile", plots.plot_dimension_profile(geometry.dimension, true_dimension=true_dimension),
                                "Dimension estimate against neighbourhood scale, with interval bands; noise lifts small scales, curvature large ones."))
            sec.figures.append(("dimension_estimates", plots.plot_dimension_estimates(geometry.dimension, true_dimension=true_dimension),
                                "Per-estimator values with intervals and the consensus."))
            sec.figures.append(("chart_spectra", plots.plot_spectra(geometry.atlas),
                                "Explained-variance spectra of the charts (local PCA): d leading components carry the variance where the tangent picture holds."))
            sec.figures.append(("chart_counts", plots.plot_chart_counts(geometry.chart_counts),
                                "Charts needed N(r) against radius r; on a manifold N(r) falls like r^-d, so the "
                                "dimension-like slope is about d (a diagnostic without an interval)."))
            if geometry.reach is not None:
                sec.figures.append(("reach", plots.plot_reach(geometry.reach, chart_radius=geometry.atlas.radius),
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
            f"Rule for d = {sizing.d:g}, s = {sizing.s:g}, D = {sizing.ambient_dim}: "
            "depth ~ log n, width ~ n^(d/(2s+d)), "
            "nonzero weights ~ n^(d/(2s+d)) log n; constants and bounds are those of SizingConstants.")
        sec.tables.append(("", sizing.to_frame()))
        sec.paragraphs.extend(f"{style.plain_label(k)}: {v}" for k, v in sizing.specs[-1].rules.items())
        sec.figures.append(("sizing", plots.plot_sizing(sizing), "Parameter count and predicted error against n."))
        summary["sizing"] = sizing.to_frame().to_dict(orient="records")
        sections.append(sec)

    if campaign is not None:
        sec = ReportSection("Learning curves")
        rows = campaign.rows
        ok = rows[rows["status"] == "ok"] if "status" in rows else rows
        failed = rows[rows["status"] == "failed"] if "status" in rows else rows.iloc[:0]
        sec.paragraphs.append(
            f"Campaign '{campaign.name}': {len(ok)} finished cells ({len(failed)} failed) over sizes "
            f"{', '.join(str(v) for v in sorted(set(int(v) for v in ok['n'])))}; learners "
            f"{', '.join(sorted(set(ok['learner'])))}; d = {style.fmt_number(campaign.dimension)} ({campaign.dimension_source}), "
            f"s = {style.fmt_number(campaign.smoothness)}, D = {style.fmt_number(campaign.ambient_dim)}.")
        if len(failed):
            sec.tables.append(("Failed cells", failed[["learner", "n", "repeat", "error"]]))
        summary["campaign"] = campaign.to_dict()
        summary["rows"] = ok.drop(columns=[c for c in ("config_json",) if c in ok]).to_dict(orient="records")
        if classification:
            _classification_parts(sec, summary, rows, classification, classification_reference)
            summary["note"] = CLASSIFICATION_NOTE
        if fits is not None and len(fits):
            for f in fits:
                sec.verdicts.append((f.learner, f.verdict, style.exponent_text(f, 3), f.verdict_reason))
            sec.tables.append(("Exponents (measured, with interval and verdict; predicted; ambient; implied)", exponent_table_frame(fits)))
            slopes = [dict(learner=f.learner, **s) for f in fits for s in f.local_slopes]
            if slopes:
                sec.tables.append(("Local slopes between successive sizes (diagnostic, no interval; positive when the error falls)",
                                   pd.DataFrame(slopes)))
            limited = [dict(learner=f.learner, **c) for f in fits for c in f.optimisation_limited]
            sec.tables.append(("Optimisation-limited cells (stopped at the step or time limit, or best step late in the budget)",
                               pd.DataFrame(limited) if limited else None))
            summary["exponents"] = {f.learner: f.to_dict() for f in fits}
            if theory:
                sec.tables.append(("Each learner against its own reference rate (predicted exponent over the range of d "
                                   "and s; the verdict is an interval test)", theory_table_frame(fits, theory)))
                summary["theory"] = {name: c.to_dict() for name, c in theory.items()}
            summary["optimisation_limited"] = limited
            _evidence_parts(sec, summary, diagnoses, evidence)
            _capacity_parts(sec, summary, capacity)
            sec.figures.append(("learning_curves", plots.plot_learning_curves(rows, fits),
                                "Test error against n: every repeat (small marks), size means (large marks), fitted curve (solid), "
                                "predicted exponent (long dashes), ambient exponent (dots), fitted floor (dash-dot), "
                                "optimisation-limited cells (x)."))
            sec.figures.append(("local_slopes", plots.plot_local_slopes(fits),
                                "Local slopes of the excess error (a diagnostic without intervals); a single power law keeps "
                                "them level inside the band of the exponent's interval."))
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
        frames = []
        for e in extrapolation:
            frame = e.to_frame()
            frame.insert(0, "learner", e.learner)
            frames.append(frame)
        sec.tables.append(("", pd.concat(frames, ignore_index=True)))
        summary["extrapolation"] = [e.to_dict() for e in extrapolation]
        sections.append(sec)

    sec = ReportSection("Settings, seeds and versions")
    sec.tables.append(("Settings", _items(settings or {}, "setting")))
    sec.tables.append(("Versions", pd.DataFrame([(k, v if v is not None else "not installed") for k, v in summary["versions"].items()],
                                                columns=["package", "version"])))
    sections.append(sec)
    return sections, summary
