"""The main view: characteristics on the left; groups, tests, trend and alerts of one comparison.

At 80×24 the detail of the selected characteristic × factor is split into four tabs (keys 1-4).
The screen only shows what the app's workers computed; it never touches the store.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from lotwatch.tui.app.widgets.alert_list import AlertList
from lotwatch.tui.app.widgets.anova_panel import AnovaPanel
from lotwatch.tui.app.widgets.characteristics import CharacteristicList
from lotwatch.tui.app.widgets.group_table import GroupTable
from lotwatch.tui.render.safe_text import clean, literal
from lotwatch.tui.services.data import DetailView, Overview
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, OptionList, Static, TabbedContent, TabPane

if TYPE_CHECKING:
    from lotwatch.tui.app.application import LotwatchApp

TABS = ["groups", "tests", "trend", "alerts"]


class StatusLine(Static):
    """One line: what is shown (characteristic, factor, window, alpha) and the store mode."""

    DEFAULT_CSS = """
    StatusLine { height: 1; background: $panel; padding: 0 1; }
    """


class MainScreen(Screen[None]):
    """Characteristics × factor detail; keyboard only."""

    BINDINGS = [
        Binding("f", "next_factor", "Factor", tooltip="Group by the next factor"),
        Binding("F", "prev_factor", "Factor back", show=False),
        Binding("w", "next_window", "Window", tooltip="Next window kind"),
        Binding("s", "next_alpha", "Alpha", tooltip="Next significance level"),
        Binding("left_square_bracket", "earlier_week", "Earlier week", show=False,
                key_display="["),
        Binding("right_square_bracket", "later_week", "Later week", show=False,
                key_display="]"),
        Binding("pagedown", "page(1)", "Scroll tab down", show=False, priority=True),
        Binding("pageup", "page(-1)", "Scroll tab up", show=False, priority=True),
        Binding("1", "tab('groups')", "Groups", show=False),
        Binding("2", "tab('tests')", "Tests", show=False),
        Binding("3", "tab('trend')", "Trend", show=False),
        Binding("4", "tab('alerts')", "Alerts tab", show=False),
    ]

    DEFAULT_CSS = """
    MainScreen #body { height: 1fr; }
    MainScreen #detail { width: 1fr; }
    MainScreen TabbedContent { height: 1fr; }
    MainScreen TabPane { padding: 0 0; }
    MainScreen #recent { height: auto; padding: 0 1; }
    MainScreen #letters { height: auto; padding: 0 1; }
    MainScreen #detail-message { height: auto; padding: 0 1; }
    """

    @property
    def lw(self) -> LotwatchApp:
        return self.app  # type: ignore[return-value]

    def compose(self) -> ComposeResult:
        yield StatusLine("lotwatch: opening the store…", id="status")
        with Horizontal(id="body"):
            yield CharacteristicList(id="characteristics")
            with Vertical(id="detail"):
                with TabbedContent(id="tabs", initial="groups"):
                    with TabPane("1 Groups", id="groups"):
                        yield GroupTable(id="group-table")
                        yield Static("", id="letters")
                        yield Static("", id="recent")
                    with TabPane("2 Tests", id="tests"):
                        with VerticalScroll():
                            yield AnovaPanel("", id="anova")
                    with TabPane("3 Trend", id="trend"):
                        # The chart (plotext) is mounted with the first result, keeping its
                        # import off the first paint.
                        yield Static("The trend appears once the comparison is computed.",
                                     id="trend-wait")
                    with TabPane("4 Alerts", id="alerts"):
                        yield Static("", id="alerts-head")
                        yield AlertList(id="alert-list")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.lw.main_screen = self
        self.refresh_status()
        if self.lw.overview is not None:
            self.show_overview(self.lw.overview)
        if self.lw.detail is not None:
            self.show_detail(self.lw.detail)
        self.query_one(CharacteristicList).focus()

    def on_screen_resume(self) -> None:
        self.refresh_status()
        if self.lw.overview is not None:
            self.show_overview(self.lw.overview)
        if self.lw.detail is not None:
            self.show_detail(self.lw.detail)

    # --- showing results -------------------------------------------------------------------

    def refresh_status(self, note: str | None = None) -> None:
        v = self.lw.view
        text = Text(no_wrap=True, overflow="ellipsis")
        text.append(clean(v.characteristic or "no characteristic", 22), style="bold")
        text.append(" by ")
        text.append(clean(v.factor or "-", 10), style="bold")
        text.append(f" · {clean(self.lw.window_text(), 30)} · alpha {v.alpha:g}")
        if self.lw.read_only:
            text.append(" · READ-ONLY", style="bold reverse")
        if note:
            text.append(f" · {clean(note, 30)}", style="italic")
        self.query_one(StatusLine).update(text)

    def show_overview(self, overview: Overview) -> None:
        lst = self.query_one(CharacteristicList)
        lst.show(overview.characteristics, overview.states, self.lw.view.characteristic)
        if not overview.characteristics:
            empty = ("This store has no characteristics yet. Add one with: lotwatch "
                     "characteristic add NAME --unit U --resolution R (it appears here at once).")
            self.query_one(AnovaPanel).show_message(empty)
            self.query_one("#letters", Static).update(Text(empty))
        head = self.query_one("#alerts-head", Static)
        n = len(overview.open_alerts)
        n_open = sum(1 for a in overview.open_alerts if a.state == "open")
        head.update(Text(f"{n} active alert(s) in this store, {n_open} not yet acknowledged. "
                         "Press a for every alert and its history, k there to acknowledge.",
                         style="bold" if n_open else ""))
        self.query_one(AlertList).show(overview.open_alerts)
        self.refresh_status()

    def show_detail(self, detail: DetailView) -> None:
        self.query_one(GroupTable).show(detail)
        self.query_one(AnovaPanel).show(detail)
        self._show_trend(detail)
        letters = detail.battery.letters
        letter_text = Text(no_wrap=False)
        if len(detail.battery.groups) < 2:
            n = len(detail.battery.groups)
            letter_text.append(
                f"Not enough data in {clean(detail.window_label, 40)}: {n} group(s) with at "
                f"least the minimum lots. Log lots with n, choose another window with w, or "
                "another factor with f.")
        elif letters:
            letter_text.append(f"{detail.battery.recommendation.posthoc} letters "
                               "(groups sharing a letter do not differ): ", style="italic")
            letter_text.append(", ".join(f"{clean(g, 12)} {clean(s, 6)}"
                                         for g, s in letters.items()))
        self.query_one("#letters", Static).update(letter_text)
        recent = Text()
        if detail.recent:
            recent.append("Last logged: ", style="bold")
            for i, r in enumerate(detail.recent):
                if i:
                    recent.append(" · ")
                recent.append_text(literal(r.lot, 24))
                recent.append(" ")
                recent.append_text(literal(r.level, 12))
                recent.append(f" {clean(r.values, 24)} ({r.measured_at})")
        self.query_one("#recent", Static).update(recent)
        self.refresh_status()

    def _show_trend(self, detail: DetailView) -> None:
        from lotwatch.tui.app.widgets.trend_chart import TrendChart

        charts = self.query(TrendChart)
        if charts:
            charts.first().show(detail)
            return
        self.query_one("#trend-wait", Static).display = False
        self.query_one("#trend", TabPane).mount(TrendChart(id="trend-chart", pending=detail))

    def show_detail_problem(self, message: str) -> None:
        self.query_one(AnovaPanel).show_message(message)
        self.refresh_status(note="not computed")

    # --- keys ------------------------------------------------------------------------------

    def on_option_list_option_highlighted(self, event: OptionList.OptionHighlighted) -> None:
        if event.option.id and event.option.id != self.lw.view.characteristic:
            self.lw.choose(characteristic=event.option.id)

    def action_next_factor(self) -> None:
        self.lw.cycle_factor(+1)

    def action_prev_factor(self) -> None:
        self.lw.cycle_factor(-1)

    def action_next_window(self) -> None:
        self.lw.cycle_window()

    def action_next_alpha(self) -> None:
        self.lw.cycle_alpha()

    def action_earlier_week(self) -> None:
        self.lw.shift_week(-1)

    def action_later_week(self) -> None:
        self.lw.shift_week(+1)

    def action_page(self, step: int) -> None:
        """Scroll the shown tab a page, whatever has focus (the list keeps ↑/↓)."""
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
