"""Shared pieces of the notebook panels: the panel base class and figure handling.

A panel is an ``ipywidgets.VBox`` that builds its controls and an ``Output`` once, assigns ``children`` as
one tuple and observes each control with one update method. An update method collects the control values,
calls a core function through :meth:`Panel._call` (inside ``with self.out:``), keeps the result on the panel
and redraws. Exceptions never reach the widget event loop: their text goes to the panel's status line, to
``self.error`` and (in a live kernel) to the output area. Warnings raised by the core are collected into the
status line as well.

Figures are drawn by the figure functions of :mod:`manireg.plots` on a ``matplotlib.figure.Figure`` that is
not registered with pyplot (so panels leak no pyplot state and can draw from a worker thread) and shown as
PNG bytes in an ``ipywidgets.Image``.
"""

from __future__ import annotations

import contextlib
import html
import io
import threading
import warnings

import ipywidgets as widgets

from ._look import CELL_CSS, HEADER_CSS, STATUS_CSS, TABLE_CSS, WARNING_PREFIX, colour_span

__all__ = ["Panel", "new_axes", "figure_png", "fmt", "fmt_count", "fmt_interval", "table_html", "plain_number",
           "quiet_libraries", "NOT_AVAILABLE"]

#: How a missing or non-finite number reads on screen (never NaN or inf: widget messages are JSON).
NOT_AVAILABLE = "not available"

# warnings that are library housekeeping, not about the user's data or settings
_HOUSEKEEPING = (DeprecationWarning, PendingDeprecationWarning, ImportWarning, FutureWarning)
# third-party modules whose warnings and log lines a user cannot act on
_CHATTY = ("numba", "pynndescent", "umap", "tensorflow", "distributed", "matplotlib", "PIL")

# catch_warnings changes process-wide state; one panel call at a time records warnings
_WARN_LOCK = threading.RLock()


def _shown(w) -> bool:
    """Whether a caught warning is for the user: not library housekeeping, not from a chatty library."""
    if issubclass(w.category, _HOUSEKEEPING):
        return False
    module = str(getattr(w, "filename", "")).replace("\\", "/")
    return not any(f"/{name}/" in module for name in _CHATTY)


def _in_kernel() -> bool:
    """True inside an IPython kernel (where ``with out:`` captures output)."""
    try:
        from IPython import get_ipython
    except ImportError:  # pragma: no cover - ipywidgets depends on IPython
        return False
    return get_ipython() is not None


def new_axes(figsize=(6.4, 4.2), nrows=1, ncols=1):
    """A pyplot-free Figure and its axes (a single Axes for 1 x 1)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, dpi=90, layout="constrained")
    axes = fig.subplots(nrows, ncols)
    return fig, axes


def figure_png(fig) -> bytes:
    """PNG bytes of a Figure (which is then dropped)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def quiet_libraries() -> None:
    """Silence third-party chatter (log lines, compilation notes, TensorFlow's start-up notes)."""
    import logging
    import os

    for name in _CHATTY:
        logging.getLogger(name).setLevel(logging.ERROR)
    os.environ.setdefault("TF_CPP_MIN_LOG_LEVEL", "3")


def plain_number(value):
    """``value`` as a finite float, or None (for None, NaN, inf and non-numbers): what a widget may hold."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if v == v and v not in (float("inf"), float("-inf")) else None


def fmt(value, digits=3) -> str:
    """A number for display: "none" for None, "not available" for NaN, "infinite" for inf."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return "none" if value is None else html.escape(str(value))
    if v != v:
        return NOT_AVAILABLE
    if v in (float("inf"), float("-inf")):
        return "infinite" if v > 0 else "minus infinite"
    if abs(v) >= 1e5 or (0 < abs(v) < 1e-3):
        return f"{v:.{digits}g}"
    return f"{v:.{digits}f}" if abs(v) < 100 else f"{v:,.0f}"


