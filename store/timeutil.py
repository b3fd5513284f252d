"""Timestamps: parse what people type or labs export, store UTC, show plant-local time.

Stored form is ISO 8601 UTC with a ``Z`` and whole seconds ("2026-11-30T14:05:00Z"), which
sorts correctly as text. A naive input (no offset) is taken in the zone passed as ``zone`` (the
store's plant zone, ``store.plantzone``), else the computer's local time. The bucket day of a
measurement is the plant-local calendar date of ``measured_at``.
"""

from __future__ import annotations

from datetime import UTC, date, datetime

from lotwatch.store.rules import FIRST_YEAR, LAST_YEAR

STORED_FORMAT = "%Y-%m-%dT%H:%M:%SZ"
DISPLAY_FORMAT = "%Y-%m-%d %H:%M"


class BadTime(ValueError):
    """A timestamp that cannot be understood; ``str()`` says what is expected."""


class OutOfCalendar(BadTime):
    """A readable date outside the years lotwatch works with (``FIRST_YEAR``..``LAST_YEAR``)."""


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
        dt = parse_typed(value)
    else:
        raise BadTime(f"{value!r} is not a date/time")
    try:
        if dt.tzinfo is None or dt.tzinfo.utcoffset(dt) is None:
            tz = _zone(zone)
            # naive: interpret as local time (fold=0: the first of a repeated autumn hour)
            dt = dt.astimezone() if tz is None else dt.replace(tzinfo=tz)
        return dt.astimezone(UTC)
    except (OverflowError, ValueError):  # 0001-01-01 east of UTC, 9999-12-31 west of it
        raise OutOfCalendar(f"{_shown(value)} is outside the range of dates lotwatch can store "
                      f"(years {FIRST_YEAR} to {LAST_YEAR})") from None


def _shown(value: object) -> str:
    return repr(value) if isinstance(value, str) else str(value)


def check_year(day: date | datetime, shown: str | None = None) -> None:
    """Refuse a day outside ``FIRST_YEAR``..``LAST_YEAR``: the stored text form needs four-digit
    years, and window arithmetic near year 1 or 9999 leaves the calendar (``BadTime``).
    ``shown`` is how the message names the input (default: the date)."""
    if not FIRST_YEAR <= day.year <= LAST_YEAR:
        raise OutOfCalendar(f"{shown or day.isoformat()[:10]} is outside the years "
                            f"{FIRST_YEAR} to {LAST_YEAR} that lotwatch works with")


def parse_day(text: str, what: str = "the date") -> date:
    """A typed day ``YYYY-MM-DD`` within ``check_year``'s range, else ``BadTime`` saying why."""
    try:
        day = date.fromisoformat(text.strip())
    except ValueError:
        raise BadTime(f"{what} {text!r} is not a date; use YYYY-MM-DD, e.g. 2026-11-29") from None
    check_year(day, f"{what} {text.strip()!r}")
    return day


def gap_note(naive: datetime, zone: str | None = None) -> str | None:
    """If the wall-clock time ``naive`` does not exist in the zone (clocks put forward over it),
    a sentence saying so and which instant ``to_utc`` stored for it; else None.

    A time exists when converting it to UTC and back gives the same wall-clock time (zoneinfo
    resolves a gap time with the offset in force before the change, PEP 495 fold=0)."""
    if naive.tzinfo is not None:
        return None
    tz = _zone(zone)
    try:
        stored = to_utc(naive, zone)
        back = stored.astimezone() if tz is None else stored.astimezone(tz)
    except BadTime:
        return None
    if back.replace(tzinfo=None) == naive.replace(microsecond=0):
        return None
    where = zone or "this computer's time zone"
    return (f"{naive:%Y-%m-%d %H:%M} does not exist in {where} (the clocks were put forward); "
            f"stored as {back:%Y-%m-%d %H:%M} local time ({stored:%Y-%m-%d %H:%M} UTC)")


def parse_typed(text: str) -> datetime:
    """The date/time as typed (naive when it carries no offset); ``BadTime`` if unreadable."""
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
    """The stored text form (UTC, whole seconds, ``Z``); naive input is taken in ``zone``.
    ``BadTime`` outside ``FIRST_YEAR``..``LAST_YEAR`` (the form would not sort as time)."""
    utc = to_utc(value, zone)
    check_year(utc, _shown(value))
    return utc.replace(microsecond=0).strftime(STORED_FORMAT)


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
