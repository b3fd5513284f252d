"""The group table: lots and values, mean, SD, the confidence interval's half-width, difference
from the others, ANOM, and each group's own Cpk and Ppk (the unit on the mean's header)."""

from __future__ import annotations

from lotwatch.tui.app.widgets.compact import fill
from lotwatch.tui.render.numbers import MISSING, decimals_of, fixed, index, size
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import DetailView
from textual.widgets import DataTable

ANOM_MARK = {"above": "high", "below": "low", "within": "–"}
GROUP_WIDTH = 10


class GroupTable(DataTable):
    """One row per group of the latest window (excluded groups are listed on the Tests tab)."""

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True

    def on_resize(self) -> None:
        # A few rows high under 32 lines: keep the chosen group (the flagged one) in view once
        # the table has its size.
        if self.row_count:
            self.call_after_refresh(self.move_cursor, row=self.cursor_row)

    def show(self, detail: DetailView) -> None:
        b = detail.battery
        dec = decimals_of(detail.characteristic.resolution)
        anom = {g.group: g.flag for g in b.anom.groups}
        caps = {c.group: c for c in (b.capability or [])}
        conf = round((1 - b.alpha) * 100)
        unit = clean(detail.characteristic.unit, 8)
        u = f" ({unit})" if unit else ""
        # The unit once, on the mean: SD, the interval's half-width and the difference from
        # the rest are in the same unit (narrow enough to keep Cpk and Ppk in view).
        headers = ["group", "lots", "values", f"mean{u}", "SD", f"±{conf}% CI",
                   "vs rest", "ANOM"]
        right = [False, True, True, True, True, True, True, False]
        if b.capability:
            headers += ["Cpk", "Ppk"]
            right += [True, True]
        rows: list[list[str]] = []
        styles: list[list[str]] = []
        for g in b.groups:
            # mean ± t·s/√n is symmetric (stats.results.GroupSummary): its half-width
            ci = (f"±{fixed((g.ci_high - g.ci_low) / 2, dec)}"
                  if g.ci_low is not None and g.ci_high is not None else MISSING)
            diff = g.diff_from_others
            flag = anom.get(g.name, "")
            row = [clean(g.name, GROUP_WIDTH - 1),
                   MISSING if g.lots is None else f"{g.lots:,}", f"{g.n:,}", fixed(g.mean, dec),
                   fixed(g.sd, dec), ci,
                   size(diff, detail.characteristic.resolution or None, sign=True),
                   ANOM_MARK.get(flag, MISSING)]
            if b.capability:
                cap = caps.get(g.name)
                if cap is not None and cap.status:
                    row += ["no spread", "no spread"] if cap.sd_overall == 0 else [MISSING] * 2
                else:
                    row += [index(cap.cpk if cap else None), index(cap.ppk if cap else None)]
            rows.append(row)
            st = [""] * len(row)
            if flag in ("above", "below"):
                st[7] = "bold"
            styles.append(st)
        fill(self, headers, right, rows, keys=[g.name for g in b.groups], styles=styles)
