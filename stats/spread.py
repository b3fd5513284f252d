"""Group spreads: exact overall SD from integer units, and the within (short-term) SD.

Overall SD (ddof = 1). With a resolution r every value is an integer u times r, so

    s² = r² · (n Σu² − (Σu)²) / (n (n − 1))

is computed in exact integer arithmetic and rounded once (the textbook "computing formula",
e.g. Montgomery, Design and Analysis of Experiments, ch. 2); a constant group gives exactly 0
instead of the ~1e-17 a floating mean leaves behind.

Within SD (the spread Cp/Cpk are read against):
- lots with replicates: the pooled within-lot SD, √(Σ_lots Σ (x − x̄_lot)² / Σ_lots (n_lot − 1));
- otherwise (one value per lot, "individuals"): the average moving range of consecutive lots
  divided by d2 = 1.128, the bias constant for ranges of two (common practice; Montgomery,
  Introduction to Statistical Quality Control, §6.4, Table VI of the appendix).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from decimal import Decimal, InvalidOperation
from fractions import Fraction

import numpy as np

D2_TWO = 1.128  # d2 for subgroups of two (from memory; agrees with Montgomery's Appendix VI)


def _units(x: np.ndarray, resolution: str | float | None) -> tuple[list[int], Fraction] | None:
    """Values as exact integer multiples of the resolution, or None if they are not."""
    if resolution is None:
        return None
    try:
        r = Fraction(Decimal(str(resolution)))
    except (InvalidOperation, ValueError):
        return None
    if r <= 0:
        return None
    q = x / float(r)
    u = np.rint(q)
    if not np.all(np.abs(q - u) <= 1e-6 * np.maximum(1.0, np.abs(q))):
        return None
    return [int(v) for v in u.tolist()], r


def _sqrt_fraction(v: Fraction) -> float:
    return 0.0 if v == 0 else math.sqrt(float(v))  # float(Fraction) rounds once


def overall_sd(values: Sequence[float] | np.ndarray,
               resolution: str | float | None = None) -> float | None:
    """The sample SD (ddof = 1); exact from integer units when ``resolution`` fits the values.
    None below two values."""
    x = np.asarray(values, dtype=float).ravel()
    n = x.size
    if n < 2:
        return None
    exact = _units(x, resolution)
    if exact is None:
        return float(np.std(x, ddof=1))
    u, r = exact
    s1 = sum(u)
    s2 = sum(v * v for v in u)
    var = Fraction(n * s2 - s1 * s1, n * (n - 1)) * r * r
    return _sqrt_fraction(var)


def within_sd(values: Sequence[float] | np.ndarray, lots: Sequence[object] | None = None,
              resolution: str | float | None = None) -> tuple[float | None, str]:
    """(within SD, how it was estimated). ``values`` in time order; ``lots`` labels them (None:
    every value is its own lot). Returns (None, reason) when it cannot be estimated."""
    x = np.asarray(values, dtype=float).ravel()
    labels = list(range(x.size)) if lots is None else list(lots)
    if len(labels) != x.size:
        raise ValueError(f"{x.size} values but {len(labels)} lot labels")
    order: dict[object, list[int]] = {}
    for i, lab in enumerate(labels):
        order.setdefault(lab, []).append(i)
    exact = _units(x, resolution)
    groups = list(order.values())
    df = sum(len(g) - 1 for g in groups)
    if df > 0:
        if exact is not None:
            u, r = exact
            ss = Fraction(0)
            for g in groups:
                vals = [u[i] for i in g]
                ss += Fraction(len(vals) * sum(v * v for v in vals) - sum(vals) ** 2, len(vals))
            return _sqrt_fraction(ss * r * r / df), "pooled within lots"
        ss_f = math.fsum(float(np.sum((x[g] - x[g].mean()) ** 2)) for g in groups)
        return math.sqrt(ss_f / df), "pooled within lots"
    if len(groups) < 2:
        return None, "fewer than two lots"
    if exact is not None:
        u, r = exact
        seq = [u[g[0]] for g in groups]
        mr = Fraction(sum(abs(b - a) for a, b in zip(seq, seq[1:], strict=False)),
                      len(seq) - 1) * r
        return float(mr) / D2_TWO, "average moving range / 1.128"
    seq_f = x[[g[0] for g in groups]]
    return float(np.mean(np.abs(np.diff(seq_f)))) / D2_TWO, "average moving range / 1.128"
