"""Trend of each group's mean per window: the series, an 80-column table, a plotext chart for
text and Markdown (colour codes removed) and a matplotlib SVG for HTML (text as paths, so the
page opens offline). Group names are cleaned (``tui.render.safe_text.clean``)."""

from __future__ import annotations

import io
import re
from dataclasses import dataclass
from typing import Any

from lotwatch.store.values import scale_of
from lotwatch.tui.render.report import WIDTH, fit
from lotwatch.tui.render.safe_text import clean

MARKERS = "ox+*#@%&=s"


@dataclass
class TrendSeries:
    labels: list[str]  # x labels (window end dates)
    levels: list[str]
    means: dict[str, list[float | None]]
    grand: list[float | None]


def trend_series(tr: Any) -> TrendSeries:
    labels = [w.end.isoformat() for w in tr.windows]
    ends = [w.end for w in tr.windows]
    levels = sorted(tr.frame["level"].unique().to_list())
    means: dict[str, list[float | None]] = {lv: [None] * len(ends) for lv in levels}
    pos = {e: i for i, e in enumerate(ends)}
    for end, lv, mean in tr.frame.select("window_end", "level", "mean").iter_rows():
        means[lv][pos[end]] = mean
    grand: list[float | None] = [None] * len(ends)
    for end, g in tr.grand_means.select("window_end", "grand_mean").iter_rows():
        grand[pos[end]] = g
    return TrendSeries(labels, levels, means, grand)


def trend_table_text(tr: Any, *, per_table: int = 6) -> str:
    """Each group's mean per window, window ends down the side, groups across (80 columns).

    Means carry two more decimals than the characteristic's resolution."""
    ser = trend_series(tr)
    dec = min(scale_of(getattr(tr.characteristic, "resolution", None) or "1")[1] + 2, 6)

    def cell(x: float | None) -> str:
        if x is None:
            return f"{'-':>9}"
        s = f"{x:.{dec}f}"
        return f"{s if len(s) <= 9 else fit(x, 9):>9}"

    out = []
    for start in range(0, max(len(ser.levels), 1), per_table):
        levels = ser.levels[start:start + per_table]
        out.append(f"{'window end':<10} " + " ".join(f"{clean(lv, 9):>9}" for lv in levels)
                   + f" {'all':>9}")
        for i, lab in enumerate(ser.labels):
            out.append(f"{lab:<10} " + " ".join(cell(ser.means[lv][i]) for lv in levels)
                       + f" {cell(ser.grand[i])}")
        out.append("")
    return "\n".join(out)


def trend_chart_text(tr: Any, *, width: int = 80, height: int = 20) -> str:
    """plotext line chart of each group's mean per window with the grand mean and spec limits,
    colour codes removed (safe in a code block or a plain terminal)."""
    import plotext as plt

    ser = trend_series(tr)
    plt.clear_figure()
    plt.plot_size(min(width, WIDTH), height)
    plt.theme("clear")
    x = list(range(1, len(ser.labels) + 1))
    for i, lv in enumerate(ser.levels):
        pts = [(xi, m) for xi, m in zip(x, ser.means[lv], strict=True) if m is not None]
        if pts:
            plt.plot([p[0] for p in pts], [p[1] for p in pts], marker=MARKERS[i % len(MARKERS)],
                     label=clean(lv, 12))
    gpts = [(xi, g) for xi, g in zip(x, ser.grand, strict=True) if g is not None]
    if gpts:
        plt.plot([p[0] for p in gpts], [p[1] for p in gpts], marker=".", label="all")
    for lim in (tr.lsl, tr.usl):
        if lim is not None:
            plt.hline(lim)
    step = max(1, len(x) // 4)
    plt.xticks(x[::step], [lab[5:] for lab in ser.labels][::step])
    plt.title(clean(f"{tr.characteristic.name} by {tr.factor}: mean per window", 60))
    plt.xlabel("window end (MM-DD); spec limits as horizontal lines")
    text = plt.uncolorize(plt.build())
    plt.clear_figure()
    return "\n".join(line.rstrip() for line in text.splitlines())


def literal(text: object) -> str:
    """User text for a matplotlib label, shown as typed: ``$`` escaped so a name such as
    ``$x^{$`` is not parsed as mathtext (matplotlib's "Writing mathematical expressions":
    an escaped dollar sign is a literal one)."""
    return str(text).replace("$", r"\$")


def trend_figure(tr: Any):  # -> matplotlib.figure.Figure
    """The trend chart as a matplotlib figure (``trend_chart_svg`` draws it). Every group is in
    the legend: labels are passed explicitly, since matplotlib leaves out of an automatic legend
    any label starting with "_"."""
    from matplotlib.figure import Figure

    ser = trend_series(tr)
    fig = Figure(figsize=(7.5, 3.6), dpi=96)
    ax = fig.add_subplot()
    x = list(range(len(ser.labels)))
    handles, names = [], []
    for lv in ser.levels:
        ys = [m if m is not None else float("nan") for m in ser.means[lv]]
        handles += ax.plot(x, ys, marker="o", markersize=3, linewidth=1.2)
        names.append(literal(lv))
    handles += ax.plot(x, [g if g is not None else float("nan") for g in ser.grand],
                       color="black", linewidth=2, linestyle="--")
    names.append("grand mean")
    for lim, name in ((tr.lsl, "LSL"), (tr.usl, "USL"), (tr.target, "target")):
        if lim is not None:
            ax.axhline(lim, color="firebrick" if name != "target" else "grey", linewidth=1,
                       linestyle=":" if name == "target" else "-")
            at_left = name == "target"  # the latest windows sit at the right
            ax.annotate(name, ((x[0] if at_left else x[-1]) if x else 0, lim), fontsize=7,
                        va="bottom", ha="left" if at_left else "right")
    step = max(1, len(x) // 6)
    ax.set_xticks(x[::step], ser.labels[::step], fontsize=7)
    ax.set_ylabel(literal(tr.characteristic.unit or "value"), fontsize=8)
    ax.set_title(literal(f"{tr.characteristic.name} by {tr.factor}: mean per window"),
                 fontsize=9)
    ax.legend(handles, names, fontsize=7, ncol=min(4, len(ser.levels) + 1), loc="best")
    ax.tick_params(labelsize=7)
    fig.tight_layout()
    return fig


def trend_chart_svg(tr: Any) -> str:
    """matplotlib line chart of each group's mean per window, grand mean and spec limits, as an
    inline SVG element (text as paths: no fonts or other files needed)."""
    fig = trend_figure(tr)
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None})
    svg = buf.getvalue()
    svg = svg[svg.index("<svg"):]
    # drop the RDF metadata block (creator links); the rest is self-contained
    return re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.DOTALL)


def trend_frame_for_json(tr: Any) -> list[dict[str, Any]]:
    import polars as pl

    return [dict(zip(("window_end", "window", "level", "n", "mean"), row, strict=True))
            for row in tr.frame.with_columns(pl.col("window_end").cast(pl.String)).iter_rows()]
