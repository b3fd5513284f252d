"""Trend of each group's mean per window, with the grand mean and the specification limits."""

from __future__ import annotations

from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.data import DetailView
from textual_plotext import PlotextPlot

# Distinct markers keep the groups apart without colour (NO_COLOR, monochrome terminals).
MARKERS = ["o", "x", "+", "*", "#", "@", "%", "&", "$", "~"]
GRAND_MARKER = "-"
LIMIT_MARKER = "="
# A limit further than this many data spans from the data would flatten the trend: it is named
# under the chart instead of drawn.
LIMIT_REACH = 2.0


class TrendChart(PlotextPlot):
    """A plotext chart redrawn only when a new comparison arrives (rendering is costly)."""

    DEFAULT_CSS = """
    TrendChart { height: 1fr; min-height: 10; }
    """

    def __init__(self, *, pending: DetailView | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self._pending = pending

    def on_mount(self) -> None:
        if self._pending is not None:
            self.show(self._pending)
            self._pending = None

    def show(self, detail: DetailView) -> None:
        plt = self.plt
        plt.clear_data()
        plt.clear_figure()
        plt.date_form("Y-m-d")
        unit = clean(detail.characteristic.unit, 10)
        plt.title(f"{clean(detail.characteristic.name, 24)} by {clean(detail.factor, 12)}: "
                  f"group mean per window ({unit})")
        levels: dict[str, list[tuple[str, float]]] = {}
        for p in detail.trend:
            levels.setdefault(p.level, []).append((p.window_end, p.mean))
        dates = sorted({p.window_end for p in detail.trend})
        if not dates:
            plt.title("no windows with data yet")
            self.refresh()
            return
        for i, (level, pts) in enumerate(sorted(levels.items())):
            pts.sort()
            plt.plot([d for d, _ in pts], [m for _, m in pts],
                     marker=MARKERS[i % len(MARKERS)], label=clean(level, 12))
        means = [p.mean for p in detail.trend]
        lo, hi = min(means), max(means)
        span = max(hi - lo, 1e-12)
        caption: list[str] = []
        if detail.grand_means:
            plt.plot([d for d, _ in detail.grand_means], [m for _, m in detail.grand_means],
                     marker=GRAND_MARKER, label="grand mean")
        elif detail.grand_mean is not None:
            plt.plot(dates, [detail.grand_mean] * len(dates), marker=GRAND_MARKER,
                     label="grand mean")
        for name, limit in (("LSL", detail.lsl), ("USL", detail.usl)):
            if limit is None:
                continue
            if lo - LIMIT_REACH * span <= limit <= hi + LIMIT_REACH * span:
                plt.plot(dates, [limit] * len(dates), marker=LIMIT_MARKER, label=name)
            else:
                caption.append(f"{name} {limit:g} off the chart")
        if caption:
            plt.xlabel("; ".join(caption))
        self.refresh()
