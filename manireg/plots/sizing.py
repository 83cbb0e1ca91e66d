"""Sizing figure: parameter count and predicted error against n, from a :class:`~manireg.theory.sizing.SizingTable`."""

from __future__ import annotations

__all__ = ["plot_sizing"]


def plot_sizing(table, ax=None):
    """Parameter count (left axis) and predicted error n^(-2s/(2s+d)) next to the ambient n^(-2s/(2s+D)) (right axis)."""
    import matplotlib.pyplot as plt

    if ax is None:
        fig, ax = plt.subplots(figsize=(6.4, 4.0))
    else:
        fig = ax.figure
    f = table.to_frame()
    ax.plot(f["n"], f["n_parameters"], "o-", color="tab:blue", label="parameters (dense)")
    ax.plot(f["n"], f["nonzero_budget"], "s--", color="tab:blue", alpha=0.6, label="nonzero budget")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("training samples n")
    ax.set_ylabel("parameter count", color="tab:blue")
    ax2 = ax.twinx()
    ax2.plot(f["n"], f["predicted_error"], "-", color="tab:red", label=f"n^-{table.exponent:.3f} (intrinsic d={table.d:g})")
    ax2.plot(f["n"], f["predicted_error_ambient"], ":", color="tab:red", label=f"n^-{table.ambient_exponent:.3f} (ambient D={table.input_dim})")
    ax2.set_yscale("log")
    ax2.set_ylabel("predicted error (up to constants)", color="tab:red")
    h1, l1 = ax.get_legend_handles_labels()
    h2, l2 = ax2.get_legend_handles_labels()
    ax.legend(h1 + h2, l1 + l2, fontsize=7, loc="upper center")
    ax.set_title(f"Sizing rule for d={table.d:g}, s={table.s:g}")
    ax.grid(True, which="both", alpha=0.25)
    return fig
