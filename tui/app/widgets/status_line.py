"""One line: what is shown (characteristic, factor, window, alpha), "computing…" while the shown
numbers are stale, and the store's mode."""

from __future__ import annotations

from typing import TYPE_CHECKING, cast

from lotwatch.tui.render.safe_text import clean
from rich.text import Text
from textual.widgets import Static

if TYPE_CHECKING:
    from lotwatch.tui.app.state import AppState


class StatusLine(Static):
    """Repaints itself when the app's view, result or store state changes."""

    def __init__(self, *, show_view: bool = True, **kwargs) -> None:
        super().__init__("lotwatch: opening the store…", **kwargs)
        self.show_view = show_view

    def on_mount(self) -> None:
        for name in ("view", "detail", "computing", "store_note", "overview"):
            self.watch(self.app, name, self._repaint, init=False)
        self._repaint()

    def _repaint(self, *_: object) -> None:
        st = cast("AppState", self.app)
        v = st.view
        text = Text(no_wrap=True, overflow="ellipsis")
        if self.show_view:
            text.append(clean(v.characteristic or "no comparison yet", 22), style="bold")
            text.append(" by ")
            text.append(clean(v.factor or "-", 10), style="bold")
            text.append(f" · {clean(st.window_text(), 30)} · alpha {v.alpha:g}")
        elif st.overview is not None:
            text.append(f"Board · {clean(st.overview.window_label or 'reading…', 30)}",
                        style="bold")
        if st.computing or st.overview is None or st.overview.partial:
            text.append(" · computing…", style="italic")
        if st.read_only:
            text.append(" · READ-ONLY", style="bold reverse")
        if st.store_note:
            text.append(f" · {clean(st.store_note, 30)}", style="italic")
        self.update(text)
