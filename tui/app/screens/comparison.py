"""The comparison view: one characteristic × factor with its group table, ANOVA table and
decision, and the run chart, together at 80×24 (side by side from 120 columns); tabs hold what
does not fit: the pairwise table of the recommended post-hoc test, Dunnett against a chosen
reference, the spread view and the companion tests. The group table's cursor chooses the group
the chart draws apart (at first the flagged one); d puts a cursor on the chart's days and Enter
lists that group's lots of those days. The screen shows only computed results.
"""

from __future__ import annotations

from collections.abc import Iterator

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.base import LotwatchScreen
from lotwatch.tui.app.widgets.anova_panel import AnovaPanel, anova_table, decision_text
from lotwatch.tui.app.widgets.group_table import GroupTable
from lotwatch.tui.app.widgets.posthoc_tables import DunnettTable, PairwiseTable, SpreadTable
from lotwatch.tui.app.widgets.status_line import StatusLine
from lotwatch.tui.app.widgets.trend_chart import RunChartView
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import (
    ACKNOWLEDGED,
    MEAN_ALERT,
    SPREAD_ALERT,
    DetailView,
)
from rich.console import Group
from rich.text import Text
from textual.app import ComposeResult, SystemCommand
from textual.binding import Binding
from textual.containers import Container, Vertical, VerticalScroll
from textual.widgets import DataTable, Static, TabbedContent, TabPane

TABS = ["chart", "pairs", "dunnett", "spread", "tests"]
EVIDENCE_LINES = 4


def evidence_text(detail: DetailView, limit: int = EVIDENCE_LINES) -> Text:
    """The detectors under the chart: each group's evidence as a fraction of its threshold
    (1 = crossed), direction, kind and estimated onset; most evidence first."""
    out = Text(no_wrap=False)
    if not detail.detectors:
        out.append("Detector evidence: none stored yet (a review advances the detectors).",
                   style="italic")
        return out
    out.append("Evidence (1 = threshold): ", style="bold")
    for i, d in enumerate(detail.detectors[:limit]):
        if i:
            out.append(" · ")
        part = f"{clean(d.group, 12)} {d.kind} {clean(d.direction or '', 6)} {d.evidence:.2f}"
        if d.onset and d.evidence:
            part += f" since {d.onset}"
        out.append(part, style="bold" if d.alarmed else "")
        if d.alarmed:
            out.append(" (alarm)", style="bold")
    return out


