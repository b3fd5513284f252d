"""A table of alerts: state, characteristic × factor, groups, size, q, when opened."""

from __future__ import annotations

from rich.text import Text
from textual.widgets import DataTable

from tui.data import AlertRow
from tui.safe_text import literal
from tui.widgets.numbers import num, pval


class AlertList(DataTable):
    """Alerts, one row each; the row key is the alert id as text."""

    DEFAULT_CSS = """
    AlertList { height: auto; max-height: 1fr; }
    """

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True
        self.add_column("#", key="id")
        self.add_column("state", key="state")
        self.add_column("characteristic", key="characteristic")
        self.add_column("factor", key="factor")
        self.add_column("groups", key="groups")
        self.add_column(Text("shift", justify="right"), key="size")
        self.add_column(Text("q", justify="right"), key="q")
        self.add_column("opened", key="opened")

    def show(self, alerts: list[AlertRow]) -> None:
        keep = self.cursor_row
        self.clear()
        for a in alerts:
            state = Text(a.state, style="bold reverse" if a.state == "open" else "")
            self.add_row(
                Text(str(a.id), justify="right"), state, literal(a.characteristic, 18),
                literal(a.factor, 10), literal(a.groups or "", 14),
                Text(num(a.size, 3), justify="right"), Text(pval(a.q), justify="right"),
                literal((a.opened_window or a.opened_at or "")[:16], 16),
                key=str(a.id),
            )
        if alerts:
            self.move_cursor(row=min(keep, len(alerts) - 1))

    @property
    def selected_id(self) -> int | None:
        if self.row_count == 0:
            return None
        key = self.coordinate_to_cell_key(self.cursor_coordinate).row_key
        return int(key.value) if key.value is not None else None
