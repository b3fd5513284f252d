"""Acknowledge an alert: who (the login name) and a note saying what was checked or done."""

from __future__ import annotations

from typing import cast

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.write_modal import WriteModal
from lotwatch.tui.app.state import AppState
from lotwatch.tui.app.widgets.caution import Caution
from lotwatch.tui.render.numbers import pval, size
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import AlertRow
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.validation import Function
from textual.widgets import Input, Static


class AcknowledgeScreen(WriteModal):
    """Type a note, Enter records the acknowledgement; the form stays open if it fails."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, alert: AlertRow) -> None:
        super().__init__()
        self.alert = alert
        self._saving = False

    @property
    def state(self) -> AppState:
        return cast("AppState", self.app)

    def compose(self) -> ComposeResult:
        a = self.alert
        head = Text(f"Acknowledge alert #{a.id}: ", style="bold")
        head.append(f"{clean(a.characteristic, 24)} by {clean(a.factor, 12)}")
        body = Text(f"groups {clean(a.groups or '-', 24)}, "
                    f"shift {size(a.size, a.resolution or None, clean(a.unit, 8))}, "
                    f"q {pval(a.q)}, state {clean(a.state)}")
        with Vertical():
            yield Static(head)
            yield Static(body)
            yield Static(Text(f"Recorded as acknowledged by {clean(self.state.user, 24)}."))
            yield Caution()
            yield Input(placeholder="note: what you checked or did (required)", compact=True,
                        validators=[Function(lambda v: bool(v.strip()),
                                             "a note is required: say what you checked or did")],
                        id="ack-note", max_length=500)
            yield Static("", id="ack-problem")
            yield Static("Enter record · Esc cancel", markup=False)

    def on_mount(self) -> None:
        self.query_one(Input).focus()

    @on(Input.Submitted)
    def _submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if self._saving:
            return
        if self.state.read_only:
            self.state.refuse_read_only("acknowledging alerts")
            return
        result = event.input.validate(event.value)
        if result is not None and not result.is_valid:
            self.show_problem("; ".join(result.failure_descriptions))
            return
        self._saving = True
        self.show_problem("recording…")
        self.post_message(msg.Acknowledge(self, self.alert.id, event.value.strip()))

    def show_problem(self, message: str) -> None:
        self.query_one("#ack-problem", Static).update(Text(clean(message, 300)))
