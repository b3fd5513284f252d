"""Plain-text report of a ``BatteryResult`` for an 80-column terminal (``lotwatch analyze``).

No markup, no colour: group names and units are printed literally, with control and other
non-printable characters shown as ``\\xNN`` escapes so they cannot move the cursor or restyle the
terminal, and long names shortened with ``~``.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Iterable

from lotwatch.stats.results import BatteryResult, PairComparison, TestResult
from lotwatch.tui.caution import CAUTION
from lotwatch.tui.render import numbers
from lotwatch.tui.render.safe_text import clean

WIDTH = 80


def num(x: float | None, width: int = 10, digits: int = 6) -> str:
    """Right-aligned number in at most ``width`` characters (fewer digits if it must)."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "-".rjust(width)
    if isinstance(x, float) and math.isinf(x):
        return ("inf" if x > 0 else "-inf").rjust(width)
    if width <= 0:
        return f"{x:.{digits}g}"
    for d in range(digits, 0, -1):
        s = f"{x:.{d}g}"
        if len(s) <= width:
            return s.rjust(width)
    return f"{x:.0e}".rjust(width)


def meas(x: float | None, resolution: str | None, width: int = 10) -> str:
    """A measured quantity (mean, SD, limit, difference) right-aligned in ``width``: with a
    resolution, its decimals plus one (``render.numbers.measured``, the one rule of every
    screen); without one (a file analysed with no --resolution), six significant digits."""
    if resolution is None or x is None or not math.isfinite(x):
        return num(x, width)
    text = numbers.measured(x, resolution)
    if width <= 0:
        return text
    return text.rjust(width) if len(text) <= width else num(x, width)


def pval(p: float | None, width: int = 8) -> str:
    """A p-value cell in the one style of ``render.numbers.pval``, right-aligned."""
    if p is None or math.isnan(p):
        return "-".rjust(width)
    return numbers.pval(p).rjust(width)


def _p_words(p: float | None) -> str:
    if p is None or math.isnan(p):
        return "n/a"
    return "< 0.0001" if p < 1e-4 else f"= {p:.4f}"


def _wrap(text: str, indent: str = "  ") -> list[str]:
    return textwrap.wrap(clean(text), WIDTH - 1, initial_indent=indent,
                         subsequent_indent=indent + "  ") or [indent]


def _heading(title: str) -> list[str]:
    return ["", title, "-" * len(title)]


def _anova(r: BatteryResult, unit: str, res: str | None) -> list[str]:
    a = r.anova
    route = "exact integer arithmetic" if a.exact else "floating point"
    lines = _heading(f"One-way ANOVA (k = {a.k} groups, N = {a.n_total}, alpha {a.alpha:g}, "
                     f"{route})")
    lines.append(f"{'Source':<16}{'df':>5} {'SS':>12} {'MS':>12} {'F':>10} {'p-value':>9}")
    lines.append(f"{'Between groups':<16}{a.df_between:>5} {num(a.ss_between, 12)} "
                 f"{num(a.ms_between, 12)} {num(a.f, 10)} {pval(a.p, 9)}")
    lines.append(f"{'Within groups':<16}{a.df_within:>5} {num(a.ss_within, 12)} "
                 f"{num(a.ms_within, 12)}")
    lines.append(f"{'Total':<16}{a.df_between + a.df_within:>5} {num(a.ss_total, 12)}")
    if a.f_crit is not None:
        lines.append(f"Critical F ({1 - a.alpha:g}; {a.df_between}, {a.df_within}) = "
                     f"{num(a.f_crit, 0).strip()}    R-squared = {num(a.r_squared, 0).strip()}"
                     f"    residual SD = {meas(a.resid_sd, res, 0)}"
                     + (f" {clean(unit, 10)}" if unit else ""))
    lines.extend(_wrap(a.decision, ""))
    if a.status != "ok":
        lines.append(f"Status: {a.status}")
    return lines


def _checks(r: BatteryResult) -> list[str]:
    lines = _heading("Companion tests and checks")
    w = r.welch
    if w.status == "ok":
        lines.extend(_wrap(f"Welch ANOVA F = {num(w.f, 0).strip()} on {num(w.df_between, 0).strip()}"
                           f" and {num(w.df_within, 0, 4).strip()} df (p {_p_words(w.p)})."))
    else:
        lines.extend(_wrap(f"Welch ANOVA: not computed ({w.status})."))
    tests: Iterable[TestResult] = (r.kruskal, r.brown_forsythe, r.bartlett, r.normality)
    for t in tests:
        lines.extend(_wrap(t.sentence))
    if r.resolution_warning:
        lines.extend(_wrap("Resolution: " + r.resolution_warning))
    lines.append("")
    rec = r.recommendation
    if rec.test == "none":
        lines.extend(_wrap(f"Recommended: nothing to read. {rec.reason}", ""))
    else:
        lines.extend(_wrap(f"Recommended: {rec.test} with {rec.posthoc}. {rec.reason}", ""))
    return lines


