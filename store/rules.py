"""The input rules every door applies the same way (command line, file import, the app's form).

- Measurement times: not more than ``FUTURE_SLACK`` ahead of the clock (clock skew between a lab
  PC and the terminal; a lot cannot be measured tomorrow) and not before ``MIN_YEAR`` (older
  stamps are typing mistakes; common practice).
- Names. A grouping factor's key is typed as ``--tag KEY=VALUE``, used as a column name in
  exports and imports and shown in narrow table headers, so it must start with a letter and hold
  only letters, digits, ``_``, ``-`` and ``.`` (no spaces, no ``=``). A characteristic's name may
  also hold spaces and ``( ) / % #`` but none of ``; = , " ' ` \\ | < > { } [ ]``, which break
  command lines, CSV headers and shell scripts. Both are at most 80 characters and never hold a
  character that changes how text is displayed (``store.text``).
- Any tag key a lot carries may not hold ``=`` or ``;`` (it could never be given as KEY=VALUE).
"""

from __future__ import annotations

import re
from datetime import UTC, datetime, timedelta

FUTURE_SLACK = timedelta(minutes=10)
FUTURE_TIME = "the measurement time is in the future"
# The one home of the year bounds. MIN_YEAR: the earliest plausible measurement (common
# practice: older stamps are typing mistakes). FIRST_YEAR..LAST_YEAR: the calendar lotwatch can
# store and compute windows in at all (four-digit years in the stored text form, room for window
# arithmetic); used for review dates and weeks (``store.timeutil``).
MIN_YEAR = 1970
FIRST_YEAR, LAST_YEAR = 1000, 9000
# An import's default plausible years run from MIN_YEAR to this many years after the current one
# (``import --years FROM-TO`` sets others).
IMPORT_YEARS_AHEAD = 1
MAX_NAME = 80

_FACTOR_KEY = re.compile(r"[^\W\d_][\w.-]*")
_CHAR_NAME = re.compile(r"[^\W\d_][\w .()/%#+-]*")
_CHAR_BAD = re.compile(r"""[;=,"'`\\|<>{}\[\]]""")


def import_years(now: datetime | None = None) -> tuple[int, int]:
    """The plausible measurement years an import accepts by default: ``MIN_YEAR`` to
    ``IMPORT_YEARS_AHEAD`` years after the current one (a lotwatch default)."""
    return MIN_YEAR, (now or datetime.now(UTC)).year + IMPORT_YEARS_AHEAD


def time_problem(when: datetime, now: datetime | None = None) -> str | None:
    """Why an aware measurement time cannot be stored, or None."""
    if when.year < MIN_YEAR:
        return f"{when.year} is before {MIN_YEAR}; type the year in full, e.g. 2026"
    now = now or datetime.now(UTC)
    if when > now + FUTURE_SLACK:
        return FUTURE_TIME
    return None


def factor_key_problem(key: str) -> str | None:
    """Why ``key`` cannot name a grouping factor, or None."""
    if len(key) > MAX_NAME:
        return f"the factor name is longer than {MAX_NAME} characters"
    if not _FACTOR_KEY.fullmatch(key):
        return ("a factor name starts with a letter and holds only letters, digits, _, - and . "
                "(no spaces or =), so it can be typed as --tag KEY=VALUE")
    return None


def characteristic_name_problem(name: str) -> str | None:
    """Why ``name`` cannot name a characteristic, or None."""
    if len(name) > MAX_NAME:
        return f"the characteristic name is longer than {MAX_NAME} characters"
    bad = _CHAR_BAD.search(name)
    if bad:
        return (f"the characteristic name may not hold {bad.group()!r} (letters, digits, spaces "
                "and _ - . ( ) / % # + only)")
    if not _CHAR_NAME.fullmatch(name):
        return ("a characteristic name starts with a letter and holds letters, digits, spaces "
                "and _ - . ( ) / % # + only")
    return None


def tag_key_problem(key: str) -> str | None:
    """Why ``key`` cannot be a tag key of a lot, or None."""
    for ch in "=;":
        if ch in key:
            return f"tag name {key!r} holds {ch!r}; it could never be given as --tag KEY=VALUE"
    return None
