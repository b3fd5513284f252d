"""``lotwatch init --zone`` and ``lotwatch zone show/set``: the plant calendar from the command
line. Offsets from the IANA tz database: America/Chicago is UTC-6 in November."""

from __future__ import annotations

import sqlite3
from pathlib import Path

TAGS = ("--tag", "site=north", "--tag", "line=1", "--tag", "shift=night")


def _days(db: Path) -> list[str]:
    conn = sqlite3.connect(db)
    try:
        return [r[0] for r in conn.execute("SELECT day FROM measurements ORDER BY id")]
    finally:
        conn.close()


def test_init_with_a_zone_and_plant_local_logging(cli, tmp_path: Path) -> None:
    db = tmp_path / "plant.sqlite"
    r = cli("init", db, "--zone", "America/Chicago")
    assert r.exit_code == 0, r.output
    assert "Plant time zone: America/Chicago" in r.output
    cli("characteristic", "add", "fill", "--unit", "mL", "--resolution", "0.1", "--db", db)
    # a naive --at is plant time: 23:30 CST on 29 Nov is 05:30 UTC on 30 Nov
    r = cli("log", "fill", "500.1", *TAGS, "--lot", "N1", "--at", "2026-11-29 23:30", "--db", db)
    assert r.exit_code == 0, r.output
    assert "2026-11-29 23:30 (plant time, America/Chicago)" in r.output
    assert _days(db) == ["2026-11-29"]
    r = cli("history", "1", "--db", db)
    assert "(times in plant time, America/Chicago)" in r.output  # when it was logged


def test_zone_set_moves_the_days_and_refuses_unknown_names(cli, tmp_path: Path) -> None:
    db = tmp_path / "plant.sqlite"
    cli("init", db, "--zone", "America/Chicago")
    cli("characteristic", "add", "fill", "--unit", "mL", "--resolution", "0.1", "--db", db)
    cli("log", "fill", "500.1", *TAGS, "--lot", "N1", "--at", "2026-11-30T05:30:00Z", "--db", db)
    r = cli("zone", "set", "Chicago", "--db", db)
    assert r.exit_code == 2 and "not a time zone name" in r.output
    assert "Traceback" not in r.output
    assert _days(db) == ["2026-11-29"]
    r = cli("zone", "set", "UTC", "--db", db)
    assert r.exit_code == 0, r.output
    assert "was America/Chicago" in r.output and "1 measurement moved" in r.output
    assert _days(db) == ["2026-11-30"]
    r = cli("zone", "show", "--db", db)
    assert r.output.strip() == "Plant time zone: UTC"
    assert cli("check", "--db", db).exit_code == 0


def test_init_refuses_an_unknown_zone_and_makes_no_file(cli, tmp_path: Path) -> None:
    db = tmp_path / "x.sqlite"
    r = cli("init", db, "--zone", "Mars/Base")
    assert r.exit_code == 2 and "not a time zone name" in r.output
    assert not db.exists()


def test_alerts_show_times_are_plant_local(cli, tmp_path: Path) -> None:
    from lotwatch.store import Store
    from lotwatch.store.alerts import Transition, record_transitions

    db = tmp_path / "plant.sqlite"
    cli("init", db, "--zone", "Asia/Tokyo")
    cli("characteristic", "add", "fill", "--unit", "mL", "--resolution", "0.1", "--db", db)
    with Store.open(db) as s:
        [alert] = record_transitions(s, [Transition("fill", "line", "opened", "W48", ["1"],
                                                    "higher", 0.3, 0.03, 0.002)], by="review")
        stamp = s.conn.execute("SELECT at FROM alert_events").fetchone()[0]
    from datetime import datetime
    from zoneinfo import ZoneInfo

    local = datetime.strptime(stamp, "%Y-%m-%dT%H:%M:%SZ").replace(
        tzinfo=ZoneInfo("UTC")).astimezone(ZoneInfo("Asia/Tokyo")).strftime("%Y-%m-%d %H:%M")
    r = cli("alerts", "show", str(alert.id), "--db", db)
    assert r.exit_code == 0, r.output
    assert "times in plant time, Asia/Tokyo" in r.output and f"{local} opened" in r.output
    assert stamp not in r.output  # no raw UTC stamp beside plant times
