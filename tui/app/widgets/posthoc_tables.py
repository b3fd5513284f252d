"""The comparison's pairwise tables: the recommended post-hoc test, Dunnett against a chosen
reference group, and the spread view (each group's SD against the pooled SD). Render only."""

from __future__ import annotations

from lotwatch.tui.app.widgets.compact import fill
from lotwatch.tui.render.numbers import MISSING, decimals_of, fixed, pval
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import DetailView
from textual.widgets import DataTable

POSTHOC_FIELD = {"Tukey-Kramer": "tukey", "Games-Howell": "games_howell", "Dunn": "dunn"}


def _interval(lo: float | None, hi: float | None, dec: int) -> str:
    if lo is None or hi is None:
        return MISSING
    return f"{fixed(lo, dec)}..{fixed(hi, dec)}"


class PairwiseTable(DataTable):
    """Every pair: difference in units, simultaneous interval, adjusted p."""

    def on_mount(self) -> None:
        self.cursor_type = "row"

    def show(self, detail: DetailView) -> str:
        """Fill the table; returns its title (which test, at which confidence)."""
        b = detail.battery
        name = b.recommendation.posthoc
        pairs = getattr(b, POSTHOC_FIELD.get(name, "tukey"), []) or []
        dec = decimals_of(detail.characteristic.resolution)
        unit = clean(detail.characteristic.unit, 6)
        rows, styles = [], []
        for p in pairs:
            rows.append([f"{clean(p.a, 10)} - {clean(p.b, 10)}", f"{p.diff:+.{dec}f}",
                         _interval(p.lower, p.upper, dec), pval(p.p),
                         "differ" if p.significant else ""])
            styles.append(["bold" if p.significant else ""] * 5)
        fill(self, ["pair", f"diff {unit}", "interval", "adj. p", ""],
             [False, True, True, True, False], rows, styles=styles)
        conf = round((1 - b.alpha) * 100)
        if name == "Dunn":
            return (f"Dunn's test (recommended; {clean(b.dunn_adjust)}-adjusted p), "
                    "difference of mean ranks")
        return f"{name} (recommended): {conf}% simultaneous intervals, adjusted p"


class DunnettTable(DataTable):
    """Each group against the reference: difference, simultaneous interval, adjusted p."""

    def on_mount(self) -> None:
        self.cursor_type = "row"

    def show(self, detail: DetailView) -> str:
        b = detail.battery
        dec = decimals_of(detail.characteristic.resolution)
        rows, styles = [], []
        for d in b.dunnett or []:
            rows.append([clean(d.group, 12), f"{d.diff:+.{dec}f}",
                         _interval(d.lower, d.upper, dec), pval(d.p),
                         "differs" if d.significant else ""])
            styles.append(["bold" if d.significant else ""] * 5)
        unit = clean(detail.characteristic.unit, 6)
        fill(self, ["group", f"vs ref {unit}", "interval", "adj. p", ""],
             [False, True, True, True, False], rows, styles=styles)
        if b.reference is None:
            return "Dunnett: press g to choose a reference group (each group against it)."
        return (f"Dunnett against {clean(b.reference, 16)} ({round((1 - b.alpha) * 100)}% "
                "simultaneous intervals); g picks another reference.")


class SpreadTable(DataTable):
    """Each group's SD and its ratio to the pooled within-group SD."""

    def on_mount(self) -> None:
        self.cursor_type = "row"

    def show(self, detail: DetailView) -> str:
        dec = decimals_of(detail.characteristic.resolution)
        rows = [[clean(s.group, 12), str(s.n), fixed(s.sd, dec),
                 MISSING if s.ratio is None else f"{s.ratio:.2f}x"] for s in detail.spread]
        fill(self, ["group", "n", "SD", "/ pooled"], [False, True, True, True], rows)
        bf = detail.battery.brown_forsythe
        return (f"Pooled within-group SD {fixed(detail.pooled_sd, dec)} "
                f"{clean(detail.characteristic.unit, 6)}. {clean(bf.sentence or bf.status, 200)}")
