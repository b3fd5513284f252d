"""Pure helpers of the app: ISO weeks and the words for worker failures."""

from __future__ import annotations

import sqlite3

from lotwatch.store import BadInput, RowProblem, StoreFull, StoreLocked, StoreMissing, StoreReadOnly
from lotwatch.tui.app.errors import describe_error
from lotwatch.tui.app.state import parse_week, shift_week


def test_iso_weeks_across_a_year_end():
    # ISO 8601: week 1 is the week with the year's first Thursday; 2026-01-01 is a Thursday, so
    # 2026-W01 starts on Monday 2025-12-29, and 2020 had 53 weeks (it began on a Wednesday and
    # was a leap year). Common calendar facts.
    assert parse_week("2026-W01").isoformat() == "2025-12-29"
    assert shift_week("2026-W01", -1) == "2025-W52"
    assert shift_week("2020-W53", 1) == "2021-W01"
    assert shift_week("2020-W52", 1) == "2020-W53"
    assert parse_week("28 days to 2026-11-29") is None


def test_store_failures_say_what_happened_and_what_to_do():
    locked = describe_error(StoreLocked("x.sqlite is busy; try again in a moment."), "saving")
    assert "busy" in locked and "What you typed is kept" in locked
    full = describe_error(StoreFull("the disk holding x.sqlite is full"), "saving")
    assert full.startswith("The disk holding x.sqlite is full.")
    assert "reopen without --read-only" in describe_error(StoreReadOnly("cannot write"), "s")
    assert "Restore it" in describe_error(StoreMissing("no store at x"), "reading")
    bad = describe_error(BadInput([RowProblem("terminal", None, "value", "abc",
                                              "not a number")]), "saving")
    assert "not a number" in bad and "Correct the form" in bad
    db = describe_error(sqlite3.DatabaseError("file is not a database"), "reading the store")
    assert db.startswith("reading the store: the store could not be read or written")
    odd = describe_error(ZeroDivisionError("division by zero"), "computing")
    assert "ZeroDivisionError" in odd and "keeps running" in odd


def test_week_stepping_follows_the_plant_calendar(monkeypatch):
    """Issue 11, item 3: 03:00 UTC on Monday 2026-11-30 is still Sunday evening in Chicago, so a
    week back from the plant's current week (2026-W48) is 2026-W47, not 2026-W48 as in UTC.
    ISO weeks: 2026-11-29 is the Sunday of 2026-W48 (common calendar fact)."""
    from datetime import UTC, datetime

    from lotwatch.tui.app.state import step_week
    from lotwatch.tui.services import review_inputs

    class Clock(datetime):
        @classmethod
        def now(cls, tz=None):
            return datetime(2026, 11, 30, 3, 0, tzinfo=UTC).astimezone(tz)

    monkeypatch.setattr(review_inputs, "datetime", Clock)
    assert step_week(None, -1, "America/Chicago") == "2026-W47"
    assert step_week(None, -1, "UTC") == "2026-W48"
    assert step_week("2026-W47", 1, "America/Chicago") is None  # back to this plant week
