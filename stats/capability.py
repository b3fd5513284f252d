"""Process capability of one group against specification limits, from the group's own spread.

With μ the group mean, σ_w the group's within (short-term) SD and s its overall SD (ddof = 1;
both from ``stats.spread``: pooled within lots where lots have replicates, else the average
moving range / 1.128)::

    Cp  = (USL − LSL) / (6 σ_w)          Cpk = min(USL − μ, μ − LSL) / (3 σ_w)
    Pp  = (USL − LSL) / (6 s)            Ppk = min(USL − μ, μ − LSL) / (3 s)

(Montgomery, Introduction to Statistical Quality Control, §8.2.) With only one limit, Cp and Pp
are None and Cpk/Ppk use that side alone. The (1 − alpha) interval for Cpk is Bissell's (1990)
normal approximation: Cpk ± z(1 − alpha/2) · √(1/(9n) + Cpk²/(2(n − 1))), n = values.
A group without spread has no index ("undefined: no spread"). The indices assume roughly
normal data: a group whose skewness test (D'Agostino 1970, scipy.stats.skewtest) rejects at
1% with at least 8 values carries a caveat.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence

import numpy as np
from lotwatch.stats.results import Capability
from lotwatch.stats.spread import overall_sd, within_sd
from scipy import stats as sps

NO_SPREAD = "undefined: no spread"
SKEW_ALPHA = 0.01
SKEW_MIN_N = 8  # scipy's skewtest needs at least 8 values


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


def _skew_note(x: np.ndarray) -> str | None:
    if x.size < SKEW_MIN_N or float(np.ptp(x)) == 0:
        return None
    with warnings.catch_warnings():  # nearly constant data: scipy warns, the p says enough
        warnings.simplefilter("ignore", RuntimeWarning)
        test = sps.skewtest(x)
    if not (math.isfinite(test.pvalue) and test.pvalue < SKEW_ALPHA):
        return None
    side = "right" if test.statistic > 0 else "left"
    return (f"skewed to the {side} (skewness test p = {test.pvalue:.2g}): the indices assume "
            "normal data and misstate the tail there")


def capability(name: str, values: Sequence[float] | np.ndarray, *, lsl: float | None,
               usl: float | None, lots: Sequence[object] | None = None,
               resolution: str | float | None = None, alpha: float = 0.05) -> Capability:
    """Cp, Cpk (within SD), Pp, Ppk (overall SD) and Bissell's Cpk interval of one group.

    ``values`` in time order; ``lots`` labels each value with its lot (None: one value per lot).
    """
    if lsl is None and usl is None:
        raise ValueError("capability needs at least one specification limit (lsl or usl)")
    if lsl is not None and usl is not None and not usl > lsl:
        raise ValueError(f"USL {usl} must be greater than LSL {lsl}")
    x = np.asarray(values, dtype=float).ravel()
    keep = np.isfinite(x)
    labels = None if lots is None else [lab for lab, k in zip(lots, keep, strict=True) if k]
    x = x[keep]
    n = int(x.size)
    n_lots = n if labels is None else len(set(labels))
    if n == 0:
        return Capability(group=name, cp=None, cpk=None, cpk_ci=None, pp=None, ppk=None,
                          n=0, lots=0, status="no values")
    mean = float(np.mean(x))
    mean += math.fsum((x - mean).tolist()) / n  # one refinement pass
    overall = overall_sd(x, resolution)
    within, method = within_sd(x, labels, resolution)
    status = None
    if overall == 0:
        status = NO_SPREAD
    elif overall is None:
        status = "one value: no spread to measure"
    cp, cpk = _index(mean, within, lsl, usl)
    pp, ppk = _index(mean, overall, lsl, usl)
    ci = None
    if cpk is not None and n > 1:
        z = float(sps.norm.isf(alpha / 2))
        half = z * math.sqrt(1 / (9 * n) + cpk * cpk / (2 * (n - 1)))
        ci = (cpk - half, cpk + half)
    return Capability(group=name, cp=cp, cpk=cpk, cpk_ci=ci, pp=pp, ppk=ppk, n=n, lots=n_lots,
                      sd_within=within, sd_overall=overall, within_method=method,
                      status=status, caveat=_skew_note(x))
