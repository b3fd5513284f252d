"""Every alert, open and past, with its history; filter by text or state; acknowledge."""

from __future__ import annotations

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.base import LotwatchScreen
from lotwatch.tui.app.widgets.alert_list import AlertList
from lotwatch.tui.app.widgets.caution import Caution
from lotwatch.tui.render.safe_text import clean, literal
from lotwatch.tui.services.view_models import AlertRow, AlertsView
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.widgets import DataTable, Input, Static

STATE_FILTERS = ["all", "open", "acknowledged", "cleared"]


def matches(alert: AlertRow, text: str, state: str) -> bool:
    """The filter: a state (or all) and a case-insensitive substring of characteristic/factor/groups."""
    if state != "all" and alert.state != state:
        return False
    if not text:
        return True
    hay = " ".join([alert.characteristic, alert.factor, alert.groups or "", str(alert.id)])
    return text.casefold() in hay.casefold()


def _local(stamp: str, zone: str | None) -> str:
    """A stored UTC stamp in plant time, short ("12-01 23:24"); as stored if unreadable."""
    from lotwatch.store.timeutil import format_local

    try:
        return format_local(stamp, "%m-%d %H:%M", zone=zone)
    except ValueError:
        return clean(stamp, 20)


class AlertsScreen(LotwatchScreen):
    """Alerts table on top, the highlighted alert's history beneath."""

    BINDINGS = [
        Binding("k", "acknowledge", "Ack", tooltip="Acknowledge the alert with a note"),
        Binding("o", "next_state", "State", tooltip="Show all, open, acknowledged, cleared"),
        Binding("slash", "filter", "Filter", key_display="/"),
        Binding("enter", "drill", "Open", tooltip="Open the alert's comparison"),
        Binding("escape", "back", "Back", show=False),  # b does the same; the footer fits 80
    ]

    def __init__(self) -> None:
        super().__init__()
        self.state_filter = "all"
        self.view: AlertsView | None = None
        self.shown: list[AlertRow] = []

    def compose_body(self) -> ComposeResult:
        yield Static("", id="alerts-state")
        yield Input(placeholder="/ filter by characteristic, factor or group (Esc: back to list)",
                    compact=True, id="alert-filter")
        yield Caution()
        yield AlertList(id="all-alerts")
        with VerticalScroll(id="history-box"):
            yield Static("", id="history")

    def on_mount(self) -> None:
        self.query_one(AlertList).focus()
        self.watch(self.app, "alerts", self.show_alerts)
        self._show_state()

    def on_screen_resume(self) -> None:
        self.post_message(msg.Reload("alerts"))

    def _show_state(self) -> None:
        n_open = sum(1 for a in (self.view.alerts if self.view else []) if a.state == "open")
        self.query_one("#alerts-state", Static).update(Text(
            f"Alerts: showing {self.state_filter} ({len(self.shown)}), {n_open} open. "
            "o state · / filter · k acknowledge", no_wrap=True, overflow="ellipsis"))

    def show_alerts(self, view: AlertsView | None) -> None:
        if view is None:
            return
        self.view = view
        self._apply_filter()

    def _apply_filter(self) -> None:
        if self.view is None:
            return
        text = self.query_one("#alert-filter", Input).value.strip()
        self.shown = [a for a in self.view.alerts if matches(a, text, self.state_filter)]
        self.query_one(AlertList).show(self.shown)
        self._show_state()
        self._show_history()

    def _current(self) -> AlertRow | None:
        lst = self.query_one(AlertList)
        aid = lst.selected_id
        return next((a for a in self.shown if a.id == aid), None)

    def _show_history(self) -> None:
        a = self._current()
        out = Text()
        if a is None or self.view is None:
            out.append("No alert selected." if self.shown else "No alerts match.")
        else:
            out.append(f"#{a.id} {clean(a.characteristic, 24)} by {clean(a.factor, 12)}: "
                       f"{a.state}, opened {clean(a.opened_window or a.opened_at, 24)}",
                       style="bold")
            if a.direction:
                out.append(f", {clean(a.groups or '', 24)} {clean(a.direction, 10)}")
            for e in self.view.history.get(a.id, []):
                out.append("\n")
                out.append(f"{_local(e.at, self.view.plant_zone)}  {clean(e.event, 12)}")
                if e.window:
                    out.append(f"  {clean(e.window, 26)}")
                if e.by:
                    out.append("  by ")
                    out.append_text(literal(e.by, 24))
                if e.note:
                    out.append(": ")
                    out.append_text(literal(e.note, 200))
                if e.text:
                    out.append("\n  ")
                    out.append_text(literal(e.text, 300))
        self.query_one("#history", Static).update(out)

    @on(DataTable.RowHighlighted)
    def _highlighted(self) -> None:
        self._show_history()

    @on(Input.Changed, "#alert-filter")
    def _filter_changed(self) -> None:
        self._apply_filter()

    @on(Input.Submitted, "#alert-filter")
    def _filter_done(self) -> None:
        self.query_one(AlertList).focus()

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()  # Enter on a row opens the alert's comparison
        self.action_drill()

    def action_filter(self) -> None:
        self.query_one("#alert-filter", Input).focus()

    def action_next_state(self) -> None:
        i = STATE_FILTERS.index(self.state_filter)
        self.state_filter = STATE_FILTERS[(i + 1) % len(STATE_FILTERS)]
        self._apply_filter()

    def action_acknowledge(self) -> None:
        a = self._current()
        if a is None:
            return
        if a.state != "open":
            self.app.notify(f"Alert #{a.id} is {a.state}; only open alerts are acknowledged.",
                            markup=False)
            return
        self.open_acknowledge(a.id)

    def action_drill(self) -> None:
        a = self._current()
        if a is not None:
            self.post_message(msg.OpenComparison(a.characteristic, a.factor, None))

    def action_back(self) -> None:
        if self.focused is self.query_one("#alert-filter", Input):
            self.query_one(AlertList).focus()
        else:
            self.app.switch_mode("board")
