"""Power of the one-way ANOVA F test to detect one group shifted from the others.

Configuration: group j's mean is ``shift`` away from the common mean of the others. With
μ̄ = Σ n_i μ_i / N the noncentrality is (Cohen 1988, §8.3; Scheffé 1959, §2.8)::

    λ = Σ n_i (μ_i − μ̄)² / σ² = shift² · n_j (N − n_j) / (N σ²)

and power = P(F(k − 1, N − k, λ) > F(1 − alpha; k − 1, N − k)). With unequal groups the group j
giving the smallest λ (the hardest one to catch, usually the smallest group) is used, so the
reported power is a floor over which group shifts. Equal n per group gives
λ = shift² · n (k − 1)/(k σ²), i.e. Cohen's f = (shift/σ)·√(k − 1)/k and λ = f² N.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from lotwatch.stats.results import OK, PowerResult
from scipy import optimize, special

MAX_N = 1_000_000


def f_test_power(lam: float, df1: float, df2: float, alpha: float) -> float:
    """P(F(df1, df2, λ) > critical F) for the (1 − alpha) critical value."""
    crit = float(special.fdtri(df1, df2, 1 - alpha))
    if lam <= 0:
        return float(special.fdtrc(df1, df2, crit))
    below = float(special.ncfdtr(df1, df2, lam, crit))
    if math.isnan(below) and lam > 1e6:  # scipy gives NaN for enormous λ, where the power is 1
        return 1.0
    return 1.0 - below


def _lambda_coef(ns: Sequence[int]) -> float:
    n_total = sum(ns)
    return min(n * (n_total - n) / n_total for n in ns)


def n_per_group_for_power(k: int, effect_shift_sd: float, alpha: float, target: float) -> int | None:
    """Smallest common n (≥ 2) per group with power ≥ target when one of k groups is shifted by
    ``effect_shift_sd`` within-group SDs. None when beyond MAX_N."""
    if effect_shift_sd <= 0 or k < 2:
        return None

    def power(n: int) -> float:
        lam = effect_shift_sd * effect_shift_sd * n * (k - 1) / k  # inf, not OverflowError
        return f_test_power(lam, k - 1, k * n - k, alpha)

    lo, hi = 2, 2
    while power(hi) < target:
        lo, hi = hi, hi * 2
        if hi > MAX_N:
            return None
    while lo < hi:  # power increases with n: smallest n with power ≥ target
        mid = (lo + hi) // 2
        if power(mid) >= target:
            hi = mid
        else:
            lo = mid + 1
    return lo


def power_analysis(ns: Sequence[int], sd_within: float | None, *, alpha: float = 0.05,
                   shift: float | None = None) -> PowerResult:
    """Power now at ``shift``, lots per group needed for 80%/90% power at ``shift``, and the
    smallest shift detected with 80% power at the current group sizes (in the data's units)."""
    if shift is not None and not (math.isfinite(shift) and shift != 0):
        raise ValueError(f"shift must be a non-zero finite number, got {shift!r}")
    sizes = [int(n) for n in ns if n > 0]
    k = len(sizes)
    n_total = sum(sizes)

    def empty(status: str) -> PowerResult:
        return PowerResult(alpha=alpha, sd_within=sd_within, shift=shift, power_at_shift=None,
                           n_per_group_80=None, n_per_group_90=None, detectable_shift_80=None,
                           status=status)

    if k < 2:
        return empty("fewer than two groups")
    if n_total - k < 1:
        return empty("no within-group degrees of freedom")
    if sd_within is None or not math.isfinite(sd_within):
        return empty("no within-group SD")
    if sd_within <= 0:
        return empty("zero within-group variance")
    df1, df2 = k - 1, n_total - k
    coef = _lambda_coef(sizes) / (sd_within * sd_within)
    if not math.isfinite(coef):
        return empty("within-group SD too small for a power calculation")

    def power_at(d: float) -> float:
        return f_test_power(d * d * coef, df1, df2, alpha)

    hi = sd_within
    for _ in range(200):
        if power_at(hi) >= 0.80:
            break
        hi *= 2
    else:
        return empty("power does not reach 80% at any shift")
    if power_at(0.0) >= 0.80:  # alpha itself is at least 0.80: no shift is needed
        detectable = 0.0
    else:
        detectable = float(optimize.brentq(lambda d: power_at(d) - 0.80, 0.0, hi,
                                           xtol=1e-12 * hi, rtol=1e-12))
    if shift is None:
        return PowerResult(alpha=alpha, sd_within=sd_within, shift=None, power_at_shift=None,
                           n_per_group_80=None, n_per_group_90=None,
                           detectable_shift_80=detectable, status=OK)
    d_sd = abs(shift) / sd_within
    return PowerResult(alpha=alpha, sd_within=sd_within, shift=shift,
                       power_at_shift=power_at(abs(shift)),
                       n_per_group_80=n_per_group_for_power(k, d_sd, alpha, 0.80),
                       n_per_group_90=n_per_group_for_power(k, d_sd, alpha, 0.90),
                       detectable_shift_80=detectable, status=OK)
