"""The manireg look: one palette, markers, reference-line styles, verdict badges, labels and number formats.

Figures (:mod:`manireg.plots`), the HTML report and the notebook panels take every colour, marker, badge
and screen label from here, so a learner has the same colour and marker on every surface whatever order
it is drawn in. This module is pure data plus small helpers; it imports nothing heavy (matplotlib is
imported only inside :func:`apply_style`).

How the colours were chosen
---------------------------
Each group that can meet on one figure (the learner kinds, the dimension estimators, the verdicts) was
picked by hand from hues that differ in lightness as well as in hue, then checked: the smallest pairwise
CIE76 colour difference in CIELAB within the group, for normal vision and after simulating deuteranopia and
protanopia (Machado, Oliveira and Fernandes 2009, severity 1), is at least 20 (measured: learners 31.8,
estimators 21.4, verdicts 24.0). ``tests/test_style.py`` recomputes these numbers. Markers differ within
every group as well, so no pair relies on colour alone.
"""

from __future__ import annotations

import math
import zlib

__all__ = [
    "INK", "PAPER", "MUTED", "GRID", "RULE", "ACCENT",
    "LEARNER_STYLES", "ESTIMATOR_STYLES", "RESERVE_STYLES", "learner_style", "estimator_style",
    "REFERENCE_LINES", "reference_line", "LIMITED_MARK",
    "VERDICT_BADGES", "NEUTRAL_BADGE", "verdict_badge", "badge_svg", "badge_html",
    "ERROR", "WARNING", "STATUS", "BUTTONS", "WARNING_PREFIX",
    "fmt_number", "fmt_interval", "fmt_value", "plain_label", "PLAIN_LABELS",
    "exponent_text", "predicted_text", "rc", "apply_style",
]

# ------------------------------------------------------------------------------------------------ neutrals
INK = "#1e2633"      # text, axes, consensus line
PAPER = "#fbfaf7"    # page background (warm white)
MUTED = "#5f6b78"    # secondary text
GRID = "#dfe3e8"     # grid lines
RULE = "#c9ced6"     # table rules
ACCENT = "#27479a"   # headings, the header band (the net's blue)

# ------------------------------------------------------------------------------------------- learners
#: Fixed colour and marker per learner kind (names as in the ``learner`` column of a campaign's rows).
LEARNER_STYLES = {
    "net": {"color": "#27479a", "marker": "o", "label": "network"},
    "knn": {"color": "#e5892a", "marker": "s", "label": "k nearest neighbours"},
    "kernel_ridge": {"color": "#4fb9c2", "marker": "D", "label": "kernel ridge"},
    "net_classifier": {"color": "#7b2153", "marker": "^", "label": "network classifier"},
    "knn_classifier": {"color": "#4e561c", "marker": "P", "label": "k nearest neighbours classifier"},
    "logistic": {"color": "#2f1bcd", "marker": "h", "label": "logistic regression (ambient baseline)"},
    "policy": {"color": "#c0a070", "marker": "v", "label": "policy"},
    "conv_net": {"color": "#22aafd", "marker": "*", "label": "convolutional network"},
    "conv_classifier": {"color": "#a76b70", "marker": "d", "label": "convolutional network classifier"},
}

#: Used, in this order, by names that are not a known kind: the entry is chosen from the name itself
#: (a checksum), so it never depends on which learners are drawn or in what order.
RESERVE_STYLES = (
    {"color": "#4d7a2a", "marker": "P"},
    {"color": "#a0523a", "marker": "X"},
    {"color": "#6a5fb0", "marker": "h"},
    {"color": "#2c6f80", "marker": "<"},
    {"color": "#8a6d1e", "marker": ">"},
    {"color": "#5c5c66", "marker": "p"},
)


