"""The run chart as text: one group's daily means (or SDs, for a spread alert) drawn distinctly
over the other groups' muted ones, with LSL, target and USL always on the scale, the estimated
onset, a cursor over the days, and the group's detector evidence underneath.

Readable without colour (NO_COLOR): the shown group is "#" (bold), the others "·" (dim), the
limits "═" (LSL, USL) and "─" (target) named in the right margin, the onset "┆", the cursor a
reversed column with "▲" on the axis; the evidence strip uses block heights (█ = at or over the
threshold). When the limits lie far from the data, the axis is compressed: each limit outside
the data gets a row of its own at the edge, its axis mark "≈" saying the scale breaks there, and
the data keep the rows in between (never "off the chart"). Y labels carry the characteristic's
resolution.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from lotwatch.tui.render.numbers import decimals_of, fixed
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import DayMean, RunChart
from rich.text import Text

SHOWN, OTHER, LIMIT, TARGET, ONSET, BREAK = "#", "·", "═", "─", "┆", "≈"
BLOCKS = "▁▂▃▄▅▆▇"
MARGIN = 4  # right margin: the limits' names
FIXED_ROWS = 4  # legend, axis with dates, evidence strip, cursor line
LEAD = 7  # days kept on the chart before the onset
LINEAR_SHARE = 0.4  # the data take at least this share of a plain axis, else it is compressed
STYLE = {SHOWN: "bold red", OTHER: "dim", LIMIT: "yellow", TARGET: "yellow", ONSET: "magenta"}
PRIORITY = {TARGET: 1, LIMIT: 1, ONSET: 2, OTHER: 3, SHOWN: 4}
LIMIT_NAMES = {"LSL": ("LSL", LIMIT), "target": ("tgt", TARGET), "USL": ("USL", LIMIT)}


@dataclass(frozen=True)
class Picture:
    """The chart's lines and, for each column of the plot, its first and last day offset."""

    lines: list[Text]
    columns: list[tuple[int, int]]


def column_days(days: int, width: int, keep: int | None = None) -> list[tuple[int, int]]:
    """The plot's columns as (first, last) day offsets, oldest first: the latest days, ``per``
    days a column, with ``per`` the smallest that still reaches back to day offset ``keep``
    (the onset's lead; else to the first day) in at most ``width`` columns. The newest column
    ends on the last day."""
    if days <= 0 or width <= 0:
        return []
    first = 0 if keep is None else min(max(keep, 0), days - 1)
    per = max(1, math.ceil((days - first) / width))
    ncols = min(width, math.ceil(days / per))
    out = []
    for i in range(ncols):
        end = days - 1 - i * per
        out.append((max(end - per + 1, 0), end))
    return out[::-1]


def pooled(points: list[DayMean], kind: str) -> float | None:
    """Several days as one point: the mean of all their values (n-weighted), or for spread the
    pooled within-day SD sqrt(Σ(nᵢ − 1)sᵢ² / Σ(nᵢ − 1)) (NIST/SEMATECH e-Handbook 7.4.3)."""
    if kind == "spread":
        df = sum(p.n - 1 for p in points if p.sd is not None)
        if df <= 0:
            return None
        return math.sqrt(sum((p.n - 1) * p.sd ** 2 for p in points if p.sd is not None) / df)
    n = sum(p.n for p in points)
    return sum(p.n * p.mean for p in points) / n if n else None


def column_values(chart: RunChart, columns: list[tuple[int, int]],
                  kind: str) -> dict[str, list[float | None]]:
    out: dict[str, list[float | None]] = {}
    for group, points in chart.series.items():
        out[group] = [pooled([p for p in points if a <= p.offset <= b], kind)
                      for a, b in columns]
    return out


def y_rows(lo: float, hi: float, limits: list[tuple[str, float]],
           rows: int) -> list[tuple[str, float | None]]:
    """The value at each plot row, top first: ("data", v) or ("LSL", v), ("target", v) ...

    Plain linear when the data take at least ``LINEAR_SHARE`` of the span with the limits;
    else compressed: limits beyond the data on rows of their own at the edges (the scale is
    broken between them and the data)."""
    if hi <= lo:
        hi, lo = hi + 0.5, lo - 0.5
    every = [v for _, v in limits] + [lo, hi]
    top, bottom = max(every), min(every)
    above = sorted([x for x in limits if x[1] > hi], key=lambda x: -x[1])
    below = sorted([x for x in limits if x[1] < lo], key=lambda x: -x[1])
    band = rows - len(above) - len(below)
    if (hi - lo) >= LINEAR_SHARE * (top - bottom) or band < 2:
        above, below, band, lo, hi = [], [], rows, bottom, top
    out: list[tuple[str, float | None]] = [(name, v) for name, v in above]
    step = (hi - lo) / (band - 1) if band > 1 else 0.0
    out += [("data", hi - i * step) for i in range(band)]
    out += [(name, v) for name, v in below]
    return out


