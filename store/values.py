"""Exact decimal values as integer counts of a resolution step.

A characteristic with resolution ``r`` (a decimal such as 0.1 or 0.05) stores the value ``x`` as
``units = x / r``, an integer. Keeping integers makes sums and sums of squares exact, so the
aggregates can be checked against the raw rows bit for bit. Rounding to the resolution (only on
request) is half-even ("banker's rounding", IEEE 754 roundTiesToEven; Python ``decimal``
``ROUND_HALF_EVEN``).
"""

from __future__ import annotations

import math
import re
from decimal import ROUND_HALF_EVEN, Context, Decimal, InvalidOperation, localcontext
from functools import lru_cache

# Largest |units - origin| accepted: keeps d*d and per-bucket sums of d*d far inside SQLite's
# signed 64-bit integers (1e7 squared is 1e14; 90,000 such extremes fit in one bucket).
MAX_ABS_D = 10_000_000

_CTX = Context(prec=60)
# Longest number text the import accepts, and the longest the integer fast path of
# ``text_to_units`` converts: far beyond any instrument, far below Python's limit of 4,300 digits
# for converting text to int (longer texts go through ``decimal``, which has no such limit).
MAX_NUMBER_CHARS = 100


class BadValue(ValueError):
    """A value text that cannot be stored; ``str()`` is the reason for the user."""


def parse_decimal(text: object) -> Decimal:
    """Parse a finite decimal number from text; refuse anything else with a clear reason."""
    if isinstance(text, bool) or text is None:
        raise BadValue(f"{text!r} is not a number")
    if isinstance(text, int):
        return Decimal(text)
    if isinstance(text, float):
        if not math.isfinite(text):
            raise BadValue(f"{text!r} is not a finite number")
        return Decimal(repr(text))
    if isinstance(text, Decimal):
        value = text
    else:
        s = str(text).strip()
        if not s:
            raise BadValue("the value is empty")
        try:
            value = Decimal(s)
        except InvalidOperation:
            raise BadValue(f"{s!r} is not a number") from None
    if not value.is_finite():
        raise BadValue(f"{text!s} is not a finite number")
    _check_size(value, str(text).strip())
    return value


# Bounds on a typed number: far past any gauge, and small enough that ``to_units`` divides
# exactly in its 60-digit context (a value of 1e999999 would overflow it; one of 1e-999999
# would underflow to 0 and be stored as zero without a word).
MAX_EXPONENT = 30
MAX_DIGITS = 30


class OutOfRange(BadValue):
    """A number too large, too small or too long to be a measurement (``_check_size``)."""


def _check_size(value: Decimal, typed: str) -> None:
    if value.is_zero():
        return
    significant = len("".join(map(str, value.as_tuple().digits)).rstrip("0"))
    shown = _short(typed)
    if value.adjusted() > MAX_EXPONENT:
        raise OutOfRange(f"{shown} is too large to be a measurement "
                         f"(more than {MAX_EXPONENT + 1} digits before the point)")
    if value.adjusted() < -MAX_EXPONENT:
        raise OutOfRange(f"{shown} is too small to be a measurement "
                         f"(more than {MAX_EXPONENT} zeros after the point)")
    if significant > MAX_DIGITS:
        raise OutOfRange(f"{shown} has more than {MAX_DIGITS} significant digits")


def _short(text: str) -> str:
    return text if len(text) <= 40 else f"{text[:20]}...{text[-12:]}"


@lru_cache(maxsize=256)
def parse_resolution(text: str) -> Decimal:
    """Parse and check a resolution text: a positive finite decimal such as "0.1" or "0.05"."""
    try:
        r = parse_decimal(text)
    except BadValue as exc:
        raise BadValue(f"resolution {text!r}: {exc}") from None
    if r <= 0:
        raise BadValue(f"resolution {text!r} must be greater than 0")
    return r


def canonical_resolution(text: str) -> str:
    """The resolution as plain decimal text without exponent or trailing zeros ("0.10" -> "0.1")."""
    r = parse_resolution(text).normalize(_CTX)
    s = format(r, "f")
    return s


@lru_cache(maxsize=256)
def _scale(resolution: str) -> tuple[int, int]:
    """Write the resolution as ``m / 10**k`` with integers m, k >= 0."""
    r = parse_resolution(resolution).normalize(_CTX)
    sign, digits, exp = r.as_tuple()
    m = int("".join(map(str, digits)))
    if exp >= 0:  # type: ignore[operator]
        return m * 10**exp, 0  # type: ignore[operator]
    return m, -exp  # type: ignore[operator]


