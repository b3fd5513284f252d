"""The report's family table counts lots as lots beside values, and writes sizes in the
characteristic's unit with its resolution's decimals plus one (issue 11, items 2 and 4). Oracle:
the distinct lots and values of the window counted with plain SQL on the store."""

from __future__ import annotations

import re
import sqlite3
from datetime import date, datetime, timedelta

from click.testing import CliRunner
from lotwatch.tui.cli import main


def test_family_table_counts_lots_and_values_and_gives_units(demo_copy, tmp_path):
    out = tmp_path / "week.md"
    r = CliRunner().invoke(main, ["--db", str(demo_copy), "report", "--dry-run", "--out",
                                  str(out)])
    assert r.exit_code == 0, r.output
    lines = out.read_text().splitlines()
    head_at = next(i for i, line in enumerate(lines) if line.startswith("| characteristic |"))
    head = [h.strip() for h in lines[head_at].strip("|").split("|")]
    rows = [[c.strip() for c in line.strip("|").split("|")]
            for line in lines[head_at + 2:] if line.startswith("|")]
    row = next(dict(zip(head, r_, strict=True)) for r_ in rows
               if r_[0] == "fill\\_volume" and r_[1] == "line")
    last = date.fromisoformat(re.search(r"to (\d{4}-\d{2}-\d{2})", row["window"]).group(1))
    first = last - timedelta(days=27)  # a trailing 28-day window (review.window_days)
    with sqlite3.connect(demo_copy) as conn:
        lots, values = conn.execute(
            "SELECT count(DISTINCT m.lot_id), count(*) FROM measurements m JOIN "
            "characteristics c ON c.id = m.characteristic_id WHERE c.name = 'fill_volume' "
            "AND m.voided = 0 AND m.day BETWEEN ? AND ?",
            (first.isoformat(), last.isoformat())).fetchone()
    assert lots < values  # the demo's fill_volume lots carry replicates
    assert (row["lots"], row["values"]) == (f"{lots:,}", f"{values:,}")
    # fill_volume is read to 0.1 mL: sizes carry 2 decimals and the unit
    for key in ("largest shift", "detectable shift", "gate"):
        assert re.fullmatch(r"-?\d+\.\d{2} mL", row[key]), (key, row[key])


def test_report_event_times_are_plant_local(demo_copy, tmp_path):
    """Issue 11, item 3: the report's events read like alerts show and history (plant time,
    saying so), never the stored UTC stamps. Oracle: zoneinfo on the stored stamps."""
    from zoneinfo import ZoneInfo

    zone = "America/Chicago"
    r = CliRunner().invoke(main, ["--db", str(demo_copy), "zone", "set", zone])
    assert r.exit_code == 0, r.output
    out = tmp_path / "week.md"
    r = CliRunner().invoke(main, ["--db", str(demo_copy), "report", "--dry-run", "--out",
                                  str(out)])
    assert r.exit_code == 0, r.output
    text = out.read_text()
    assert f"Events (times in plant time, {zone})" in text
    with sqlite3.connect(demo_copy) as conn:
        stamps = [s for (s,) in conn.execute("SELECT at FROM alert_events")]
    assert stamps
    for stamp in stamps:
        assert stamp not in text  # no raw UTC stamp
        utc = datetime.strptime(stamp, "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=ZoneInfo("UTC"))
        assert f"- {utc.astimezone(ZoneInfo(zone)):%Y-%m-%d %H:%M} opened" in text
