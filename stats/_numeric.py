"""Private numeric helpers: exact decimal-to-integer conversion and careful float sums.

Values measured at a declared resolution (``"0.1"``, ``"0.0000001"``) are integer multiples of
it. Converting them to integer counts of resolution units lets the ANOVA sums be accumulated with
Python integers and combined as exact fractions, so rounding happens once, at the very end.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from decimal import ROUND_HALF_EVEN, Context, Decimal, InvalidOperation
from fractions import Fraction

import numpy as np

# Generous precision: a 13-digit constant plus 7 decimals needs 20 digits; leave room.
_CTX = Context(prec=60)
# A value counts as on the grid when it is within this many units of an integer number of
# resolution units (absorbs binary floating-point noise such as 0.30000000000000004).
_GRID_SLACK = Decimal("1e-6")


def parse_resolution(resolution: str | float | int | Decimal) -> Decimal:
    """The resolution as a positive Decimal, read from its text (``"0.1"``) or shortest float repr."""
    try:
        res = Decimal(resolution) if isinstance(resolution, (str, Decimal)) else Decimal(repr(resolution))
    except (InvalidOperation, ValueError):
        raise ValueError(f"resolution {resolution!r} is not a number") from None
    if not res.is_finite() or res <= 0:
        raise ValueError(f"resolution {resolution!r} must be a positive number")
    return res


def to_units(values: Iterable[float | str] | np.ndarray, res: Decimal, *,
             label: str = "") -> list[int]:
    """Each value as an integer count of resolution units (exact decimal arithmetic).

    Floats are read through their shortest round-trip text (``repr``), which is the decimal the
    user typed for any value with at most 15-17 significant digits. Raises ValueError naming the
    value when it is not (within float noise) a multiple of the resolution.

    A float array takes a vectorised shortcut first: with res = a/b, q = x·b/a carries at most
    ~3·2⁻⁵³ relative error (repr's half-ulp plus two roundings), so when |q| < 2³¹ and q is
    within 1e-7 of an integer r, the decimal route would also find q within its 1e-6 slack of r
    and return r. Every other value goes through the decimal route.
    """
    if isinstance(values, np.ndarray) and values.dtype.kind == "f":
        return _to_units_array(values.ravel(), res, label)
    return [_to_unit_decimal(x, res, label) for x in values]


def _to_units_array(x: np.ndarray, res: Decimal, label: str) -> list[int]:
    frac = Fraction(res)
    a, b = frac.numerator, frac.denominator
    if a >= 2**53 or b >= 2**53:
        return [_to_unit_decimal(v, res, label) for v in x.tolist()]
    with np.errstate(invalid="ignore", over="ignore"):
        q = x * float(b) / float(a)
        r = np.rint(q)
        ok = np.isfinite(q) & (np.abs(q) < 2.0**31) & (np.abs(q - r) <= 1e-7)
    out = r.astype(np.int64, copy=False) if ok.all() else np.where(ok, r, 0).astype(np.int64)
    result = out.tolist()
    for i in np.flatnonzero(~ok).tolist():
        result[i] = _to_unit_decimal(float(x[i]), res, label)
    return result


def _to_unit_decimal(x: float | str, res: Decimal, label: str) -> int:
    text = x if isinstance(x, str) else repr(float(x))
    try:
        q = _CTX.divide(Decimal(text), res)
    except InvalidOperation:
        raise ValueError(f"{label}value {x!r} is not a number") from None
    if not q.is_finite():
        raise ValueError(f"{label}value {x!r} is not finite")
    r = q.to_integral_value(rounding=ROUND_HALF_EVEN)
    if abs(q - r) > _GRID_SLACK:
        raise ValueError(
            f"{label}value {x!r} is not a multiple of the resolution {res} "
            f"({q.normalize()} units)")
    return int(r)


def int_sums(units: Sequence[int], origin: int) -> tuple[int, int, int]:
    """n, Σd and Σd² of d = units − origin, with Python integers (no overflow, no rounding)."""
    s1 = 0
    s2 = 0
    for u in units:
        d = u - origin
        s1 += d
        s2 += d * d
    return len(units), s1, s2


def careful_mean(x: np.ndarray) -> float:
    """Mean by fsum plus one refinement pass: m = Σx/n, then m += Σ(x − m)/n (corrected two-pass)."""
    n = x.size
    m = math.fsum(x.tolist()) / n
    return m + math.fsum((x - m).tolist()) / n


def careful_ss(x: np.ndarray, m: float) -> float:
    """Σ(x − m)² by fsum of squared deviations from an accurate mean (two-pass algorithm)."""
    d = x - m
    return math.fsum((d * d).tolist())


def sqrt_fraction(q: Fraction) -> float:
    """√q to float precision: integer square root of q·2^256, then scaled back by 2^-128."""
    if q <= 0:
        return 0.0
    r = math.isqrt((q.numerator << 256) // q.denominator)
    return math.ldexp(float(r), -128)


def fmt_num(x: float | None, digits: int = 4) -> str:
    """Short human form of a number for sentences (``g`` format), ``"n/a"`` for None."""
    if x is None:
        return "n/a"
    if math.isinf(x):
        return "infinite"
    if math.isnan(x):
        return "n/a"
    return f"{x:.{digits}g}"


def fmt_p(p: float | None) -> str:
    """p-value for sentences: ``p = 0.0123`` or ``p < 0.0001``."""
    if p is None or math.isnan(p):
        return "p n/a"
    if p < 1e-4:
        return "p < 0.0001"
    return f"p = {p:.4f}"
