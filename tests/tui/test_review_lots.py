"""The weekly review screen counts lots as lots and writes each shift with the characteristic's
resolution (issue 11, items 2 and 4). Oracle: distinct lots counted with plain SQL."""

from __future__ import annotations

import re
import sqlite3
from datetime import UTC, datetime, timedelta

from lotwatch.tui.app.application import LotwatchApp
from textual.widgets import DataTable
from tui_helpers import settle


def _replicated_store(path) -> None:
    """3 sites x 8 lots in the last 16 days, two replicate values per lot (mm, 0.01)."""
    from lotwatch.store import LotEntry, Store

    now = datetime.now(UTC).replace(microsecond=0)
    with Store.create(path) as store:
        store.add_characteristic("bore", unit="mm", resolution="0.01", plausible=(9.0, 11.0))
        entries = []
        for i in range(24):
            site = ("North", "South", "East")[i % 3]
            base = 10.0 + (0.1 if site == "East" else 0.0) + 0.01 * (i % 5)
            entries.append(LotEntry("bore", [f"{base:.2f}", f"{base + 0.02:.2f}"],
                                    {"site": site, "line": "L1", "shift": "day"},
                                    lot=f"R{i:03d}", measured_at=now - timedelta(hours=16 * i)))
        store.log_lots(entries)


async def test_the_review_screen_counts_lots_not_values(tmp_path):
    path = tmp_path / "rep.sqlite"
    _replicated_store(path)
    with sqlite3.connect(path) as conn:
        lots, values = conn.execute("SELECT count(DISTINCT lot_id), count(*) FROM measurements "
                                    "WHERE voided = 0").fetchone()
    assert (lots, values) == (24, 48)
    app = LotwatchApp(path)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot, lambda: not app.computing)
        await pilot.press("r")
        await settle(pilot, lambda: app.review is not None)
        row = next(r for r in app.review.rows if r.factor == "site")
        assert (row.lots_total, row.n_total) == (lots, values)
        table = app.screen.query_one(DataTable)
        labels = [str(c.label).strip() for c in table.columns.values()]
        assert "lots" in labels and "n" not in labels
        i = next(k for k, r in enumerate(app.review.rows) if r.factor == "site")
        cells = [str(c).strip() for c in table.get_row_at(i)]
        assert cells[labels.index("lots")] == f"{lots}"
        # bore is read to 0.01 mm: the shift carries three decimals and the unit
        assert re.fullmatch(r"-?\d+\.\d{3} mm", cells[labels.index("shift")]), cells
