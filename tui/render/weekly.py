"""The weekly report as Markdown (text charts in code blocks) or one offline HTML page (inline
SVG charts; no network fetch, no external CSS or JS). Its data comes from
``tui.services.weekly_report.build_weekly_report``; names from people are escaped for each
medium (``md_escape``, ``html.escape``)."""

from __future__ import annotations

import html
from typing import TYPE_CHECKING, Any

from lotwatch.tui.caution import CAUTION
from lotwatch.tui.render.numbers import measured, pval
from lotwatch.tui.render.report import (
    _omega,
    _status_lines,
    alert_sentence,
    alert_tag,
    count_cell,
    family_table_md,
    fit,
    md_escape,
    settings_sentence,
    size_cell,
)
from lotwatch.tui.render.trend import trend_chart_svg, trend_chart_text, trend_table_text

if TYPE_CHECKING:
    from lotwatch.tui.services.weekly_report import WeeklyReport


def _anova_md(b: Any) -> list[str]:
    a = b.anova
    rows = [("Between groups", a.df_between, a.ss_between, a.ms_between, a.f, a.p),
            ("Within groups", a.df_within, a.ss_within, a.ms_within, None, None),
            ("Total", a.df_between + a.df_within, a.ss_total, None, None, None)]
    out = ["| source | df | SS | MS | F | p |", "|---|---|---|---|---|---|"]
    for name, df, ss_, ms, f, p in rows:
        p_cell = pval(p) if p is not None else "-"
        out.append(f"| {name} | {df} | {fit(ss_, 10)} | {fit(ms, 10)} | {fit(f, 8)} | {p_cell} |")
    return out


def _groups_rows(b: Any, resolution: str) -> list[list[str]]:
    """Group rows with the decimals of the resolution (never rounded to significant figures:
    a mean of 500.04 must not read "500")."""
    return [[g.name, "–" if g.lots is None else f"{g.lots:,}", f"{g.n:,}",
             measured(g.mean, resolution), measured(g.sd, resolution),
             measured(g.ci_low, resolution), measured(g.ci_high, resolution),
             measured(g.diff_from_others, resolution)] for g in b.groups]


def group_head(unit: str) -> list[str]:
    """The group table's header, with the unit beside every size."""
    u = f" ({unit})" if unit else ""
    return ["group", "lots", "values", f"mean{u}", f"SD{u}", f"CI low{u}", f"CI high{u}",
            f"vs others{u}"]


def _event_time(stamp: str, zone: str) -> str:
    """A stored UTC stamp in plant time, as ``alerts show`` and ``history`` write it."""
    from lotwatch.store.timeutil import format_local

    try:
        return format_local(stamp, zone=zone)
    except ValueError:
        return stamp


def _events_text(events: list[Any], zone: str) -> list[str]:
    return [f"{_event_time(e.at, zone)} {e.event}" + (f" by {e.by}" if e.by else "") +
            (f" in {e.window}" if e.window else "") + (f": {e.note}" if e.note else "")
            for e in events]


def _events_heading(rep: WeeklyReport) -> str:
    return f"Events (times in plant time, {rep.zone})"


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
        ch = s.detail.characteristic
        head = group_head(ch.unit)
        lines += ["", "### Groups", "", "| " + " | ".join(md_escape(x) for x in head) + " |",
                  "|" + "---|" * len(head)]
        lines += ["| " + " | ".join(md_escape(x) for x in row) + " |"
                  for row in _groups_rows(b, ch.resolution)]
        lines += ["", "### Checks, post-hoc comparisons and capability (full battery)", "",
                  "```text", render_battery(b, unit=s.detail.characteristic.unit,
                                           resolution=s.detail.characteristic.resolution
                                           ).rstrip(), "```",
                  "", "### Trend of each group's mean per window", "", "```text",
                  trend_chart_text(s.trend), "```", "", "```text",
                  trend_table_text(s.trend).rstrip(), "```", "",
                  f"### {md_escape(_events_heading(rep))}", ""]
        lines += [f"- {md_escape(t)}" for t in _events_text(s.events, rep.zone)]
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
    head = ["characteristic", "factor", "window", "k", "lots", "values", "test", "F", "p", "q",
            "ω²", "η²",
            "largest shift", "group", "detectable shift", "gate", "alert"]
    rows = []
    for c in r.comparisons:
        f = c.welch_f if c.test == "Welch" else c.f
        rows.append([c.characteristic, c.factor, c.window_label, c.k, count_cell(c.lots_total),
                     f"{c.n_total:,}", c.test,
                     fit(f, 8), pval(c.p_used), pval(c.q), _omega(c.omega_squared),
                     fit(c.eta_squared, 6), size_cell(c, c.largest_shift),
                     c.largest_shift_group or "", size_cell(c, c.detectable_shift),
                     size_cell(c, c.gate), alert_tag(c) or "-"])
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
                       fit(a.ms_between, 10), fit(a.f, 8), pval(a.p)],
                      ["Within groups", a.df_within, fit(a.ss_within, 10), fit(a.ms_within, 10),
                       "", ""],
                      ["Total", a.df_between + a.df_within, fit(a.ss_total, 10), "", "", ""]]),
                  "<h3>Groups</h3>", _html_table(group_head(s.detail.characteristic.unit),
                                                     _groups_rows(b, s.detail.characteristic.resolution)),
                  "<h3>Trend of each group's mean per window</h3>",
                  f"<figure>{trend_chart_svg(s.trend)}</figure>",
                  "<h3>Checks, post-hoc comparisons and capability (full battery)</h3>",
                  "<pre>" + e(render_battery(b, unit=s.detail.characteristic.unit,
                                             resolution=s.detail.characteristic.resolution))
                  + "</pre>",
                  f"<h3>{e(_events_heading(rep))}</h3><ul>"]
        parts += [f"<li>{e(t)}</li>" for t in _events_text(s.events, rep.zone)]
        parts.append("</ul>")
    parts += [f'<p class="caution">{e(CAUTION)}</p>', "</body></html>", ""]
    return "\n".join(parts)
