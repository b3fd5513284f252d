"""A table of alerts: state, characteristic × factor, groups, size, q, when opened."""

from __future__ import annotations

from lotwatch.tui.app.widgets.compact import fill
from lotwatch.tui.render.numbers import pval, size
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import AlertRow
from textual.widgets import DataTable

HEADERS = ["#", "state", "characteristic", "factor", "groups", "shift", "q", "opened in"]
RIGHT = [True, False, False, False, False, True, True, False]


class AlertList(DataTable):
    """Alerts, one row each; the row key is the alert id as text."""

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True
        fill(self, HEADERS, RIGHT, [])

    def show(self, alerts: list[AlertRow]) -> None:
        keep = self.cursor_row
        rows, styles = [], []
        for a in alerts:
            rows.append([str(a.id), clean(a.state, 12), clean(a.characteristic, 16),
                         clean(a.factor, 8), clean(a.groups or "", 12),
                         size(a.size, a.resolution or None, clean(a.unit, 6)),
                         pval(a.q), clean(a.opened_window or a.opened_at or "", 22)])
            styles.append(["", "bold reverse" if a.state == "open" else ""] + [""] * 6)
        fill(self, HEADERS, RIGHT, rows, keys=[str(a.id) for a in alerts], styles=styles)
        if alerts:
            self.move_cursor(row=min(max(keep, 0), len(alerts) - 1))

    @property
    def selected_id(self) -> int | None:
        if self.row_count == 0:
            return None
        key = self.coordinate_to_cell_key(self.cursor_coordinate).row_key
        return int(key.value) if key.value is not None else None
