"""Review output: the 80-column text table, Markdown, the weekly report (Markdown or HTML) and
trend tables/charts.

Text and Markdown charts are plotext ``build()`` output without colour codes; HTML charts are
matplotlib figures rendered to inline SVG (text as paths), so an HTML report opens offline: no
network fetch, no external CSS or JS. Every name that came from a person (characteristics, levels,
notes) is escaped for its medium: control characters for text, ``|`` and markup characters for
Markdown, ``html.escape`` for HTML.
"""

from __future__ import annotations

import html
import io
import math
import re
import textwrap
from dataclasses import dataclass
from typing import Any

from lotwatch.stats.monitor import CAUTION
from lotwatch.tui.render.battery_text import clean_text

WIDTH = 80
MARKERS = "ox+*#@%&=s"
ALERT_TAGS = {"opened": "NEW", "reopened": "RE", "cleared": "CLR"}
STATE_TAGS = {"open": "OPEN", "acknowledged": "ACK", "cleared": "", None: ""}


# --------------------------------------------------------------------------------------------
# number formatting


def fit(x: float | None, width: int) -> str:
    """A number in at most ``width`` characters (fewer significant digits, then exponent form)."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    for sig in (4, 3, 2, 1):
        s = f"{x:.{sig}g}"
        if len(s) <= width:
            return s
    s = f"{x:.0e}".replace("e-0", "e-").replace("e+0", "e")
    return s if len(s) <= width else ("big" if x > 0 else "-big")


def _omega(x: float | None) -> str:
    if x is None:
        return "-"
    return "<0" if x < 0 else f"{x:.2f}"


def alert_tag(c: Any) -> str:
    """NEW/RE/CLR for what this review recorded, else OPEN/ACK for the standing state."""
    if c.event in ALERT_TAGS:
        return ALERT_TAGS[c.event]
    return STATE_TAGS.get(c.alert_state, "")


def _shift(c: Any, group_width: int) -> str:
    if c.largest_shift is None:
        return "-"
    sign = "+" if c.largest_shift >= 0 else "-"
    value = fit(abs(c.largest_shift), 4)
    return f"{sign}{value} {clean_text(c.largest_shift_group or '', group_width)}"


# --------------------------------------------------------------------------------------------
# review as text / Markdown


# (header, width, alignment); 79 characters with the separators
_TEXT_COLS = (("char.", 11, "<"), ("by", 5, "<"), ("window", 9, "<"), ("k", 2, ">"),
              ("F", 6, ">"), ("p", 6, ">"), ("q", 6, ">"), ("ω²", 4, ">"),
              ("shift grp", 10, "<"), ("det.", 5, ">"), ("alert", 5, "<"))


def _text_row(cells: list[str]) -> str:
    out = []
    for (_, w, align), cell in zip(_TEXT_COLS, cells, strict=True):
        cell = cell if len(cell) <= w else cell[: w - 1] + "~"
        out.append(f"{cell:{align}{w}}")
    return " ".join(out).rstrip()


def _f_cell(c: Any, width: int) -> str:
    if c.test == "Welch":
        return fit(c.welch_f, width - 1) + "w"
    return fit(c.f, width)


def _wrap(text: str, indent: str = "") -> list[str]:
    return textwrap.wrap(text, WIDTH - 1, initial_indent=indent, subsequent_indent=indent) or [""]


def settings_sentence(result: Any) -> str:
    s = result.settings
    if s.window == "trailing":
        win = f"trailing {s.days}-day windows every {s.step_days} days"
    elif s.window == "last_n":
        win = f"the last {s.last_n} lots of each group, every {s.step_days} days"
    else:
        win = "ISO calendar weeks"
    return (f"Windows: {win}; groups with fewer than {s.min_n} lots left out. An alert opens "
            f"when q <= {result.fdr_level:g} and the largest shift reaches the practical gate in "
            f"{s.alert_k} of the last {s.alert_m} windows, and clears after {s.alert_m} windows "
            "without.")


def render_review_text(result: Any) -> str:
    """The review as plain text, no line longer than 80 characters."""
    lines = [clean_text(f"lotwatch review as of {result.as_of.isoformat()}: {result.window_label}",
                        WIDTH)]
    lines += _wrap(settings_sentence(result))
    lines += _wrap(result.family_statement)
    lines.append("")
    lines.append(_text_row([h for h, _, _ in _TEXT_COLS]))
    lines.append(_text_row(["-" * w for _, w, _ in _TEXT_COLS]))
    for c in result.comparisons:
        lines.append(_text_row([
            clean_text(c.characteristic), clean_text(c.factor), c.window_short, str(c.k),
            _f_cell(c, 6), fit(c.p_used, 6), fit(c.q, 6), _omega(c.omega_squared),
            _shift(c, 4), fit(c.detectable_shift, 5), alert_tag(c)]))
    lines.append("")
    lines += _wrap("char.: characteristic; by: grouping factor. k: groups used. F: classical F; 'w' marks Welch's F, read where Bartlett's "
                   "test finds unequal spread (p is then Welch's). q: FDR-adjusted p. shift grp: "
                   "the largest difference of one group's mean from the mean of the others, "
                   "and that group. det.: "
                   "shift detectable with 80% power. alert: NEW/RE opened or reopened now, CLR "
                   "cleared now, OPEN, ACK acknowledged.")
    lines += _status_lines(result, clean=lambda s: clean_text(s))
    lines += _alert_lines(result, clean=lambda s: clean_text(s))
    for n in result.notes:
        lines += _wrap("Note: " + clean_text(n))
    lines.append("")
    lines += _wrap(CAUTION)
    return "\n".join(line[:WIDTH] for line in lines) + "\n"


def _status_lines(result: Any, *, clean) -> list[str]:
    out: list[str] = []
    short = [c for c in result.comparisons if c.status != "ok"]
    if short:
        out.append("")
        out += _wrap("No test (not enough data or no spread): " + "; ".join(
            f"{clean(c.characteristic)} by {clean(c.factor)} ({c.status}, {c.k} usable group(s))"
            for c in short))
    excl = [c for c in result.comparisons if c.excluded]
    if excl:
        out.append("")
        out += _wrap(f"Left out (fewer than {result.settings.min_n} lots in the window): " + "; ".join(
            f"{clean(c.characteristic)} by {clean(c.factor)}: " + ", ".join(
                f"{clean(lv)} ({n})" for lv, n in c.excluded) for c in excl))
    return out


def _alert_lines(result: Any, *, clean) -> list[str]:
    out: list[str] = []
    active = [c for c in result.comparisons if c.alert_state in ("open", "acknowledged")
              or c.event == "cleared"]
    if not active:
        out.append("")
        out += _wrap("No alert is open.")
        return out
    out.append("")
    out.append("Alerts:")
    for c in active:
        out += _wrap(f"[{alert_tag(c) or c.alert_state}] " + clean(alert_sentence(c)), "  ")
    return out


def alert_sentence(c: Any) -> str:
    """The alert's sentence for a comparison (always ending with the caution): the stored
    alert's description when there is one, else this review's numbers."""
    if getattr(c, "alert_text", None):
        return c.alert_text
    from lotwatch.tui.services.review_engine import alert_text

    size = abs(c.largest_shift) if c.largest_shift is not None else None
    head = f"alert {c.alert_id}: " if c.alert_id else ""
    return head + alert_text(c.characteristic, c.factor, c.groups, c.direction, size, c.unit,
                             c.size_fraction, c.window_label, c.q)


def md_escape(s: str) -> str:
    """Text safe inside a Markdown table cell or paragraph."""
    s = clean_text(s)
    for ch in "\\`*_[]<>|#":
        s = s.replace(ch, "\\" + ch)
    return s


def family_table_md(result: Any) -> list[str]:
    head = ["characteristic", "factor", "window", "k", "N", "test", "F", "p", "q", "ω²", "η²",
            "largest shift", "group", "detectable shift", "gate", "alert"]
    lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for c in result.comparisons:
        f = c.welch_f if c.test == "Welch" else c.f
        lines.append("| " + " | ".join([
            md_escape(c.characteristic), md_escape(c.factor), md_escape(c.window_label),
            str(c.k), str(c.n_total), c.test, fit(f, 8), fit(c.p_used, 8), fit(c.q, 8),
            _omega(c.omega_squared), fit(c.eta_squared, 6),
            fit(c.largest_shift, 8), md_escape(c.largest_shift_group or ""),
            fit(c.detectable_shift, 8), fit(c.gate, 8),
            alert_tag(c) or "-"]) + " |")
    return lines


def render_review_md(result: Any) -> str:
    """The review as a Markdown document (the family table and the alerts)."""
    lines = [f"# lotwatch review as of {result.as_of.isoformat()}", "",
             f"Window: {md_escape(result.window_label)}", "", settings_sentence(result), "",
             result.family_statement, ""]
    lines += family_table_md(result)
    lines += [ln if ln else "" for ln in _status_lines(result, clean=md_escape)]
    lines += _alert_lines(result, clean=md_escape)
    lines += [f"\nNote: {md_escape(n)}" for n in result.notes]
    lines += ["", f"*{CAUTION}*", ""]
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# trend


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


def _decimals(resolution: str | None) -> int:
    text = str(resolution or "1")
    return len(text.split(".")[1]) if "." in text else 0


def trend_table_text(tr: Any, *, per_table: int = 6) -> str:
    """Each group's mean per window, window ends down the side, groups across (80 columns).

    Means carry two more decimals than the characteristic's resolution."""
    ser = trend_series(tr)
    dec = min(_decimals(getattr(tr.characteristic, "resolution", None)) + 2, 6)

    def cell(x: float | None) -> str:
        if x is None:
            return f"{'-':>9}"
        s = f"{x:.{dec}f}"
        return f"{s if len(s) <= 9 else fit(x, 9):>9}"

    out = []
    for start in range(0, max(len(ser.levels), 1), per_table):
        levels = ser.levels[start:start + per_table]
        out.append(f"{'window end':<10} " + " ".join(f"{clean_text(lv, 9):>9}" for lv in levels)
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
                     label=clean_text(lv, 12))
    gpts = [(xi, g) for xi, g in zip(x, ser.grand, strict=True) if g is not None]
    if gpts:
        plt.plot([p[0] for p in gpts], [p[1] for p in gpts], marker=".", label="all")
    for lim in (tr.lsl, tr.usl):
        if lim is not None:
            plt.hline(lim)
    step = max(1, len(x) // 4)
    plt.xticks(x[::step], [lab[5:] for lab in ser.labels][::step])
    plt.title(clean_text(f"{tr.characteristic.name} by {tr.factor}: mean per window", 60))
    plt.xlabel("window end (MM-DD); spec limits as horizontal lines")
    text = plt.uncolorize(plt.build())
    plt.clear_figure()
    return "\n".join(line.rstrip() for line in text.splitlines())


def trend_chart_svg(tr: Any) -> str:
    """matplotlib line chart of each group's mean per window, grand mean and spec limits, as an
    inline SVG element (text as paths: no fonts or other files needed)."""
    from matplotlib.figure import Figure

    ser = trend_series(tr)
    fig = Figure(figsize=(7.5, 3.6), dpi=96)
    ax = fig.add_subplot()
    x = list(range(len(ser.labels)))
    for lv in ser.levels:
        ys = [m if m is not None else float("nan") for m in ser.means[lv]]
        ax.plot(x, ys, marker="o", markersize=3, linewidth=1.2, label=lv)
    ax.plot(x, [g if g is not None else float("nan") for g in ser.grand], color="black",
            linewidth=2, linestyle="--", label="grand mean")
    for lim, name in ((tr.lsl, "LSL"), (tr.usl, "USL"), (tr.target, "target")):
        if lim is not None:
            ax.axhline(lim, color="firebrick" if name != "target" else "grey", linewidth=1,
                       linestyle=":" if name == "target" else "-")
            at_left = name == "target"  # the latest windows sit at the right
            ax.annotate(name, ((x[0] if at_left else x[-1]) if x else 0, lim), fontsize=7,
                        va="bottom", ha="left" if at_left else "right")
    step = max(1, len(x) // 6)
    ax.set_xticks(x[::step], ser.labels[::step], fontsize=7)
    ax.set_ylabel(tr.characteristic.unit or "value", fontsize=8)
    ax.set_title(f"{tr.characteristic.name} by {tr.factor}: mean per window", fontsize=9)
    ax.legend(fontsize=7, ncol=min(4, len(ser.levels) + 1), loc="best")
    ax.tick_params(labelsize=7)
    fig.tight_layout()
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None})
    svg = buf.getvalue()
    svg = svg[svg.index("<svg"):]
    # drop the RDF metadata block (creator links); the rest is self-contained
    return re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.DOTALL)


