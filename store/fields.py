"""Checking the fields a person gives for a characteristic or a factor (command line, app form).

Every problem is collected and raised together as one ``BadInput`` naming each field.
"""

from __future__ import annotations

import math
from typing import Any, cast

from lotwatch.store.errors import BadInput, RowProblem
from lotwatch.store.rules import characteristic_name_problem, factor_key_problem
from lotwatch.store.text import unsafe_character
from lotwatch.store.values import BadValue, canonical_resolution

CHARACTERISTIC_FIELDS = frozenset(
    {"name", "unit", "resolution", "lsl", "target", "usl", "min_shift", "plausible"}
)


def clean_name(name: object, what: str) -> str:
    """``name`` stripped; BadInput when empty, over 80 characters, holding a character that
    could disguise itself on a terminal (``store.text.unsafe_character``) or breaking the name
    rules of ``store.rules`` for factors and characteristics."""
    text = str(name).strip() if name is not None else ""
    problem = None
    if not text:
        problem = f"the {what} name is empty"
    elif len(text) > 80:
        problem = f"the {what} name is longer than 80 characters"
    elif (bad := unsafe_character(text)) is not None:
        problem = f"the {what} name contains {bad}"
    elif what == "factor":
        problem = factor_key_problem(text)
    elif what == "characteristic":
        problem = characteristic_name_problem(text)
    if problem:
        raise BadInput([RowProblem("command line", None, what, str(name), problem)])
    return text


def _number(field: str, value: object, problems: list[RowProblem]) -> float | None:
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    try:
        x = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        problems.append(RowProblem("command line", None, field, str(value), "not a number"))
        return None
    if not math.isfinite(x):
        problems.append(RowProblem("command line", None, field, str(value),
                                   "must be a finite number"))
        return None
    return x


def _plausible(plausible: object, problems: list[RowProblem]) -> tuple[float, float] | None:
    if plausible is None:
        return None
    try:
        a, b = cast("tuple[object, object]", plausible)
    except (TypeError, ValueError):
        problems.append(RowProblem("command line", None, "plausible", str(plausible),
                                   "give the plausible range as a (low, high) pair"))
        return None
    pa, pb = _number("plausible low", a, problems), _number("plausible high", b, problems)
    if pa is None or pb is None:
        return None
    if pa >= pb:
        problems.append(RowProblem("command line", None, "plausible",
                                   f"{a}..{b}", "the low end must be below the high end"))
        return None
    return (pa, pb)


def validate_characteristic(*, name: object, unit: object, resolution: object, lsl: object,
                            target: object, usl: object, min_shift: object,
                            plausible: object) -> dict[str, Any]:
    """The cleaned fields (name, unit, canonical resolution text, floats, plausible pair), or
    BadInput listing every problem: LSL < USL, LSL <= target <= USL, target inside the plausible
    range, min_shift > 0."""
    problems: list[RowProblem] = []
    clean = clean_name(name, "characteristic")
    unit_text = "" if unit is None else str(unit).strip()
    res: str | None = None
    try:
        res = canonical_resolution(str(resolution))
    except BadValue as exc:
        problems.append(RowProblem("command line", None, "resolution", str(resolution), str(exc)))
    lo_v = _number("lsl", lsl, problems)
    tg_v = _number("target", target, problems)
    hi_v = _number("usl", usl, problems)
    ms_v = _number("min_shift", min_shift, problems)
    pl_v = _plausible(plausible, problems)
    if lo_v is not None and hi_v is not None and lo_v >= hi_v:
        problems.append(RowProblem("command line", None, "lsl", str(lsl),
                                   f"the LSL must be below the USL ({usl})"))
    if tg_v is not None:
        if (lo_v is not None and tg_v < lo_v) or (hi_v is not None and tg_v > hi_v):
            problems.append(RowProblem("command line", None, "target", str(target),
                                       "the target must lie between the LSL and the USL"))
        if pl_v is not None and not pl_v[0] <= tg_v <= pl_v[1]:
            problems.append(RowProblem("command line", None, "target", str(target),
                                       "the target must lie inside the plausible range"))
    if ms_v is not None and ms_v <= 0:
        problems.append(RowProblem("command line", None, "min_shift", str(min_shift),
                                   "the smallest shift worth detecting must be above 0"))
    if problems:
        raise BadInput(problems)
    return {"name": clean, "unit": unit_text, "resolution": res, "lsl": lo_v,
            "target": tg_v, "usl": hi_v, "min_shift": ms_v, "plausible": pl_v}