def _mix(hex_colour: str, other: str, t: float) -> str:
    """``hex_colour`` moved a fraction ``t`` (0..1) of the way to ``other``."""
    a = [int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)]
    b = [int(other[i:i + 2], 16) for i in (1, 3, 5)]
    return "#" + "".join(f"{round(x + t * (y - x)):02x}" for x, y in zip(a, b))


def _width_multiplier(name: str):
    """The multiplier of a net label ``net-w<m>`` (as :class:`~manireg.curves.learners.LearnerSpec` names them)."""
    if not name.startswith("net-w"):
        return None
    try:
        m = float(name[5:])
    except ValueError:
        return None
    return m if m > 0 and math.isfinite(m) else None


def learner_style(name: str) -> dict:
    """Colour, marker and plain label of a learner, whatever order the learners are drawn in.

    Known kinds map to their fixed entry; a net with a width multiplier (``"net-w0.5"``, ``"net-w2"``) gets
    a shade of the net's blue (lighter below 1, darker above) and the net's marker; any other name gets an
    entry of :data:`RESERVE_STYLES` chosen from the name's checksum.

    >>> learner_style("net")["marker"], learner_style("net-w2")["color"] != learner_style("net")["color"]
    ('o', True)
    """
    name = str(name)
    if name in LEARNER_STYLES:
        return dict(LEARNER_STYLES[name], name=name)
    m = _width_multiplier(name)
    if m is not None:
        base = LEARNER_STYLES["net"]
        step = min(abs(math.log2(m)), 3.0) / 3.0  # x8 or /8 is the far end of the shade range
        colour = _mix(base["color"], "#ffffff" if m < 1 else "#000000", 0.6 * step if m < 1 else 0.5 * step)
        return {"color": colour, "marker": base["marker"], "label": f"network, width x{m:g}", "name": name}
    entry = RESERVE_STYLES[zlib.crc32(name.encode("utf-8")) % len(RESERVE_STYLES)]
    return dict(entry, label=name, name=name)


# ----------------------------------------------------------------------------------------- estimators
#: Fixed colour, marker and full name per dimension estimator (as in ``DimensionReport.estimates``).
ESTIMATOR_STYLES = {
    "mle": {"color": "#1d7a66", "marker": "o", "label": "maximum likelihood (Levina-Bickel)", "short": "likelihood"},
    "twonn": {"color": "#d4683a", "marker": "s", "label": "two nearest neighbours (TwoNN)", "short": "TwoNN"},
    "lpca": {"color": "#9079c9", "marker": "^", "label": "local PCA", "short": "local PCA"},
    "corr": {"color": "#d8b43c", "marker": "D", "label": "correlation dimension", "short": "correlation"},
    "consensus": {"color": INK, "marker": "*", "label": "consensus", "short": "consensus"},
}


def estimator_style(name: str) -> dict:
    """Colour, marker, full name (``label``) and ``short`` name of a dimension estimator; unknown names get a
    reserve entry."""
    name = str(name)
    if name in ESTIMATOR_STYLES:
        return dict(ESTIMATOR_STYLES[name], name=name)
    entry = RESERVE_STYLES[zlib.crc32(name.encode("utf-8")) % len(RESERVE_STYLES)]
    return dict(entry, label=name, short=name, name=name)


# ------------------------------------------------------------------------------------ reference lines
#: Fixed styles of theory lines. ``color`` None means "the colour of the learner the line belongs to".
REFERENCE_LINES = {
    "predicted": {"color": None, "linestyle": (0, (7, 3)), "linewidth": 1.3, "alpha": 0.9},
    "ambient": {"color": "#8a7a63", "linestyle": (0, (1.2, 2.4)), "linewidth": 1.4, "alpha": 0.9},
    "band": {"color": None, "alpha": 0.14, "linewidth": 0},
    "floor": {"color": None, "linestyle": (0, (2, 2, 6, 2)), "linewidth": 0.9, "alpha": 0.7},
    "truth": {"color": INK, "linestyle": (0, (5, 2, 1, 2)), "linewidth": 1.1, "alpha": 1.0},
    "fit": {"color": None, "linestyle": "-", "linewidth": 1.7, "alpha": 1.0},
}