# --------------------------------------------------------------------------------------------
# weekly report


@dataclass
class AlertSection:
    summary: Any  # ComparisonSummary
    detail: Any  # ComparisonDetail
    trend: Any  # TrendResult
    events: list[Any]


@dataclass
class WeeklyReport:
    result: Any  # ReviewResult
    sections: list[AlertSection]
    new_alerts: list[Any]  # ComparisonSummary opened/reopened in this window
    cleared: list[Any]


def build_weekly_report(store, *, week: str | None = None, as_of=None,
                        fdr_method: str | None = None, persist: bool = True) -> WeeklyReport:
    """Run the review (recording it, as ``lotwatch review`` does, unless ``persist`` is False),
    then gather every active alert's battery and trend."""
    from lotwatch.store import alerts as store_alerts
    from lotwatch.tui.services import review_engine as eng

    result = eng.run_review(store, week=week, as_of=as_of, fdr_method=fdr_method,
                            persist=persist)
    latest = result.windows[-1].label
    sections, new, cleared = [], [], []
    for c in result.comparisons:
        events = store_alerts.alert_history(store, c.alert_id) if c.alert_id else []
        in_window = [e for e in events if e.window == latest]
        if any(e.event in ("opened", "reopened") for e in in_window):
            new.append(c)
        if any(e.event == "cleared" for e in in_window):
            cleared.append(c)
        if c.alert_state in ("open", "acknowledged"):
            detail = eng.comparison_detail(store, c.characteristic, c.factor, as_of=result.as_of,
                                           summary=c)
            tr = eng.trend(store, c.characteristic, c.factor, as_of=result.as_of)
            sections.append(AlertSection(c, detail, tr, events))
    return WeeklyReport(result, sections, new, cleared)


