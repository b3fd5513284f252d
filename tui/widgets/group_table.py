"""The group table: n, mean, SD, confidence interval, difference from the others, ANOM, Cpk."""

from __future__ import annotations

from rich.cells import cell_len
from rich.text import Text
from textual.widgets import DataTable

from tui.data import DetailView
from tui.safe_text import clean
from tui.widgets.numbers import MISSING, decimals_of, fixed, num

ANOM_MARK = {"above": "high", "below": "low", "within": "–"}
GROUP_WIDTH = 10


class GroupTable(DataTable):
    """One row per group of the latest window (excluded groups are listed on the Tests tab).

    Cell padding is off (every column counts at 80 columns); each column is as wide as its
    widest cell plus one space, numbers right-aligned.
    """

    DEFAULT_CSS = """
    GroupTable { height: auto; max-height: 1fr; }
    """

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True
        self.cell_padding = 0

    def show(self, detail: DetailView) -> None:
        b = detail.battery
        dec = decimals_of(detail.characteristic.resolution)
        anom = {g.group: g.flag for g in b.anom.groups}
        cpk = {c.group: c.cpk for c in (b.capability or [])}
        conf = round((1 - b.alpha) * 100)
        headers = ["group", "n", "mean", "SD", f"{conf}% CI", "vs rest", "ANOM"]
        right = [False, True, True, True, False, True, False]
        if b.capability:
            headers.append("Cpk")
            right.append(True)
        rows: list[list[str]] = []
        for g in b.groups:
            ci = (f"{fixed(g.ci_low, dec)}..{fixed(g.ci_high, dec)}"
                  if g.ci_low is not None and g.ci_high is not None else MISSING)
            diff = g.diff_from_others
            row = [clean(g.name, GROUP_WIDTH - 1), str(g.n), fixed(g.mean, dec),
                   fixed(g.sd, dec), ci, MISSING if diff is None else f"{diff:+.{dec}f}",
                   ANOM_MARK.get(anom.get(g.name, ""), MISSING)]
            if b.capability:
                row.append(num(cpk.get(g.name), 3))
            rows.append(row)
        widths = [max([cell_len(h)] + [cell_len(r[i]) for r in rows]) + 1
                  for i, h in enumerate(headers)]
        self.clear(columns=True)
        for i, h in enumerate(headers):
            self.add_column(_cell(h, right[i], first=i == 0), key=h, width=widths[i])
        for g, row in zip(b.groups, rows, strict=True):
            flagged = anom.get(g.name) in ("above", "below")
            cells = [_cell(v, right[i], first=i == 0, bold=flagged and i == 6)
                     for i, v in enumerate(row)]
            self.add_row(*cells, key=g.name)


def _cell(value: str, right: bool, *, first: bool = False, bold: bool = False) -> Text:
    """A cell with one space before it (the first column: after it) to separate columns."""
    text = f"{value} " if first else f" {value}"
    return Text(text, justify="right" if right else "left", style="bold" if bold else "",
                no_wrap=True)