#: The mark of a cell that stopped at a step or time cap (or whose best step came late).
LIMITED_MARK = {"marker": "x", "color": "#a23b1e", "size": 46, "linewidth": 1.3}


def reference_line(kind: str, color: str | None = None) -> dict:
    """Matplotlib keyword arguments of a reference line (``"predicted"``, ``"ambient"``, ``"band"``, ...).

    ``color`` fills in the colour of lines that follow their learner; a fixed colour is kept.
    """
    if kind not in REFERENCE_LINES:
        raise ValueError(f"reference_line: kind must be one of {sorted(REFERENCE_LINES)}; got {kind!r}.")
    kw = dict(REFERENCE_LINES[kind])
    if kw["color"] is None:
        kw["color"] = color if color is not None else INK
    return kw


# -------------------------------------------------------------------------------------- verdict badges
#: One badge per verdict string of :mod:`manireg.curves.fitting`: colour, shape, short label.
VERDICT_BADGES = {
    "measured": {"color": "#2f8a57", "shape": "disc", "glyph": "check", "label": "measured"},
    "not a power law over this range": {"color": "#d09216", "shape": "diamond", "glyph": "wave", "label": "not a power law here"},
    "insufficient data": {"color": "#8c5aa8", "shape": "triangle", "glyph": "dots", "label": "too little data"},
    "power law not shown at this precision": {"color": "#3016bf", "shape": "hexagon", "glyph": "wave",
                                              "label": "not shown at this precision"},
    "optimisation-limited": {"color": "#c02010", "shape": "octagon", "glyph": "dots", "label": "optimisation-limited"},
}
#: The badge of a verdict this module does not know (never an error).
NEUTRAL_BADGE = {"color": "#8a9098", "shape": "square", "glyph": "query", "label": None}


def verdict_badge(verdict) -> dict:
    """Badge of a verdict string; an unknown verdict gets the neutral badge with the verdict as its label."""
    v = "" if verdict is None else str(verdict)
    if v in VERDICT_BADGES:
        return dict(VERDICT_BADGES[v], verdict=v)
    return dict(NEUTRAL_BADGE, label=v or "no verdict", verdict=v)


_SHAPES = {
    "disc": "<circle cx='8' cy='8' r='7'/>",
    "diamond": "<polygon points='8,0.6 15.4,8 8,15.4 0.6,8'/>",
    "triangle": "<polygon points='8,1 15.2,14.6 0.8,14.6'/>",
    "square": "<rect x='1.5' y='1.5' width='13' height='13' rx='2'/>",
    "hexagon": "<polygon points='4.3,1.2 11.7,1.2 15.4,8 11.7,14.8 4.3,14.8 0.6,8'/>",
    "octagon": "<polygon points='5.1,0.8 10.9,0.8 15.2,5.1 15.2,10.9 10.9,15.2 5.1,15.2 0.8,10.9 0.8,5.1'/>",
}
_GLYPHS = {
    "check": "<polyline points='4.3,8.4 7,11 11.8,5.4' fill='none' stroke='#fff' stroke-width='2' stroke-linecap='round' stroke-linejoin='round'/>",
    "wave": "<path d='M4,8.6 q2,-3 4,0 t4,0' fill='none' stroke='#fff' stroke-width='1.8' stroke-linecap='round'/>",
    "dots": "<g fill='#fff'><circle cx='5.6' cy='11.2' r='1.1'/><circle cx='8' cy='11.2' r='1.1'/><circle cx='10.4' cy='11.2' r='1.1'/></g>",
    "query": "<path d='M6,6.2 q0,-2.4 2.2,-2.4 q2.2,0 2.2,2 q0,1.4 -2.2,2.2 v1.4' fill='none' stroke='#fff' stroke-width='1.6' stroke-linecap='round'/><circle cx='8.2' cy='12.4' r='1' fill='#fff'/>",
}


