"""SizingPanel: the network the sizing rules give for n, d, s and D, and the predicted exponents.

Controls -> :func:`manireg.theory.sizing.size_network`, :func:`manireg.theory.rates.regression_exponent`,
:func:`~manireg.theory.rates.ambient_exponent` and :func:`manireg.theory.sizing.sizing_table` ->
:func:`manireg.plots.sizing.plot_sizing`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import ipywidgets as widgets

from .._results import ResultMixin
from ._base import Panel, fmt, table_html
from ._look import caption_html, title_html

__all__ = ["SizingPanel", "SizingResults"]

#: Sample sizes of the plot unless the caller gives others.
DEFAULT_N_GRID = (100, 300, 1000, 3000, 10000, 30000, 100000)

#: SizingConstants fields with a control, in display order, with their labels (plain words first).
CONSTANT_LABELS = {
    "c_depth": "depth constant c_depth",
    "c_width": "width constant c_width",
    "c_nonzero": "nonzero-weight constant c_nonzero",
    "depth_max": "largest depth depth_max",
    "width_max": "largest width width_max",
}
_CONSTANT_FIELDS = tuple(CONSTANT_LABELS)


def _sizing_table_function():
    from manireg.theory.sizing import sizing_table

    return sizing_table


@dataclass
class SizingResults(ResultMixin):
    """Current results of a :class:`SizingPanel`."""

    n: int
    dimension: float
    smoothness: float
    ambient_dim: int
    width_multiplier: float
    constants: dict
    spec: object = None
    predicted_exponent: float | None = None
    ambient_exponent: float | None = None
    table: object = field(default=None, repr=False)
    _skip_in_dict = ("table",)


class SizingPanel(Panel):
    """Depth, width, nonzero budget and parameter count for n samples, with the predicted exponents.

    Parameters
    ----------
    n : int
        Training samples.
    dimension : float
        Intrinsic dimension d.
    smoothness : float
        Hölder smoothness s of the target.
    ambient_dim : int
        Ambient dimension D (the number of features).
    constants : SizingConstants, optional
        Initial constants (the documented defaults when None).
    n_grid : sequence of int
        Sample sizes of the plot.
    width_multiplier : float, default=1.0
        Factor on the rules' width.

    Attributes
    ----------
    n, dimension, smoothness, ambient_dim, width_multiplier : the controls
    constants : dict of SizingConstants field -> control
    spec : ArchitectureSpec or None
    predicted_exponent : float or None
        2s/(2s+d).
    ambient_exponent : float or None
        2s/(2s+D): the predicted exponent if the ambient dimension D counted instead of d.
    table : the result of ``sizing_table`` for the plot, or None
    """

    title = "Sizing"

    def __init__(self, n=1000, dimension=2.0, smoothness=1.0, ambient_dim=10, *, constants=None,
                 n_grid=DEFAULT_N_GRID, width_multiplier=1.0):
        super().__init__()
        from manireg.theory.sizing import SizingConstants

        c = SizingConstants() if constants is None else constants
        self.spec = self.predicted_exponent = self.ambient_exponent = self.table = None
        style = {"description_width": "250px"}
        lay = widgets.Layout(width="400px")
        self.n = widgets.BoundedIntText(value=int(n), min=2, max=10**9, description="samples n", style=style,
                                        layout=lay)
        self.dimension = widgets.BoundedFloatText(value=float(dimension), min=1.0, max=10**6, step=0.1,
                                                  description="intrinsic dimension d", style=style, layout=lay)
        self.smoothness = widgets.BoundedFloatText(value=float(smoothness), min=0.05, max=100.0, step=0.1,
                                                   description="smoothness s", style=style, layout=lay)
        self.ambient_dim = widgets.BoundedIntText(value=int(ambient_dim), min=1, max=10**7,
                                                  description="ambient dimension D", style=style, layout=lay)
        self.width_multiplier = widgets.BoundedFloatText(value=float(width_multiplier), min=0.01, max=100.0,
                                                         step=0.25, description="width multiplier", style=style,
                                                         layout=lay)
        self.constants = {}
        for name, label in CONSTANT_LABELS.items():
            value = getattr(c, name)
            cls = widgets.BoundedIntText if isinstance(value, int) else widgets.BoundedFloatText
            kw = {"min": 1, "max": 10**6} if isinstance(value, int) else {"min": 1e-6, "max": 1e6, "step": 0.1}
            self.constants[name] = cls(value=value, description=label, style=style, layout=lay, **kw)
        self._base_constants = c
        self.n_grid = widgets.Text(value=", ".join(str(int(v)) for v in n_grid), description="sample sizes of the plot",
                                   style=style, layout=widgets.Layout(width="650px"), continuous_update=False)
        self.spec_html = widgets.HTML()
        self.image = self._image()

        controls = widgets.VBox([self.n, self.dimension, self.smoothness, self.ambient_dim, self.width_multiplier,
                                 widgets.HTML(caption_html("sizing constants")), *self.constants.values()])
        self.children = (
            widgets.HTML(title_html("Network size from the sizing rules")),
            widgets.HBox([controls, self.spec_html]),
            self.n_grid, self.image, self.status, self.out,
        )
        for w in (self.n, self.dimension, self.smoothness, self.ambient_dim, self.width_multiplier, self.n_grid,
                  *self.constants.values()):
            w.observe(self.update, names="value")
        self.update()

    # ------------------------------------------------------------------ settings
    def sizing_constants(self):
        """A SizingConstants from the controls (other fields as given at construction)."""
        import dataclasses

        return dataclasses.replace(self._base_constants, **{k: w.value for k, w in self.constants.items()})

    def constants_dict(self) -> dict:
        """The constants with a control, as a plain dict (what a net learner's ``constants`` takes)."""
        return {k: w.value for k, w in self.constants.items()}

    def plot_sizes(self) -> list:
        return [int(float(tok)) for tok in self.n_grid.value.replace(";", ",").split(",") if tok.strip()]

    # ------------------------------------------------------------------ update
    def update(self, change=None):
        """Size the network and compute the exponents for the current controls; redraw the plot."""
        from manireg.theory.rates import ambient_exponent, regression_exponent
        from manireg.theory.sizing import size_network

        n, d = int(self.n.value), float(self.dimension.value)
        s, D = float(self.smoothness.value), int(self.ambient_dim.value)
        constants = self._call("reading the sizing constants", self.sizing_constants)
        if constants is None:
            return
        spec = self._call("sizing the network", size_network, n, d, s, D, constants=constants,
                          width_multiplier=float(self.width_multiplier.value))
        if spec is None:
            return
        b = self._call("the predicted exponent", regression_exponent, d, s)
        b_amb = self._call("the ambient exponent", ambient_exponent, D, s, d=d)
        if b is None or b_amb is None:
            return
        self.spec, self.predicted_exponent, self.ambient_exponent = spec, float(b), float(b_amb)
        self.spec_html.value = table_html([
            ("depth (hidden layers)", str(spec.depth)),
            ("width", str(spec.width)),
            ("nonzero-weight budget", f"{spec.nonzero_budget:,}"),
            ("parameters (dense)", f"{spec.n_parameters:,}"),
            ("weight bound", fmt(spec.weight_bound)),
            ("predicted exponent 2s/(2s+d)", f"<b>{fmt(b)}</b>"),
            ("predicted ambient exponent 2s/(2s+D)", fmt(b_amb)),
        ], header=("quantity", "value"))
        self._set_status(f"n={n:,}, d={d:g}, s={s:g}, D={D}: depth {spec.depth}, width {spec.width}, "
                         f"{spec.n_parameters:,} parameters; predicted exponent {fmt(b)} "
                         f"(ambient: {fmt(b_amb)})")
        self.update_plot(constants)

    def update_plot(self, constants=None):
        """Parameter count and predicted error against n (``sizing_table`` -> ``plot_sizing``)."""
        from manireg.plots.sizing import plot_sizing

        sizing_table = self._call("the sizing plot", _sizing_table_function)
        if sizing_table is None:
            return
        constants = constants if constants is not None else self.sizing_constants()
        try:
            grid = self.plot_sizes()
        except ValueError as exc:
            self._set_error("reading the sample sizes of the plot", exc)
            return
        table = self._call("the sizing table", sizing_table, grid, float(self.dimension.value),
                           float(self.smoothness.value), int(self.ambient_dim.value), constants)
        if table is None:
            return
        self.table = table
        self._call("the sizing plot", self._draw, self.image, lambda ax: plot_sizing(table, ax=ax), (6.4, 4.0))

    def results(self) -> SizingResults:
        return SizingResults(n=int(self.n.value), dimension=float(self.dimension.value),
                             smoothness=float(self.smoothness.value), ambient_dim=int(self.ambient_dim.value),
                             width_multiplier=float(self.width_multiplier.value), constants=self.constants_dict(),
                             spec=self.spec, predicted_exponent=self.predicted_exponent,
                             ambient_exponent=self.ambient_exponent, table=self.table)
