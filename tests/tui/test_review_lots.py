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
        store.add_characteristic("bore", unit="mm", resolution="0.01", plausible=(9.0, 11.0),
                                 min_shift=0.125)
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
        # so does the gate an alert needs (its minimum shift; the unit is on the shift's column)
        assert cells[labels.index("gate")] == "0.125", cells


async def test_an_earlier_week_says_it_shows_the_state_as_of_that_week(tmp_path):
    """Issue 11, item 8: stepping the review back a week says that the detectors are shown as
    they were then and the alerts as they stand now."""
    from lotwatch.store import Store
    from lotwatch.tui.services.review_engine import run_review
    from tui_helpers import screen_text

    path = tmp_path / "rep.sqlite"
    _replicated_store(path)
    with Store.open(path) as store:
        run_review(store)  # the detectors advanced to the latest day
    app = LotwatchApp(path)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot, lambda: not app.computing)
        await pilot.press("r")
        await settle(pilot, lambda: app.review is not None)
        assert "state as of that week" not in screen_text(app)
        await pilot.press("left_square_bracket")
        await settle(pilot, lambda: app.review is not None and app.review.week is not None)
        text = " ".join(screen_text(app).split())
        assert "state as of that week" in text and "acknowledgements made since" in text


async def test_the_board_shows_a_factor_with_one_level_beside_detector_rows(tmp_path):
    """A factor with a single level has no detector; once other rows carry detector columns
    its row is padded, not a crash of the interface (seen at 100 columns)."""
    from lotwatch.store import Store
    from lotwatch.tui.services.review_engine import run_review

    path = tmp_path / "rep.sqlite"
    _replicated_store(path)  # line and shift have one level each
    with Store.open(path) as store:
        run_review(store)
    for size in ((80, 24), (100, 30)):
        app = LotwatchApp(path)
        async with app.run_test(size=size) as pilot:
            await settle(pilot, lambda a=app: a.overview is not None and not a.computing)
            table = app.screen.query_one("#board", DataTable)
            assert table.row_count == 3  # bore by site, line and shift
            assert app.is_running


async def test_alert_sizes_in_the_app_carry_unit_and_resolution(alert_store):
    """The alerts screen and the acknowledge form write the size like every other screen: the
    resolution's decimals plus one and the unit (bore: 0.01 mm, size 0.15 -> "0.150 mm")."""
    from lotwatch.tui.app.screens.acknowledge import AcknowledgeScreen
    from lotwatch.tui.app.screens.alerts import AlertsScreen
    from tui_helpers import screen_text

    path, _ = alert_store
    app = LotwatchApp(path)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot, lambda: not app.computing)
        await pilot.press("a")
        await settle(pilot, lambda: isinstance(app.screen, AlertsScreen) and app.alerts)
        assert "0.150 mm" in screen_text(app)
        await pilot.press("k")
        await settle(pilot, lambda: isinstance(app.screen, AcknowledgeScreen))
        assert "shift 0.150 mm" in screen_text(app)
