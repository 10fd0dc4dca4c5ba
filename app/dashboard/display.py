"""Showing and hiding parts of the page without laying the whole page out again.

Bokeh lays out the whole page (every widget's sizes and styles, 85–150 ms on a 2-core machine) whenever a
model's ``visible``, ``css_classes`` or ``stylesheets`` change; a change of inline ``styles`` only restyles
the element, and the browser reflows the page on its own (a few ms). The status lines that come and go
with every edit and every slider drag (the "working" line, the preview status line, the chart's warnings,
the bands notice) are therefore shown and hidden through their ``display`` style with :func:`set_shown`,
and their ``visible`` stays True.
"""
from __future__ import annotations

__all__ = ["HIDDEN", "SHOWN", "set_shown", "is_shown"]

#: Inline styles of a hidden status line (``display: none``: it takes no room).
HIDDEN = {"display": "none"}
#: Inline styles of a shown one (the style removed: the element's own display applies).
SHOWN = {"display": None}


def set_shown(viewable, shown: bool) -> None:
    """Show or hide ``viewable`` through its inline ``display`` style; nothing is sent when it is already so."""
    want = SHOWN if shown else HIDDEN
    if viewable.styles.get("display") != want["display"]:
        viewable.styles = {**viewable.styles, **want}


def is_shown(viewable) -> bool:
    """Whether ``viewable`` is shown by :func:`set_shown` (and not hidden by ``visible``)."""
    return bool(viewable.visible) and viewable.styles.get("display") != "none"
