"""Core statistics against published worked examples and printed tables, and degenerate inputs."""

from __future__ import annotations

import math

import numpy as np
import pytest
from lotwatch.stats.anova import anova_batch, anova_from_sums, one_way_anova
from lotwatch.stats.capability import capability
from lotwatch.stats.checks import (
    bartlett_test,
    brown_forsythe,
    kruskal_wallis,
    recommend,
    residual_normality,
    resolution_check,
)
from lotwatch.stats.effect import effect_sizes, variance_components
from lotwatch.stats.multiple import adjust_pvalues
from lotwatch.stats.power import power_analysis
from lotwatch.stats.results import TestResult as Check  # alias: pytest would collect Test*
from lotwatch.stats.welch import welch_anova, welch_batch, welch_from_moments
from scipy import stats as sps

# NIST/SEMATECH e-Handbook of Statistical Methods §7.4.3.3, one-way ANOVA example (3 levels of 5;
# data and results quoted from memory, cross-checked below with scipy.stats.f_oneway).
HANDBOOK = [[6.9, 5.4, 5.8, 4.6, 4.0], [8.3, 6.8, 7.8, 9.2, 6.5], [8.0, 10.5, 8.1, 6.9, 9.3]]


@pytest.mark.parametrize("resolution", ["0.1", None])
def test_handbook_one_way_example(resolution: str | None) -> None:
    t = one_way_anova(HANDBOOK, alpha=0.05, resolution=resolution)
    # e-Handbook §7.4.3.3 (from memory): SS treatments 27.897, SS error 17.452, F 9.59
    assert round(t.ss_between, 3) == 27.897
    assert round(t.ss_within, 3) == 17.452
    assert round(t.f, 2) == 9.59
    assert (t.df_between, t.df_within) == (2, 12)
    # cross-check with scipy.stats.f_oneway
    ref = sps.f_oneway(*HANDBOOK)
    assert t.f == pytest.approx(ref.statistic, rel=1e-12)
    assert t.p == pytest.approx(ref.pvalue, rel=1e-10)
    assert "differ" in t.decision and t.status == "ok"
    assert t.exact is (resolution is not None)


@pytest.mark.parametrize(("level", "df1", "df2", "table"), [
    (0.95, 2, 12, 3.89),  # standard F tables, upper 5% points
    (0.95, 3, 20, 3.10),  # standard F tables, upper 5% points
    (0.95, 4, 30, 2.69),  # standard F tables, upper 5% points
    (0.99, 2, 12, 6.93),  # standard F tables, upper 1% points
])
def test_f_critical_values_match_printed_tables(level: float, df1: int, df2: int,
                                                table: float) -> None:
    rng = np.random.default_rng(df1 * 100 + df2)
    k, n_total = df1 + 1, df1 + 1 + df2
    sizes = [n_total // k + (1 if i < n_total % k else 0) for i in range(k)]
    t = one_way_anova([rng.normal(size=s) for s in sizes], alpha=1 - level)
    assert round(t.f_crit, 2) == table


# Benjamini & Hochberg (1995), J. R. Statist. Soc. B 57, 289-300, §3.2 worked example: 15 p-values
BH_EXAMPLE = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240,
              0.4262, 0.5719, 0.6528, 0.7590, 1.000]


def test_bh_paper_example() -> None:
    adj = adjust_pvalues(BH_EXAMPLE, "bh", level=0.05)
    assert int(adj.reject.sum()) == 4  # Benjamini & Hochberg (1995): BH rejects 4 at q = 0.05
    assert adj.reject[:4].all() and adj.family_size == 15
    # same paper: Bonferroni rejects 3 (p <= 0.05/15)
    assert sum(p <= 0.05 / 15 for p in BH_EXAMPLE) == 3
    assert int(adjust_pvalues(BH_EXAMPLE, "holm").reject.sum()) == 3  # Holm (1979) step-down


def test_nan_excluded_not_rejected() -> None:
    p = np.array([0.001, np.nan, 0.02, 0.8, np.nan])
    adj = adjust_pvalues(p, "bh")
    assert adj.excluded == (1, 4) and adj.family_size == 3
    assert np.isnan(adj.q[[1, 4]]).all() and not adj.reject[[1, 4]].any()
    # common practice: BH over the three finite p-values only
    assert adj.q[0] == pytest.approx(0.003) and adj.q[2] == pytest.approx(0.03)
    with pytest.raises(ValueError, match="unknown adjustment"):
        adjust_pvalues(p, "fdr")


