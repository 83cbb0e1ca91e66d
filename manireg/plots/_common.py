"""Shared pieces of the figure functions: the manireg rc settings, new axes, readable log-axis ticks."""

from __future__ import annotations

import functools
import math

from .. import style


def styled(func):
    """Run a figure function under the manireg rc settings (fonts, grid, spines, colour cycle)."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        import matplotlib

        with matplotlib.rc_context(style.rc()):
            return func(*args, **kwargs)

    return wrapper


def new_axes(ax, figsize):
    """``(fig, ax)``: the given Axes and its figure, or a new figure of ``figsize``."""
    if ax is None:
        import matplotlib.pyplot as plt

        fig, ax = plt.subplots(figsize=figsize)
    else:
        fig = ax.figure
    style.apply_style(ax)
    return fig, ax


def _majors_in_view(lo: float, hi: float) -> int:
    """How many powers of ten lie in ``[lo, hi]``."""
    if not (lo > 0 and hi > 0):
        return 0
    return max(0, math.floor(math.log10(hi) + 1e-9) - math.ceil(math.log10(lo) - 1e-9) + 1)


def _log_formatters():
    from matplotlib.ticker import Formatter

    class PlainMajor(Formatter):
        """Decades as plain numbers (0.01, 100, 1e6 and beyond)."""

        def __call__(self, x, pos=None):
            return style.fmt_number(x, 2) if x > 0 else ""

    class SparseMinor(Formatter):
        """Label minor ticks only when fewer than two decades show, so every log axis has numbers."""

        def __call__(self, x, pos=None):
            if x <= 0:
                return ""
            lo, hi = sorted(self.axis.get_view_interval())
            if _majors_in_view(lo, hi) >= 2:
                return ""
            span = math.log10(hi / lo) if lo > 0 else 9.0
            mant = round(x / 10 ** math.floor(math.log10(x) + 1e-12), 6)
            keep = {2.0, 3.0, 4.0, 5.0, 6.0, 8.0} if span < 0.5 else ({2.0, 3.0, 5.0} if span < 1.0 else {2.0, 5.0})
            return style.fmt_number(x, 2) if mant in keep else ""

    return PlainMajor(), SparseMinor()


def log_ticks(ax, which: str = "both") -> None:
    """Plain-number ticks on the log axes of ``ax``, with minor labels when fewer than two decades show."""
    axes = {"x": [ax.xaxis], "y": [ax.yaxis], "both": [ax.xaxis, ax.yaxis]}[which]
    for axis in axes:
        if axis.get_scale() != "log":
            continue
        major, minor = _log_formatters()
        axis.set_major_formatter(major)
        axis.set_minor_formatter(minor)


def learner_kwargs(name: str) -> dict:
    """Colour and marker of a learner (from :func:`manireg.style.learner_style`)."""
    s = style.learner_style(name)
    return {"color": s["color"], "marker": s["marker"]}