def _anova_md(b: Any) -> list[str]:
    a = b.anova
    rows = [("Between groups", a.df_between, a.ss_between, a.ms_between, a.f, a.p),
            ("Within groups", a.df_within, a.ss_within, a.ms_within, None, None),
            ("Total", a.df_between + a.df_within, a.ss_total, None, None, None)]
    out = ["| source | df | SS | MS | F | p |", "|---|---|---|---|---|---|"]
    for name, df, ss_, ms, f, p in rows:
        out.append(f"| {name} | {df} | {fit(ss_, 10)} | {fit(ms, 10)} | {fit(f, 8)} | {fit(p, 8)} |")
    return out


def _groups_rows(b: Any) -> list[list[str]]:
    return [[g.name, str(g.n), fit(g.mean, 10), fit(g.sd, 8), fit(g.ci_low, 10),
             fit(g.ci_high, 10), fit(g.diff_from_others, 8)] for g in b.groups]


GROUP_HEAD = ["group", "n", "mean", "sd", "CI low", "CI high", "vs others"]


def _events_text(events: list[Any]) -> list[str]:
    return [f"{e.at} {e.event}" + (f" by {e.by}" if e.by else "") +
            (f" in {e.window}" if e.window else "") + (f": {e.note}" if e.note else "")
            for e in events]


