"""Rolling-window explanation: vectorised one-way statistics over every window × comparison,
family-wise false-discovery control and the practical gate. Window plans and sums live in
``stats.windows``, the settings in ``stats.review_settings`` (both re-exported here). Alerts
come from the sequential detectors in ``stats.detect``.

Pure computation on numpy arrays and polars frames; no SQLite. A *comparison* is one
characteristic × one grouping factor; a *window* is a span of days (or the last N lots of each
group) ending on a given day. The review engine (``tui/review_engine.py``) feeds this module the
store's per-day bucket sums and persists what it decides.

Sufficient statistics. For group i of a window the store keeps, per day, n, Σd and Σd² where
d = units − origin is an integer count of resolution steps from the characteristic's origin. Window
sums are differences of day-wise cumulative sums, so a window costs O(1) per group whatever its
length. From them (NIST/SEMATECH e-Handbook of Statistical Methods §7.4.3.3)::

    mean_i      = (origin + Σd_i / n_i) · resolution
    SS_within   = Σ_i (n_i·Σd²_i − (Σd_i)²) / n_i · resolution²     (numerator exact in integers)
    SS_between  = Σ_i n_i (m_i − m)² · resolution²                   (m_i = Σd_i/n_i, m = ΣΣd/N)
    F = (SS_between/(k−1)) / (SS_within/(N−k)),  p = P(F(k−1, N−k) > F)
    eta² = SS_between/SS_total;  omega² = (SS_between − (k−1)·MS_within)/(SS_total + MS_within)
           (Hays 1963)

Welch's heteroscedastic F (Welch 1951), with w_i = n_i/s_i², W = Σw_i, m_w = Σw_i·mean_i/W::

    A = Σ w_i (mean_i − m_w)² / (k − 1)
    T = Σ (1 − w_i/W)² / (n_i − 1)
    F_W = A / (1 + 2(k − 2)T/(k² − 1)),  df1 = k − 1,  df2 = (k² − 1)/(3T)

Bartlett's test of equal variances from the same sums (Bartlett 1937; NIST/SEMATECH §1.3.5.7),
with s_i² = (n_i·Σd²_i − (Σd_i)²)/(n_i(n_i − 1)) and s_p² = Σ(n_i − 1)s_i²/(N − k)::

    T = [(N − k)·ln s_p² − Σ(n_i − 1)·ln s_i²] / [1 + (Σ 1/(n_i − 1) − 1/(N − k)) / (3(k − 1))]

referred to χ²(k − 1). It routes a comparison to Welch: where Bartlett's p < alpha the review
reads (and feeds to the FDR family) Welch's p instead of the classical one. Bartlett is sensitive
to non-normality; a needless switch to Welch costs little power, which is why the simple sum-based
check is used here (the full battery on raw values adds Brown-Forsythe).

Largest shift: for each usable group, mean_i − mean of all other observations of the window,
= (Σd_i/n_i − (ΣΣd − Σd_i)/(N − n_i))·resolution; the group with the largest absolute value.

Detectable shift (80% power): the smallest shift δ of one average-sized group (n̄ = N/k) away
from the others that the classical F test at level alpha detects with probability 0.8. With
σ² = MS_within the noncentrality of that configuration is λ = δ²·n̄(N − n̄)/(N·σ²) (Cohen 1988
§8.2 for the noncentral-F power of the one-way design), so δ₈₀ = σ·√(λ₈₀·N/(n̄(N − n̄))) with
λ₈₀ solving P(F'(k−1, N−k, λ) > F_crit) = 0.8 (``scipy.special.ncfdtrinc``).

False-discovery control (Benjamini & Hochberg 1995; Benjamini & Yekutieli 2001): the family is
every comparison of one review (one window position) with a defined p. BH is the default. The
windows of one review share lots (a lot enters every characteristic and every factor it is tagged
with), so the tests are dependent; BH is proven under independence or positive regression
dependence, BY under arbitrary dependence at the price of the factor c(m) = Σ_{i≤m} 1/i, which is
why BY is offered.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from lotwatch.stats.review_settings import (  # noqa: F401  (re-exported)
    FDR_METHODS,
    NO_LIMITS_GATES,
    WINDOW_KINDS,
    ReviewSettings,
)
from lotwatch.stats.welch_rule import reads_welch
from lotwatch.stats.windows import (  # noqa: F401  (re-exported)
    BucketCube,
    Comparison,
    GroupSums,
    Window,
    bucket_cube,
    day_runs_cube,
    window_plan,
    window_span,
    window_sums,
)

NOT_ENOUGH = "not enough data"
ZERO_VARIANCE = "zero within-group variance"
OK = "ok"


# --------------------------------------------------------------------------------------------
# statistics over all windows x comparisons


@dataclass
class WindowStats:
    """One-way statistics for every window × comparison: arrays of shape (W, C) unless noted.

    Values are in the characteristic's unit (SS in unit²). ``status`` is "ok", "not enough data"
    or "zero within-group variance"; numbers are NaN where undefined. ``usable`` (W, C, K) marks
    groups with n ≥ min_n; ``mean``/``sd`` (W, C, K) are NaN for empty groups.
    """

    sums: GroupSums
    min_n: int
    usable: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    k: np.ndarray
    n_total: np.ndarray
    grand_mean: np.ndarray
    ss_between: np.ndarray
    ss_within: np.ndarray
    df_within: np.ndarray
    ms_within: np.ndarray
    f: np.ndarray
    p: np.ndarray
    welch_f: np.ndarray
    welch_df2: np.ndarray
    welch_p: np.ndarray
    bartlett_p: np.ndarray
    test: np.ndarray  # object array: "F" (classical) or "Welch", the test the review reads
    p_used: np.ndarray  # p of ``test``
    eta_squared: np.ndarray
    omega_squared: np.ndarray
    largest_shift: np.ndarray
    largest_group: np.ndarray  # int index into levels[c]; -1 when undefined
    status: np.ndarray  # object array of str

    def excluded(self, w: int, c: int) -> list[tuple[str, int]]:
        """Groups with 0 < lots < min_n in window w of comparison c: (level, lots)."""
        out = []
        counts = self.sums.n if self.sums.lots is None else self.sums.lots
        for g, lv in enumerate(self.sums.levels[c]):
            nn = int(counts[w, c, g])
            if 0 < nn < self.min_n:
                out.append((lv, nn))
        return out

    def group_name(self, c: int, g: int) -> str | None:
        return self.sums.levels[c][g] if g >= 0 else None


def window_statistics(sums: GroupSums, *, min_n: int, alpha: float = 0.05) -> WindowStats:
    """ANOVA, Welch, Bartlett, effect sizes and the largest shift for every window × comparison
    at once; ``alpha`` is the level of the Bartlett check that routes a comparison to Welch."""
    # imported here: commands that only read settings stay quick (these load scipy)
    from lotwatch.stats.anova import anova_batch, within_numerator
    from lotwatch.stats.welch import welch_batch
    from scipy import special

    n_all = sums.n
    # the minimum group size counts lots (a lot with replicates is one lot), values if unknown
    usable = (sums.n if sums.lots is None else sums.lots) >= max(min_n, 1)
    n = np.where(usable, n_all, 0)
    s1 = np.where(usable, sums.s1, 0)
    s2 = np.where(usable, sums.s2, 0)
    res = np.array([c.resolution for c in sums.comparisons], dtype=np.float64)[None, :]
    origin = np.array([c.origin_units for c in sums.comparisons], dtype=np.float64)[None, :]
    res3 = res[:, :, None]
    nf = n.astype(np.float64)
    shape = n.shape[:2]

    def flat(x: np.ndarray) -> np.ndarray:
        return x.reshape(-1, x.shape[2])

    with np.errstate(divide="ignore", invalid="ignore"):
        k = usable.sum(axis=2)
        N = nf.sum(axis=2)
        S = s1.sum(axis=2).astype(np.float64)
        m_i = np.where(usable, s1 / np.where(usable, nf, 1.0), np.nan)  # deviation units
        m = S / N
        num = np.where(usable, within_numerator(n, s1, s2), 0.0)
        df_b = (k - 1).astype(np.float64)
        df_w = N - k
        enough = (k >= 2) & (df_w > 0)
        # the one ANOVA (stats.anova.anova_batch) on exact integer deviation sums; SS scale
        # with the resolution squared, F, p and the effect sizes do not
        av = anova_batch(flat(n), flat(s1), flat(s2))
        ssw_u = av.ss_within.reshape(shape)
        ssb = av.ss_between.reshape(shape) * res ** 2
        ssw = ssw_u * res ** 2
        msw = np.where(df_w > 0, ssw / df_w, np.nan)
        f = av.f.reshape(shape)
        p = av.p.reshape(shape)
        eta = np.where(enough, av.eta_squared.reshape(shape), np.nan)
        omega = av.omega_squared.reshape(shape)

        # the one Welch (stats.welch.welch_batch), from group means and variances in units
        var_i = np.where(usable & (nf > 1), num / (nf * (nf - 1)), np.nan) * res3 ** 2
        w_ok = enough & np.all(~usable | (var_i > 0), axis=2)  # every group has a spread
        wb = welch_batch(flat(np.where(usable, nf, 0.0)), flat(np.nan_to_num(m_i * res3)),
                         flat(np.nan_to_num(var_i)))
        wf = wb.f.reshape(shape)
        wdf2 = wb.df_within.reshape(shape)
        wp = wb.p.reshape(shape)

        # Bartlett (scale-free: computed in deviation units)
        v_u = np.where(usable & (nf > 1), num / (nf * (nf - 1)), np.nan)
        sp2 = ssw_u / np.where(df_w > 0, df_w, np.nan)
        logs = np.where(usable, (nf - 1) * np.log(np.where(usable, v_u, 1.0)), 0.0).sum(axis=2)
        corr = 1 + (np.where(usable, 1 / np.where(usable, nf - 1, 1.0), 0.0).sum(axis=2)
                    - 1 / df_w) / (3 * df_b)
        b_stat = (df_w * np.log(sp2) - logs) / corr
        b_ok = w_ok & np.isfinite(b_stat)
        bp = np.where(b_ok, special.chdtrc(np.where(b_ok, df_b, 1.0),
                                           np.where(b_ok, np.maximum(b_stat, 0.0), 0.0)), np.nan)

        # largest shift: group mean minus the mean of all other observations
        rest_n = N[:, :, None] - nf
        other = (S[:, :, None] - s1) / rest_n
        diff = np.where(usable & (rest_n > 0) & enough[:, :, None], m_i - other, np.nan) * res3
        absd = np.where(np.isnan(diff), -1.0, np.abs(diff))
        lg = np.argmax(absd, axis=2)
        shift = np.take_along_axis(diff, lg[:, :, None], axis=2)[:, :, 0]
        lg = np.where(np.isnan(shift), -1, lg)
        sd = np.sqrt(np.where(n_all > 1, within_numerator(n_all, sums.s1, sums.s2)
                              / (n_all * (n_all - 1.0)), np.nan)) * res3
        mean_all = np.where(n_all > 0, (origin[:, :, None] + sums.s1 / np.where(n_all > 0, n_all, 1))
                            * res3, np.nan)
    welch = reads_welch(bp, alpha) & np.isfinite(wp)  # the one rule: stats/welch_rule.py
    test = np.where(welch, "Welch", "F").astype(object)
    p_used = np.where(welch, wp, p)
    status = np.where(~enough, NOT_ENOUGH, np.where(ssw_u > 0, OK, ZERO_VARIANCE)).astype(object)
    return WindowStats(
        sums=sums, min_n=min_n, usable=usable, mean=mean_all, sd=sd, k=k, n_total=N.astype(np.int64),
        grand_mean=np.where(N > 0, (origin + m) * res, np.nan), ss_between=np.where(enough, ssb, np.nan),
        ss_within=np.where(enough, ssw, np.nan), df_within=df_w, ms_within=msw, f=f, p=p,
        welch_f=wf, welch_df2=wdf2, welch_p=wp, bartlett_p=bp, test=test, p_used=p_used,
        eta_squared=eta, omega_squared=omega,
        largest_shift=shift, largest_group=lg, status=status)


def detectable_shift(stats: WindowStats, *, alpha: float = 0.05, power: float = 0.8,
                     rows: Sequence[int] | None = None) -> np.ndarray:
    """Smallest shift of one group from the others detected with ``power`` by the F test at
    ``alpha`` (hardest group; see the module docstring), for the given window rows (default all).

    Returns an array (len(rows), C) in the characteristic's unit; NaN where undefined.
    """
    from scipy import special  # imported here: commands that only read settings stay quick

    idx = list(range(stats.k.shape[0])) if rows is None else list(rows)
    k = stats.k[idx].astype(np.float64)
    N = stats.n_total[idx].astype(np.float64)
    msw = stats.ms_within[idx]
    ok = (k >= 2) & (N - k > 0) & np.isfinite(msw) & (msw > 0)
    dfb = np.where(ok, k - 1, 1.0)
    dfw = np.where(ok, N - k, 1.0)
    nn = np.where(stats.usable[idx], stats.sums.n[idx], 0).astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        coef = np.where(nn > 0, nn * (N[:, :, None] - nn) / N[:, :, None], np.inf).min(axis=2)
        fcrit = special.fdtri(dfb, dfw, 1 - alpha)
        lam = special.ncfdtrinc(dfb, dfw, 1 - power, fcrit)
        delta = np.sqrt(msw * lam / coef)
    return np.where(ok, delta, np.nan)


# --------------------------------------------------------------------------------------------
# false discovery rate


def family_fdr(p: np.ndarray, method: str = "bh") -> tuple[np.ndarray, np.ndarray]:
    """Adjust each row of ``p`` (W, C) as its own family; NaN entries are not in the family.

    BH adjusted p (Benjamini & Hochberg 1995): q_(i) = min_{j ≥ i} min(1, p_(j) / (j/m));
    BY (Benjamini & Yekutieli 2001) multiplies by c(m) = Σ_{i=1..m} 1/i. Computed by
    ``stats.multiple.adjust_pvalues`` (the one implementation), row by row.
    Returns (q, family_size per row).
    """
    from lotwatch.stats.multiple import adjust_pvalues

    if method not in FDR_METHODS:
        raise ValueError(f"FDR method {method!r}: use bh or by")
    p2 = np.atleast_2d(np.asarray(p, dtype=np.float64))
    q = np.full_like(p2, np.nan)
    sizes = np.zeros(p2.shape[0], dtype=np.int64)
    for r in range(p2.shape[0]):
        res = adjust_pvalues(p2[r], method)
        q[r] = res.q
        sizes[r] = res.family_size
    return q, sizes


# --------------------------------------------------------------------------------------------
# practical gate and the alert rule


def practical_gate(comp: Comparison, settings: ReviewSettings) -> tuple[float | None, str]:
    """The smallest shift worth an alert for a comparison, and where it came from.

    Returns (gate, source): source "min_shift", "tolerance" (fraction × (USL − LSL)),
    "detectable" (gate None: use each window's detectable shift) or "skip" (no alerts).
    """
    if comp.min_shift is not None and comp.min_shift > 0:
        return float(comp.min_shift), "min_shift"
    if comp.lsl is not None and comp.usl is not None and comp.usl > comp.lsl:
        return settings.tolerance_fraction * (comp.usl - comp.lsl), "tolerance"
    return None, settings.no_limits_gate


def signals(stats: WindowStats, q: np.ndarray, settings: ReviewSettings,
            detectable: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Which window × comparison cells carry a signal: q ≤ fdr_level and |largest shift| ≥ gate.

    ``detectable`` has the same shape as ``q`` (used where the gate source is "detectable").
    Returns (signal bool array, gate array used).
    """
    gates = np.empty(q.shape, dtype=np.float64)
    for c, comp in enumerate(stats.sums.comparisons):
        g, src = practical_gate(comp, settings)
        if src == "skip":
            gates[:, c] = np.inf
        elif g is None:
            gates[:, c] = detectable[:, c]
        else:
            gates[:, c] = g
    with np.errstate(invalid="ignore"):
        sig = (q <= settings.fdr_level) & (np.abs(stats.largest_shift) >= gates)
    return np.where(np.isnan(q) | np.isnan(gates), False, sig), gates


def anom_critical_value(ns: Sequence[int], df: float, alpha: float = 0.05) -> float | None:
    """Two-sided ANOM critical value h (Nelson 1982) for group sizes ``ns`` and ``df`` degrees of
    freedom of s, from ``stats.distributions.qanom`` (cached on the group fractions). None for
    fewer than two groups or no degrees of freedom."""
    from lotwatch.stats.distributions import qanom

    sizes = [int(x) for x in ns if x > 0]
    if len(sizes) < 2 or not df > 0:
        return None
    return float(qanom(1.0 - alpha, np.asarray(sizes, dtype=np.float64), float(df)))


def anom_flags_from_summary(mean: Sequence[float], n: Sequence[int], grand_mean: float,
                            ms_within: float, critical_value: float) -> list[str]:
    """ANOM flags: a group is "above"/"below" when its mean is outside
    grand_mean ± h·s·√((N − n_i)/(N·n_i)) (Nelson 1982, unequal n), else "within"."""
    N = float(sum(n))
    s = math.sqrt(ms_within)
    out = []
    for mi, ni in zip(mean, n, strict=True):
        half = critical_value * s * math.sqrt((N - ni) / (N * ni))
        out.append("above" if mi > grand_mean + half else "below" if mi < grand_mean - half
                   else "within")
    return out
