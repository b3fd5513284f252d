"""Effect sizes of the one-way ANOVA and the random-effects variance components.

Effect sizes (fixed effects)::

    eta²    = SS_between / SS_total
    omega²  = (SS_between − df_b · MS_within) / (SS_total + MS_within)      (Hays 1963)
    Cohen f = √(eta² / (1 − eta²))                                          (Cohen 1988, §8.2)

Intervals invert the noncentral F distribution (Steiger & Fouladi 1997; Steiger 2004,
Psychological Methods 9, 164-182; Smithson 2003): the (1 − alpha) interval [λ_L, λ_U] for the
noncentrality holds P(F ≤ F_obs | λ_L) = 1 − alpha/2 and P(F ≤ F_obs | λ_U) = alpha/2 (λ_L = 0 when
even λ = 0 gives less than 1 − alpha/2), then eta² = λ/(λ + N) and f = √(λ/N).

Variance components (random-effects one-way model, ANOVA estimator; Searle, Casella & McCulloch
1992, §3.5)::

    σ²_w = MS_within,  n₀ = (N − Σ n_i²/N)/(k − 1),  σ²_b = max(0, (MS_between − MS_within)/n₀)
    ICC  = σ²_b / (σ²_b + σ²_w)

ICC interval from the F distribution (Searle 1971, §9.6 for balanced data; Shrout & Fleiss 1979,
ICC(1)): with F_L = F / F(1 − alpha/2; k − 1, N − k) and F_U = F · F(1 − alpha/2; N − k, k − 1),
ICC_L = (F_L − 1)/(F_L + n₀ − 1) and ICC_U = (F_U − 1)/(F_U + n₀ − 1), clipped to [0, 1]. For
unbalanced groups n₀ replaces the common n, an approximation (Donner 1986) that is adequate when
the sizes are not very different.
"""

from __future__ import annotations

import math

from lotwatch.stats.results import OK, AnovaTable, EffectSize, VarianceComponents
from scipy import optimize
from scipy import stats as sps

Parts = tuple[float, float, int, int]  # ss_between, ss_within, df_between, df_within


def _parts(table: AnovaTable | Parts) -> tuple[float | None, float | None, int, int]:
    if isinstance(table, AnovaTable):
        return table.ss_between, table.ss_within, table.df_between, table.df_within
    ssb, ssw, dfb, dfw = table
    return float(ssb), float(ssw), int(dfb), int(dfw)


def noncentrality_interval(f_obs: float, df1: float, df2: float,
                           alpha: float = 0.05) -> tuple[float, float]:
    """(1 − alpha) interval for the noncentrality λ of F(df1, df2, λ) given an observed F."""

    def cdf(lam: float) -> float:
        return float(sps.f.cdf(f_obs, df1, df2)) if lam <= 0 else float(
            sps.ncf.cdf(f_obs, df1, df2, lam))

    def bound(target: float) -> float:
        if cdf(0.0) <= target:
            return 0.0
        hi = max(10.0, 2.0 * f_obs * df1)
        if hi > 1e9:  # F so large that scipy's noncentral F is NaN out there: bound unknown
            return math.nan
        while cdf(hi) > target:
            hi *= 2.0
            if hi > 1e9:
                return math.inf
        try:
            return float(optimize.brentq(lambda lam: cdf(lam) - target, 0.0, hi, xtol=1e-12,
                                         rtol=1e-12, maxiter=500))
        except ValueError:  # the noncentral F CDF came back NaN inside the bracket
            return math.nan

    return bound(1 - alpha / 2), bound(alpha / 2)


def effect_sizes(table: AnovaTable | Parts, alpha: float = 0.05) -> EffectSize:
    """Eta², omega², Cohen's f and their (1 − alpha) intervals from an ANOVA table or its parts."""
    ssb, ssw, dfb, dfw = _parts(table)
    if ssb is None or ssw is None or dfb < 1:
        return EffectSize(None, None, None, status="fewer than two groups")
    if dfw < 1:
        return EffectSize(None, None, None, status="no within-group degrees of freedom")
    sst = ssb + ssw
    if sst <= 0:
        return EffectSize(None, None, None, status="all values equal")
    msw = ssw / dfw
    eta = ssb / sst
    omega = (ssb - dfb * msw) / (sst + msw)
    # ssw == 0, or so small (a subnormal sum) that ssw / dfw underflows to 0: no finite F.
    if msw <= 0:
        return EffectSize(eta_squared=eta, omega_squared=omega, cohen_f=math.inf,
                          status="zero within-group variance")
    cohen = math.sqrt(ssb / ssw)  # = sqrt(eta² / (1 - eta²)); no 0/0 when eta² rounds to 1
    n_total = dfb + dfw + 1
    f_obs = (ssb / dfb) / msw
    if not math.isfinite(f_obs):  # overflows for a huge between / tiny within ratio
        return EffectSize(eta_squared=eta, omega_squared=omega, cohen_f=cohen,
                          status="F too large for an interval")
    lo, hi = noncentrality_interval(f_obs, dfb, dfw, alpha)
    eta_ci = (lo / (lo + n_total), hi / (hi + n_total) if math.isfinite(hi) else 1.0)
    f_ci = (math.sqrt(lo / n_total), math.sqrt(hi / n_total))
    return EffectSize(eta_squared=eta, omega_squared=omega, cohen_f=cohen, eta_squared_ci=eta_ci,
                      cohen_f_ci=f_ci, status=OK)


def variance_components(table: AnovaTable | Parts, ns: list[int] | tuple[int, ...], *,
                        alpha: float = 0.05) -> VarianceComponents:
    """σ²_between, σ²_within and the intraclass correlation of the random-effects model."""
    ssb, ssw, dfb, dfw = _parts(table)
    if ssb is None or ssw is None or dfb < 1:
        return VarianceComponents(None, None, None, status="fewer than two groups")
    if dfw < 1:
        return VarianceComponents(None, None, None, status="no within-group degrees of freedom")
    k = dfb + 1
    n_total = sum(ns)
    msb, msw = ssb / dfb, ssw / dfw
    n0 = (n_total - sum(n * n for n in ns) / n_total) / (k - 1)
    var_b = max(0.0, (msb - msw) / n0)
    if msw <= 0:
        if var_b == 0:
            return VarianceComponents(0.0, 0.0, None, status="all values equal")
        return VarianceComponents(var_b, 0.0, 1.0, status="zero within-group variance")
    icc = var_b / (var_b + msw)
    f_obs = msb / msw
    if not math.isfinite(f_obs) or not math.isfinite(n0):
        # F overflows (huge between, tiny within): no interval from the F distribution
        return VarianceComponents(var_between=var_b, var_within=msw, icc=icc, status=OK)
    f_l = f_obs / float(sps.f.isf(alpha / 2, dfb, dfw))
    f_u = f_obs * float(sps.f.isf(alpha / 2, dfw, dfb))

    def to_icc(x: float) -> float:
        return min(1.0, max(0.0, (x - 1) / (x + n0 - 1)))

    return VarianceComponents(var_between=var_b, var_within=msw, icc=icc,
                              icc_ci=(to_icc(f_l), to_icc(f_u)), status=OK)