def report_markdown(rep: WeeklyReport) -> str:
    """The weekly report as Markdown (text charts in code blocks)."""
    from lotwatch.tui.render.battery_text import render_battery

    r = rep.result
    lines = [f"# lotwatch weekly review: {md_escape(r.window_label)}", "",
             f"As of {r.as_of.isoformat()}. {settings_sentence(r)}", "", r.family_statement, "",
             "## Summary", ""]
    lines.append(f"Open alerts: {len(rep.sections)}. New this window: {len(rep.new_alerts)}. "
                 f"Cleared this window: {len(rep.cleared)}.")
    lines.append("")
    for n in r.notes:
        lines += [f"Note: {md_escape(n)}", ""]
    for c in rep.new_alerts:
        lines.append(f"- new: {md_escape(alert_sentence(c))}")
    for s in rep.sections:
        if s.summary not in rep.new_alerts:
            lines.append(f"- {s.summary.alert_state}: {md_escape(alert_sentence(s.summary))}")
    for c in rep.cleared:
        lines.append(f"- cleared: {md_escape(c.characteristic)} by {md_escape(c.factor)}")
    lines += ["", "## Every comparison (the FDR family)", ""]
    lines += family_table_md(r)
    lines += [ln for ln in _status_lines(r, clean=md_escape)]
    for s in rep.sections:
        c, b = s.summary, s.detail.battery
        aid = c.alert_id or "(replayed)"
        lines += ["", f"## Alert {aid}: {md_escape(c.characteristic)} by "
                  f"{md_escape(c.factor)}", "", md_escape(alert_sentence(c)), "",
                  "### ANOVA table", ""]
        lines += _anova_md(b)
        lines += ["", "### Groups", "", "| " + " | ".join(GROUP_HEAD) + " |",
                  "|" + "---|" * len(GROUP_HEAD)]
        lines += ["| " + " | ".join(md_escape(x) for x in row) + " |" for row in _groups_rows(b)]
        lines += ["", "### Checks, post-hoc comparisons and capability (full battery)", "",
                  "```text", render_battery(b, unit=s.detail.characteristic.unit).rstrip(), "```",
                  "", "### Trend of each group's mean per window", "", "```text",
                  trend_chart_text(s.trend), "```", "", "```text",
                  trend_table_text(s.trend).rstrip(), "```", "", "### Events", ""]
        lines += [f"- {md_escape(t)}" for t in _events_text(s.events)]
    lines += ["", f"*{CAUTION}*", ""]
    return "\n".join(lines)