@pytest.mark.parametrize(("f", "cohen_n"), [(0.10, 274), (0.25, 45), (0.40, 18)])
def test_cohen_power_table(f: float, cohen_n: int) -> None:
    # Cohen (1988) Table 8.4.4, u = 3 (k = 4), alpha .05, power .80 (values from memory, ±1)
    k = 4
    shift = f * k / math.sqrt(k - 1)  # one group shifted: f = (shift/σ)·√(k−1)/k
    r = power_analysis([10] * k, 1.0, shift=shift)
    assert abs(r.n_per_group_80 - cohen_n) <= 1
    assert r.n_per_group_90 > r.n_per_group_80


def test_detectable_shift_has_80_percent_power() -> None:
    r = power_analysis([8, 10, 12], 2.0)
    again = power_analysis([8, 10, 12], 2.0, shift=r.detectable_shift_80)
    assert again.power_at_shift == pytest.approx(0.80, abs=1e-9)


def test_zero_shift_refused() -> None:
    with pytest.raises(ValueError, match="non-zero"):
        power_analysis([5, 5], 1.0, shift=0.0)


def test_bissell_cpk_interval() -> None:
    # Bissell (1990) approximation: Cpk ± z·√(1/(9n) + Cpk²/(2(n−1))). 17 lots of three values
    # (centre − 0.5, centre, centre + 0.5): the pooled within-lot SD is exactly 0.5.
    centres = np.linspace(-1, 1, 17) + 10.0
    x = np.repeat(centres, 3) + np.tile([-0.5, 0.0, 0.5], 17)
    lots = np.repeat(np.arange(17), 3)
    c = capability("A", x, lots=lots, lsl=8.0, usl=13.0)
    assert c.sd_within == pytest.approx(0.5) and c.within_method == "pooled within lots"
    assert c.cp == pytest.approx(5 / 3)
    cpk = min(13 - 10, 10 - 8) / 1.5
    assert c.cpk == pytest.approx(cpk)
    n = 51
    half = 1.959963984540054 * math.sqrt(1 / (9 * n) + cpk ** 2 / (2 * (n - 1)))
    assert c.cpk_ci == pytest.approx((cpk - half, cpk + half))
    one_sided = capability("A", x, lots=lots, lsl=None, usl=13.0)
    assert one_sided.cp is None and one_sided.cpk == pytest.approx(2.0)
    assert one_sided.pp is None and one_sided.ppk == pytest.approx(3 / (3 * np.std(x, ddof=1)))


def test_resolution_warning() -> None:
    # common practice (ten-to-one rule): resolution ≤ 1/10 of 6σ or of the tolerance
    assert resolution_check(1.0, "0.1") is None
    assert "coarse" in resolution_check(0.05, "0.1")
    assert "tolerance" in resolution_check(1.0, "0.1", tolerance=0.5)
    assert resolution_check(1.0, None) is None


def test_recommendation_rules() -> None:
    ok = Check("Brown-Forsythe", 1.0, 0.5, "s")
    spread = Check("Brown-Forsythe", 9.0, 0.001, "s")
    normal = Check("Shapiro-Wilk", 0.99, 0.6, "s")
    skewed = Check("Shapiro-Wilk", 0.8, 0.0001, "s")
    assert recommend(spread, normal, [10, 10]).posthoc == "Games-Howell"
    assert recommend(ok, skewed, [10, 10]).test == "Kruskal-Wallis"
    assert recommend(ok, skewed, [100, 100]).test == "classical ANOVA"
    r = recommend(ok, normal, [10, 10])
    assert r.posthoc == "Tukey-Kramer" and "classical" in r.reason


# --- degenerate inputs: every one has a status in words, never a silent NaN -------------------

def test_fewer_than_two_groups() -> None:
    t = one_way_anova([[1.0, 2.0, 3.0]])
    assert t.status == "fewer than two groups" and t.f is None
    assert welch_anova([[1.0, 2.0]]).status == "fewer than two groups"
    assert kruskal_wallis([[1.0, 2.0]]).status == "fewer than two groups"
    assert effect_sizes(t).status == "fewer than two groups"
    assert power_analysis([5], 1.0).status == "fewer than two groups"
    assert one_way_anova([]).status == "fewer than two groups"


def test_single_value_groups() -> None:
    t = one_way_anova([[1.0], [2.0], [4.0]], resolution="1")
    assert t.status == "no within-group degrees of freedom" and t.f is None
    assert t.ss_between == pytest.approx(sps.tvar([1, 2, 4]) * 2)
    assert welch_anova([[1.0], [2.0, 3.0]]).status == "a group has fewer than two values"
    assert bartlett_test([[1.0], [2.0, 3.0]]).status == "a group has fewer than two values"


