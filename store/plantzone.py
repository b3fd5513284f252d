"""The plant time zone: the calendar that days, ISO weeks and windows are counted in.

A store keeps every timestamp in UTC; its plant zone (an IANA name such as "America/Chicago",
kept in the ``settings`` table under ``plant.time_zone``) says which local calendar date a
measurement belongs to, so a night shift's 23:30 lot stays on its own plant day and ISO week.
A new store takes the computer's zone; stores made before the setting existed keep "UTC" so
their days do not move. Changing the zone recomputes every measurement's day and every day sum
in one write transaction (``store.rezone.set_plant_zone``).
"""

from __future__ import annotations

import os
import secrets
from datetime import UTC, datetime
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError, available_timezones

from lotwatch.store.errors import BadInput, RowProblem

if TYPE_CHECKING:
    import sqlite3


ZONE_KEY = "plant.time_zone"
LEGACY_ZONE = "UTC"  # stores older than the setting: their days were UTC days
_STORED = "%Y-%m-%dT%H:%M:%SZ"


def _valid(name: str) -> bool:
    if not name or name.startswith(("/", ".")) or ".." in name:
        return False
    try:
        ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError, OSError):
        return False
    return True


def machine_zone() -> str:
    """The computer's IANA zone name: ``$TZ`` if it names one, else the target of the
    /etc/localtime link, else /etc/timezone; "UTC" if none says (common practice on Linux)."""
    candidates: list[str] = []
    tz = os.environ.get("TZ", "").strip().lstrip(":")
    if tz:
        candidates.append(tz)
    try:
        target = os.readlink("/etc/localtime")
        if "zoneinfo/" in target:
            candidates.append(target.split("zoneinfo/", 1)[1])
    except OSError:
        pass
    try:
        candidates.append(Path("/etc/timezone").read_text(encoding="utf-8").strip())
    except OSError:
        pass
    for name in candidates:
        if _valid(name):
            return "UTC" if name in ("Etc/UTC", "Etc/Universal", "UCT", "Zulu") else name
    return "UTC"


def check_zone(name: object, *, field: str = "zone") -> str:
    """The zone name if it is a known IANA zone; BadInput with a hint otherwise."""
    text = str(name).strip() if name is not None else ""
    if _valid(text):
        return text
    hint = ""
    if text:
        lowered = text.lower()
        close = sorted(z for z in available_timezones() if lowered in z.lower())[:5]
        if close:
            hint = f" (did you mean {', '.join(close)}?)"
    raise BadInput([RowProblem("command line", None, field, text,
                               f"{text!r} is not a time zone name; use an IANA name such as "
                               f"Europe/Berlin, America/Chicago or UTC{hint}")])


@lru_cache(maxsize=64)
def zone(name: str) -> ZoneInfo:
    return ZoneInfo(name)


def day_function(name: str):
    """A function from a stored UTC timestamp text to its plant-local date (YYYY-MM-DD).
    Lab files repeat timestamps, so results are memoised per call site."""
    if name == "UTC":
        return lambda stamp: stamp[:10]
    tz = zone(name)
    seen: dict[str, str] = {}

    def day(stamp: str) -> str:
        got = seen.get(stamp)
        if got is None:
            got = (datetime.strptime(stamp, _STORED).replace(tzinfo=UTC)
                   .astimezone(tz).date().isoformat())
            seen[stamp] = got
        return got

    return day


def plant_day(stamp: str, name: str) -> str:
    """The plant-local calendar date of one stored UTC timestamp."""
    return day_function(name)(stamp)


_LOT_ALPHABET = "ABCDEFGHJKLMNPQRSTUVWXYZ23456789"  # no 0/O, 1/I


def new_lot_code(taken: set[str], when: datetime | None = None, zone_name: str = "UTC") -> str:
    """A readable, unique lot ID: ``L`` + plant-local date-time + random suffix
    (L20261130-140500-K7QX2M), so the date in the ID is the plant day it was made on."""
    stamp = (when or datetime.now(UTC)).astimezone(zone(zone_name)).strftime("%Y%m%d-%H%M%S")
    while True:
        code = f"L{stamp}-" + "".join(secrets.choice(_LOT_ALPHABET) for _ in range(6))
        if code not in taken:
            taken.add(code)
            return code


def read_zone(conn: sqlite3.Connection) -> str:
    row = conn.execute("SELECT value FROM settings WHERE key = ?", (ZONE_KEY,)).fetchone()
    return row[0] if row else LEGACY_ZONE


def write_zone(conn: sqlite3.Connection, name: str) -> None:
    conn.execute("INSERT INTO settings(key, value) VALUES (?, ?) "
                 "ON CONFLICT(key) DO UPDATE SET value = excluded.value", (ZONE_KEY, name))