def _groups(r: BatteryResult, unit: str, res: str | None) -> list[str]:
    u = f" ({clean(unit, 10)})" if unit else ""
    lines = _heading(f"Groups{u}, {1 - r.alpha:g} confidence intervals of the mean")
    # lots counted as lots: a lots column when the values of a lot are replicates
    with_lots = any(g.lots is not None and g.lots != g.n for g in r.groups)
    name_w = 8 if with_lots else 14
    lots_h = f"{'lots':>6}" if with_lots else ""
    vw = 8 if with_lots else 6
    lines.append(f"{'group':<{name_w}}{lots_h}{'values':>{vw}} {'mean':>10} {'sd':>9} "
                 f"{'CI low':>10} {'CI high':>10} {'vs others':>10} {'let':<4}")
    for g in r.groups:
        lots = (f"{'-' if g.lots is None else g.lots:>6}" if with_lots else "")
        lines.append(f"{clean(g.name, name_w):<{name_w}}{lots}{g.n:>{vw}} {meas(g.mean, res)} "
                     f"{meas(g.sd, res, 9)} {meas(g.ci_low, res)} {meas(g.ci_high, res)} "
                     f"{meas(g.diff_from_others, res)} "
                     f"{clean(r.letters.get(g.name, ''), 4):<4}".rstrip())
    for e in r.excluded:
        lines.append(f"{clean(e.name, name_w):<{name_w}}{' ' * len(lots_h)}{e.n:>{vw}}  "
                     f"excluded: {clean(e.reason)}")
    if r.letters:
        lines.extend(_wrap(f"Letters: two groups with no letter in common differ by "
                           f"{r.recommendation.posthoc} at alpha {r.alpha:g}; a common letter "
                           "means that test found no difference between them.", ""))
    return lines


def _pairs(title: str, pairs: list[PairComparison], ranks: bool = False,
           res: str | None = None) -> list[str]:
    if not pairs:
        return []
    lines = _heading(title)
    diff = "rank diff" if ranks else "diff"
    lines.append(f"{'pair':<29}{diff:>10} {'lower':>10} {'upper':>10} {'p adj':>9} sig")
    for p in pairs:
        label = f"{clean(p.a, 13)} - {clean(p.b, 13)}"
        r_ = None if ranks else res  # mean ranks are not in the data's unit
        lines.append(f"{label:<29}{meas(p.diff, r_)} {meas(p.lower, r_)} {meas(p.upper, r_)} "
                     f"{pval(p.p, 9)} "
                     f"{'yes' if p.significant else 'no'}")
    return lines


def _dunnett(r: BatteryResult, res: str | None) -> list[str]:
    if r.dunnett is None:
        return []
    lines = _heading(f"Dunnett: each group against {clean(r.reference or '', 30)}")
    lines.append(f"{'group':<29}{'diff':>10} {'lower':>10} {'upper':>10} {'p adj':>9} sig")
    for c in r.dunnett:
        lines.append(f"{clean(c.group, 29):<29}{meas(c.diff, res)} {meas(c.lower, res)} "
                     f"{meas(c.upper, res)} "
                     f"{pval(c.p, 9)} {'yes' if c.significant else 'no'}")
    return lines


def _anom(r: BatteryResult, res: str | None) -> list[str]:
    a = r.anom
    if not a.groups:
        return []
    lines = _heading(f"Analysis of means (alpha {a.alpha:g}, grand mean "
                     f"{meas(a.grand_mean, res, 0).strip()}, "
                     f"h = {num(a.critical_value, 0, 4).strip()})")
    lines.append(f"{'group':<29}{'mean':>10} {'lower':>10} {'upper':>10}  flag")
    for g in a.groups:
        lines.append(f"{clean(g.group, 29):<29}{meas(g.mean, res)} {meas(g.lower, res)} "
                     f"{meas(g.upper, res)}"
                     f"  {clean(g.flag)}")
    return lines


def _ci(ci: tuple[float, float] | None) -> str:
    if ci is None:
        return ""
    return f" [{num(ci[0], 0, 3).strip()}, {num(ci[1], 0, 3).strip()}]"


