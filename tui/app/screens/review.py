"""The weekly review: every comparison of one week, sorted by q, with effect size and alert state.

Enter drills into the main view for the highlighted comparison; k acknowledges its alert.
"""

from __future__ import annotations

from collections.abc import Iterator

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.base import LotwatchScreen
from lotwatch.tui.app.state import step_week
from lotwatch.tui.app.widgets.caution import Caution
from lotwatch.tui.app.widgets.compact import fill
from lotwatch.tui.render.numbers import num, pval, size
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import ComparisonRow, ReviewView
from rich.text import Text
from textual.app import ComposeResult, SystemCommand
from textual.binding import Binding
from textual.widgets import DataTable, Static


class ReviewScreen(LotwatchScreen):
    """One week's family of comparisons with false-discovery control."""

    BINDINGS = [
        Binding("enter", "drill", "Open", tooltip="Show this comparison in the main view"),
        Binding("k", "acknowledge", "Ack", tooltip="Acknowledge the comparison's alert"),
        Binding("p", "record", "Record",
                tooltip="Record this review: open, hold or clear alerts as it decides"),
        # [ ] and Esc stay out of the footer so that it fits 80 columns (the head line names
        # [ ], b goes back as Esc does; help lists them all)
        Binding("left_square_bracket", "week(-1)", "Earlier", key_display="[", show=False),
        Binding("right_square_bracket", "week(1)", "Later", key_display="]", show=False),
        Binding("escape", "back", "Back", show=False),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[ComparisonRow] = []

    def compose_body(self) -> ComposeResult:
        yield Static("Weekly review: computing…", id="review-head")
        yield Caution()
        yield DataTable(id="review-table", cursor_type="row", zebra_stripes=True)

    def on_mount(self) -> None:
        self.query_one(DataTable).focus()
        self.watch(self.app, "review", self.show_review)
        self.watch(self.app, "review_problem", self.show_problem, init=False)

    def on_screen_resume(self) -> None:
        self.post_message(msg.Reload("review"))

    def show_review(self, review: ReviewView | None) -> None:
        if review is None:
            return
        head = Text(no_wrap=False)
        head.append(f"Weekly review {clean(review.window_label, 44)}", style="bold")
        head.append(f": {review.family_size} comparisons, q = {review.fdr_method.upper()} "
                    f"false-discovery-adjusted p (level {review.fdr_level:g}) of the F "
                    "shown ('w': Welch's F, read where the spreads differ). gate = the shift an alert needs. [ ] week · Enter open · p record "
                    "(opens/clears alerts) · k acknowledge")
        for note in review.notes:  # e.g. an earlier week: the state as of that week
            head.append(f"\nNote: {clean(note)}", style="italic")
        self.query_one("#review-head", Static).update(head)
        t = self.query_one(DataTable)
        keep = t.cursor_row
        self.rows = list(review.rows)
        # p, k and effect sizes are left to the drill-in (Enter): at 80 columns the group, the
        # shift with its unit, the gate an alert needs and the alert state need the room.
        headers = ["characteristic", "factor", "lots", "F", "q", "group", "shift", "gate", "alert"]
        right = [False, False, True, True, True, False, True, True, False]
        rows, styles = [], []
        for r in self.rows:
            alert = r.alert_state or ("–" if r.status == "ok" else r.status)
            group = clean(r.groups or "–", 10)
            shift = size(r.largest_shift, r.resolution, clean(r.unit, 4))
            lots = r.n_total if r.lots_total is None else r.lots_total  # lots counted as lots
            rows.append([clean(r.characteristic, 14), clean(r.factor, 7), f"{lots:,}",
                         num(r.f, 3) + ("w" if r.test == "Welch" else ""), pval(r.q), group,
                         shift, size(r.gate, r.resolution),
                         clean(alert, 12)])
            hot = r.alert_state == "open"
            styles.append(["bold" if hot else ""] * 8 + ["bold reverse" if hot else ""])
        fill(t, headers, right, rows, keys=[str(i) for i in range(len(rows))], styles=styles)
        if self.rows:
            t.move_cursor(row=min(keep, len(self.rows) - 1))

    def show_problem(self, message: str) -> None:
        if not message:
            return
        self.query_one("#review-head", Static).update(
            Text("Weekly review not computed: ", style="bold") + Text(clean(message, 300)))

    def palette_commands(self) -> Iterator[SystemCommand]:
        yield from super().palette_commands()
        if not self.state.read_only:
            yield SystemCommand("Record the review", "Open, hold or clear alerts as this "
                                "review decides (p)", self.action_record)

    def _current(self) -> ComparisonRow | None:
        t = self.query_one(DataTable)
        if not self.rows or t.cursor_row < 0 or t.cursor_row >= len(self.rows):
            return None
        return self.rows[t.cursor_row]

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        self.action_drill()

    def action_drill(self) -> None:
        row = self._current()
        if row is not None:
            self.post_message(msg.OpenComparison(row.characteristic, row.factor,
                                                 self.state.review_week))

    def action_acknowledge(self) -> None:
        row = self._current()
        if row is None:
            return
        if row.alert_id is None or row.alert_state not in ("open", "acknowledged"):
            self.app.notify("This comparison has no open alert to acknowledge.", markup=False)
            return
        self.open_acknowledge(row.alert_id)

    def action_record(self) -> None:
        self.post_message(msg.RecordReview())

    def action_week(self, step: int) -> None:
        ov = self.state.overview
        zone = ov.plant_zone if ov is not None else None  # plant weeks, as the review's
        self.post_message(msg.ShowReviewWeek(step_week(self.state.review_week, step, zone)))

    def action_back(self) -> None:
        self.app.switch_mode("board")

