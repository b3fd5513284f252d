"""The app keeps the detectors current with whatever the store holds: on opening (the days since
the last review) and when another terminal stores lots (``lotwatch log`` and ``lotwatch import``
leave the detectors for later). A read-only app writes nothing. Oracle: the store's own tables
read with plain SQL (``detector_progress`` against the last day of the day sums)."""

from __future__ import annotations

import sqlite3
import time
from datetime import UTC, datetime

from lotwatch.store import LotEntry, Store
from lotwatch.tui.app.application import LotwatchApp
from tui_helpers import settle

TAGS = {"site": "Riverbend", "line": "RB-2", "shift": "early"}


def _state(path) -> tuple[set[tuple[str, str | None]], str]:
    with sqlite3.connect(path) as conn:
        progress = set(conn.execute("SELECT through_day, dirty_from FROM detector_progress"))
        last = conn.execute("SELECT max(day) FROM buckets").fetchone()[0]
    return progress, last


def _log_elsewhere(path, lot: str) -> None:
    """A lot stored as the command line's `log` does: the detectors are left behind."""
    with Store.open(path) as store:
        store.log_lots([LotEntry("fill_volume", ["500.4"], TAGS, lot=lot,
                                 measured_at=datetime.now(UTC))])


def _current(path) -> bool:
    progress, last = _state(path)
    return bool(progress) and progress == {(last, None)}


async def test_the_app_brings_the_detectors_current_on_opening_and_after_other_terminals(
        demo_copy):
    _log_elsewhere(demo_copy, "ELSEWHERE-1")
    assert not _current(demo_copy)  # behind: the lot marked its day for recomputing
    app = LotwatchApp(demo_copy, poll_seconds=0.1)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, lambda: _current(demo_copy), timeout=30)
        _log_elsewhere(demo_copy, "ELSEWHERE-2")
        assert not _current(demo_copy)
        deadline = time.monotonic() + 30
        while not _current(demo_copy) and time.monotonic() < deadline:
            await pilot.pause(0.1)
        assert _current(demo_copy)


async def test_a_read_only_app_leaves_the_detectors_as_they_are(demo_copy):
    _log_elsewhere(demo_copy, "ELSEWHERE-3")
    before = _state(demo_copy)
    app = LotwatchApp(demo_copy, read_only=True, poll_seconds=0.1)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, lambda: app.overview is not None and not app.overview.partial,
                     timeout=30)
        await pilot.pause(0.5)
    assert _state(demo_copy) == before
