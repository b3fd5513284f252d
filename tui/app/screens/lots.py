"""The lots behind a number: one group's values in the window, with who logged them and notes;
correct (c) or void (v) a value with a reason, see its history (h). Same rules and audit trail
as ``lotwatch correct`` / ``void`` / ``history``: the writes go through the store's API."""

from __future__ import annotations

from typing import cast

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.size_guard import SizeGuard
from lotwatch.tui.app.state import AppState
from lotwatch.tui.app.widgets.caution import Caution
from lotwatch.tui.app.widgets.compact import fill
from lotwatch.tui.render.safe_text import clean, literal
from lotwatch.tui.services.view_models import LotsRequest, LotsView, LotValue
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static


def value_cell(v: LotValue) -> str:
    text = v.value
    if v.original is not None:
        text += f" (was {v.original})"
    return text


def mark_cell(v: LotValue) -> str:
    marks = []
    if v.voided:
        marks.append("void")
    if v.outside_spec:
        marks.append("OUT of spec")
    return ", ".join(marks)


class LotsScreen(SizeGuard, Screen[None]):
    """Values of one group, newest first; the answer to every request comes back here."""

    BINDINGS = [
        Binding("c", "correct", "Correct", tooltip="Correct the value with a reason"),
        Binding("v", "void", "Void", tooltip="Void the value with a reason"),
        Binding("h", "history", "History", tooltip="The value's audit trail"),
        Binding("escape", "back", "Back"),
    ]

    def __init__(self, request: LotsRequest) -> None:
        super().__init__()
        self.request = request
        self.lots: LotsView | None = None

    @property
    def state(self) -> AppState:
        return cast("AppState", self.app)

    def compose(self) -> ComposeResult:
        r = self.request
        yield Static(Text(f"Lots of {clean(r.characteristic, 24)} with {clean(r.factor, 12)} = "
                          f"{clean(r.level, 20)}: reading…", style="bold"), id="lots-head")
        yield DataTable(id="lots-table", cursor_type="row", zebra_stripes=True)
        with VerticalScroll(id="lots-history"):
            yield Static("", id="history")
        yield Caution()
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.query_one(DataTable).focus()
        self._load()
        # Every store change (ours included) reloads the board; reload the lots with it.
        self.watch(self.app, "overview", lambda _: self._load(), init=False)

    def _load(self) -> None:
        self.post_message(msg.LoadLots(self, self.request))

    def on_lots_loaded(self, message: msg.LotsLoaded) -> None:
        message.stop()
        view = self.lots = message.lots
        r = view.request
        head = Text(f"Lots of {clean(r.characteristic, 24)} with {clean(r.factor, 12)} = "
                    f"{clean(r.level, 20)}", style="bold")
        head.append(f", {clean(view.window_label, 30)}: {len(view.values)} value(s) in "
                    f"{clean(view.unit, 8)}" + (" (the newest shown)" if view.truncated else ""))
        head.append(". c correct · v void · h history · Esc back")
        self.query_one("#lots-head", Static).update(head)
        rows = [[str(v.measurement_id), clean(v.lot, 22), v.measured_at, value_cell(v),
                 mark_cell(v), clean(v.by, 12), clean(v.note, 30)] for v in view.values]
        styles = [["bold" if (v.voided or v.outside_spec) else ""] * 7 for v in view.values]
        table = self.query_one(DataTable)
        keep = table.cursor_row
        fill(table, ["#", "lot", "time (plant)", "value", "", "by", "note"],
             [True, False, False, True, False, False, False], rows,
             keys=[str(v.measurement_id) for v in view.values], styles=styles)
        if rows:
            table.move_cursor(row=min(max(keep, 0), len(rows) - 1))

    def current(self) -> LotValue | None:
        if self.lots is None or not self.lots.values:
            return None
        table = self.query_one(DataTable)
        i = table.cursor_row
        return self.lots.values[i] if 0 <= i < len(self.lots.values) else None

    def action_correct(self) -> None:
        self._edit("correct")

    def action_void(self) -> None:
        self._edit("void")

    def _edit(self, kind: str) -> None:
        from lotwatch.tui.app.screens.reason import ReasonScreen

        v = self.current()
        if v is None:
            return
        if self.state.read_only:
            self.state.refuse_read_only("correcting and voiding values")
            return
        if v.voided:
            self.notify(f"Value #{v.measurement_id} is already void.", markup=False)
            return
        assert self.lots is not None
        self.app.push_screen(ReasonScreen(kind, v, self.lots.unit))

    def action_history(self) -> None:
        v = self.current()
        if v is not None:
            self.post_message(msg.LoadHistory(self, v.measurement_id))

    def on_history_loaded(self, message: msg.HistoryLoaded) -> None:
        message.stop()
        out = Text(f"History of value #{message.measurement_id}", style="bold")
        for line in message.lines:
            out.append(f"\n{line.at}  {clean(line.action, 8)}  by ")
            out.append_text(literal(line.by, 24))
            if line.action == "correct":
                out.append(f": {clean(line.old or '', 20)} -> {clean(line.new or '', 20)}")
            elif line.action == "log":
                out.append(f": {clean(line.new or '', 20)}")
            if line.reason:
                out.append(" (")
                out.append_text(literal(line.reason, 200))
                out.append(")")
        self.query_one("#history", Static).update(out)

    def action_back(self) -> None:
        self.dismiss(None)