def row_of(value: float, rows: list[tuple[str, float | None]]) -> int:
    """The data row nearest ``value`` (values beyond the band go to its edge)."""
    data = [(i, v) for i, (kind, v) in enumerate(rows) if kind == "data" and v is not None]
    return min(data, key=lambda x: abs(x[1] - value))[0]


def draw(chart: RunChart, *, group: str | None, role: str, kind: str = "mean",
         onset: str | None = None, cursor: int | None = None, width: int = 78,
         height: int = 14) -> Picture:
    """The chart in ``width`` × ``height`` cells. ``group`` is drawn distinctly (``role``
    says why: "flagged" or "highlighted"); ``cursor`` is a column index."""
    dec = decimals_of(chart.resolution) - 1  # labels at the resolution
    unit = clean(chart.unit, 8)
    limits = [] if kind == "spread" else [
        (name, v) for name, v in (("USL", chart.usl), ("target", chart.target),
                                  ("LSL", chart.lsl)) if v is not None]
    label_w = max([len(fixed(v, dec)) for _, v in limits] + [6]) + 1
    plot_w = max(width - label_w - 1 - MARGIN, 8)
    keep = None
    if onset and chart.first_day <= onset <= chart.last_day:
        keep = _days(onset) - _days(chart.first_day) - LEAD
    columns = column_days(chart.days, plot_w, keep)
    cell_w = max(1, min(plot_w // max(len(columns), 1), 3))
    values = column_values(chart, columns, kind)
    seen = [v for vs in values.values() for v in vs if v is not None]
    plot_h = max(height - FIXED_ROWS, 3)
    what = "SD" if kind == "spread" else "mean"
    per = columns[-1][1] - columns[-1][0] + 1 if columns else 1  # the first may be shorter
    legend = Text(no_wrap=True, overflow="crop")
    if group is not None:
        legend.append(f"{SHOWN} {clean(group, 16)} ({role})", style=STYLE[SHOWN])
        legend.append(f"  {OTHER} others", style=STYLE[OTHER])
    legend.append(f"  {what} per {'day' if per == 1 else f'{per} days'}"
                  + (f" ({unit})" if unit else ""))
    if limits:
        legend.append(f"  {LIMIT} LSL/USL {TARGET} target")
    if onset:
        legend.append(f"  {ONSET} onset")
    head = [legend]
    if legend.cell_len > width and height >= 20 and group is not None:
        # narrow but tall: the legend on two lines
        cut = legend.plain.index("  ", legend.plain.index(OTHER))
        head = [legend[:cut], legend[cut + 2:]]
        plot_h -= 1
    if not seen:
        return Picture(head + [Text("no values in these weeks", style="italic")], columns)
    rows = y_rows(min(seen), max(seen), limits, plot_h)
    grid: list[list[tuple[str, int]]] = [[(" ", 0)] * plot_w for _ in rows]

    def put(r: int, c: int, ch: str) -> None:
        if 0 <= c < plot_w and PRIORITY[ch] > grid[r][c][1]:
            grid[r][c] = (ch, PRIORITY[ch])

    margin = [""] * len(rows)
    for name, v in limits:
        r = next((i for i, (k, _) in enumerate(rows) if k == name), None)
        if r is None:
            r = row_of(v, rows)
        short, mark = LIMIT_NAMES[name]
        margin[r] = (margin[r] + "/" if margin[r] else "") + short
        for c in range(plot_w):
            put(r, c, mark)
    onset_col = None
    off = _days(onset) - _days(chart.first_day) if onset else -1
    if onset and columns and columns[0][0] <= off <= columns[-1][1]:
        onset_col = next(i for i, (a, b) in enumerate(columns) if a <= off <= b)
        for r in range(len(rows)):
            put(r, onset_col * cell_w + cell_w // 2, ONSET)
    for g, vs in values.items():
        mark = SHOWN if g == group else OTHER
        for i, point in enumerate(vs):
            if point is not None:
                put(row_of(point, rows), i * cell_w + cell_w // 2, mark)
    lines = list(head)
    data_rows = [i for i, (k, _) in enumerate(rows) if k == "data"]
    first_data, last_data = data_rows[0], data_rows[-1]
    cur = range(cursor * cell_w, cursor * cell_w + cell_w) if cursor is not None else range(0)
    for r, (k, at) in enumerate(rows):
        line = Text(no_wrap=True, overflow="crop")
        j = r - first_data  # every other data row labelled, from the top one
        label = fixed(at, dec) if (k != "data" or j % 2 == 0 or r == last_data) else ""
        axis = BREAK if k != "data" else "┤" if label else "│"
        line.append(f"{label:>{label_w - 1}} {axis}")
        for c, (ch, _) in enumerate(grid[r]):
            style = STYLE.get(ch, "")
            line.append(ch, style=(style + " reverse").strip() if c in cur else style)
        line.append(f" {margin[r][:MARGIN - 1]}", style=STYLE[LIMIT] if margin[r] else "")
        lines.append(line)
    lines.append(_axis(chart, columns, cell_w, plot_w, label_w, onset_col, onset, cursor))
    lines.append(_evidence(chart, columns, cell_w, plot_w, label_w, group, kind, cursor))
    lines.append(_cursor_line(chart, columns, values, group, kind, unit, cursor, width))
    return Picture(lines, columns)


def _days(day: str) -> int:
    from datetime import date

    return date.fromisoformat(day).toordinal()


def _axis(chart: RunChart, columns: list[tuple[int, int]], cell_w: int, plot_w: int,
          label_w: int, onset_col: int | None, onset: str | None, cursor: int | None) -> Text:
    """The x axis with dates (MM-DD) at the start, the onset and the end; ▲ under the cursor."""
    cells = ["─"] * plot_w
    styles = [""] * plot_w

    def label(col: int, text: str, style: str = "") -> None:
        start = min(max(col * cell_w, 0), plot_w - len(text))
        if all(ch == "─" for ch in cells[max(start - 1, 0):start + len(text) + 1]):
            for j, ch in enumerate(text):
                cells[start + j], styles[start + j] = ch, style

    if cursor is not None and 0 <= cursor < len(columns):
        c = cursor * cell_w + cell_w // 2
        cells[c], styles[c] = "▲", "bold"
    if onset_col is not None and onset:
        label(onset_col + 1, onset[5:], STYLE[ONSET])
    if columns:
        label(0, chart.day(columns[0][0])[5:])
        label(len(columns), chart.day(columns[-1][1])[5:])
    line = Text(" " * label_w + "└", no_wrap=True, overflow="crop")
    for ch, st in zip(cells, styles, strict=True):
        line.append(ch, style=st)
    return line


def _evidence(chart: RunChart, columns: list[tuple[int, int]], cell_w: int, plot_w: int,
              label_w: int, group: str | None, kind: str, cursor: int | None) -> Text:
    """The shown group's detector evidence per column (its largest over the column's days)."""
    line = Text(f"{'evid':>{label_w - 1}} │", no_wrap=True, overflow="crop")
    points = dict(chart.evidence.get((group or "", kind), ()))
    last = None
    for i, (a, b) in enumerate(columns):
        vals = [points[d] for d in range(a, b + 1) if d in points]
        e = max(vals) if vals else None
        if e is not None:
            last = e
        if e is None or e <= 0:
            ch, st = " ", ""
        elif e >= 1:
            ch, st = "█", "bold red"
        else:
            ch, st = BLOCKS[min(int(e * len(BLOCKS)), len(BLOCKS) - 1)], ""
        text = (" " * (cell_w // 2) + ch).ljust(cell_w)
        line.append(text, style=(st + " reverse").strip() if i == cursor else st)
    line.append(" " * (plot_w - len(columns) * cell_w))
    if last is not None:  # the latest evidence, in the margin's three characters
        text = f"{last:.1f}" if last < 10 else f"{min(last, 999):.0f}"
        line.append(f" {text}", style="bold" if last >= 1 else "")
    return line


def _cursor_line(chart: RunChart, columns: list[tuple[int, int]],
                 values: dict[str, list[float | None]], group: str | None, kind: str, unit: str,
                 cursor: int | None, width: int) -> Text:
    line = Text(no_wrap=True, overflow="crop")
    if cursor is None or not 0 <= cursor < len(columns):
        line.append("evidence: █ at or over the detector's threshold", style="dim")
        return line
    a, b = columns[cursor]
    days = chart.day(a)[5:] + ("" if a == b else ".." + chart.day(b)[5:])
    dec = decimals_of(chart.resolution)
    line.append(f"▲ {days} ", style="bold")
    what = "SD" if kind == "spread" else "mean"
    if group is not None:
        v = values.get(group, [None] * len(columns))[cursor]
        n = sum(p.n for p in chart.series.get(group, ()) if a <= p.offset <= b)
        if n:
            line.append(f"{clean(group, 12)} {what} {fixed(v, dec)} {unit} (n {n})",
                        style="bold")
        else:
            line.append(f"{clean(group, 12)}: no values", style="bold")
        others = [p for g, ps in chart.series.items() if g != group for p in ps
                  if a <= p.offset <= b]
        line.append(f", others {fixed(pooled(others, kind), dec)}")
    line.append(" · Enter: lots")
    line.truncate(width)
    return line
