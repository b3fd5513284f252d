"""A yes/no question (y / n, Enter = yes, Escape = no)."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static


class ConfirmScreen(ModalScreen[bool]):
    """Ask one question; dismiss with True (y/Enter) or False (n/Escape)."""

    BINDINGS = [
        Binding("y,enter", "answer(True)", "Yes"),
        Binding("n,escape", "answer(False)", "No"),
    ]

    DEFAULT_CSS = """
    ConfirmScreen { align: center middle; }
    ConfirmScreen Vertical { width: 64; height: auto; border: round $warning;
        background: $surface; padding: 0 1; }
    """

    def __init__(self, question: str) -> None:
        super().__init__()
        self.question = question

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(self.question, markup=False)
            yield Static("y / Enter: yes    n / Esc: no", markup=False)

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)