def to_units(value: Decimal, resolution: str, *, round_values: bool = False) -> tuple[int, bool]:
    """``value / resolution`` as an integer; returns (units, was_rounded).

    Raises BadValue if the value is finer than the resolution and ``round_values`` is false.
    """
    r = parse_resolution(resolution)
    with localcontext(_CTX):
        q = value / r
        whole = q.to_integral_value(rounding=ROUND_HALF_EVEN)
    if q == whole:
        return int(whole), False
    if not round_values:
        raise FinerThanResolution(value)
    return int(whole), True


_PLAIN = re.compile(r"\s*(-?)(\d+)(?:\.(\d+))?\s*\Z")


def text_to_units(text: object, resolution: str, *,
                  round_values: bool = False) -> tuple[int, bool]:
    """Parse a value and convert it to units: ``to_units(parse_decimal(text), ...)``.

    Plain decimals ("500.1", "-3", "0.050") that fit the resolution exactly take an integer
    fast path (value * 10**k is the digit string; units = that / m); everything else, including
    values needing rounding, goes through ``decimal``. Both give identical results.
    """
    if isinstance(text, str) and len(text) <= MAX_NUMBER_CHARS:
        match = _PLAIN.match(text)
        if match:
            m, k = _scale(resolution)
            sign, whole, frac = match.groups()
            frac = frac or ""
            if len(frac) <= k:
                n = int(whole + frac + "0" * (k - len(frac)))
                q, r = divmod(-n if sign else n, m)
                if r == 0:
                    return q, False
    return to_units(parse_decimal(text), resolution, round_values=round_values)


@lru_cache(maxsize=1024)
def scaled_bound(bound: float, resolution: str) -> Decimal:
    """A float limit times 10**k, exactly (compare with ``units * m``)."""
    _, k = _scale(resolution)
    return Decimal(repr(bound)).scaleb(k)


class FinerThanResolution(BadValue):
    """The value has more decimals than the resolution allows."""

    def __init__(self, value: Decimal) -> None:
        self.value = value
        super().__init__(f"{value} is finer than the resolution")


def units_to_decimal(units: int, resolution: str) -> Decimal:
    """``units * resolution`` exactly."""
    m, k = _scale(resolution)
    return Decimal(units * m).scaleb(-k)


def format_units(units: int, resolution: str) -> str:
    """The value as text with exactly as many decimals as the resolution (0.05 -> "500.10")."""
    m, k = _scale(resolution)
    n = units * m
    sign = "-" if n < 0 else ""
    n = abs(n)
    if k == 0:
        return f"{sign}{n}"
    whole, frac = divmod(n, 10**k)
    return f"{sign}{whole}.{frac:0{k}d}"


def units_to_float(units: int, resolution: str) -> float:
    """``units * resolution`` as the nearest float (one rounding: exact integer / power of ten)."""
    m, k = _scale(resolution)
    return (units * m) / (10**k)


def scale_of(resolution: str) -> tuple[int, int]:
    """Public form of the ``m / 10**k`` decomposition (for vectorised conversions)."""
    return _scale(resolution)


def round_to_units(value: float | Decimal, resolution: str) -> int:
    """Nearest whole number of resolution steps to ``value`` (half-even), for origins."""
    d = value if isinstance(value, Decimal) else Decimal(repr(float(value)))
    units, _ = to_units(d, resolution, round_values=True)
    return units


def choose_origin(
    resolution: str,
    *,
    target: float | None,
    lsl: float | None,
    usl: float | None,
    plausible: tuple[float, float] | None,
) -> int:
    """Origin in units: the target, else the LSL/USL midpoint, else the plausible-range midpoint,
    else 0. Centring the deviations keeps d and d*d small (the usual "shifted data" trick for a
    numerically stable variance; Chan, Golub & LeVeque 1983)."""
    if target is not None:
        return round_to_units(target, resolution)
    if lsl is not None and usl is not None:
        return round_to_units((Decimal(repr(lsl)) + Decimal(repr(usl))) / 2, resolution)
    if plausible is not None:
        lo, hi = plausible
        return round_to_units((Decimal(repr(lo)) + Decimal(repr(hi))) / 2, resolution)
    return 0
