"""Studentized range, Dunnett and analysis-of-means distribution functions against outside sources.

Oracles: scipy.stats.studentized_range (adaptive quadrature), scipy.stats.multivariate_t /
multivariate_normal (Genz quasi-Monte-Carlo), seeded Monte-Carlo simulations written here, and
published table values quoted from memory (marked so).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from lotwatch.stats import _mvt, distributions
from lotwatch.stats.distributions import (
    panom,
    pdunnett,
    ptukey,
    qanom,
    qdunnett,
    qtukey,
)
from scipy import stats

# ------------------------------------------------------------------------- studentized range

@pytest.mark.parametrize("k", [2, 3, 5, 12, 30])
@pytest.mark.parametrize("df", [1.0, 2.5, 5.0, 10.0, 37.0, 988.0, 2.0e4, math.inf])
def test_ptukey_matches_scipy(k, df):
    # Oracle: scipy.stats.studentized_range.cdf. scipy switches to the df = inf formula above
    # df = 1e5, so finite df are kept below that.
    q = np.array([0.3, 1.0, 2.0, 3.0, 3.7, 4.5, 6.0, 9.0])
    ours = ptukey(q, k, df)
    ref = stats.studentized_range.cdf(q, k, df)
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-8)


def test_ptukey_upper_tail_pvalues():
    # Oracle: scipy.stats.studentized_range.sf (what scipy.stats.tukey_hsd reports as p-values).
    q = np.array([4.0, 5.0, 6.0, 7.0])
    ours = 1.0 - ptukey(q, 6, 40.0)
    ref = stats.studentized_range.sf(q, 6, 40.0)
    np.testing.assert_allclose(ours, ref, rtol=1e-6, atol=1e-11)


@pytest.mark.parametrize("p,k,df", [(0.95, 3, 10.0), (0.99, 5, 20.0), (0.95, 12, 988.0),
                                    (0.95, 2, 1.0), (0.90, 10, 2.0), (0.95, 4, math.inf),
                                    (0.30, 3, 5.0), (0.999, 20, 60.0)])
def test_qtukey_matches_scipy(p, k, df):
    # Oracle: scipy.stats.studentized_range.ppf.
    assert qtukey(p, k, df) == pytest.approx(stats.studentized_range.ppf(p, k, df), rel=1e-8)


@pytest.mark.parametrize("k,df,expected", [(2, math.inf, 2.772), (3, math.inf, 3.314),
                                           (4, math.inf, 3.633), (3, 10.0, 3.877),
                                           (5, 20.0, 4.232), (10, math.inf, 4.474)])
def test_qtukey_published_table(k, df, expected):
    # Upper 5% points of the studentized range (Harter 1960 tables, as reprinted in most
    # handbooks), three decimals, from memory.
    assert qtukey(0.95, k, df) == pytest.approx(expected, abs=6e-4)


def test_qtukey_inverts_ptukey_vectorised():
    df = np.linspace(3.0, 200.0, 40)
    q = qtukey(np.full(40, 0.95), 7, df)
    assert q.shape == (40,)
    np.testing.assert_allclose(ptukey(q, 7, df), 0.95, atol=1e-12)


def test_ptukey_edges():
    out = ptukey(np.array([-1.0, 0.0, np.nan, 2.0]), 3, np.array([10.0, 10.0, 10.0, -1.0]))
    assert out[0] == 0.0 and out[1] == 0.0  # common practice: a range cannot be negative
    assert math.isnan(out[2]) and math.isnan(out[3])
    assert math.isnan(qtukey(1.5, 3, 10.0)) and math.isnan(qtukey(0.95, 3, 0.0))
    assert ptukey(200.0, 3, math.inf) == 1.0  # beyond w_max the range CDF is 1 (common practice)
    with pytest.raises(ValueError, match="k must be an integer"):
        ptukey(2.0, 1, 10.0)


def test_range_cdf_interpolant_matches_direct_rule():
    # Internal consistency: the piecewise re-expansion of the Chebyshev series of W(w; k) agrees
    # with the direct quadrature W(w; k) = k ∫ φ(z)[Φ(z) − Φ(z − w)]^{k−1} dz (Hartley 1942).
    for k in (2, 12, 100):
        w = np.linspace(0.0, distributions._w_max(k), 1500)
        np.testing.assert_allclose(distributions._range_cdf(w, k),
                                   distributions._range_cdf_direct(w, k), atol=1e-12)


def test_qtukey_cache_returns_identical_value():
    first = qtukey(0.95, 9, 123.456)
    assert qtukey(0.95, 9, 123.456) == first
    assert qtukey(np.array([0.95, 0.95]), 9, 123.456)[1] == first


# ----------------------------------------------------------------------------------- Dunnett

@pytest.mark.parametrize("p,df,expected", [(2, 10.0, 2.57), (3, 10.0, 2.76), (4, 10.0, 2.89),
                                           (2, math.inf, 2.21), (3, math.inf, 2.35),
                                           (4, math.inf, 2.44), (5, 20.0, 2.73)])
def test_dunnett_two_sided_table(p, df, expected):
    # Dunnett (1964), Biometrics 20, table of two-sided 5% critical values for p treatments with
    # equal n (two decimals), from memory.
    assert qdunnett(0.95, np.full(p, 8.0), 8.0, df) == pytest.approx(expected, abs=0.006)


def test_dunnett_one_treatment_is_t():
    # With a single treatment Dunnett's statistic is the two-sample t (common practice).
    assert qdunnett(0.95, np.array([7.0]), 5.0, 10.0) == pytest.approx(
        stats.t.ppf(0.975, 10), abs=1e-8)


def test_pdunnett_matches_multivariate_normal_and_t():
    # Oracle: scipy.stats.multivariate_normal / multivariate_t .cdf (Genz QMC, seeded), with the
    # correlation rho_ij = lambda_i lambda_j of Dunnett (1955).
    n, n0 = np.array([5.0, 10.0, 30.0, 100.0]), 10.0
    lam = np.sqrt(n / (n + n0))
    corr = np.outer(lam, lam)
    np.fill_diagonal(corr, 1.0)
    for c in (1.8, 2.5, 3.1):
        lim = np.full(4, c)
        mvn = stats.multivariate_normal(cov=corr).cdf(lim, lower_limit=-lim)
        assert pdunnett(c, n, n0, math.inf)[0] == pytest.approx(mvn, abs=2e-5)
        mvt = stats.multivariate_t(shape=corr, df=7, seed=12345).cdf(lim, lower_limit=-lim)
        assert pdunnett(c, n, n0, 7.0)[0] == pytest.approx(mvt, abs=3e-4)


def test_pdunnett_quadrature_converged():
    # Internal consistency: the default rule agrees with a rule with four times as many nodes.
    n, n0 = np.array([3.0, 40.0, 200.0]), 6.0
    lam = np.sqrt(n / (n + n0))
    c = np.linspace(0.5, 4.0, 8)
    uniq, mult = _mvt.unique_with_counts(lam)
    default = _mvt._dunnett_known_variance(c, uniq, mult)
    z, wz = _mvt.composite_nodes(0.0, 9.5, 256, 12)
    tau = np.sqrt(1 - uniq**2)
    f = np.prod([(stats.norm.cdf((cc + uniq[:, None] * z) / tau[:, None])
                  - stats.norm.cdf((-cc + uniq[:, None] * z) / tau[:, None])) ** mult[:, None]
                 for cc in c], axis=1)
    fine = f @ (2 * wz * stats.norm.pdf(z))
    np.testing.assert_allclose(default, fine, atol=1e-9)


# ------------------------------------------------------------------------- analysis of means

def _anom_max_stat(n: np.ndarray, df: float | None, draws: int, seed: int) -> np.ndarray:
    """Independent Monte-Carlo of max_i |ȳ_i − ȳ|/(s·sqrt((N − n_i)/(N n_i))) under H0."""
    rng = np.random.default_rng(seed)
    big_n = n.sum()
    means = rng.standard_normal((draws, n.size)) / np.sqrt(n)
    grand = (means * n).sum(axis=1) / big_n
    t = np.abs(means - grand[:, None]) / np.sqrt((big_n - n) / (big_n * n))
    m = t.max(axis=1)
    if df is not None:
        m = m / np.sqrt(rng.chisquare(df, draws) / df)
    return m


@pytest.mark.parametrize("k,df,alpha,memory", [(3, 12, 0.05, 2.67), (4, 20, 0.05, 2.69),
                                               (5, 30, 0.01, None), (8, 40, 0.05, None)])
def test_anom_critical_values_equal_n(k, df, alpha, memory):
    # Nelson (1983), J. Quality Technology 15, exact ANOM critical values h(alpha; k, df): the two
    # quoted values are from memory; every case is verified by a seeded simulation of
    # max |T_i| under H0 (400,000 draws, tolerance 4.5 standard errors).
    n = np.full(k, 6.0)
    h = qanom(1 - alpha, n, float(df))
    if memory is not None:
        assert h == pytest.approx(memory, abs=0.006)
    m = _anom_max_stat(n, float(df), 400_000, seed=k * 1000 + df)
    covered = float(np.mean(m <= h))
    se = math.sqrt(alpha * (1 - alpha) / m.size)
    assert abs(covered - (1 - alpha)) < 4.5 * se


def test_anom_cdf_unequal_n_simulation():
    # Unequal n (Nelson 1982): seeded simulation of the statistic, several h, known and finite df.
    n = np.array([4.0, 7.0, 7.0, 15.0, 30.0])
    for df in (None, 9.0):
        m = _anom_max_stat(n, df, 400_000, seed=99)
        for h in (2.0, 2.6, 3.2):
            p = panom(h, n, math.inf if df is None else df)[0]
            emp = float(np.mean(m <= h))
            se = math.sqrt(emp * (1 - emp) / m.size)
            assert abs(p - emp) < 4.5 * se


def test_anom_two_groups_is_t():
    # With two groups both statistics equal |t| of the two-sample t test (common practice).
    assert qanom(0.95, np.array([4.0, 9.0]), 11.0) == pytest.approx(stats.t.ppf(0.975, 11))


@pytest.mark.parametrize("sizes", [[4, 7, 7, 15, 30], [1000, 5, 5], [10] * 11 + [300]])
def test_anom_known_variance_converged(sizes):
    # Internal consistency: the Fourier integral with the default nodes agrees with a rule over a
    # much longer range (v up to 2000) and denser nodes, for a mild, an extreme ([1000, 5, 5]) and
    # a one-large-group design; also the interpolant used in production.
    n = np.array(sizes, dtype=float)
    p, mult = _mvt.unique_with_counts(n / n.sum())
    x = np.linspace(0.8, 5.0, 9)
    default = _mvt._anom_known_variance(x, p, mult)
    v, wv = _mvt.composite_nodes(0.0, 2000.0, 4000, 12)
    b = v[None, :] * np.sqrt(p)[:, None]
    fine = [math.sqrt(2 / math.pi) * (np.prod(_mvt._g_cos(b, xx * np.sqrt(1 - p)[:, None])
                                              ** mult[:, None], axis=0) @ wv) for xx in x]
    np.testing.assert_allclose(default, fine, atol=2e-6)
    interp = _mvt._anom_interpolant(tuple(p), tuple(mult))
    np.testing.assert_allclose(_mvt._eval_interpolant(interp, x), fine, atol=2e-6)


def test_anom_cdf_monotone_and_within_sidak_bounds():
    # Sidak (1967) inequality: prod P(|T_i| <= h) <= P(max|T| <= h) <= P(|T_1| <= h); the CDF also
    # increases to 1 (common practice).
    n = np.full(6, 5.0)
    h = np.array([1.0, 2.0, 3.0, 4.0, 40.0])
    p = panom(h, n, 20.0)
    assert np.all(np.diff(p) > 0) and p[-1] == pytest.approx(1.0, abs=1e-9)
    single = 2 * stats.t.cdf(h, 20) - 1
    assert np.all(p >= single**6 - 1e-9) and np.all(p <= single + 1e-12)