def badge_svg(verdict, size: int = 16) -> str:
    """A small inline SVG of the verdict's badge shape (no external files)."""
    b = verdict_badge(verdict)
    return (f"<svg class='mr-badge-icon' width='{size}' height='{size}' viewBox='0 0 16 16' aria-hidden='true'>"
            f"<g fill='{b['color']}'>{_SHAPES[b['shape']]}</g>{_GLYPHS[b['glyph']]}</svg>")


def badge_html(verdict) -> str:
    """The verdict badge as inline HTML: shape, short label, and the full verdict as a tooltip."""
    import html

    b = verdict_badge(verdict)
    return (f"<span class='mr-badge' style='border-color:{b['color']};color:{_mix(b['color'], INK, 0.35)}' "
            f"title='{html.escape(b['verdict'] or 'no verdict', quote=True)}'>{badge_svg(verdict)}"
            f"<span>{html.escape(b['label'])}</span></span>")


# ----------------------------------------------------------------------------- status, errors, buttons
ERROR = "#a23b1e"    # brick: error text and borders
#: The one prefix of every warning line, on the command line and in the panels.
WARNING_PREFIX = "warning: "
WARNING = "#9a6a00"  # ochre: warnings in text
#: Status colours of panels and the report (text colour on a light background; ``*_bg`` for fills).
STATUS = {
    "idle": "#5f6b78", "running": "#27479a", "paused": "#9a6a00", "done": "#2f7a4f", "error": ERROR,
    "idle_bg": "#eef0f3", "running_bg": "#e6ecf7", "paused_bg": "#f8efd9", "done_bg": "#e4f1e8", "error_bg": "#f6e5df",
}
#: Plain CSS values for panel buttons: background, text, border and hover background.
BUTTONS = {
    "primary": {"background": "#27479a", "color": "#ffffff", "border": "#1d3675", "hover": "#1d3675"},
    "secondary": {"background": "#eef0f3", "color": "#1e2633", "border": "#b9c0ca", "hover": "#e0e4ea"},
    "danger": {"background": "#fbeee9", "color": "#a23b1e", "border": "#a23b1e", "hover": "#f4dcd3"},
}


# ----------------------------------------------------------------------------------------- numbers
def _is_number(x) -> bool:
    if isinstance(x, bool):
        return False
    try:
        float(x)
    except (TypeError, ValueError):
        return False
    return not isinstance(x, (str, bytes))


def fmt_number(x, digits: int = 3) -> str:
    """A number to ``digits`` significant digits, as a person would write it.

    ``None`` -> ``"none"``, NaN -> ``"not available"``, +-inf -> ``"infinite"``/``"minus infinite"``;
    integers keep every digit; numbers from 1e-4 to 1e6 are written as plain decimals, others as ``1.2e-5``.

    >>> fmt_number(0.010000000000000002), fmt_number(1234.5678), fmt_number(2.0), fmt_number(float("nan"))
    ('0.01', '1235', '2', 'not available')
    """
    if x is None:
        return "none"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if not _is_number(x):
        return str(x)
    v = float(x)
    if math.isnan(v):
        return "not available"
    if math.isinf(v):
        return "infinite" if v > 0 else "minus infinite"
    if isinstance(x, int) or (hasattr(x, "dtype") and getattr(x.dtype, "kind", "") in "iu"):
        return str(int(x))
    digits = max(1, int(digits))
    if v == 0:
        return "0"
    mag = math.floor(math.log10(abs(v)))
    if -4 <= mag < 6:  # plain decimals, rounded to the significant digits, no trailing zeros
        text = f"{v:.{max(0, digits - 1 - mag)}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return "0" if text in ("-0", "") else text
    mant, exp = f"{v:.{digits - 1}e}".split("e")
    if "." in mant:
        mant = mant.rstrip("0").rstrip(".")
    return f"{mant}e{int(exp)}"