class ComparisonScreen(LotwatchScreen):
    """One comparison; keyboard only."""

    BINDINGS = [
        Binding("f", "factor(1)", "Factor", tooltip="Group by the next factor"),
        Binding("F", "factor(-1)", "Factor back", show=False),
        # w and s stay out of the footer so that it fits 80 columns (help and palette list them)
        Binding("w", "next_window", "Window", show=False, tooltip="Next window kind"),
        Binding("s", "next_alpha", "Alpha", show=False, tooltip="Next significance level"),
        Binding("g", "reference", "Reference", show=False,
                tooltip="Dunnett: the next group as reference"),
        Binding("l", "lots", "Lots", tooltip="The lots behind the highlighted group"),
        Binding("d", "chart", "Days", show=False, tooltip="The chart's cursor over the days: ←/→ move, "
                "↑/↓ group, Enter the lots of that day"),
        Binding("left_square_bracket", "week(-1)", "Earlier week", show=False,
                key_display="["),
        Binding("right_square_bracket", "week(1)", "Later week", show=False, key_display="]"),
        Binding("pagedown", "page(1)", "Scroll tab down", show=False, priority=True),
        Binding("pageup", "page(-1)", "Scroll tab up", show=False, priority=True),
        Binding("1", "tab('chart')", "Chart", show=False),
        Binding("2", "tab('pairs')", "Pairwise", show=False),
        Binding("3", "tab('dunnett')", "Dunnett", show=False),
        Binding("4", "tab('spread')", "Spread", show=False),
        Binding("5", "tab('tests')", "Tests", show=False),
        Binding("escape", "back", "Board", show=False, tooltip="Back to the board"),
    ]

    _shown: tuple[str, str] | None = None  # the comparison on screen
    _chart_shown: str | None = None  # the group the chart draws apart
    _following = False  # False while the screen itself moves the group table's cursor

    def compose_body(self) -> ComposeResult:
        yield StatusLine(id="status")
        with Container(id="cmp-body"):
            with Vertical(id="cmp-main"):
                yield GroupTable(id="group-table")
                yield Static("", id="cmp-anova")
            with TabbedContent(id="tabs", initial="chart"):
                with TabPane("1 Chart", id="chart"):
                    yield RunChartView(id="run-chart")
                    yield Static("", id="evidence", classes="tab-title")
                with TabPane("2 Pairs", id="pairs"):
                    yield Static("", id="pairs-title", classes="tab-title")
                    yield PairwiseTable(id="pairs-table")
                with TabPane("3 Dunnett", id="dunnett"):
                    yield Static("", id="dunnett-title", classes="tab-title")
                    yield DunnettTable(id="dunnett-table")
                with TabPane("4 Spread", id="spread"):
                    yield Static("", id="spread-title", classes="tab-title")
                    yield SpreadTable(id="spread-table")
                with TabPane("5 Tests", id="tests"):
                    with VerticalScroll(id="tests-scroll"):
                        yield AnovaPanel("", id="anova")

    def on_mount(self) -> None:
        self.watch(self.app, "detail", self._show_detail)
        self.watch(self.app, "detail_problem", self._show_problem, init=False)
        self.query_one(GroupTable).focus()

    # --- showing results -------------------------------------------------------------------

    def _board_groups(self, detail: DetailView) -> tuple[list[str], bool]:
        """The board row's groups for this comparison and whether an alert flags them (else
        they are the window's most shifted group)."""
        ov = self.state.overview
        if ov is None:
            return [], False
        for r in ov.board:
            if (r.characteristic, r.factor) == (detail.characteristic.name, detail.factor):
                groups = [g.strip() for g in (r.group or "").split(",") if g.strip()]
                return groups, r.state in (MEAN_ALERT, SPREAD_ALERT, ACKNOWLEDGED)
        return [], False

    def _flagged(self, detail: DetailView) -> list[str]:
        groups, alert = self._board_groups(detail)
        return groups if alert else []

    def _show_detail(self, detail: DetailView | None) -> None:
        if detail is None:
            return
        changed = self._shown != (detail.characteristic.name, detail.factor)
        self._shown = (detail.characteristic.name, detail.factor)
        table = self.query_one(GroupTable)
        group = self._chart_group(detail) if changed else self._chart_shown
        self._following = False  # the table's cursor moves below: not the reader's choice
        table.show(detail)
        names = [g.name for g in detail.battery.groups]
        if group in names:
            table.move_cursor(row=names.index(group))
            # once laid out, scroll the row into view (the table may be three rows high)
            self.call_after_refresh(table.move_cursor, row=names.index(group))
        self._following = True
        b = detail.battery
        parts: list = []
        if len(b.groups) < 2:
            parts.append(Text(
                f"Not enough data in {clean(detail.window_label, 40)}: {len(b.groups)} group(s) "
                "with at least the minimum lots. Log lots with n, choose another window with "
                "w, or another factor with f."))
        else:
            if b.anova.df_within > 0:
                # Below 32 rows the chart needs the Total row's line (Tests has it).
                parts.append(anova_table(detail, total=self.size.height >= 32))
            # Under 32 rows the sentence alone fits one line at 80 columns.
            parts.append(decision_text(detail) if self.size.height >= 32
                         else Text(clean(b.anova.decision), style="bold"))
        self.query_one("#cmp-anova", Static).update(Group(*parts))
        self.query_one(AnovaPanel).show(detail)
        self.query_one("#pairs-title", Static).update(
            Text(self.query_one(PairwiseTable).show(detail)))
        self.query_one("#dunnett-title", Static).update(
            Text(self.query_one(DunnettTable).show(detail)))
        self.query_one("#spread-title", Static).update(
            Text(self.query_one(SpreadTable).show(detail)))
        if changed:
            self.query_one("#tests-scroll", VerticalScroll).scroll_home(animate=False)
        self._show_chart(detail, group, keep_cursor=not changed)
        self.query_one("#evidence", Static).update(
            evidence_text(detail, 2 if self.size.height < 32 else EVIDENCE_LINES))

    def _chart_group(self, detail: DetailView) -> str | None:
        """The group the chart draws distinctly when a comparison arrives: the flagged one,
        else the board's most shifted one, else the one whose detector is closest to its
        threshold (if it has any evidence), else the table's first."""
        names = {g.name for g in detail.battery.groups} | set(
            detail.chart.series if detail.chart else ())
        flagged = [g for g in self._flagged(detail) if g in names]
        if flagged:
            return flagged[0]
        shifted = [g for g in self._board_groups(detail)[0] if g in names]
        if shifted:
            return shifted[0]
        top = next((d for d in detail.detectors if d.evidence and d.group in names), None)
        if top is not None:
            return top.group
        # nothing stands out: the table's first group, drawn as "highlighted" (↑/↓ change it)
        return detail.battery.groups[0].name if detail.battery.groups else None

    def _show_chart(self, detail: DetailView, group: str | None, *,
                    keep_cursor: bool = False) -> None:
        """Draw ``group`` distinctly; its strongest detector says whether the chart shows
        means or (an alarmed spread detector) SDs, and where the onset is."""
        mine = [d for d in detail.detectors if d.group == group]
        top = mine[0] if mine else None  # most evidence first
        kind = "spread" if top is not None and top.kind == "spread" and top.alarmed else "mean"
        line = next((d for d in mine if d.kind == kind), None)
        onset = line.onset if line is not None and line.evidence else None
        groups, alert = self._board_groups(detail)
        role = ("flagged" if alert else "largest shift") if group in groups else "highlighted"
        self.query_one(RunChartView).show(detail.chart, group=group, role=role, kind=kind,
                                          onset=onset, keep_cursor=keep_cursor)
        self._chart_shown = group

    def _show_problem(self, message: str) -> None:
        if message:
            self.query_one(AnovaPanel).show_message(message)
            self.query_one("#cmp-anova", Static).update(Text(clean(message, 300)))

    # --- keys ------------------------------------------------------------------------------

    def palette_commands(self) -> Iterator[SystemCommand]:
        yield from super().palette_commands()
        yield SystemCommand("Next factor", "Group by the next factor (f)",
                            lambda: self.action_factor(1))
        yield SystemCommand("Next window kind", "Trailing days, last lots, calendar week (w)",
                            self.action_next_window)
        yield SystemCommand("Next significance level", "alpha 0.05 / 0.01 / 0.10 (s)",
                            self.action_next_alpha)
        yield SystemCommand("Lots of the highlighted group", "List, correct, void (l)",
                            self.action_lots)

    def _choose(self, **changes: object) -> None:
        self.post_message(msg.ChooseView(self.state.view.but(**changes)))

    def action_factor(self, step: int) -> None:
        ov = self.state.overview
        if ov is None or not ov.factors:
            return
        names = [f.name for f in ov.factors]
        v = self.state.view
        i = names.index(v.factor) if v.factor in names else -step
        self._choose(factor=names[(i + step) % len(names)])

    def action_next_alpha(self) -> None:
        view = self.state.view.next_alpha()
        self.notify(f"Significance level alpha = {view.alpha:g}", markup=False, timeout=2)
        self.post_message(msg.ChooseView(view))

    def action_next_window(self) -> None:
        from lotwatch.tui.app.state import WINDOW_NAMES

        view = self.state.view.next_window(self.state.window_kind())
        self.notify(f"Window: {WINDOW_NAMES[view.window or 'trailing']}. [ and ] move a week "
                    "back and forth.", markup=False, timeout=3)
        self.post_message(msg.ChooseView(view))

    def action_week(self, step: int) -> None:
        ov = self.state.overview
        zone = ov.plant_zone if ov is not None else None  # plant weeks, as the review's
        self.post_message(msg.ChooseView(self.state.view.shifted_week(step, zone)))

    def action_reference(self) -> None:
        d = self.state.detail
        if d is None or not d.battery.groups:
            return
        names = [g.name for g in d.battery.groups]
        ref = self.state.view.reference
        nxt = names[(names.index(ref) + 1) % len(names)] if ref in names else names[0]
        self._choose(reference=nxt)
        self.query_one(TabbedContent).active = "dunnett"

    def action_lots(self) -> None:
        from lotwatch.tui.app.screens.lots import LotsScreen
        from lotwatch.tui.services.view_models import LotsRequest

        d = self.state.detail
        table = self.query_one(GroupTable)
        if d is None or table.row_count == 0:
            return
        key = table.coordinate_to_cell_key(table.cursor_coordinate).row_key.value
        if key is None:
            return
        v = self.state.view
        self.app.push_screen(LotsScreen(LotsRequest(d.characteristic.name, d.factor, key,
                                                    week=v.week, window=v.window)))

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        """The group table's cursor chooses the group the chart draws distinctly."""
        d = self.state.detail
        if event.data_table.id != "group-table" or d is None or \
                not self._following:
            return
        key = event.row_key.value if event.row_key is not None else None
        if key is not None and key != self._chart_shown:
            self._show_chart(d, key, keep_cursor=True)

    def on_run_chart_view_group_step(self, event: RunChartView.GroupStep) -> None:
        table = self.query_one(GroupTable)
        if table.row_count:
            table.move_cursor(row=(table.cursor_row + event.step) % table.row_count)

    def on_run_chart_view_days_chosen(self, event: RunChartView.DaysChosen) -> None:
        """Enter on a chart point: the lots of that group on those plant days."""
        from lotwatch.tui.app.screens.lots import LotsScreen
        from lotwatch.tui.services.view_models import LotsRequest

        d = self.state.detail
        if d is None:
            return
        v = self.state.view
        self.app.push_screen(LotsScreen(LotsRequest(
            d.characteristic.name, d.factor, event.group, week=v.week, window=v.window,
            since=event.first, until=event.last)))

    def action_chart(self) -> None:
        self.query_one(TabbedContent).active = "chart"
        self.query_one(RunChartView).focus()

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if event.data_table.id == "group-table":
            event.stop()
            self.action_lots()

    def action_page(self, step: int) -> None:
        """Scroll the shown tab a page, whatever has focus."""
        tabs = self.query_one(TabbedContent)
        pane = self.query_one(f"#{tabs.active}", TabPane)
        for widget in pane.query("VerticalScroll, DataTable"):
            if widget.max_scroll_y > 0:
                if step > 0:
                    widget.scroll_page_down()
                else:
                    widget.scroll_page_up()
                return

    def action_tab(self, tab: str) -> None:
        self.query_one(TabbedContent).active = tab

    def action_back(self) -> None:
        self.app.switch_mode("board")
