"""How numbers are written everywhere (app, command-line text, Markdown, HTML): the one formatter.

- measured quantities (means, SDs, intervals, differences) carry the decimals their
  characteristic's resolution implies plus one (``decimals_of``), never rounded to a number of
  significant figures, and never "-0.00";
- p- and q-values in one style: in table cells four decimals, or "<0.0001" below that
  (``pval``; never an exponent, never a bare 0), and in sentences "p = 0.0123" / "p < 0.0001"
  (``p_is``), never "p = <0.0001";
- capability indices with two decimals (``index``);
- counts with thousands separators; a count of lots says so, and so does a count of values
  when they differ (``lots_and_values``: "943 lots, 1,886 values").
"""

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
    """``x`` with a fixed number of decimals; a dash when missing; a value that rounds to zero
    is "0.00", never "-0.00"."""
    if x is None or not math.isfinite(x):
        return MISSING
    text = f"{x:.{decimals}f}"
    if text.startswith("-") and not text.strip("-0."):
        text = text[1:]
    return text


def measured(x: float | None, resolution: str) -> str:
    """A measured quantity (mean, SD, interval end) with the decimals of ``resolution`` + 1."""
    return fixed(x, decimals_of(resolution))


def size(x: float | None, resolution: str | None, unit: str = "", *, sign: bool = False) -> str:
    """A size in a characteristic's unit (a shift, an alert's size, a gate): the resolution's
    decimals plus one (``measured``; three significant digits when no resolution is known), an
    explicit "+" when ``sign``, then the unit. A dash when missing."""
    if x is None or not math.isfinite(x):
        return MISSING
    if resolution:
        text = measured(x, resolution)
        if sign and not text.startswith("-"):
            text = "+" + text
    else:
        text = signed(x) if sign else num(x, 3)
    return f"{text} {unit}" if unit else text


def index(x: float | None) -> str:
    """A capability index (Cp, Cpk, Pp, Ppk, an end of Cpk's interval): two decimals (common
    practice); a dash when undefined."""
    return fixed(x, 2)


def lots_and_values(lots: int | None, values: int) -> str:
    """"943 lots, 1,886 values" when lots carry replicates; "943 lots" when each has one value;
    "1,886 values" when the lots are not known."""
    if lots is None:
        return f"{values:,} value{'s' if values != 1 else ''}"
    head = f"{lots:,} lot{'s' if lots != 1 else ''}"
    return head if lots == values else f"{head}, {values:,} value{'s' if values != 1 else ''}"


def signed(x: float | None, digits: int = 3) -> str:
    """``x`` with an explicit sign (differences and shifts); zero is "+0"."""
    if x is None or not math.isfinite(x):
        return MISSING
    return f"{x + 0.0:+.{digits}g}" if x != 0 else "+0"


def pval(p: float | None) -> str:
    """A p- or q-value in a table cell: four decimals, or "<0.0001" below that (never a bare 0
    and never an exponent: the same style in every list and history)."""
    if p is None or not math.isfinite(p):
        return MISSING
    if p < 0.0001:
        return "<0.0001"
    return f"{p:.4f}"


def p_is(p: float | None, name: str = "p") -> str:
    """A p- or q-value in a sentence: "p = 0.0123" or "p < 0.0001" (never "p = <0.0001")."""
    if p is None or not math.isfinite(p):
        return f"{name} not computed"
    if p < 0.0001:
        return f"{name} < 0.0001"
    return f"{name} = {p:.4f}"


def decimals_of(resolution: str) -> int:
    """Decimals implied by a resolution text ("0.05" -> 2, "1" -> 0), plus one for means."""
    if "." in resolution:
        return len(resolution.split(".", 1)[1].rstrip("0")) + 1
    return 1
