"""The comparison's run chart: one group's daily means drawn distinctly over the others', the
limits, the onset and the group's detector evidence (drawn by ``tui.render.run_chart``).

Focused (d, or Tab), a cursor walks the days: ←/→ a column, Home/End the first/last, ↑/↓ the
previous/next group, Enter the lots behind the point (posted as ``DaysChosen``).
"""

from __future__ import annotations

from lotwatch.tui.render.run_chart import Picture, draw
from lotwatch.tui.services.view_models import RunChart
from rich.console import Group, RenderableType
from rich.text import Text
from textual.binding import Binding
from textual.message import Message
from textual.widget import Widget


class RunChartView(Widget, can_focus=True):
    """Renders a ``RunChart`` it is given; computes nothing but the layout."""

    BINDINGS = [
        Binding("left", "move(-1)", "Earlier", show=False),
        Binding("right", "move(1)", "Later", show=False),
        Binding("home", "move(-10000)", "First day", show=False),
        Binding("end", "move(10000)", "Last day", show=False),
        Binding("up", "group(-1)", "Previous group", show=False),
        Binding("down", "group(1)", "Next group", show=False),
        Binding("enter", "choose", "Lots of the day", show=False),
    ]

    class DaysChosen(Message):
        """Enter on a point: the lots of ``group`` on plant days ``first`` .. ``last``."""

        def __init__(self, group: str, first: str, last: str) -> None:
            super().__init__()
            self.group, self.first, self.last = group, first, last

    class GroupStep(Message):
        """↑/↓ on the chart: show the previous/next group."""

        def __init__(self, step: int) -> None:
            super().__init__()
            self.step = step

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.chart: RunChart | None = None
        self.group: str | None = None
        self.role = ""
        self.kind = "mean"
        self.onset: str | None = None
        self.cursor: int | None = None  # column index; None = the newest column
        self.picture: Picture | None = None

    def show(self, chart: RunChart | None, *, group: str | None, role: str, kind: str,
             onset: str | None, keep_cursor: bool = False) -> None:
        if not keep_cursor:
            self.cursor = None
        self.picture = None
        self.chart, self.group, self.role, self.kind, self.onset = (chart, group, role, kind,
                                                                    onset)
        self.refresh()

    def render(self) -> RenderableType:
        if self.chart is None:
            return Text("The chart appears once the comparison is computed.")
        w, h = self.content_size
        pic = draw(self.chart, group=self.group, role=self.role, kind=self.kind,
                   onset=self.onset, cursor=self._cursor(w, h) if self.has_focus else None,
                   width=w, height=h)
        self.picture = pic
        lines = list(pic.lines)
        if not self.has_focus and lines:
            hint = Text("d: the cursor over the days (←/→, Enter: the lots)", style="dim",
                        no_wrap=True, overflow="crop")
            lines[-1] = hint
        return Group(*lines)

    def drawn(self) -> Picture | None:
        """The chart as drawn at the current size (None before a chart arrives)."""
        if self.picture is None and self.chart is not None:
            w, h = self.content_size
            self.picture = draw(self.chart, group=self.group, role=self.role, kind=self.kind,
                                onset=self.onset, cursor=self.cursor if self.has_focus else None,
                                width=w, height=h)
        return self.picture

    def _columns(self) -> list[tuple[int, int]]:
        """The plot's columns (day offsets) at the current size."""
        pic = self.drawn()
        return pic.columns if pic is not None else []

    def _cursor(self, width: int, height: int) -> int:
        """The cursor's column, clamped to the columns the current size gives; at first the
        newest column where the shown group has values."""
        columns = self._columns()
        n = len(columns)
        if self.cursor is None:
            offsets = {p.offset for p in (self.chart.series.get(self.group or "", ())
                                          if self.chart else ())}
            self.cursor = next((i for i in range(n - 1, -1, -1)
                                if any(a <= o <= b for o in offsets
                                       for a, b in [columns[i]])), n - 1)
        self.cursor = min(max(self.cursor, 0), n - 1)
        return self.cursor

    def on_focus(self) -> None:
        self.refresh()

    def on_blur(self) -> None:
        self.refresh()

    def on_resize(self) -> None:
        self.picture = None

    def action_move(self, step: int) -> None:
        n = len(self._columns())
        if not n:
            return
        current = n - 1 if self.cursor is None else self.cursor
        self.cursor = min(max(current + step, 0), n - 1)
        self.refresh()

    def action_group(self, step: int) -> None:
        self.post_message(self.GroupStep(step))

    def action_choose(self) -> None:
        columns = self._columns()
        if self.chart is None or not columns or self.group is None:
            return
        c = len(columns) - 1 if self.cursor is None else min(max(self.cursor, 0),
                                                              len(columns) - 1)
        a, b = columns[c]
        self.post_message(self.DaysChosen(self.group, self.chart.day(a), self.chart.day(b)))
