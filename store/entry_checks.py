"""One lot entry checked on its own: characteristic, lot ID, tags, time and values (exact units,
resolution, plausible range). Used by ``store.lots`` (entries typed or logged through the API) and by
``store.bulk_plan`` (imports), so both give the same refusals in the same words."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

from lotwatch.store.errors import RowProblem
from lotwatch.store.model import Characteristic, LotEntry
from lotwatch.store.rules import tag_key_problem, time_problem
from lotwatch.store.text import unsafe_character
from lotwatch.store.timeutil import BadTime, format_stored, parse_stored
from lotwatch.store.values import (
    MAX_ABS_D,
    BadValue,
    FinerThanResolution,
    format_units,
    scale_of,
    scaled_bound,
    text_to_units,
)


@dataclass
class PreparedEntry:
    index: int
    entry: LotEntry
    char: Characteristic
    units: tuple[int, ...]
    tags: dict[str, str]
    measured_at: str
    by: str
    lot: str | None
    rounded: int
    row: int | None
    problems: list[RowProblem] = field(default_factory=list)


def row_of(e: LotEntry, value_index: int | None = None) -> int | None:
    if not e.rows:
        return None
    if value_index is not None and len(e.rows) == len(e.values):
        return e.rows[value_index]
    return e.rows[0]


def entry_problem(e: LotEntry, column: str | None, value: object, reason: str,
             value_index: int | None = None) -> RowProblem:
    return RowProblem(e.source or "command line", row_of(e, value_index), column,
                      None if value is None else str(value), reason)


def with_unit(text: str, c: Characteristic) -> str:
    return f"{text} {c.unit}" if c.unit else text


def prepare_entry(i: int, e: LotEntry, chars: dict[str, Characteristic], now: datetime,
             round_values: bool, user: str,
             times: dict[object, str], zone: str) -> PreparedEntry | list[RowProblem]:
    problems: list[RowProblem] = []
    char = chars.get(str(e.characteristic).strip()) if e.characteristic is not None else None
    if char is None:
        known = ", ".join(sorted(chars)) or "none defined yet"
        problems.append(entry_problem(e, "characteristic", e.characteristic,
                                 f"unknown characteristic {e.characteristic!r} (known: {known})"))
    lot = None
    if e.lot is not None:
        lot = str(e.lot).strip()
        if not lot:
            problems.append(entry_problem(e, "lot", e.lot, "the lot ID is empty"))
        elif len(lot) > 100:
            problems.append(entry_problem(e, "lot", e.lot, "the lot ID is longer than 100 characters"))
        elif (bad := unsafe_character(lot)) is not None:
            problems.append(entry_problem(e, "lot", e.lot, f"the lot ID contains {bad}"))
    tags: dict[str, str] = {}
    for key, value in (e.tags or {}).items():
        k = str(key).strip() if key is not None else ""
        v = str(value).strip() if value is not None else ""
        if not k:
            problems.append(entry_problem(e, None, value, "a tag has an empty name"))
        elif not v:
            problems.append(entry_problem(e, k, value if value is not None else "",
                                     f"tag {k!r} is empty"))
        elif (bad := unsafe_character(k + v)) is not None:
            problems.append(entry_problem(e, k, v, f"tag {k!r} contains {bad}"))
        elif (why := tag_key_problem(k)) is not None:
            problems.append(entry_problem(e, k, v, why))
        elif k in tags and tags[k] != v:
            problems.append(entry_problem(e, k, v, f"tag {k!r} is given twice ({tags[k]!r} and {v!r})"))
        else:
            tags[k] = v
    try:
        when = now if e.measured_at is None else e.measured_at
        measured = times.get(when) if isinstance(when, str) else None
        if measured is None:
            measured = format_stored(when, zone=zone)  # naive times are plant-local
            if isinstance(when, str):
                times[when] = measured  # lab files repeat timestamps; parse each text once
    except BadTime as exc:
        problems.append(entry_problem(e, "measured_at", e.measured_at, str(exc)))
        measured = ""
    except (TypeError, ValueError, OverflowError) as exc:
        problems.append(entry_problem(e, "measured_at", e.measured_at, f"not a date/time ({exc})"))
        measured = ""
    if measured and (why := time_problem(parse_stored(measured), now)) is not None:
        problems.append(entry_problem(e, "measured_at", e.measured_at, why))
    units: list[int] = []
    rounded = 0
    column = e.column or "value"
    values = [e.values] if isinstance(e.values, str) else list(e.values or [])
    if not values:
        problems.append(entry_problem(e, column, None, "no value given"))
    if char is not None:
        for j, text in enumerate(values):
            try:
                u, was_rounded = text_to_units(text, char.resolution, round_values=round_values)
            except FinerThanResolution as exc:
                problems.append(entry_problem(
                    e, column, text,
                    f"{exc.value} is finer than the resolution {with_unit(char.resolution, char)}"
                    f" of {char.name}; use --round to round half-even", j))
                continue
            except BadValue as exc:
                problems.append(entry_problem(e, column, text, f"{exc} ({char.name})", j))
                continue
            reason = range_problem(u, char)
            if reason:
                problems.append(entry_problem(e, column, text, reason, j))
                continue
            rounded += int(was_rounded)
            units.append(u)
    if problems or char is None:
        return problems
    return PreparedEntry(index=i, entry=e, char=char, units=tuple(units), tags=tags,
                     measured_at=measured, by=(e.by or "").strip() or user, lot=lot,
                     rounded=rounded, row=row_of(e))


def range_problem(units: int, c: Characteristic) -> str | None:
    """Why a value (in units) is implausible for ``c``, or None. Exact: compares units * m with
    the limits times 10**k."""
    lo, hi = c.plausible_low, c.plausible_high
    m, _ = scale_of(c.resolution)
    scaled = units * m
    if ((lo is not None and scaled < scaled_bound(lo, c.resolution))
            or (hi is not None and scaled > scaled_bound(hi, c.resolution))):
        lo_t = "-inf" if lo is None else f"{lo:g}"
        hi_t = "+inf" if hi is None else f"{hi:g}"
        value = format_units(units, c.resolution)
        return (f"{with_unit(value, c)} is outside the plausible range {lo_t} to "
                f"{with_unit(hi_t, c)} of {c.name}")
    if abs(units - c.origin_units) > MAX_ABS_D:
        value = format_units(units, c.resolution)
        return (f"{with_unit(value, c)} is more than {MAX_ABS_D:,} resolution steps away from "
                f"the origin of {c.name}; check the value or the resolution")
    return None