def fmt_count(value) -> str:
    """A sample or parameter count with thousands separators (``inf`` and ``-`` kept)."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return "none" if value is None else NOT_AVAILABLE
    if v != v:
        return NOT_AVAILABLE
    if v in (float("inf"), float("-inf")):
        return "infinite"
    return f"{v:,.0f}"


def fmt_interval(iv, digits=3, *, count=False) -> str:
    """``[lo, hi]``; "none" without an interval, "not available" when an end is not a number."""
    if iv is None:
        return "none"
    lo, hi = iv
    if plain_number(lo) is None and plain_number(hi) is None:
        return NOT_AVAILABLE
    f = fmt_count if count else (lambda v: fmt(v, digits))
    return f"[{f(lo)}, {f(hi)}]"


def table_html(rows, header=None) -> str:
    """A small two-or-more column HTML table from a list of tuples (already formatted strings)."""
    parts = [f'<table style="{TABLE_CSS}">']
    if header:
        parts.append("<tr>" + "".join(f'<th style="{HEADER_CSS}">{html.escape(h)}</th>' for h in header) + "</tr>")
    for row in rows:  # the first column holds labels: kept on one line
        parts.append("<tr>" + "".join(f'<td style="{CELL_CSS}{";white-space:nowrap" if i == 0 else ""}">{c}</td>'
                                      for i, c in enumerate(row)) + "</tr>")
    parts.append("</table>")
    return "".join(parts)


class Panel(widgets.VBox):
    """Base class of the manireg panels.

    Attributes
    ----------
    out : ipywidgets.Output
        Where a live kernel shows the text of errors and warnings of the last update.
    status : ipywidgets.HTML
        One-line status: what was computed, or the error of the last update.
    error : str or None
        Text of the last error (None after a successful update).
    last_message : str or None
        Text of the last failure, including ones shown elsewhere (e.g. the planner's refusal).
    notes : list of str
        Warnings raised by the core during the last update.
    """

    title = "panel"

    def __init__(self, **kwargs):
        self.out = widgets.Output(layout=widgets.Layout(max_height="160px", overflow="auto"))
        self.status = widgets.HTML(value="")
        self.error = None
        self.last_message = None
        self.notes = []
        quiet_libraries()
        super().__init__(**kwargs)
        self.add_class("mr-panel")

    # ------------------------------------------------------------------ core calls
    def _call(self, what, func, *args, _show=True, **kwargs):
        """Run ``func(*args, **kwargs)`` inside ``with self.out:``; return its result or None on error.

        From a worker thread the output context is not entered (it is not thread-safe); the status line and
        ``self.error`` still carry the error.
        """
        main = _in_kernel() and threading.current_thread() is threading.main_thread()
        with (self.out if main else contextlib.nullcontext()):
            if main:
                # clear now, not at the next output: a call that prints nothing must not leave the
                # previous call's error on screen
                self.out.clear_output()
            try:
                with _WARN_LOCK, warnings.catch_warnings(record=True) as caught:
                    warnings.simplefilter("always")
                    result = func(*args, **kwargs)
            except Exception as exc:  # noqa: BLE001 - shown in the panel, never raised into the event loop
                self._set_error(what, exc, show=_show)
                return None
            self.notes = list(dict.fromkeys(" ".join(str(w.message).split()) for w in caught if _shown(w)))
            if main:
                for note in self.notes:
                    print(WARNING_PREFIX + note)
            if _show:
                self.error = None
            return result

    def _set_error(self, what, exc, show=True):
        text = f"{what} failed: {exc}"
        self.last_message = text
        if show:
            self.error = text
            self.status.value = f'<div style="{STATUS_CSS}">{colour_span(text, "error")}</div>'
        if _in_kernel() and threading.current_thread() is threading.main_thread():
            print(text)

    def _set_status(self, text):
        extra = ""
        if self.notes:
            extra = "".join("<br>" + colour_span(WARNING_PREFIX + n, "warning") for n in self.notes[:4])
        self.status.value = f'<div style="{STATUS_CSS}">{html.escape(text)}{extra}</div>'

    def _set_busy(self, text):
        """Say what a step that may take a while is doing (and how far it is), before it starts."""
        self.status.value = f'<div style="{STATUS_CSS}">{colour_span("working: " + text, "busy")}</div>'

    @staticmethod
    def _draw(image, draw, figsize=(6.4, 4.2)):
        """Draw with ``draw(ax)`` (a figure function) and put the PNG into ``image``."""
        fig, ax = new_axes(figsize)
        draw(ax)
        image.value = figure_png(fig)
        image.layout.display = None

    @staticmethod
    def _image():
        """An empty PNG image widget, hidden until a figure is drawn into it.

        ``align_self="flex-start"`` keeps the figure at its drawn size: box children are stretched by default,
        which distorted figures beside taller columns."""
        return widgets.Image(format="png", layout=widgets.Layout(display="none", align_self="flex-start"))

    def results(self):  # pragma: no cover - overridden
        raise NotImplementedError


def set_choices(panel, dropdown, options, preferred=()):
    """Give ``dropdown`` these options (values, or ``(label, value)`` pairs) without firing the panel's update:
    keep the current choice when it is still offered, else the first of ``preferred`` that is, else the first
    option."""
    options = [tuple(o) if isinstance(o, (tuple, list)) else o for o in options]
    if [tuple(o) if isinstance(o, (tuple, list)) else o for o in dropdown.options] == options:
        return
    values = [o[1] if isinstance(o, tuple) else o for o in options]
    panel._quiet = True
    try:
        current = dropdown.value
        dropdown.options = options
        if current in values:
            dropdown.value = current
        elif values:
            dropdown.value = next((c for c in preferred if c in values), values[0])
    finally:
        panel._quiet = False


class BackgroundRun:
    """Run, pause and resume a campaign in a background thread: the part the curve and the policy panels share.

    The panel sets ``campaign`` (an object with ``run(progress=, stop=, on_unit=)`` and ``progress()``),
    ``start_button``, ``pause_button``, ``progress`` and ``progress_label``, calls :meth:`_init_run` in its
    ``__init__``, and provides ``refresh()`` and ``_fit_text()`` (the fit summary appended to the final status,
    or ""). ``run_noun`` names the work in status lines; ``extra_buttons`` are disabled while a run is going.
    """

    run_noun = "campaign"
    extra_buttons = ()

    def _init_run(self):
        import threading

        self.running = False
        self.run_message = None
        self._thread = None
        self._stop = threading.Event()

    def start(self):
        """Run the missing cells in a background thread (returns at once)."""
        import threading

        from ._look import style_progress

        if self.campaign is None:
            self._set_error("start", ValueError(f"this panel shows stored rows; pass a {self.run_source} to run cells."))
            return
        if self.running:
            return
        self._stop.clear()
        self.running = True
        self.start_button.disabled = True
        self.pause_button.disabled = False
        for name in self.extra_buttons:
            getattr(self, name).disabled = True
        style_progress(self.progress, "running")
        self._thread = threading.Thread(target=self._worker, name=f"manireg-{self.run_noun.replace(' ', '-')}-panel",
                                        daemon=True)
        self._thread.start()

    def pause(self):
        """Stop after the unit in flight; finished cells stay in the store (start again to resume)."""
        self._stop.set()
        self.pause_button.disabled = True
        if self.running:
            self._set_busy("pausing after the work unit in flight")

    def wait(self, timeout=None) -> bool:
        """Block until the background run ends (for scripts and tests); True when it has ended."""
        if self._thread is not None:
            self._thread.join(timeout)
            return not self._thread.is_alive()
        return True

    def _run_status(self, p) -> str:
        return f"{self.run_noun} run: {p['finished']} of {p['total']} cells finished, {p['remaining']} remain"

    def _worker(self):
        from ._look import style_progress

        campaign = self.campaign
        try:
            p = campaign.progress()
            if p["finished"]:
                self.run_message = (f"resumed: found {p['finished']} finished cells of {p['total']}; "
                                    f"{p['remaining']} remain")
            else:
                self.run_message = f"started: {p['total']} cells to run"
            self._set_busy(self.run_message)

            def on_unit(rows):
                self.refresh()
                if not self._stop.is_set():
                    self._set_busy(self._run_status(campaign.progress()))

            campaign.run(progress=False, stop=self._stop, on_unit=on_unit)
        except Exception as exc:  # noqa: BLE001 - shown in the panel
            self._set_error(f"the {self.run_noun} run", exc)
        finally:
            self.running = False
            self.start_button.disabled = False
            self.pause_button.disabled = True
            for name in self.extra_buttons:
                getattr(self, name).disabled = False
            paused = self._stop.is_set()
            self.refresh()
            if paused:
                style_progress(self.progress, "paused")
                self.progress_label.value += " (paused)"
            if self.error is None:
                p = campaign.progress()
                head = ("paused: " if paused and p["remaining"] else "") + self._run_status(p)
                fit = self._fit_text()
                self._set_status(head + ("; " + fit if fit else ""))
