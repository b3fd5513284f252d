"""Run chart of each group's mean per window, the flagged group drawn distinctly.

Readable without colour (NO_COLOR): the flagged group is drawn with "#" and named in the title,
the other groups with a muted "·"; LSL, target and USL are always on the scale (the axis widens to
hold them, never "off the chart"); the y labels are written at the characteristic's resolution.
"""

from __future__ import annotations

from lotwatch.tui.render.numbers import decimals_of
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import DetailView
from textual_plotext import PlotextPlot

FLAGGED_MARKER = "#"
OTHER_MARKER = "·"
GRAND_MARKER = "-"
LIMIT_MARKERS = {"LSL": "=", "target": ":", "USL": "="}
ONSET_MARKER = "|"
Y_TICKS = 5


def y_ticks(lo: float, hi: float, decimals: int) -> tuple[list[float], list[str]]:
    """Evenly spaced ticks over [lo, hi] labelled with ``decimals`` decimals."""
    if hi <= lo:
        hi = lo + 10 ** -max(decimals, 0)
    step = (hi - lo) / (Y_TICKS - 1)
    ticks = [lo + i * step for i in range(Y_TICKS)]
    return ticks, [f"{t:.{decimals}f}" for t in ticks]


class TrendChart(PlotextPlot):
    """Redrawn only when a new comparison arrives (rendering is costly)."""

    def __init__(self, *, pending: tuple[DetailView, list[str]] | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self._pending = pending

    def on_mount(self) -> None:
        if self._pending is not None:
            self.show(*self._pending)
            self._pending = None

    def show(self, detail: DetailView, flagged: list[str]) -> None:
        plt = self.plt
        plt.clear_data()
        plt.clear_figure()
        plt.date_form("Y-m-d")
        unit = clean(detail.characteristic.unit, 10)
        levels: dict[str, list[tuple[str, float]]] = {}
        for p in detail.trend:
            levels.setdefault(p.level, []).append((p.window_end, p.mean))
        dates = sorted({p.window_end for p in detail.trend})
        if not dates:
            plt.title("no windows with data yet")
            self.refresh()
            return
        marked = [g for g in flagged if g in levels]
        # Short enough for a half-width chart (plotext drops a title that does not fit): the
        # title is what names the flagged group when there is no colour.
        title = (f"{FLAGGED_MARKER} = {clean(', '.join(marked), 24)} (flagged), "
                 f"{OTHER_MARKER} = others" if marked else f"{OTHER_MARKER} = groups")
        title += f" [{unit}]"
        plt.title(title)
        muted_label = "other groups"
        for level, pts in sorted(levels.items()):
            pts.sort()
            xs, ys = [d for d, _ in pts], [m for _, m in pts]
            if level in marked:
                plt.plot(xs, ys, marker=FLAGGED_MARKER, label=clean(level, 12), color="red+")
            else:
                plt.plot(xs, ys, marker=OTHER_MARKER, color="gray", label=muted_label)
                muted_label = ""
        values = [p.mean for p in detail.trend]
        if detail.grand_means:
            plt.plot([d for d, _ in detail.grand_means], [m for _, m in detail.grand_means],
                     marker=GRAND_MARKER, label="grand mean", color="blue")
        for name, limit in (("LSL", detail.lsl), ("target", detail.target),
                            ("USL", detail.usl)):
            if limit is not None:
                plt.plot(dates, [limit] * len(dates), marker=LIMIT_MARKERS[name], label=name,
                         color="orange")
                values.append(limit)
        lo, hi = min(values), max(values)
        pad = (hi - lo) * 0.05 or 1.0
        onset = next((d.onset for d in detail.detectors
                      if d.onset and d.group in marked and d.evidence), None)
        if onset and dates[0] <= onset <= dates[-1]:
            # The estimated onset of the flagged group's change, a vertical line of "|".
            plt.plot([onset, onset], [lo - pad, hi + pad], marker=ONSET_MARKER, label="onset",
                     color="magenta")
        plt.ylim(lo - pad, hi + pad)
        ticks, labels = y_ticks(lo - pad, hi + pad,
                                max(decimals_of(detail.characteristic.resolution) - 1, 0))
        plt.yticks(ticks, labels)
        self.refresh()
