"""Multiple-comparison adjustment of p-values across a family of comparisons, NaN-safe.

* ``"bh"``: Benjamini & Hochberg (1995) step-up false discovery rate:
  q_(i) = min_{j ≥ i} min(1, m p_(j) / j) over the sorted p-values.
* ``"by"``: Benjamini & Yekutieli (2001), valid under any dependence: BH multiplied by
  c(m) = Σ_{i=1..m} 1/i.
* ``"holm"``: Holm (1979) step-down familywise error: q_(i) = max_{j ≤ i} min(1, (m − j + 1) p_(j)).

Non-finite p-values (NaN: a comparison that could not be computed) are excluded from the family:
their q is NaN, they are never rejected, and ``family_size`` counts only finite p-values.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

METHODS = ("bh", "by", "holm")


@dataclass(frozen=True)
class AdjustedPValues:
    """q has the shape of the input (NaN where the input was not finite); ``reject`` is
    q ≤ ``level``; ``excluded`` lists flat indices of non-finite inputs."""

    method: str
    level: float
    q: np.ndarray
    reject: np.ndarray
    excluded: tuple[int, ...]
    family_size: int


def adjust_pvalues(p: Any, method: str = "bh", *, level: float = 0.05) -> AdjustedPValues:
    """Adjusted p-values (q) for ``method`` in ``"bh"``, ``"by"``, ``"holm"``."""
    if method not in METHODS:
        raise ValueError(f"unknown adjustment method {method!r}; use one of {', '.join(METHODS)}")
    arr = np.asarray(p, dtype=float)
    flat = arr.ravel()
    finite = np.isfinite(flat)
    if np.any((flat[finite] < 0) | (flat[finite] > 1)):
        bad = flat[finite][(flat[finite] < 0) | (flat[finite] > 1)][0]
        raise ValueError(f"p-value {bad!r} is outside [0, 1]")
    idx = np.flatnonzero(finite)
    m = idx.size
    q = np.full(flat.shape, np.nan)
    if m:
        order = np.argsort(flat[idx], kind="stable")
        ps = flat[idx][order]
        ranks = np.arange(1, m + 1, dtype=float)
        if method in ("bh", "by"):
            # p / (i/m), not p·m/i: at i = m the divisor is exactly 1, so p_(m) = alpha stays
            # alpha and is rejected (p·m/m can round up one ulp above it).
            adj = ps / (ranks / m)
            if method == "by":
                adj = adj * float(np.sum(1.0 / ranks))
            adj = np.minimum.accumulate(adj[::-1])[::-1]
        else:
            adj = np.maximum.accumulate(ps * (m - ranks + 1))
        out = np.empty(m)
        out[order] = np.minimum(adj, 1.0)
        q[idx] = out
    reject = np.zeros(flat.shape, dtype=bool)
    reject[idx] = q[idx] <= level
    return AdjustedPValues(method=method, level=level, q=q.reshape(arr.shape),
                           reject=reject.reshape(arr.shape),
                           excluded=tuple(int(i) for i in np.flatnonzero(~finite)),
                           family_size=int(m))
