"""The latest window's ANOVA table and, beneath it, the companion tests in one line each."""

from __future__ import annotations

from lotwatch.tui.render.numbers import lots_and_values, num, p_is, pval
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import DetailView
from rich.console import Group, RenderableType
from rich.table import Table
from rich.text import Text
from textual.widgets import Static


def anova_table(detail: DetailView, *, total: bool = True) -> Table:
    """Between / Within / Total with df, SS, MS, F and p (NIST/SEMATECH §7.4.3 layout); the
    Total row (their sum) may be left out where rows are scarce."""
    a = detail.battery.anova
    t = Table(box=None, pad_edge=False, padding=(0, 1), show_edge=False, header_style="bold")
    t.add_column("Source")
    for name in ("df", "SS", "MS", "F", "p"):
        t.add_column(name, justify="right")
    t.add_row("Between", str(a.df_between), num(a.ss_between), num(a.ms_between), num(a.f),
              pval(a.p))
    t.add_row("Within", str(a.df_within), num(a.ss_within), num(a.ms_within), "", "")
    if total:
        t.add_row("Total", str(a.df_between + a.df_within), num(a.ss_total), "", "", "")
    return t


def decision_text(detail: DetailView) -> Text:
    """The ANOVA's decision sentence, with the critical F when the sentence lacks it."""
    a = detail.battery.anova
    decision = Text("Decision: ", style="bold") + Text(clean(a.decision))
    if a.f_crit is not None and "critical F" not in a.decision:
        decision.append(f" (critical F at alpha {a.alpha:g}: {num(a.f_crit)})")
    return decision


def companion_lines(detail: DetailView) -> list[Text]:
    """Critical F and decision, Welch, Kruskal-Wallis, checks, recommendation, effect, power."""
    b = detail.battery
    unit = clean(detail.characteristic.unit, 12)
    lines: list[Text] = [decision_text(detail)]
    w = b.welch
    if w.f is not None:
        lines.append(Text(f"Welch: F = {num(w.f)} on {num(w.df_between, 3)}, "
                          f"{num(w.df_within, 4)} df, {p_is(w.p)}"))
    else:
        lines.append(Text(f"Welch: {clean(w.status)}"))
    k = b.kruskal
    if k.statistic is not None:
        lines.append(Text(f"Kruskal-Wallis: H = {num(k.statistic)} on {num(k.df, 3)} df, "
                          f"{p_is(k.p)}"))
    else:
        lines.append(Text(clean(k.sentence or f"Kruskal-Wallis: {k.status}")))
    lines.append(Text("Variance check: ", style="bold")
                 + Text(clean(b.brown_forsythe.sentence or b.brown_forsythe.status)))
    lines.append(Text("Residual check: ", style="bold")
                 + Text(clean(b.normality.sentence or b.normality.status)))
    r = b.recommendation
    lines.append(Text("Read: ", style="bold")
                 + Text(f"{clean(r.test)}, then {clean(r.posthoc)}. {clean(r.reason)}"))
    e = b.effect
    eff = f"omega² = {num(e.omega_squared, 3)}, eta² = {num(e.eta_squared, 3)}"
    if e.eta_squared_ci is not None:
        eff += f" ({num(e.eta_squared_ci[0], 2)}..{num(e.eta_squared_ci[1], 2)})"
    eff += f", Cohen's f = {num(e.cohen_f, 3)}"
    lines.append(Text("Effect size: ", style="bold") + Text(eff))
    if not _any_significant(detail):
        d = b.power.detectable_shift_80
        if d is not None:
            lines.append(Text("Nothing significant. ", style="bold") + Text(
                f"Smallest shift of one group detectable with 80% power at these group "
                f"sizes: {num(d, 3)} {unit}"))
        else:
            lines.append(Text(f"Nothing significant; detectable shift: "
                              f"{clean(b.power.status)}"))
    if b.resolution_warning:
        lines.append(Text("Resolution: ", style="bold") + Text(clean(b.resolution_warning)))
    for ex in b.excluded:
        lines.append(Text(f"Left out: {clean(ex.name, 20)} (n = {ex.n}): {clean(ex.reason)}"))
    for note in b.notes:
        lines.append(Text(clean(note)))
    return lines


def _any_significant(detail: DetailView) -> bool:
    b = detail.battery
    ps = [b.anova.p, b.welch.p, b.kruskal.p]
    return any(p is not None and p < b.alpha for p in ps)


class AnovaPanel(Static):
    """ANOVA table plus companion lines for the shown comparison."""

    def show(self, detail: DetailView) -> None:
        b = detail.battery
        lots = (None if any(g.lots is None for g in b.groups)
                else sum(g.lots or 0 for g in b.groups))
        head = Text(f"{clean(detail.window_label, 40)}: {b.anova.k} groups, "
                    f"{lots_and_values(lots, b.anova.n_total)}", style="bold")
        parts: list[RenderableType] = [head]
        if b.anova.df_within > 0 or b.anova.ss_total is not None:
            parts.append(anova_table(detail))
        parts.extend(companion_lines(detail))
        self.update(Group(*parts))

    def show_message(self, message: str) -> None:
        self.update(Text(clean(message)))
