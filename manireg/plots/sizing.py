"""Sizing figure: parameter count and predicted error against n, from a :class:`~manireg.theory.sizing.SizingTable`."""

from __future__ import annotations

from .. import style
from ._common import log_ticks, new_axes, styled

__all__ = ["plot_sizing"]

_COUNT = style.LEARNER_STYLES["net"]["color"]
_ERROR = "#a0523a"


@styled
def plot_sizing(table, ax=None):
    """Parameter count (left axis) and predicted error n^(-2s/(2s+d)) next to the ambient n^(-2s/(2s+D)) (right axis)."""
    fig, ax = new_axes(ax, (6.6, 4.2))
    f = table.to_frame()
    D = table.ambient_dim
    ax.plot(f["n"], f["n_parameters"], "-", marker="o", ms=4, color=_COUNT, label="parameters (dense)")
    ax.plot(f["n"], f["nonzero_budget"], "--", marker="s", ms=4, color=_COUNT, alpha=0.7, label="nonzero weights allowed")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("training samples n")
    ax.set_ylabel("parameter count", color=_COUNT)
    ax2 = ax.twinx()
    ax2.grid(False)
    ax2.spines["right"].set_visible(True)
    ax2.spines["top"].set_visible(False)
    ax2.plot(f["n"], f["predicted_error"], **style.reference_line("predicted", _ERROR),
             label=f"{style.predicted_text(table.exponent, 3)}: n^-{table.exponent:.3f} (intrinsic d = {style.fmt_number(table.d)})")
    ax2.plot(f["n"], f["predicted_error_ambient"], **style.reference_line("ambient"),
             label=f"ambient exponent {table.ambient_exponent:.3f}: n^-{table.ambient_exponent:.3f} (D = {D})")
    ax2.set_yscale("log")
    ax2.set_ylabel("predicted error (up to constants)", color=_ERROR)
    log_ticks(ax)
    log_ticks(ax2, "y")
    h1, l1 = ax.get_legend_handles_labels()
    h2, l2 = ax2.get_legend_handles_labels()
    ax.legend(h1 + h2, l1 + l2, loc="upper left", bbox_to_anchor=(0.0, -0.13), borderaxespad=0.0)
    ax.set_title(f"Sizing rule for d = {style.fmt_number(table.d)}, s = {style.fmt_number(table.s)}")
    return fig
