"""A yes/no question: only y says yes (Enter alone never confirms); n or Escape says no."""

from __future__ import annotations

from lotwatch.tui.app.screens.size_guard import SizeGuard
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static


class ConfirmScreen(SizeGuard, ModalScreen[bool]):
    """Ask one question; dismiss with True (y) or False (n/Escape)."""

    BINDINGS = [
        Binding("y", "answer(True)", "Yes"),
        Binding("n,escape", "answer(False)", "No"),
    ]

    def __init__(self, question: str) -> None:
        super().__init__()
        self.question = question

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(self.question, markup=False)
            yield Static("y: yes    n / Esc: no", markup=False)

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)
