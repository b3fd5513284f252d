"""Property tests of the core statistics against reference libraries (scipy.stats, statsmodels).

Oracles: scipy.stats (f_oneway with equal_var True/False, kruskal, levene(center="median"),
bartlett, shapiro), statsmodels (anova_oneway use_var equal/unequal, multipletests,
FTestAnovaPower, confint_effectsize_oneway), pingouin (intraclass_corr ICC1). Well-conditioned
data: agreement to 1e-9 relative.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from lotwatch.stats.anova import anova_batch, anova_from_sums, one_way_anova
from lotwatch.stats.checks import bartlett_test, brown_forsythe, kruskal_wallis, residual_normality
from lotwatch.stats.effect import effect_sizes, variance_components
from lotwatch.stats.multiple import adjust_pvalues
from lotwatch.stats.power import power_analysis
from lotwatch.stats.welch import welch_anova, welch_batch, welch_from_moments
from scipy import stats as sps
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.oneway import anova_oneway, confint_effectsize_oneway
from statsmodels.stats.power import FTestAnovaPower

REL = 1e-9
SETTINGS = settings(max_examples=40, deadline=None)


@st.composite
def grouped(draw, min_k: int = 2, max_k: int = 6, min_n: int = 3, max_n: int = 25):
    """Random well-conditioned groups of values on a 0.01 grid (ties possible)."""
    k = draw(st.integers(min_k, max_k))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    sizes = rng.integers(min_n, max_n + 1, size=k)
    centre = draw(st.sampled_from([0.0, 10.0, 500.0]))
    out = []
    for i, n in enumerate(sizes):
        scale = rng.uniform(0.5, 3.0)
        out.append(np.round(centre + rng.normal(0.3 * i, scale, size=n), 2))
    return out


def _lists(groups):
    return [g.tolist() for g in groups]


@SETTINGS
@given(grouped())
def test_anova_vs_scipy_and_statsmodels(groups) -> None:
    ref = sps.f_oneway(*groups)  # scipy.stats.f_oneway (classical)
    sm = anova_oneway(np.concatenate(groups), np.repeat(np.arange(len(groups)),
                                                        [g.size for g in groups]),
                      use_var="equal")  # statsmodels anova_oneway(use_var="equal")
    for res in (None, "0.01"):
        t = one_way_anova(_lists(groups), resolution=res)
        assert t.f == pytest.approx(ref.statistic, rel=REL)
        assert t.p == pytest.approx(ref.pvalue, rel=REL, abs=1e-300)
        assert t.f == pytest.approx(sm.statistic, rel=REL)
    t = one_way_anova(_lists(groups))
    n = [g.size for g in groups]
    c = groups[0][0]
    s1 = [float(np.sum(g - c)) for g in groups]
    s2 = [float(np.sum((g - c) ** 2)) for g in groups]
    from_sums = anova_from_sums(n, s1, s2, origin=c)
    assert from_sums.f == pytest.approx(ref.statistic, rel=REL)
    assert from_sums.grand_mean == pytest.approx(t.grand_mean, rel=REL)
    units = [np.round(g * 100).astype(np.int64) for g in groups]
    o = int(units[0][0])
    exact = anova_from_sums(n, [int(np.sum(u - o)) for u in units],
                            [int(np.sum((u - o) ** 2)) for u in units], resolution="0.01",
                            origin=o)
    assert exact.f == pytest.approx(ref.statistic, rel=REL) and exact.exact
    b = anova_batch([n], [s1], [s2])
    assert b.f[0] == pytest.approx(ref.statistic, rel=REL)
    assert b.p[0] == pytest.approx(ref.pvalue, rel=REL, abs=1e-300)


@SETTINGS
@given(grouped())
def test_welch_vs_scipy_and_statsmodels(groups) -> None:
    ref = sps.f_oneway(*groups, equal_var=False)  # scipy.stats.f_oneway(equal_var=False)
    sm = anova_oneway(np.concatenate(groups), np.repeat(np.arange(len(groups)),
                                                        [g.size for g in groups]),
                      use_var="unequal")  # statsmodels anova_oneway(use_var="unequal")
    w = welch_anova(groups)
    assert w.f == pytest.approx(ref.statistic, rel=REL)
    assert w.p == pytest.approx(ref.pvalue, rel=REL, abs=1e-300)
    assert w.df_within == pytest.approx(sm.df[1], rel=REL)
    n = [g.size for g in groups]
    m = [float(np.mean(g)) for g in groups]
    v = [float(np.var(g, ddof=1)) for g in groups]
    assert welch_from_moments(n, m, v).f == pytest.approx(ref.statistic, rel=REL)
    wb = welch_batch([n + [0]], [m + [0.0]], [v + [0.0]])  # padded absent group
    assert wb.f[0] == pytest.approx(ref.statistic, rel=REL)
    assert wb.df_within[0] == pytest.approx(sm.df[1], rel=REL)


@SETTINGS
@given(grouped())
def test_checks_vs_scipy(groups) -> None:
    kw = kruskal_wallis(groups)
    ref = sps.kruskal(*groups)  # scipy.stats.kruskal (tie-corrected)
    assert kw.statistic == pytest.approx(ref.statistic, rel=REL)
    assert kw.p == pytest.approx(ref.pvalue, rel=REL, abs=1e-300)
    bf = brown_forsythe(groups)
    ref = sps.levene(*groups, center="median")  # scipy.stats.levene(center="median")
    assert bf.statistic == pytest.approx(ref.statistic, rel=REL)
    assert bf.p == pytest.approx(ref.pvalue, rel=REL, abs=1e-300)
    bt = bartlett_test(groups)
    ref = sps.bartlett(*groups)  # scipy.stats.bartlett
    assert bt.statistic == pytest.approx(ref.statistic, rel=REL)
    resid = np.concatenate([g - g.mean() for g in groups])
    nt = residual_normality(groups)
    assert nt.statistic == pytest.approx(sps.shapiro(resid).statistic, rel=REL)
    for t in (kw, bf, bt, nt):
        assert t.sentence and t.status == "ok"


def test_normality_above_5000_uses_dagostino() -> None:
    rng = np.random.default_rng(5)
    groups = [rng.normal(size=3000), rng.normal(size=3000)]
    r = residual_normality(groups)
    resid = np.concatenate([g - g.mean() for g in groups])
    ref = sps.normaltest(resid)  # scipy.stats.normaltest (D'Agostino-Pearson K²)
    assert r.name == "D'Agostino-Pearson"
    assert r.statistic == pytest.approx(ref.statistic, rel=REL)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.one_of(st.floats(0, 1), st.just(float("nan"))), min_size=1, max_size=40),
       st.sampled_from(["bh", "by", "holm"]))
@example([0.0, 0.0, 0.05], "bh")  # found with a fresh seed: p_(m) = alpha must be rejected (BH 1995)
def test_adjust_vs_statsmodels(p, method) -> None:
    arr = np.array(p)
    adj = adjust_pvalues(arr, method)
    finite = np.isfinite(arr)
    assert adj.family_size == int(finite.sum())
    assert not adj.reject[~finite].any() and np.isnan(adj.q[~finite]).all()
    if finite.any():
        sm_method = {"bh": "fdr_bh", "by": "fdr_by", "holm": "holm"}[method]
        rej, q, _, _ = multipletests(arr[finite], alpha=0.05, method=sm_method)  # statsmodels
        np.testing.assert_allclose(adj.q[finite], q, rtol=1e-12, atol=1e-15)
        assert (adj.reject[finite] == (q <= 0.05)).all()


@settings(max_examples=25, deadline=None)
@given(st.integers(2, 8), st.integers(3, 40), st.floats(0.1, 2.0))
def test_power_vs_statsmodels(k, n, shift) -> None:
    r = power_analysis([n] * k, 1.0, shift=shift)
    f = shift * math.sqrt(k - 1) / k  # Cohen's f of one group shifted (equal n)
    # statsmodels FTestAnovaPower: nobs is the TOTAL number of observations
    ref = FTestAnovaPower().power(effect_size=f, nobs=n * k, alpha=0.05, k_groups=k)
    assert r.power_at_shift == pytest.approx(ref, rel=REL, abs=1e-12)
    n80 = FTestAnovaPower().solve_power(effect_size=f, nobs=None, alpha=0.05, power=0.8,
                                        k_groups=k) / k
    assert r.n_per_group_80 == max(2, math.ceil(n80 - 1e-6))


@pytest.mark.filterwarnings("ignore:divide by zero:RuntimeWarning")  # inside statsmodels
@SETTINGS
@given(grouped(min_k=3))
def test_effect_size_intervals_vs_statsmodels(groups) -> None:
    t = one_way_anova(groups)
    e = effect_sizes(t)
    # statsmodels confint_effectsize_oneway: noncentral-F inversion (Steiger 2004)
    ref = confint_effectsize_oneway(t.f, (t.df_between, t.df_within), alpha=0.05,
                                    nobs=t.n_total)
    # statsmodels' root finder stops at ~1e-4 relative; ours is checked against the defining
    # equation below, so compare loosely here
    np.testing.assert_allclose(e.cohen_f_ci, ref.ci_f, rtol=1e-3, atol=1e-6)
    lam = np.asarray(ref.ci_nc)
    np.testing.assert_allclose(e.eta_squared_ci, lam / (lam + t.n_total), rtol=1e-3, atol=1e-6)
    # Steiger (2004): P(F <= F_obs | λ_L) = 1 - α/2 and P(F <= F_obs | λ_U) = α/2
    lam_l, lam_u = (f * f * t.n_total for f in e.cohen_f_ci)
    if lam_l > 0:
        assert sps.ncf.cdf(t.f, t.df_between, t.df_within, lam_l) == pytest.approx(0.975, abs=1e-9)
    if lam_u > 0:
        assert sps.ncf.cdf(t.f, t.df_between, t.df_within, lam_u) == pytest.approx(0.025, abs=1e-9)
    else:  # F so small that even λ = 0 puts it below the 2.5% point: interval [0, 0]
        assert sps.f.cdf(t.f, t.df_between, t.df_within) <= 0.025
    assert e.eta_squared == pytest.approx(t.ss_between / t.ss_total, rel=REL)


@pytest.mark.filterwarnings("ignore:The inplace keyword")  # inside pingouin
def test_icc_vs_pingouin_balanced() -> None:
    pg = pytest.importorskip("pingouin")
    import pandas as pd

    rng = np.random.default_rng(11)
    k, n = 8, 5
    effects = rng.normal(0, 1.0, size=k)
    data = effects[:, None] + rng.normal(0, 0.8, size=(k, n))
    t = one_way_anova(list(data))
    vc = variance_components(t, [n] * k)
    df = pd.DataFrame({"target": np.repeat(np.arange(k), n), "rater": np.tile(np.arange(n), k),
                       "score": data.ravel()})
    icc = pg.intraclass_corr(df, targets="target", raters="rater", ratings="score")
    row = icc.set_index("Type").loc["ICC(1,1)"]  # pingouin ICC(1,1) = one-way random (Shrout-Fleiss)
    assert vc.icc == pytest.approx(row["ICC"], rel=1e-9)
    lo, hi = row["CI95"]
    assert vc.icc_ci[0] == pytest.approx(max(lo, 0.0), abs=0.006)  # pingouin rounds to 2 dp
    assert vc.icc_ci[1] == pytest.approx(hi, abs=0.006)


def test_batches_vs_scipy_row_by_row() -> None:
    rng = np.random.default_rng(21)
    m, k = 60, 7
    n = rng.integers(2, 12, size=(m, k))
    n[rng.random((m, k)) < 0.15] = 0  # absent groups pad with n = 0
    n[:, :2] = np.maximum(n[:, :2], 2)
    units = [[rng.integers(-300, 300, size=n[i, j]) for j in range(k)] for i in range(m)]
    s1 = np.array([[int(u.sum()) for u in row] for row in units], dtype=np.int64)
    s2 = np.array([[int((u * u).sum()) for u in row] for row in units], dtype=np.int64)
    b = anova_batch(n, s1, s2)  # int64 sums of integer deviations
    mean = s1 / np.maximum(n, 1)
    var = np.where(n > 1, (s2 - s1 * mean) / np.maximum(n - 1, 1), 0.0)
    w = welch_batch(n, mean, var)
    for i, row in enumerate(units):
        groups = [u.astype(float) for u in row if u.size]
        ref = sps.f_oneway(*groups)  # scipy.stats.f_oneway, classical
        assert b.f[i] == pytest.approx(ref.statistic, rel=REL)
        assert b.p[i] == pytest.approx(ref.pvalue, rel=REL, abs=1e-300)
        assert b.df_within[i] == sum(g.size for g in groups) - len(groups)
        sm_eta = b.ss_between[i] / (b.ss_between[i] + b.ss_within[i])
        assert b.eta_squared[i] == pytest.approx(sm_eta, rel=REL)
        ref_w = sps.f_oneway(*groups, equal_var=False)  # scipy.stats.f_oneway, Welch
        assert w.f[i] == pytest.approx(ref_w.statistic, rel=REL)
        assert w.p[i] == pytest.approx(ref_w.pvalue, rel=REL, abs=1e-300)
        e = effect_sizes(one_way_anova(groups))
        assert b.omega_squared[i] == pytest.approx(e.omega_squared, rel=1e-9, abs=1e-12)


@settings(max_examples=80, deadline=None)
@given(st.sampled_from(["0.1", "0.01", "0.0001", "0.5", "0.02", "0.25", "5", "0.0000001"]),
       st.lists(st.integers(-10**12, 10**12), min_size=1, max_size=30),
       st.lists(st.floats(-1e6, 1e6, allow_nan=False), max_size=5))
def test_unit_conversion_matches_python_decimal(res_text, ints, extra) -> None:
    """The vectorised float-to-units shortcut agrees with Python's decimal module (the oracle)."""
    from decimal import Decimal

    from lotwatch.stats._numeric import parse_resolution, to_units

    res = parse_resolution(res_text)
    values = [float(Decimal(i) * res) for i in ints] + extra
    arr = np.array(values)
    expected, expected_error = [], None
    for v in values:
        q = Decimal(repr(v)) / res  # Python decimal: exact quotient of the shortest repr
        r = q.to_integral_value()
        if abs(q - r) > Decimal("1e-6"):
            expected_error = v
            break
        expected.append(int(r))
    if expected_error is None:
        assert to_units(arr, res) == expected
    else:
        with pytest.raises(ValueError, match="not a multiple"):
            to_units(arr, res)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.lists(st.integers(-999, 999), min_size=2, max_size=15), min_size=2,
                max_size=6),
       st.sampled_from([0, 10**6, 10**12]), st.sampled_from(["0.1", "0.001", "0.25"]))
def test_exact_route_equals_rational_arithmetic(units, offset, res_text) -> None:
    """Exact route vs a textbook computation in Python fractions (definition of SS, §7.4.3)."""
    from fractions import Fraction

    res = Fraction(res_text)
    groups = [[(offset + u) * res for u in g] for g in units]  # exact values
    if all(len(set(g)) == 1 for g in groups):
        return
    n_total = sum(len(g) for g in groups)
    grand = sum(sum(g) for g in groups) / n_total
    means = [sum(g) / len(g) for g in groups]
    ssb = sum(len(g) * (m - grand) ** 2 for g, m in zip(groups, means, strict=True))
    ssw = sum((x - m) ** 2 for g, m in zip(groups, means, strict=True) for x in g)
    t = one_way_anova([[float(x) for x in g] for g in groups], resolution=res_text)
    assert t.exact
    assert t.ss_between == float(ssb) and t.ss_within == float(ssw)  # correctly rounded
    dfb, dfw = len(groups) - 1, n_total - len(groups)
    assert t.f == float((ssb / dfb) / (ssw / dfw))
    assert t.grand_mean == float(grand)