def fmt_interval(lo, hi, digits: int = 3) -> str:
    """``[lo, hi]`` with :func:`fmt_number`; ``"not available"`` when either end is missing or NaN."""
    if lo is None or hi is None or not _is_number(lo) or not _is_number(hi) or math.isnan(float(lo)) or math.isnan(float(hi)):
        return "not available"
    return f"[{fmt_number(lo, digits)}, {fmt_number(hi, digits)}]"


def fmt_value(v, digits: int = 4) -> str:
    """Any table value: numbers via :func:`fmt_number`, pairs as intervals, lists joined, text unchanged."""
    if v is None or isinstance(v, (bool, int, float)) or _is_number(v):
        return fmt_number(v, digits)
    if isinstance(v, (list, tuple)):
        if not v:
            return "none"
        return ", ".join(fmt_value(u, digits) for u in v)
    if isinstance(v, dict):
        return "; ".join(f"{plain_label(k)} {fmt_value(u, digits)}" for k, u in v.items()) or "none"
    text = str(v)
    return "none" if text in ("None", "nan", "NaN", "") else text


def exponent_text(fit, digits: int = 2) -> str:
    """``"exponent 0.52 [0.47, 0.57], measured"``: a measured exponent never appears without both."""
    import numpy as np

    e = getattr(fit, "exponent", float("nan"))
    if e is None or not np.isfinite(e):
        return f"no exponent ({getattr(fit, 'verdict', 'no verdict')})"
    lo, hi = fit.interval
    return f"exponent {e:.{digits}f} [{lo:.{digits}f}, {hi:.{digits}f}], {fit.verdict}"


def predicted_text(value, digits: int = 2) -> str:
    """``"predicted exponent 0.60"`` (or ``"0.55 to 0.65"`` for a range of s)."""
    if isinstance(value, (tuple, list)):
        lo, hi = float(value[0]), float(value[1])
        if lo != hi:
            return f"predicted exponent {lo:.{digits}f} to {hi:.{digits}f}"
        value = lo
    return f"predicted exponent {float(value):.{digits}f}"


# ------------------------------------------------------------------------------------------- labels
#: Code names that can reach a screen, in plain words.
PLAIN_LABELS = {
    "ess": "effective sample size",
    "value_se": "standard error of the value",
    "value_estimate": "value estimate (doubly robust)",
    "clipped_share": "share of clipped weights",
    "policy_value": "true policy value",
    # learning-curve rows and metrics
    "test_mse": "test error (MSE)",
    "test_mse_clean": "error against the noise-free target",
    "train_mse": "training error (MSE)",
    "val_mse": "validation error (MSE)",
    "test_error_rate": "test error rate",
    "excess_error_rate": "excess error rate (over the Bayes classifier)",
    "excess_logistic_risk": "excess logistic risk (over the Bayes probabilities)",
    "test_cross_entropy": "test cross-entropy (nats)",
    "calibration_error": "calibration error (top-class confidence)",
    "learner": "learner",
    "n": "n",
    "repeat": "repeat",
    "reason": "why",
    "error": "error message",
    "stop_reason": "stopped because",
    "step_cap": "step limit",
    "time_cap": "time limit",
    "late_best": "best step came late",
    # fits and extrapolation
    "n_lo": "smallest n",
    "n_hi": "largest n",
    "slope": "local slope (diagnostic)",
    "observed": "observed error",
    "predicted": "forecast error",
    "predicted_lo": "forecast, low end",
    "predicted_hi": "forecast, high end",
    "relative_error": "forecast off by",
    "inside_band": "inside the forecast band",
    "floor": "error floor",
    "floor_source": "floor from",
    "n_repeats": "repeats",
    "n_sizes": "sizes",
    "verdict_reason": "why",
    # dimension
    "estimator": "estimator",
    "dimension": "dimension",
    "lower": "low end",
    "upper": "high end",
    "interval_kind": "interval",
    "consensus": "consensus",
    "true_dimension": "true dimension d",
    "dimension_used": "dimension d used",
    "dimension_source": "where d came from",
    # sizing
    "depth": "depth",
    "width": "width",
    "nonzero_budget": "nonzero weights allowed",
    "n_parameters": "parameters (dense)",
    "predicted_error": "predicted error (intrinsic rate)",
    "predicted_error_ambient": "predicted error (ambient rate)",
    "weight_bound": "weight bound",
    "output_bound": "output bound",
    "c_depth": "depth constant",
    "c_width": "width constant",
    "c_nonzero": "nonzero-weights constant",
    "depth_min": "smallest depth",
    "depth_max": "largest depth",
    "width_min": "smallest width",
    "width_max": "largest width",
    "nonzero_min": "fewest nonzero weights",
    "width_multiplier": "width multiplier",
    "width_multipliers": "width multipliers",
    # data and settings
    "source": "data source",
    "target": "target column",
    "n_samples": "samples",
    "ambient_dim": "ambient dimension D",
    "smoothness": "smoothness s",
    "noise_variance": "noise variance",
    "fingerprint": "data fingerprint",
    "seed": "seed",
    "quick": "quick run",
    "sizes": "sample sizes",
    "repeats": "repeats",
    "learners": "learners",
    "precision": "precision",
    "store": "store file",
    "spec": "campaign settings",
    "package": "package",
    "version": "version",
    "setting": "setting",
    "value": "value",
    "quantity": "quantity",
    "item": "item",
}