def test_zero_within_variance() -> None:
    for res in ("0.1", None):
        t = one_way_anova([[1.0, 1.0], [2.0, 2.0]], resolution=res)
        assert t.status == "zero within-group variance"
        assert t.f == math.inf and t.p == 0.0 and "infinite" in t.decision
    assert welch_anova([[1.0, 1.0], [2.0, 2.0]]).status == "zero variance in a group"
    assert bartlett_test([[1.0, 1.0], [2.0, 3.0]]).status == "zero variance in a group"
    assert residual_normality([[1.0, 1.0], [2.0, 2.0]]).status == "zero within-group variance"
    assert effect_sizes(one_way_anova([[1.0, 1.0], [2.0, 2.0]])).status == \
        "zero within-group variance"
    assert power_analysis([2, 2], 0.0).status == "zero within-group variance"


def test_subnormal_within_sum() -> None:
    """Found by fuzzing: SS_within = 5e-324 (the smallest subnormal double, IEEE 754) over 3 df
    makes MS_within = SS_within / df underflow to exactly 0; F = MS_b / MS_w is then undefined
    and was a ZeroDivisionError. It is reported as zero within-group variance."""
    assert 5e-324 / 3 == 0.0  # IEEE 754 round-to-nearest underflow (the cause)
    e = effect_sizes((1.0, 5e-324, 1, 3))
    assert e.status == "zero within-group variance" and e.cohen_f == math.inf
    assert e.eta_squared == 1.0 and e.eta_squared_ci is None
    vc = variance_components((1.0, 5e-324, 1, 3), [2, 3])
    assert vc.status == "zero within-group variance" and vc.icc == 1.0


def test_f_overflows() -> None:
    """MS_b / MS_w overflows to inf for 1e300 against 1e-301 (IEEE 754): no interval can come
    from the F distribution, and none is given (before, the ICC interval read (0, 0))."""
    e = effect_sizes((1e300, 1e-300, 2, 3))
    assert e.status == "F too large for an interval" and e.eta_squared_ci is None
    vc = variance_components((1e300, 1e-300, 2, 3), [2, 3])
    assert vc.icc == 1.0 and vc.icc_ci is None


def test_all_values_equal() -> None:
    t = one_way_anova([[3.0, 3.0], [3.0, 3.0, 3.0]], resolution="0.5")
    assert t.status == "all values equal" and t.f is None and t.p is None
    assert kruskal_wallis([[3.0, 3.0], [3.0, 3.0]]).status == "all values tied"
    assert brown_forsythe([[3.0, 3.0], [3.0, 3.0]]).status == "all values equal"
    assert variance_components(t, [2, 3]).status == "all values equal"


def test_non_finite_values() -> None:
    bad = [[1.0, np.nan], [2.0, 3.0]]
    assert one_way_anova(bad).status == "non-finite values"
    assert welch_anova(bad).status == "non-finite values"
    assert kruskal_wallis(bad).status == "non-finite values"
    assert brown_forsythe(bad).status == "non-finite values"
    assert bartlett_test(bad).status == "non-finite values"
    assert residual_normality(bad).status == "non-finite values"
    assert anova_from_sums([2, 2], [1.0, math.inf], [1.0, 2.0]).status == "non-finite values"


def test_batch_degenerate_rows_are_nan() -> None:
    n = np.array([[3, 3, 0], [1, 1, 0], [2, 2, 2]])
    s1 = np.array([[3.0, 6.0, 0.0], [1.0, 2.0, 0.0], [2.0, 4.0, 6.0]])
    s2 = np.array([[5.0, 14.0, 0.0], [1.0, 4.0, 0.0], [2.0, 8.0, 18.0]])  # row 3: zero SSw
    b = anova_batch(n, s1, s2)
    assert np.isfinite(b.f[0]) and np.isnan(b.f[1:]).all()
    w = welch_batch(n, s1 / np.maximum(n, 1), np.array([[1.0, 1.0, 0], [0, 0, 0], [0, 0, 0]]))
    assert np.isfinite(w.f[0]) and np.isnan(w.f[1:]).all()
    assert welch_from_moments([3, 3], [1.0, 2.0], [1.0, 1.0]).f == pytest.approx(w.f[0])


def test_off_grid_sums_refused() -> None:
    with pytest.raises(ValueError, match="not an integer"):
        anova_from_sums([2, 2], [1.5, 2], [3, 4], resolution="0.1")
