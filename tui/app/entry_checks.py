"""Checks the entry form runs as the person types (Textual validators with worded failures).

Values must be numbers, on the characteristic's resolution (a whole number of steps) and inside its
plausible range; required tags must be present; the time must be understood. The store applies
the same rules again when saving (one transaction, all or nothing); these checks only make the
problem visible before Enter.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from datetime import datetime

from lotwatch.store.rules import MIN_YEAR
from lotwatch.store.rules import time_problem as stored_time_problem
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import CharacteristicInfo
from textual.validation import Function, ValidationResult, Validator

_SPLIT = re.compile(r"[\s;]+")

# Decimal exponent beyond which a typed value is refused before any arithmetic (1e999999 would
# overflow the decimal context); no measured quantity is near 10**30 in its own unit.
MAX_EXPONENT = 30


def split_values(text: str) -> list[str]:
    """Values as typed, separated by spaces or semicolons (a comma is not a separator)."""
    return [v for v in _SPLIT.split(text.strip()) if v]


def value_problems(text: str, ch: CharacteristicInfo | None) -> list[str]:
    """Every problem of the values field, in words (empty when the values can be stored)."""
    from lotwatch.store.values import (
        BadValue,
        FinerThanResolution,
        OutOfRange,
        parse_decimal,
        to_units,
    )

    if ch is None:
        return ["choose a characteristic first"]
    values = split_values(text)
    if not values:
        return ["type at least one value (several values of one lot: separate with spaces)"]
    problems: list[str] = []
    unit = clean(ch.unit, 12)
    for v in values:
        shown = clean(v, 20)
        try:
            d = parse_decimal(v)
        except OutOfRange as exc:
            problems.append(clean(str(exc), 80))
            continue
        except BadValue:
            hint = " (use a decimal point, not a comma)" if "," in v else ""
            problems.append(f"{shown!r} is not a number{hint}")
            continue
        if d.adjusted() > MAX_EXPONENT:
            problems.append(f"{shown} is too large to be a measurement")
            continue
        try:
            to_units(d, ch.resolution)
        except FinerThanResolution:
            problems.append(f"{shown} is finer than the resolution {ch.resolution} {unit}")
            continue
        except BadValue as exc:
            problems.append(f"{shown}: {exc}")
            continue
        except (ArithmeticError, ValueError):  # decimal overflow, int-string limits
            problems.append(f"{shown} is too large to be a measurement")
            continue
        lo, hi = ch.plausible_low, ch.plausible_high
        x = float(d)
        if (lo is not None and x < lo) or (hi is not None and x > hi):
            problems.append(f"{shown} is outside the plausible range "
                            f"{_bound(lo)}..{_bound(hi)} {unit}")
    return problems


def _bound(x: float | None) -> str:
    return "-inf" if x is None else f"{x:g}"


def time_problem(text: str, now: datetime | None = None, zone: str | None = None) -> str | None:
    """None when the time is empty ("now"), or a readable ISO time not in the future; a time
    without an offset is read in ``zone`` (the plant's), as the store will store it."""
    from lotwatch.store.timeutil import BadTime, OutOfCalendar, to_utc

    s = text.strip()
    if not s or s.lower() == "now":
        return None
    try:
        t = to_utc(s, zone)
    except OutOfCalendar:
        return f"{clean(s, 20)} cannot be a measurement time; type e.g. 2026-11-30 14:05"
    except BadTime:
        return (f"{clean(s, 20)!r} is not a time; type e.g. 2026-11-30 14:05 (plant time) "
                "or leave it empty for now")
    except (ValueError, OverflowError):  # a date at the calendar's ends (year 1, 9999)
        return f"{clean(s, 20)} cannot be a measurement time; type e.g. 2026-11-30 14:05"
    if not MIN_YEAR <= t.year:
        return f"{clean(s, 20)} is before {MIN_YEAR}; type the year in full, e.g. 2026"
    why = stored_time_problem(t, now)  # the store's rule: the same for every door
    return None if why is None else f"{clean(s, 20)}: {why}"


def spec_notes(text: str, ch: CharacteristicInfo) -> list[str]:
    """Values beyond the characteristic's LSL or USL: stored all the same, but flagged."""
    from lotwatch.store.values import BadValue, parse_decimal

    out = []
    for v in split_values(text):
        try:
            d = parse_decimal(v)
            if d.adjusted() > MAX_EXPONENT:
                continue
            x = float(d)
        except (BadValue, ArithmeticError, ValueError):
            continue  # value_problems says what is wrong with it
        if ch.lsl is not None and x < ch.lsl:
            out.append(f"{clean(ch.name, 20)} {clean(v, 20)} is outside specification "
                       f"(below LSL {ch.lsl:g}): it will be stored and flagged")
        elif ch.usl is not None and x > ch.usl:
            out.append(f"{clean(ch.name, 20)} {clean(v, 20)} is outside specification "
                       f"(above USL {ch.usl:g}): it will be stored and flagged")
    return out


class ValuesCheck(Validator):
    """A values field: numbers on the resolution within the plausible range."""

    def __init__(self, characteristic: Callable[[], CharacteristicInfo | None], *,
                 prefix: str = "") -> None:
        super().__init__()
        self._characteristic = characteristic
        self._prefix = f"{prefix}: " if prefix else ""

    def validate(self, value: str) -> ValidationResult:
        problems = value_problems(value, self._characteristic())
        if not problems:
            return self.success()
        return self.failure("; ".join(self._prefix + p for p in problems), value)


class TimeCheck(Validator):
    """The time field: empty (now) or a time that can be read and is not in the future; a time
    without an offset is plant time (``zone``)."""

    def __init__(self, zone: str | None = None) -> None:
        super().__init__()
        self.zone = zone

    def validate(self, value: str) -> ValidationResult:
        problem = time_problem(value, zone=self.zone)
        return self.success() if problem is None else self.failure(problem, value)


def required(name: str) -> Function:
    """A required tag must not be blank."""
    return Function(lambda v: bool(v.strip()), f"{clean(name, 20)} is required")


def one_line(name: str) -> Function:
    """Tags and lot IDs are single words or phrases: no control characters."""
    return Function(lambda v: clean(v) == v, f"{clean(name, 20)} contains control characters")