def plain_label(code_name) -> str:
    """The plain words for a code name that reaches the screen; unknown names lose their underscores."""
    key = str(code_name)
    if key in PLAIN_LABELS:
        return PLAIN_LABELS[key]
    return key.replace("_", " ")


# ------------------------------------------------------------------------------------------ figures
def rc() -> dict:
    """Matplotlib rc settings of manireg figures (use with ``matplotlib.rc_context(rc())``)."""
    return {
        "font.family": "sans-serif",
        "font.sans-serif": ["DejaVu Sans", "Liberation Sans", "Arial", "sans-serif"],
        "font.size": 9.5,
        "axes.titlesize": 10.5,
        "axes.titleweight": "bold",
        "axes.titlelocation": "left",
        "axes.titlecolor": INK,
        "axes.labelsize": 9.5,
        "axes.labelcolor": INK,
        "axes.edgecolor": "#8b95a1",
        "axes.linewidth": 0.8,
        "axes.facecolor": "#ffffff",
        "axes.grid": True,
        "axes.grid.which": "major",
        "axes.spines.top": False,
        "axes.spines.right": False,
        "axes.prop_cycle": _cycler(),
        "grid.color": GRID,
        "grid.linewidth": 0.7,
        "grid.linestyle": "-",
        "xtick.color": "#4a5563",
        "ytick.color": "#4a5563",
        "xtick.labelsize": 8.5,
        "ytick.labelsize": 8.5,
        "legend.fontsize": 7.8,
        "legend.frameon": True,
        "legend.framealpha": 0.92,
        "legend.edgecolor": RULE,
        "legend.fancybox": False,
        "figure.facecolor": "#ffffff",
        "savefig.facecolor": "#ffffff",
        "lines.markersize": 5.0,
        "image.cmap": "cividis",
    }


def _cycler():
    from cycler import cycler  # ships with matplotlib; only called when figures are drawn

    return cycler(color=[s["color"] for s in LEARNER_STYLES.values()])


def apply_style(ax) -> None:
    """Give an existing Axes the manireg frame: light grid behind the data, no top/right spines."""
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        if side in ax.spines and not getattr(ax, "_manireg_twin", False):
            ax.spines[side].set_visible(False)
    ax.grid(True, which="major", color=GRID, linewidth=0.7)
    ax.tick_params(colors="#4a5563", labelsize=8.5)
