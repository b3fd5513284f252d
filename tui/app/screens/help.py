"""Help: every key binding, what each number means, and the caution."""

from __future__ import annotations

from lotwatch.tui.app.screens.size_guard import SizeGuard
from lotwatch.tui.app.widgets.caution import CAUTION
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

MEANINGS = [
    ("Group table",
     "lots = distinct lots of the group in the window; values = its measurements (more than "
     "the lots when lots carry replicates); mean and SD (sample, values - 1) of its values; CI = "
     "two-sided t confidence interval of the mean at 1 - alpha; 'vs rest' = group mean minus the "
     "mean of all other values; ANOM = analysis of means: 'high'/'low' when the group mean lies "
     "outside the decision limits around the grand mean; Cpk = min(USL - mean, mean - LSL) / "
     "(3 x the group's own within SD: pooled within lots, or average moving range / 1.128), "
     "Ppk the same with the group's overall SD; shown when limits exist."),
    ("ANOVA table",
     "Between = variation of group means around the grand mean, Within = variation of lots "
     "around their own group mean, Total = both. df = degrees of freedom (k-1, N-k, N-1); SS = "
     "sum of squares; MS = SS/df; F = MS Between / MS Within; p = chance of an F this large if "
     "all groups had the same mean. Critical F = the F at which p would equal alpha; an F above "
     "the critical F means the group means differ at that alpha."),
    ("Companion tests",
     "Welch = ANOVA that does not assume equal spread; Kruskal-Wallis = rank test that does not "
     "assume normal data; variance check = Brown-Forsythe test of equal spread; residual check "
     "= normality of values around their group means. 'Read' names the test the checks point "
     "to and the matching post-hoc comparison (Tukey-Kramer, Games-Howell or Dunn)."),
    ("Effect sizes",
     "eta² = SS Between / SS Total (share of variation explained by the factor, biased up); "
     "omega² = the less biased version (0 = none); Cohen's f = sqrt(eta² / (1 - eta²)), about "
     "0.1 small, 0.25 medium, 0.4 large (Cohen 1988). A tiny p with a tiny effect is real but "
     "may not matter."),
    ("q-values",
     "Each week many comparisons (characteristic x factor) are tested. q = p adjusted for that "
     "family by Benjamini-Hochberg: among comparisons with q below 0.05, about 5% or fewer are "
     "expected to be false alarms. An alert opens on q, not p, and only when the largest shift "
     "also reaches a practical size (the characteristic's min shift, else a share of the "
     "tolerance) in k of the last m windows (review settings; 2 of 3 unless changed). It clears "
     "after m windows without a signal."),
    ("Detectable shift",
     "When nothing is significant: the smallest shift of one group from the others that the F "
     "test would detect with 80% power at these group sizes and this within-group SD. "
     "'Nothing significant' with a large detectable shift means 'not enough data to tell'."),
    ("Board",
     "Every characteristic x factor with data, most urgent first. States: mean alert (!) = an "
     "open alert on group means; spread alert (!) = an open alert on spread; acknowledged (~) "
     "= someone looked and noted what they did; watching = enough data and no alert; not "
     "enough data (·) = the window's statistics could not be computed. group = the flagged "
     "(or most shifted) group and its direction; size = its mean minus the mean of the other "
     "lots, in the unit; %tol = |size| / (USL - LSL); min = the shift an alert needs; q = the "
     "latest window's q-value."),
    ("Comparison tabs",
     "Pairs = every pair of groups by the recommended post-hoc test (difference, simultaneous "
     "interval, adjusted p); Dunnett = each group against a reference you pick with g; Spread "
     "= each group's SD against the pooled within-group SD (sqrt of MS Within)."),
    ("Run chart",
     "Each group's mean per plant day over the twelve weeks before the window's end (further "
     "back to an earlier onset; several days a column when they do not fit). The flagged group "
     "(without an alert: the most shifted one; after ↑/↓ or a move in the table: the "
     "highlighted one; the legend says which) is drawn with #, the others with ·; for an "
     "alarmed spread detector the chart shows SDs per day instead. LSL and USL (═) and the "
     "target (─) are always on the scale: far from the data they get a row of their own at the "
     "edge, marked ≈ where the scale breaks. ┆ = the detector's estimated onset. The strip "
     "under the axis is the group's detector evidence day by day (█ = at or over its "
     "threshold; the number is the latest). d puts a cursor on the days: ←/→ move, ↑/↓ change "
     "the group, Enter lists the lots of that group on those days."),
    ("Lots and corrections",
     "l (or Enter on a group) lists the lots behind it in plant time, with who logged them and "
     "their notes; c corrects and v voids a value with a required reason (kept with the "
     "original in the audit trail, the same as lotwatch correct / void); h shows a value's "
     "history. A void value stays stored but leaves every statistic."),
]


