"""Boundary input on the command line: numbers past any gauge (1e999999, thousands of digits,
1e-999999), dates at the ends of the calendar (year 1, year 9999, a week whose Sunday is past
9999) and local times inside a daylight-saving gap. Each is a clear message with exit status 2
and leaves the store byte for byte as it was; a gap time is stored and the command says which
instant it stored.

Facts used: Python's ``datetime`` covers years 1 to 9999 only (Python documentation, datetime
MINYEAR/MAXYEAR); the European Union moves clocks forward at 01:00 UTC on the last Sunday of
March (Directive 2000/84/EC, article 2), which in 2026 is 29 March, so 02:00-02:59 local time
does not exist in Europe/Berlin that day; the United States moves them forward at 2 a.m. local
time on the second Sunday of March (15 U.S.C. 260a), 8 March 2026.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from tests.cli.helpers import dump

TAGS = ("--tag", "site=north", "--tag", "line=1", "--tag", "shift=day")


def _refused(result, *words: str) -> str:
    out = result.output
    assert result.exit_code == 2, (result.exit_code, out, result.exception)
    assert isinstance(result.exception, SystemExit), f"crashed: {result.exception!r}\n{out}"
    assert "Traceback" not in out and "Error" in out
    for w in words:
        assert w.lower() in out.lower(), (w, out)
    return out


@pytest.mark.parametrize("value, word", [
    ("1e999999", "too large"), ("-1e999999", "too large"), ("1E+999999999", "too large"),
    ("1e-999999", "too small"),  # would underflow to 0 and be stored as zero
    ("5" * 5000, "too large"),  # past Python's 4,300-digit int-string limit
    ("500." + "0" * 40 + "1", "significant digits"),  # would be rounded away in 60 digits
])
def test_log_refuses_numbers_past_any_gauge(cli, db: Path, value: str, word: str) -> None:
    before = dump(db)
    res = cli("log", "fill_volume", "500.1", value, *TAGS, "--db", db)
    _refused(res, word, "nothing was stored")
    assert dump(db) == before


def test_correct_refuses_a_huge_value(cli, db: Path) -> None:
    assert cli("log", "fill_volume", "500.1", *TAGS, "--db", db).exit_code == 0
    before = dump(db)
    _refused(cli("correct", "1", "1e999999", "--reason", "typo", "--db", db), "too large")
    assert dump(db) == before


@pytest.mark.parametrize("at", [
    "0001-01-01", "0001-01-01T00:00:00+05:00",  # east of UTC: before year 1 in UTC
    "9999-12-31T23:59:59-05:00",  # west of UTC: past year 9999 in UTC
    "0999-06-01",  # would be stored as "999-06-01T...", a key that does not sort as time
])
def test_log_at_refuses_dates_at_the_ends_of_the_calendar(cli, db: Path, at: str) -> None:
    before = dump(db)
    _refused(cli("log", "fill_volume", "500.1", *TAGS, "--at", at, "--db", db), "--at", at)
    assert dump(db) == before


@pytest.mark.parametrize("args, words", [
    (("--as-of", "0001-01-01"), ("--as-of", "0001-01-01")),
    (("--as-of", "9999-12-31"), ("--as-of", "9999-12-31")),
    (("--week", "0001-W01"), ("--week", "0001-W01")),
    (("--week", "9999-W52"), ("--week", "9999-W52")),  # its Sunday is past 9999-12-31
    (("--as-of", "12026-01-01"), ("--as-of",)),
])
def test_review_refuses_days_at_the_ends_of_the_calendar(cli, db: Path, args, words) -> None:
    assert cli("log", "fill_volume", "500.1", *TAGS, "--db", db).exit_code == 0
    before = dump(db)
    for command in (("review",), ("trend", "fill_volume", "--by", "site")):
        _refused(cli(*command, *args, "--db", db), *words)
    assert dump(db) == before


@pytest.mark.parametrize("zone, typed, stored_utc, shown", [
    ("Europe/Berlin", "2026-03-29 02:30", "2026-03-29T01:30:00Z", "03:30"),  # 2000/84/EC
    ("America/Chicago", "2026-03-08 02:30", "2026-03-08T08:30:00Z", "03:30"),  # 15 USC 260a
])
def test_log_at_in_a_daylight_saving_gap_says_what_was_stored(
        cli, tmp_path: Path, zone: str, typed: str, stored_utc: str, shown: str) -> None:
    path = tmp_path / "z.sqlite"
    assert cli("init", path, "--zone", zone).exit_code == 0
    assert cli("characteristic", "add", "fv", "--unit", "mL", "--resolution", "0.1",
               "--db", path).exit_code == 0
    res = cli("log", "fv", "1.0", *TAGS, "--at", typed, "--db", path)
    assert res.exit_code == 0, res.output
    assert "does not exist" in res.output and zone in res.output, res.output
    assert f"stored as {typed[:10]} {shown}" in res.output, res.output
    conn = sqlite3.connect(path)
    try:
        assert conn.execute("SELECT measured_at FROM measurements").fetchall() == [(stored_utc,)]
    finally:
        conn.close()
    # an ordinary time gets no note
    res = cli("log", "fv", "1.0", *TAGS, "--at", f"{typed[:10]} 12:00", "--db", path)
    assert res.exit_code == 0 and "does not exist" not in res.output, res.output
