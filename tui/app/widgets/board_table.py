"""The board's table: one row per characteristic × factor, most urgent first."""

from __future__ import annotations

from lotwatch.tui.app.widgets.compact import fill
from lotwatch.tui.render.numbers import MISSING, decimals_of, fixed, pval
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import (
    ACKNOWLEDGED,
    MEAN_ALERT,
    NOT_ENOUGH,
    SPREAD_ALERT,
    BoardRow,
)
from textual.widgets import DataTable

# Marks keep the state readable without colour (NO_COLOR); the words say it outright.
MARKS = {MEAN_ALERT: "!", SPREAD_ALERT: "!", ACKNOWLEDGED: "~", NOT_ENOUGH: "·"}
DIRECTION = {"higher": "high", "lower": "low", "wider": "wider"}


def size_text(row: BoardRow) -> str:
    """The signed size at the characteristic's resolution with its unit ("+1.01 mL")."""
    if row.size is None:
        return MISSING
    return f"{row.size:+.{decimals_of(row.resolution)}f} {clean(row.unit, 4)}"


def evidence_text(evidence: float | None) -> str:
    """Evidence as a fraction of the threshold in four characters ("0.56", "8.90", "20")."""
    if evidence is None:
        return MISSING
    return f"{evidence:.0f}" if evidence >= 10 else f"{evidence:.2f}"


def board_cells(row: BoardRow) -> list[str]:
    group = MISSING
    if row.group:
        group = f"{clean(row.group, 7)} {DIRECTION.get(row.direction or '', '')}".strip()
    tol = MISSING if row.percent_of_tolerance is None else f"{row.percent_of_tolerance:.0f}%"
    cells = [f"{MARKS.get(row.state, ' ')} {row.state}", clean(row.characteristic, 13),
             clean(row.factor, 7), group, size_text(row), tol,
             MISSING if row.min_shift is None else fixed(row.min_shift,
                                                         decimals_of(row.resolution) - 1)]
    if row.evidence is not None or row.onset is not None:
        cells += [evidence_text(row.evidence),
                  MISSING if not row.onset else clean(row.onset[5:], 5)]
    cells.append(pval(row.q))
    return cells


class BoardTable(DataTable):
    """Rows keyed "characteristic\\x1ffactor"; the cursor stays on its comparison across
    refreshes."""

    def on_mount(self) -> None:
        self.cursor_type = "row"
        self.zebra_stripes = True

    def show(self, rows: list[BoardRow], keep: tuple[str | None, str | None], *,
             wide: bool = True) -> None:
        """Fill the table; below 100 columns the min shift and the onset are left to the
        preview's headline (the q column must not be cut)."""
        detector = any(r.evidence is not None or r.onset is not None for r in rows)
        headers = ["state", "characteristic", "factor", "group", "size", "%tol", "min"]
        right = [False, False, False, False, True, True, True]
        if detector:
            headers += ["evid", "onset"]
            right += [True, False]
        headers.append("q")
        right.append(True)
        cells, styles, keys = [], [], []
        for r in rows:
            c = board_cells(r)
            if not detector and len(c) > len(headers):
                c = c[:7] + c[-1:]
            elif detector and len(c) < len(headers):  # no detector on this row (one level)
                c = c[:7] + [MISSING, MISSING] + c[-1:]
            cells.append(c)
            hot = r.state in (MEAN_ALERT, SPREAD_ALERT)
            styles.append(["bold reverse" if hot else ""] + ["bold" if hot else ""] * 10)
            keys.append(f"{r.characteristic}\x1f{r.factor}")
        if not wide:  # the headline under the table gives both
            for name in ("min", "onset"):
                if name in headers:
                    drop = headers.index(name)
                    headers = headers[:drop] + headers[drop + 1:]
                    right = right[:drop] + right[drop + 1:]
                    cells = [c[:drop] + c[drop + 1:] for c in cells]
        fill(self, headers, right, cells, keys=keys, styles=styles)
        target = f"{keep[0]}\x1f{keep[1]}"
        row = keys.index(target) if target in keys else 0
        if keys:
            self.move_cursor(row=row, animate=False)

    @property
    def selected(self) -> tuple[str, str] | None:
        if self.row_count == 0:
            return None
        key = self.coordinate_to_cell_key(self.cursor_coordinate).row_key.value
        if key is None:
            return None
        characteristic, factor = key.split("\x1f", 1)
        return characteristic, factor