def _effect_power(r: BatteryResult, unit: str, res: str | None) -> list[str]:
    e, v, p = r.effect, r.variance_components, r.power
    lines = _heading("Effect size, variance components, power")
    level = f"{1 - r.alpha:g}"
    lines.extend(_wrap(f"eta-squared {num(e.eta_squared, 0, 4).strip()}{_ci(e.eta_squared_ci)},"
                       f" omega-squared {num(e.omega_squared, 0, 4).strip()}, "
                       f"Cohen's f {num(e.cohen_f, 0, 4).strip()}{_ci(e.cohen_f_ci)}"
                       + (f" ({level} intervals)." if e.eta_squared_ci else ".")))
    if v.status == "ok":
        lines.extend(_wrap(f"Random-effects view: between-group variance "
                           f"{num(v.var_between, 0, 4).strip()}, within-group variance "
                           f"{num(v.var_within, 0, 4).strip()}, intraclass correlation "
                           f"{num(v.icc, 0, 3).strip()}{_ci(v.icc_ci)}."))
    u = f" {clean(unit, 10)}" if unit else ""
    if p.detectable_shift_80 is not None:
        lines.extend(_wrap(f"Smallest shift of one group detectable with 80% power now: "
                           f"{meas(p.detectable_shift_80, res, 0).strip()}{u}."))
    if p.shift is not None and p.power_at_shift is not None:
        lines.extend(_wrap(
            f"Power to detect a shift of {num(p.shift, 0, 4).strip()}{u}: "
            f"{100 * p.power_at_shift:.0f}%; values per group for 80% power: "
            f"{p.n_per_group_80 if p.n_per_group_80 is not None else 'over a million'}, "
            f"for 90%: {p.n_per_group_90 if p.n_per_group_90 is not None else 'over a million'}."))
    if p.status != "ok":
        lines.extend(_wrap(f"Power: not computed ({p.status})."))
    return lines


def _index(x: float | None, width: int = 8) -> str:
    """A capability index (``numbers.index``), right-aligned."""
    return numbers.index(x).rjust(width)


def _capability(r: BatteryResult, res: str | None) -> list[str]:
    if not r.capability:
        return []
    lines = _heading("Capability of each group from its own spread")
    lines.extend(_wrap("Cp, Cpk from the group's within SD (pooled within lots where lots have "
                       "replicates, else average moving range / 1.128); Pp, Ppk from its overall "
                       f"SD; Cpk interval {1 - r.alpha:.0%} (Bissell 1990).", ""))
    lines.append(f"{'group':<16}{'Cp':>8}{'Cpk':>8}  {'Cpk interval':<14}"
                 f"{'Pp':>8}{'Ppk':>8}{'within SD':>12}")
    for c in r.capability:
        ci = (f"{_index(c.cpk_ci[0], 0)}..{_index(c.cpk_ci[1], 0)}" if c.cpk_ci else "-")
        lines.append(f"{clean(c.group, 16):<16}{_index(c.cp)}{_index(c.cpk)}  {ci:<14}"
                     f"{_index(c.pp)}{_index(c.ppk)}{meas(c.sd_within, res, 12)}")
    for c in r.capability:
        if c.status:
            lines.extend(_wrap(f"{c.group}: {c.status}."))
        if c.caveat:
            lines.extend(_wrap(f"{c.group}: {c.caveat}."))
    return lines


def render_battery(result: BatteryResult, *, unit: str = "", resolution: str | None = None,
                   ) -> str:
    """The whole battery as plain text, no line longer than 80 characters. With the data's
    ``resolution`` (text, e.g. "0.01"), measured quantities carry its decimals plus one."""
    res = None if resolution is None else str(resolution)
    r = result
    lines: list[str] = []
    if r.status != "ok":
        lines.extend(_wrap(f"Status: {r.status}", ""))
    lines.extend(_anova(r, unit, res))
    lines.extend(_checks(r))
    lines.extend(_groups(r, unit, res))
    for title, pairs, ranks in (("Tukey-Kramer comparisons", r.tukey, False),
                                ("Games-Howell comparisons", r.games_howell, False),
                                (f"Dunn comparisons (mean ranks, {r.dunn_adjust} adjusted)",
                                 r.dunn, True)):
        lines.extend(_pairs(title, pairs, ranks, res))
    lines.extend(_dunnett(r, res))
    lines.extend(_anom(r, res))
    lines.extend(_effect_power(r, unit, res))
    lines.extend(_capability(r, res))
    if r.notes:
        lines.extend(_heading("Notes"))
        for n in r.notes:
            lines.extend(_wrap(n))
    lines.append("")
    lines.extend(textwrap.wrap(CAUTION, WIDTH - 1))
    return "\n".join(_fit(line) for line in lines) + "\n"


def _fit(line: str) -> str:
    """A line longer than the terminal is wrapped at spaces, never cut (a cut can turn 0.1416
    into "0"); a single word longer than the width stays whole."""
    if len(line) <= WIDTH:
        return line
    indent = " " * (len(line) - len(line.lstrip(" ")) + 2)
    return "\n".join(textwrap.wrap(line, WIDTH, subsequent_indent=indent,
                                    break_long_words=False, break_on_hyphens=False))
