"""Correct or void one value: a new value (for a correction) and a reason, both required.

The form posts the request up and stays open until the store answers: on success it dismisses
itself, on failure it shows why and keeps what was typed."""

from __future__ import annotations

from typing import cast

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.write_modal import WriteModal
from lotwatch.tui.app.state import AppState
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import LotValue
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.widgets import Input, Static


class ReasonScreen(WriteModal):
    """Enter records; Esc cancels."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, kind: str, value: LotValue, unit: str) -> None:
        super().__init__()
        self.kind = kind  # "correct" | "void"
        self.value = value
        self.unit = unit
        self._saving = False

    def compose(self) -> ComposeResult:
        v = self.value
        verb = "Correct" if self.kind == "correct" else "Void"
        with Vertical(id="reason-form"):
            yield Static(Text(f"{verb} value #{v.measurement_id} of lot {clean(v.lot, 24)}: "
                              f"{v.value} {clean(self.unit, 8)}", style="bold"))
            if self.kind == "correct":
                yield Input(placeholder="new value", compact=True, id="new-value")
            else:
                yield Static("A void value is kept but left out of every statistic.")
            yield Input(placeholder="reason (required, kept in the audit trail)", compact=True,
                        id="reason", max_length=500)
            yield Static("", id="reason-problem")
            yield Static("Enter record · Esc cancel", markup=False)

    def on_mount(self) -> None:
        self.query(Input).first().focus()

    def show_problem(self, text: str) -> None:
        self.query_one("#reason-problem", Static).update(Text(clean(text, 300)))

    @on(Input.Submitted)
    def _submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if self._saving:
            return
        if cast("AppState", self.app).read_only:
            cast("AppState", self.app).refuse_read_only("correcting and voiding values")
            return
        reason = self.query_one("#reason", Input).value.strip()
        new = (self.query_one("#new-value", Input).value.strip()
               if self.kind == "correct" else "")
        if self.kind == "correct" and not new:
            self.show_problem("type the new value")
            self.query_one("#new-value", Input).focus()
            return
        if not reason:
            self.show_problem("a reason is required: say why the value changes")
            self.query_one("#reason", Input).focus()
            return
        self._saving = True
        self.show_problem("recording…")
        mid = self.value.measurement_id
        if self.kind == "correct":
            self.post_message(msg.CorrectValue(self, mid, new, reason))
        else:
            self.post_message(msg.VoidValue(self, mid, reason))
