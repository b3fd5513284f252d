"""The board, the first screen: has anything drifted, which group, how much, does it matter.

Every characteristic × factor with data, most urgent first, the cursor on the most urgent row;
beneath, the highlighted comparison's flagged group, its size and its ANOVA table. Enter opens
the comparison view. The screen shows only what the app's workers computed.
"""

from __future__ import annotations

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.base import LotwatchScreen
from lotwatch.tui.app.widgets.anova_panel import anova_table, decision_text
from lotwatch.tui.app.widgets.board_table import DIRECTION, BoardTable, size_text
from lotwatch.tui.app.widgets.caution import CAUTION
from lotwatch.tui.app.widgets.status_line import StatusLine
from lotwatch.tui.render.numbers import decimals_of, fixed, pval
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import BoardRow
from rich.console import Group, RenderableType
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.events import Resize
from textual.widgets import DataTable, Static


def headline(row: BoardRow) -> Text:
    """"fill_volume by line: RB-2 high by +1.01 mL (17% of tolerance; min shift 0.50)"."""
    t = Text(no_wrap=False)
    t.append(f"{clean(row.characteristic, 24)} by {clean(row.factor, 12)}: ", style="bold")
    t.append(f"{row.state}. ")
    if row.group:
        t.append(f"{clean(row.group, 24)} {DIRECTION.get(row.direction or '', '')}",
                 style="bold")
        t.append(f" by {size_text(row)}")
        if row.onset:
            t.append(f" since {clean(row.onset, 10)}")
        extra = []
        if row.percent_of_tolerance is not None:
            extra.append(f"{row.percent_of_tolerance:.0f}% of tolerance")
        if row.min_shift is not None:
            extra.append(f"min shift {fixed(row.min_shift, decimals_of(row.resolution) - 1)} "
                         f"{clean(row.unit, 8)}".rstrip())
        if row.evidence is not None:
            extra.append(f"evidence {row.evidence:.2f} × the threshold")
        if extra:
            t.append(f" ({'; '.join(extra)})")
        t.append(f", q {pval(row.q)}.")
    return t


class BoardScreen(LotwatchScreen):
    """The board and a preview of the highlighted comparison."""

    BINDINGS = [
        Binding("enter", "open", "Open", tooltip="Open the highlighted comparison"),
    ]

    def compose_body(self) -> ComposeResult:
        yield StatusLine(show_view=False, id="status")
        yield BoardTable(id="board")
        yield Static("", id="preview")

    def on_mount(self) -> None:
        self.watch(self.app, "overview", self._show_board)
        self.watch(self.app, "detail", self._show_preview, init=False)
        self.watch(self.app, "detail_problem", self._show_preview, init=False)
        self.query_one(BoardTable).focus()

    def _show_board(self, *_: object) -> None:
        ov = self.state.overview
        if ov is None:
            return
        table = self.query_one(BoardTable)
        v = self.state.view
        table.show(ov.board, (v.characteristic, v.factor), wide=self.size.width >= 100)
        if not ov.board:
            text = ("Reading the store…" if ov.partial else
                    "Nothing to show yet: no characteristic has lots in the window. Log lots "
                    "with n, or add a characteristic with lotwatch characteristic add.")
            self.query_one("#preview", Static).update(Text(text))
            return
        self._show_preview()

    def on_resize(self, event: Resize) -> None:
        super().on_resize(event)
        self._show_board()

    def _row(self) -> BoardRow | None:
        ov = self.state.overview
        sel = self.query_one(BoardTable).selected
        if ov is None or sel is None:
            return None
        return next((r for r in ov.board if (r.characteristic, r.factor) == sel), None)

    def _show_preview(self, *_: object) -> None:
        row = self._row()
        if row is None:
            return
        parts: list[RenderableType] = [headline(row)]
        d = self.state.detail
        if self.state.detail_problem:
            parts.append(Text(clean(self.state.detail_problem, 300)))
        elif d is not None and (d.characteristic.name, d.factor) == (row.characteristic,
                                                                     row.factor):
            if d.battery.anova.df_within > 0:
                parts.append(anova_table(d))
            parts.append(decision_text(d))
        else:
            parts.append(Text("computing…", style="italic"))
        parts.append(Text(CAUTION, style="italic"))
        self.query_one("#preview", Static).update(Group(*parts))

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        sel = self.query_one(BoardTable).selected
        if sel is None:
            return
        v = self.state.view
        if (v.characteristic, v.factor) != sel:
            self.post_message(msg.ChooseView(v.but(characteristic=sel[0], factor=sel[1])))
        self._show_preview()

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        self.action_open()

    def action_open(self) -> None:
        sel = self.query_one(BoardTable).selected
        if sel is not None:
            self.post_message(msg.OpenComparison(sel[0], sel[1], self.state.view.week))
