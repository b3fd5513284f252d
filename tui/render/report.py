"""Review output: the 80-column text table and the Markdown document of one review.

Trend tables and charts are in ``tui.render.trend``, the weekly report's Markdown and HTML in
``tui.render.weekly`` (its data is gathered by ``tui.services.weekly_report``). Every name that
came from a person (characteristics, levels, notes) is escaped for its medium: control and bidi
characters removed for text (``tui.render.safe_text.clean``), ``|`` and markup characters for
Markdown.
"""

from __future__ import annotations

import math
import textwrap
from typing import Any

from lotwatch.tui.caution import CAUTION
from lotwatch.tui.render.detector_text import detector_cell, detector_summary, settings_sentence
from lotwatch.tui.render.numbers import MISSING, pval, size
from lotwatch.tui.render.safe_text import clean

WIDTH = 80
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


def size_cell(c: Any, x: float | None) -> str:
    """A size in a comparison's unit (shift, detectable shift, gate) for a Markdown or HTML
    table: the resolution's decimals plus one (``numbers.measured``) and the unit."""
    return size(x, getattr(c, "resolution", "") or None, getattr(c, "unit", ""))


def count_cell(n: int | None) -> str:
    """A count in a table cell, with thousands separators; a dash when not known."""
    return MISSING if n is None else f"{n:,}"


def _omega(x: float | None) -> str:
    if x is None:
        return "-"
    return "<0" if x < 0 else f"{x:.2f}"


def alert_tag(c: Any) -> str:
    """NEW/RE/CLR for what this review recorded, else OPEN/ACK for the standing state."""
    if c.event in ALERT_TAGS:
        return ALERT_TAGS[c.event]
    return STATE_TAGS.get(c.alert_state, "")


def _shift(c: Any, width: int) -> str:
    """The largest shift and its group in ``width`` characters: the shift by the resolution's
    decimals (``numbers.size``), the group's name shortened to what is left; a shift too long
    to leave two characters for the name falls back to four significant digits."""
    if c.largest_shift is None:
        return "-"
    value = size(c.largest_shift, getattr(c, "resolution", "") or None, sign=True)
    if len(value) > width - 3:
        value = ("+" if c.largest_shift >= 0 else "-") + fit(abs(c.largest_shift), 4)
    return f"{value} {clean(c.largest_shift_group or '', max(width - len(value) - 1, 1))}"


# --------------------------------------------------------------------------------------------
# review as text / Markdown


# (header, width, alignment); 80 characters with the separators
# p and q get the width of "<0.0001" (numbers are never cut; names are shortened with "~")
_TEXT_COLS = (("char.", 11, "<"), ("by", 5, "<"), ("window", 9, "<"), ("k", 2, ">"),
              ("F", 6, ">"), ("p", 7, ">"), ("q", 7, ">"), ("ω²", 4, ">"),
              ("shift grp", 10, "<"), ("evid", 5, ">"), ("alert", 4, "<"))


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


def render_review_text(result: Any) -> str:
    """The review as plain text, no line longer than 80 characters."""
    lines = [clean(f"lotwatch review as of {result.as_of.isoformat()}: {result.window_label}",
                        WIDTH)]
    lines += _wrap(settings_sentence(result))
    lines += _wrap(result.family_statement)
    lines.append("")
    lines.append(_text_row([h for h, _, _ in _TEXT_COLS]))
    lines.append(_text_row(["-" * w for _, w, _ in _TEXT_COLS]))
    for c in result.comparisons:
        lines.append(_text_row([
            clean(c.characteristic), clean(c.factor), c.window_short, str(c.k),
            _f_cell(c, 6), pval(c.p_used), pval(c.q), _omega(c.omega_squared),
            _shift(c, 10), detector_cell(c), alert_tag(c)]))
    lines.append("")
    lines += _wrap("char.: characteristic; by: grouping factor. k: groups used. F: classical F; 'w' marks Welch's F, read where Bartlett's "
                   "test finds unequal spread (p is then Welch's). q: FDR-adjusted p. shift grp: "
                   "the largest difference of one group's mean from the mean of the others "
                   "(in the characteristic's unit), and that group. evid: "
                   "the strongest detector's statistic / threshold (1 or more: crossed), m mean, "
                   "s spread. alert: NEW/RE opened or reopened now, CLR "
                   "cleared now, OPEN, ACK acknowledged.")
    lines += _status_lines(result, clean=clean)
    lines += _alert_lines(result, clean=clean)
    for n in result.notes:
        lines += _wrap("Note: " + clean(n))
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
    s = clean(s)
    for ch in "\\`*_[]<>|#":
        s = s.replace(ch, "\\" + ch)
    return s


def family_table_md(result: Any) -> list[str]:
    head = ["characteristic", "factor", "window", "k", "lots", "values", "test", "F", "p", "q",
            "ω²", "η²",
            "largest shift", "group", "detectable shift", "gate", "detector", "alert"]
    lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for c in result.comparisons:
        f = c.welch_f if c.test == "Welch" else c.f
        lines.append("| " + " | ".join([
            md_escape(c.characteristic), md_escape(c.factor), md_escape(c.window_label),
            str(c.k), count_cell(c.lots_total), f"{c.n_total:,}", c.test, fit(f, 8),
            pval(c.p_used), pval(c.q),
            _omega(c.omega_squared), fit(c.eta_squared, 6),
            md_escape(size_cell(c, c.largest_shift)), md_escape(c.largest_shift_group or ""),
            md_escape(size_cell(c, c.detectable_shift)), md_escape(size_cell(c, c.gate)),
            md_escape(detector_summary(c)),
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
