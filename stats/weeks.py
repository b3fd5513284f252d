"""ISO 8601 week labels ("2026-W48"): the one parser and formatter, used by window planning,
the command line and the app. Standard library only, so it is cheap to import anywhere."""

from __future__ import annotations

from datetime import date, timedelta

__all__ = ["iso_week_label", "parse_iso_week"]


def parse_iso_week(text: str) -> tuple[date, date]:
    """``"2026-W48"`` → (Monday, Sunday) of that ISO 8601 week. Raises ``ValueError``."""
    t = text.strip().upper()
    try:
        year_s, week_s = t.split("-W")
        year, week = int(year_s), int(week_s)
        monday = date.fromisocalendar(year, week, 1)
    except ValueError:
        raise ValueError(f"week {text!r}: expected an ISO week such as 2026-W48") from None
    return monday, monday + timedelta(days=6)


def iso_week_label(day: date) -> str:
    """The ISO 8601 week of a day, e.g. ``2026-W48``."""
    y, w, _ = day.isocalendar()
    return f"{y}-W{w:02d}"