_CSS = """body{font-family:sans-serif;max-width:60em;margin:1em auto;padding:0 1em;color:#222}
table{border-collapse:collapse;font-size:0.85em;margin:0.5em 0}
td,th{border:1px solid #bbb;padding:2px 6px;text-align:right}
td:first-child,th:first-child{text-align:left}
pre{background:#f4f4f4;padding:0.5em;overflow-x:auto;font-size:0.8em}
.caution{font-style:italic;border-left:4px solid #c60;padding-left:0.5em}
.alert{border-left:4px solid #b00;padding-left:0.5em}"""


def _html_table(head: list[str], rows: list[list[str]]) -> str:
    e = html.escape
    out = ["<table><thead><tr>" + "".join(f"<th>{e(h)}</th>" for h in head) + "</tr></thead><tbody>"]
    for row in rows:
        out.append("<tr>" + "".join(f"<td>{e(str(x))}</td>" for x in row) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


def report_html(rep: WeeklyReport) -> str:
    """The weekly report as one self-contained HTML page (inline CSS and SVG charts)."""
    from lotwatch.tui.render.battery_text import render_battery

    e = html.escape
    r = rep.result
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             f"<title>lotwatch weekly review: {e(r.window_label)}</title>",
             f"<style>{_CSS}</style></head><body>",
             f"<h1>lotwatch weekly review: {e(r.window_label)}</h1>",
             f"<p>As of {e(r.as_of.isoformat())}. {e(settings_sentence(r))}</p>",
             f"<p>{e(r.family_statement)}</p>", "<h2>Summary</h2>",
             f"<p>Open alerts: {len(rep.sections)}. New this window: {len(rep.new_alerts)}. "
             f"Cleared this window: {len(rep.cleared)}.</p>"]
    parts += [f"<p>Note: {e(n)}</p>" for n in r.notes]
    parts.append("<ul>")
    for c in rep.new_alerts:
        parts.append(f'<li class="alert">new: {e(alert_sentence(c))}</li>')
    for s in rep.sections:
        if s.summary not in rep.new_alerts:
            parts.append(f'<li class="alert">{e(s.summary.alert_state)}: '
                         f"{e(alert_sentence(s.summary))}</li>")
    for c in rep.cleared:
        parts.append(f"<li>cleared: {e(c.characteristic)} by {e(c.factor)}</li>")
    parts.append("</ul><h2>Every comparison (the FDR family)</h2>")
    head = ["characteristic", "factor", "window", "k", "N", "test", "F", "p", "q", "ω²", "η²",
            "largest shift", "group", "detectable shift", "gate", "alert"]
    rows = []
    for c in r.comparisons:
        f = c.welch_f if c.test == "Welch" else c.f
        rows.append([c.characteristic, c.factor, c.window_label, c.k, c.n_total, c.test,
                     fit(f, 8), fit(c.p_used, 8), fit(c.q, 8), _omega(c.omega_squared),
                     fit(c.eta_squared, 6), fit(c.largest_shift, 8), c.largest_shift_group or "",
                     fit(c.detectable_shift, 8), fit(c.gate, 8), alert_tag(c) or "-"])
    parts.append(_html_table(head, rows))
    for line in _status_lines(r, clean=lambda s: s):
        if line:
            parts.append(f"<p>{e(line)}</p>")
    for s in rep.sections:
        c, b = s.summary, s.detail.battery
        a = b.anova
        aid = c.alert_id or "(replayed)"
        parts += [f"<h2>Alert {aid}: {e(c.characteristic)} by {e(c.factor)}</h2>",
                  f'<p class="alert">{e(alert_sentence(c))}</p>', "<h3>ANOVA table</h3>",
                  _html_table(["source", "df", "SS", "MS", "F", "p"], [
                      ["Between groups", a.df_between, fit(a.ss_between, 10),
                       fit(a.ms_between, 10), fit(a.f, 8), fit(a.p, 8)],
                      ["Within groups", a.df_within, fit(a.ss_within, 10), fit(a.ms_within, 10),
                       "", ""],
                      ["Total", a.df_between + a.df_within, fit(a.ss_total, 10), "", "", ""]]),
                  "<h3>Groups</h3>", _html_table(GROUP_HEAD, _groups_rows(b)),
                  "<h3>Trend of each group's mean per window</h3>",
                  f"<figure>{trend_chart_svg(s.trend)}</figure>",
                  "<h3>Checks, post-hoc comparisons and capability (full battery)</h3>",
                  f"<pre>{e(render_battery(b, unit=s.detail.characteristic.unit))}</pre>",
                  "<h3>Events</h3><ul>"]
        parts += [f"<li>{e(t)}</li>" for t in _events_text(s.events)]
        parts.append("</ul>")
    parts += [f'<p class="caution">{e(CAUTION)}</p>', "</body></html>", ""]
    return "\n".join(parts)


def trend_frame_for_json(tr: Any) -> list[dict[str, Any]]:
    import polars as pl

    return [dict(zip(("window_end", "window", "level", "n", "mean"), row, strict=True))
            for row in tr.frame.with_columns(pl.col("window_end").cast(pl.String)).iter_rows()]
