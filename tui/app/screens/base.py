"""What every full screen of the app shares: typed access to the app's state, the keys that work
everywhere except in forms, and the "terminal too small" notice."""

from __future__ import annotations

from collections.abc import Iterator
from typing import cast

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.size_guard import SizeGuard, TooSmall
from lotwatch.tui.app.state import AppState
from textual.app import ComposeResult, SystemCommand
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer


class LotwatchScreen(SizeGuard, Screen[None]):
    """A full screen: ``compose_body`` gives its content; n and ? work here."""

    BINDINGS = [
        Binding("n", "new_lot", "Log lot", tooltip="Open the lot entry form"),
        Binding("question_mark", "help", "Help", key_display="?",
                tooltip="Keys and what every number means"),
    ]

    @property
    def state(self) -> AppState:
        return cast("AppState", self.app)

    def compose(self) -> ComposeResult:
        yield TooSmall(id="too-small")
        yield from self.compose_body()
        yield Footer(compact=True)

    def compose_body(self) -> ComposeResult:
        yield from ()

    def palette_commands(self) -> Iterator[SystemCommand]:
        """This screen's commands for the palette (only ones that work here)."""
        if not self.state.read_only:
            yield SystemCommand("Log a lot", "Open the lot entry form (n)", self.action_new_lot)
        yield SystemCommand("Help", "Keys and what every number means (?)", self.action_help)

    def action_new_lot(self) -> None:
        from lotwatch.tui.app.screens.entry import LotEntryScreen

        st = self.state
        if st.read_only:
            st.refuse_read_only("logging lots")
            return
        if st.overview is None:
            self.notify("Still reading the store; try again in a moment.", markup=False)
            return
        if not st.overview.characteristics:
            self.notify("No characteristics yet: add one with lotwatch characteristic add.",
                        markup=False, severity="warning")
            return
        self.app.push_screen(LotEntryScreen(st.overview, st.view.characteristic,
                                            st.last_tags))

    def open_acknowledge(self, alert_id: int) -> None:
        """The acknowledge form for an alert the app has loaded."""
        from lotwatch.tui.app.screens.acknowledge import AcknowledgeScreen

        st = self.state
        if st.read_only:
            st.refuse_read_only("acknowledging alerts")
            return
        pools = [st.alerts.alerts if st.alerts else [],
                 st.overview.open_alerts if st.overview else []]
        alert = next((a for pool in pools for a in pool if a.id == alert_id), None)
        if alert is None:
            self.notify(f"Alert #{alert_id} is not loaded yet; try again.", markup=False)
            self.post_message(msg.Reload("alerts"))
            return
        self.app.push_screen(AcknowledgeScreen(alert))

    def action_help(self) -> None:
        from lotwatch.tui.app.screens.help import HelpScreen

        self.app.push_screen(HelpScreen(shared=list(LotwatchScreen.BINDINGS)))
