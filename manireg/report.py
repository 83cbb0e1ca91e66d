"""One self-contained HTML report per study (figures embedded as PNG) and a ``summary.json`` beside it.

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

__all__ = ["ReportSection", "package_versions", "write_report", "ASYMPTOTIC_NOTE"]

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
    """Versions of Python and the packages a study's numbers depend on."""
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
