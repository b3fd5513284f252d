"""Process capability of one group against specification limits.

With μ the group mean, σ_w the within-group SD (short-term; the battery passes the pooled
√MS_within) and s the group's own overall SD (ddof = 1)::

    Cp  = (USL − LSL) / (6 σ_w)          Cpk = min(USL − μ, μ − LSL) / (3 σ_w)
    Pp  = (USL − LSL) / (6 s)            Ppk = min(USL − μ, μ − LSL) / (3 s)

(Montgomery, Introduction to Statistical Quality Control, §8.2.) With only one limit, Cp and Pp
are None and Cpk/Ppk use that side alone. The (1 − alpha) interval for Cpk is Bissell's (1990)
normal approximation: Cpk ± z(1 − alpha/2) · √(1/(9n) + Cpk²/(2(n − 1))).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from lotwatch.stats.results import Capability
from scipy import stats as sps


def _index(mean: float, sd: float | None, lsl: float | None,
           usl: float | None) -> tuple[float | None, float | None]:
    if sd is None or not math.isfinite(sd) or sd <= 0:
        return None, None
    cp = (usl - lsl) / (6 * sd) if lsl is not None and usl is not None else None
    sides = []
    if usl is not None:
        sides.append((usl - mean) / (3 * sd))
    if lsl is not None:
        sides.append((mean - lsl) / (3 * sd))
    return cp, (min(sides) if sides else None)


def capability(name: str, values: Sequence[float] | np.ndarray, sd_within: float | None, *,
               lsl: float | None, usl: float | None, alpha: float = 0.05) -> Capability:
    """Cp, Cpk (from ``sd_within``), Pp, Ppk (from the values' SD) and Bissell's Cpk interval."""
    if lsl is None and usl is None:
        raise ValueError("capability needs at least one specification limit (lsl or usl)")
    if lsl is not None and usl is not None and not usl > lsl:
        raise ValueError(f"USL {usl} must be greater than LSL {lsl}")
    x = np.asarray(values, dtype=float).ravel()
    x = x[np.isfinite(x)]
    n = x.size
    if n == 0:
        return Capability(group=name, cp=None, cpk=None, cpk_ci=None, pp=None, ppk=None)
    mean = float(np.mean(x))
    overall = float(np.std(x, ddof=1)) if n > 1 else None
    cp, cpk = _index(mean, sd_within, lsl, usl)
    pp, ppk = _index(mean, overall, lsl, usl)
    ci = None
    if cpk is not None and n > 1:
        z = float(sps.norm.isf(alpha / 2))
        half = z * math.sqrt(1 / (9 * n) + cpk * cpk / (2 * (n - 1)))
        ci = (cpk - half, cpk + half)
    return Capability(group=name, cp=cp, cpk=cpk, cpk_ci=ci, pp=pp, ppk=ppk)
