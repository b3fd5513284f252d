"""The "terminal too small" notice every screen shares, full or modal: below 80×24 cut
p-values and half-drawn forms mislead, so only the notice shows."""

from __future__ import annotations

from typing import cast

from rich.text import Text
from textual.events import Resize
from textual.screen import Screen
from textual.widget import Widget
from textual.widgets import Static

MIN_WIDTH, MIN_HEIGHT = 80, 24


class TooSmall(Static):
    """Shown instead of the screen's content below 80×24 (cut p-values mislead)."""


def too_small_text(width: int, height: int) -> Text:
    return Text(f"Terminal too small: {width}×{height}. lotwatch needs at least {MIN_WIDTH}×"
                f"{MIN_HEIGHT} to show its tables and forms without cutting numbers. Enlarge "
                "the window (Esc closes a form, q quits).", justify="center")


class SizeGuard:
    """For every screen, full or modal: below 80×24 only the notice shows (app.tcss hides the
    other children of a ``-too-small`` screen); ``-wide`` (120 columns and more) and ``-short``
    (under 32 rows) let the stylesheet fit the layout. A screen that does not compose a
    ``TooSmall`` gets one mounted the first time it is too small."""

    _focus_before_small: Widget | None = None

    def on_resize(self, event: Resize) -> None:
        screen = cast("Screen[object]", self)
        w, h = event.size
        small = w < MIN_WIDTH or h < MIN_HEIGHT
        screen.set_class(small, "-too-small")
        screen.set_class(w >= 120, "-wide")
        screen.set_class(h < 32, "-short")
        if not small:
            # Hiding the content took the focus away; give it back (the form keeps working).
            back = getattr(self, "_focus_before_small", None)
            self._focus_before_small = None
            if back is not None and back.is_attached:
                screen.call_after_refresh(back.focus)
            return
        if screen.focused is not None and not isinstance(screen.focused, TooSmall):
            self._focus_before_small = screen.focused
        found = screen.query(TooSmall)
        if found:
            found.first().update(too_small_text(w, h))
        else:
            screen.mount(TooSmall(too_small_text(w, h), id="too-small"))