KEY_NAMES = {"escape": "Esc", "enter": "Enter", "pagedown": "PgDn", "pageup": "PgUp",
             "down": "↓", "up": "↑", "question_mark": "?", "slash": "/", "tab": "Tab",
             "left_square_bracket": "[", "right_square_bracket": "]", "left": "←",
             "right": "→", "home": "Home", "end": "End"}


def binding_lines(title: str, bindings: list[BindingType]) -> Text:
    """One line per binding: keys and description."""
    text = Text()
    text.append(f"{title}\n", style="bold underline")
    for b in bindings:
        if not isinstance(b, Binding) or not b.description:
            continue
        keys = b.key_display or ", ".join(KEY_NAMES.get(k.strip(), k.strip())
                                          for k in b.key.split(","))
        text.append(f"  {keys:<12}", style="bold")
        text.append(f"{b.description}")
        if b.tooltip:
            text.append(f" - {b.tooltip}", style="italic")
        text.append("\n")
    return text


class HelpScreen(SizeGuard, ModalScreen[None]):
    """Scrollable help; Escape, q or ? closes it."""

    BINDINGS = [Binding("escape,q,question_mark", "close", "Close help")]

    def __init__(self, shared: list[BindingType] | None = None) -> None:
        super().__init__()
        self.shared = list(shared or [])  # the keys every full screen has (n, ?)

    def compose(self) -> ComposeResult:
        from lotwatch.tui.app.screens.acknowledge import AcknowledgeScreen
        from lotwatch.tui.app.screens.entry import LotEntryScreen
        from lotwatch.tui.app.screens.lots import LotsScreen
        from lotwatch.tui.app.screens.reason import ReasonScreen
        from lotwatch.tui.app.widgets.tag_input import TagInput
        from lotwatch.tui.app.widgets.trend_chart import RunChartView

        text = Text()
        text.append("lotwatch help (↑/↓ scroll, Esc close)\n\n", style="bold")
        text.append(CAUTION + "\n\n", style="bold")
        # The app's screens come from its modes (importing them here would close a cycle
        # through the screens' base, which opens this help).
        modes = getattr(self.app, "MODES", {})
        sections = [("Everywhere", list(getattr(self.app, "BINDINGS", [])) + self.shared)]
        for title, mode in (("Board (first screen)", "board"), ("Comparison view", "comparison"),
                            ("Weekly review", "review"), ("Alerts", "alerts")):
            cls = modes.get(mode)
            if isinstance(cls, type):
                sections.append((title, list(getattr(cls, "BINDINGS", []))))
        sections += [
            ("Run chart (after d)", RunChartView.BINDINGS),
            ("Lots behind a group", LotsScreen.BINDINGS),
            ("Correct or void a value", ReasonScreen.BINDINGS),
            ("Lot entry form", LotEntryScreen.BINDINGS),
            ("Tag fields of the form", TagInput.BINDINGS),
            ("Acknowledge", AcknowledgeScreen.BINDINGS),
        ]
        for title, bindings in sections:
            text.append_text(binding_lines(title, bindings))
            text.append("\n")
        text.append("  ctrl+p      command palette: every main action by name\n\n")
        text.append("What the numbers mean\n", style="bold underline")
        for title, body in MEANINGS:
            text.append(f"{title}: ", style="bold")
            text.append(body + "\n\n")
        with VerticalScroll():
            yield Static(text)

    def on_mount(self) -> None:
        self.query_one(VerticalScroll).focus()

    def action_close(self) -> None:
        self.dismiss(None)
