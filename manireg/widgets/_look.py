"""The look of the notebook panels: every colour and CSS string the panels use, in one place.

Buttons get colours of our own through :func:`style_button` (no stock ``button_style`` values, no stock
icons); status lines, verdicts, warnings and errors get theirs through :func:`colour_span`. Tables, titles and
captions take the inline CSS strings below (an ``ipywidgets.HTML`` value cannot rely on a page stylesheet).
"""

from __future__ import annotations

import html

from .. import style

__all__ = ["COLOURS", "TABLE_CSS", "HEADER_CSS", "CELL_CSS", "TITLE_CSS", "CAPTION_CSS", "STATUS_CSS",
           "WARNING_PREFIX", "style_button", "style_progress", "colour_span", "title_html", "caption_html"]

#: Panel colours, taken from the one style module (manireg.style) that the figures and the report use too.
COLOURS = {
    "ink": style.INK,
    "muted": style.MUTED,
    "rule": style.RULE,
    "run": style.BUTTONS["primary"]["background"],     # "start / resume", "set up campaign"
    "pause": style.STATUS["paused"],
    "action": style.BUTTONS["primary"]["border"],      # other actions ("compute the 2-D view")
    "button_text": style.BUTTONS["primary"]["color"],
    "disabled": style.STATUS["idle"],
    "progress": style.STATUS["running"],
    "progress_done": style.STATUS["done"],
    "progress_paused": style.STATUS["paused"],
    "measured": style.STATUS["done"],
    "unverified": style.WARNING,
    "warning": style.WARNING,
    "error": style.ERROR,
    "busy": style.STATUS["running"],
}

_FONT = "font-family: 'Source Sans 3', 'Segoe UI', Helvetica, Arial, sans-serif"
TABLE_CSS = f"border-collapse:collapse;font-size:13px;color:{COLOURS['ink']};{_FONT}"
HEADER_CSS = (f"text-align:left;padding:3px 12px 3px 0;border-bottom:1px solid {COLOURS['rule']};"
              f"color:{COLOURS['muted']};font-weight:600")
CELL_CSS = "text-align:left;padding:2px 12px 2px 0;vertical-align:top"
TITLE_CSS = f"font-size:14px;font-weight:600;color:{COLOURS['ink']};margin:6px 0 2px 0;{_FONT}"
CAPTION_CSS = f"font-size:12px;color:{COLOURS['muted']};{_FONT}"
STATUS_CSS = f"font-size:13px;color:{COLOURS['ink']};{_FONT}"

#: The one prefix of every warning (style.WARNING_PREFIX), on the command line and in the panels.
WARNING_PREFIX = style.WARNING_PREFIX

_BUTTON_ROLES = ("run", "pause", "action")


def style_button(button, role: str):
    """Give ``button`` the colours of ``role`` ("run", "pause" or "action") and return it."""
    if role not in _BUTTON_ROLES:
        raise ValueError(f"style_button: role must be one of {_BUTTON_ROLES}; got {role!r}.")
    button.button_style = ""
    button.icon = ""
    button.style.button_color = COLOURS[role]
    button.style.text_color = COLOURS["button_text"]
    button.style.font_weight = "600"
    button.add_class(f"mr-button-{role}")
    return button


def style_progress(bar, state: str):
    """Colour a progress bar for ``state``: "running", "done" or "paused"."""
    key = {"running": "progress", "done": "progress_done", "paused": "progress_paused"}[state]
    bar.bar_style = ""
    bar.style.bar_color = COLOURS[key]
    return bar


def colour_span(text: str, role: str, *, bold=False, escape=True) -> str:
    """``text`` in the colour of ``role`` (a key of :data:`COLOURS`) as an HTML span."""
    body = html.escape(text) if escape else text
    weight = ";font-weight:600" if bold else ""
    return f'<span style="color:{COLOURS[role]}{weight}">{body}</span>'


def title_html(text: str) -> str:
    return f'<div style="{TITLE_CSS}">{html.escape(text)}</div>'


def caption_html(text: str) -> str:
    return f'<div style="{CAPTION_CSS}">{html.escape(text)}</div>'
