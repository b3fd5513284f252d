"""How numbers are written on screen: fixed significant digits, p-values, missing values."""

from __future__ import annotations

import math

MISSING = "–"


def num(x: float | int | None, digits: int = 4) -> str:
    """``x`` to ``digits`` significant digits (general format); a dash when missing/non-finite."""
    if x is None:
        return MISSING
    if isinstance(x, int):
        return str(x)
    if not math.isfinite(x):
        return MISSING
    if x == 0:
        return "0"
    return f"{x:.{digits}g}"


def fixed(x: float | None, decimals: int = 2) -> str:
    """``x`` with a fixed number of decimals; a dash when missing."""
    if x is None or not math.isfinite(x):
        return MISSING
    return f"{x:.{decimals}f}"


def signed(x: float | None, digits: int = 3) -> str:
    """``x`` with an explicit sign (differences and shifts)."""
    if x is None or not math.isfinite(x):
        return MISSING
    return f"{x:+.{digits}g}"


def pval(p: float | None) -> str:
    """A p- or q-value: four decimals, or "<0.0001" below that (never a bare 0)."""
    if p is None or not math.isfinite(p):
        return MISSING
    if p < 0.0001:
        return "<0.0001"
    return f"{p:.4f}"


def decimals_of(resolution: str) -> int:
    """Decimals implied by a resolution text ("0.05" -> 2, "1" -> 0), plus one for means."""
    if "." in resolution:
        return len(resolution.split(".", 1)[1].rstrip("0")) + 1
    return 1
