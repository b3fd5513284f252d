"""Timestamps: parse what people type or labs export, store UTC, show plant-local time.

Stored form is ISO 8601 UTC with a ``Z`` and whole seconds ("2026-11-30T14:05:00Z"), which
sorts correctly as text. A naive input (no offset) is taken in the zone passed as ``zone`` (the
store's plant zone, ``store.plantzone``), else the computer's local time. The bucket day of a
measurement is the plant-local calendar date of ``measured_at``.
"""

from __future__ import annotations

from datetime import UTC, date, datetime

STORED_FORMAT = "%Y-%m-%dT%H:%M:%SZ"
DISPLAY_FORMAT = "%Y-%m-%d %H:%M"


class BadTime(ValueError):
    """A timestamp that cannot be understood; ``str()`` says what is expected."""


def now_utc() -> datetime:
    """The current time, aware, in UTC, to the whole second."""
    return datetime.now(UTC).replace(microsecond=0)


def _zone(name: str | None):
    if name is None:
        return None
    from lotwatch.store.plantzone import zone

    return zone(name)


def to_utc(value: datetime | date | str, zone: str | None = None) -> datetime:
    """An aware UTC datetime from a datetime (naive = local), a date (local midnight) or text.

    Text forms: ISO 8601 date/time with ``T`` or a space, optional seconds/fractions, and an
    optional offset ``Z`` / ``+01:00``; a bare date means local midnight. "Local" is the IANA
    zone ``zone`` when given (the plant zone), else the computer's zone.
    """
    if isinstance(value, datetime):
        dt = value
    elif isinstance(value, date):
        dt = datetime(value.year, value.month, value.day)
    elif isinstance(value, str):
        dt = _parse_text(value)
    else:
        raise BadTime(f"{value!r} is not a date/time")
    if dt.tzinfo is None or dt.tzinfo.utcoffset(dt) is None:
        tz = _zone(zone)
        # naive: interpret as local time (fold=0: the first of a repeated autumn hour)
        dt = dt.astimezone() if tz is None else dt.replace(tzinfo=tz)
    return dt.astimezone(UTC)


def _parse_text(text: str) -> datetime:
    s = text.strip()
    if not s:
        raise BadTime("the date/time is empty")
    candidate = s
    if candidate.endswith(("z", "Z")):
        candidate = candidate[:-1] + "+00:00"
    try:
        return datetime.fromisoformat(candidate)
    except ValueError:
        pass
    raise BadTime(
        f"{s!r} is not a date/time; use ISO 8601 such as 2026-11-30 14:05 (local time) "
        "or 2026-11-30T14:05:00Z / 2026-11-30T15:05:00+01:00"
    )


def format_stored(value: datetime | date | str, zone: str | None = None) -> str:
    """The stored text form (UTC, whole seconds, ``Z``); naive input is taken in ``zone``."""
    return to_utc(value, zone).replace(microsecond=0).strftime(STORED_FORMAT)


def parse_stored(text: str) -> datetime:
    """Inverse of ``format_stored``: an aware UTC datetime."""
    return datetime.strptime(text, STORED_FORMAT).replace(tzinfo=UTC)


def utc_day(value: datetime | str) -> str:
    """The UTC calendar date (YYYY-MM-DD) of a stored timestamp or aware datetime."""
    if isinstance(value, str):
        return value[:10]
    return to_utc(value).date().isoformat()


def format_local(value: datetime | str, fmt: str = DISPLAY_FORMAT,
                 zone: str | None = None) -> str:
    """A stored timestamp (text or datetime) shown in the plant zone ``zone`` (an IANA name),
    else in the computer's local time zone."""
    dt = parse_stored(value) if isinstance(value, str) else to_utc(value)
    tz = _zone(zone)
    return (dt.astimezone() if tz is None else dt.astimezone(tz)).strftime(fmt)


def date_text(value: date | datetime | str | None) -> str | None:
    """A day bound for queries as YYYY-MM-DD (datetimes use their UTC date)."""
    if value is None:
        return None
    if isinstance(value, datetime):
        return to_utc(value).date().isoformat()
    if isinstance(value, date):
        return value.isoformat()
    try:
        return date.fromisoformat(value.strip()).isoformat()
    except ValueError:
        raise BadTime(f"{value!r} is not a date; use YYYY-MM-DD") from None
