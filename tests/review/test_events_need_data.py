"""Issue 11, item 8: an alert event is never recorded for a window without a test. Alerts come from
the day-by-day detectors, so every recorded event names a plant day on which its characteristic
has data, and a review of a week with no data records nothing at all. Checked on the replayed
demo store (store.demo) and on the demo as built (never reviewed)."""

from __future__ import annotations

import shutil
import sqlite3
from datetime import timedelta

from click.testing import CliRunner
from lotwatch.tui.cli import main


def run(db, *args):
    return CliRunner().invoke(main, ["--db", str(db), *args])


def _counts(path) -> tuple[int, int]:
    with sqlite3.connect(path) as conn:
        return (conn.execute("SELECT count(*) FROM alerts").fetchone()[0],
                conn.execute("SELECT count(*) FROM alert_events").fetchone()[0])


def test_every_recorded_event_names_a_day_with_data(demo_replay):
    with sqlite3.connect(demo_replay.path) as conn:
        rows = conn.execute(
            "SELECT e.id, e.event, e.window, a.characteristic_id FROM alert_events e "
            "JOIN alerts a ON a.id = e.alert_id WHERE e.event != 'acknowledged'").fetchall()
        assert rows, "the replay records the planted effects' alerts"
        for event_id, event, window, char_id in rows:
            assert window.startswith("day "), (event_id, event, window)
            day = window.removeprefix("day ")
            n = conn.execute("SELECT count(*) FROM measurements WHERE characteristic_id = ? "
                             "AND day = ? AND voided = 0", (char_id, day)).fetchone()[0]
            assert n > 0, f"event {event_id} ({event}) names {day}, a day without data"


def test_a_week_without_data_records_nothing(demo_replay, tmp_path):
    early = demo_replay.start - timedelta(days=30)
    week = f"{early.isocalendar().year}-W{early.isocalendar().week:02d}"
    # the demo as built: no detector has run, no alert exists
    pristine = tmp_path / "pristine.sqlite"
    shutil.copy(demo_replay.pristine, pristine)
    before = _counts(pristine)
    r = run(pristine, "review", "--week", week)
    assert r.exit_code == 0, r.output
    assert _counts(pristine) == before == (0, 0)
    assert "[OPEN]" not in r.output and " NEW\n" not in r.output
    # the replayed demo: detectors at the end; an early week changes nothing
    replayed = tmp_path / "replayed.sqlite"
    shutil.copy(demo_replay.path, replayed)
    before = _counts(replayed)
    r = run(replayed, "review", "--week", week)
    assert r.exit_code == 0, r.output
    assert _counts(replayed) == before
    assert "state as of that week" in " ".join(r.output.split())
