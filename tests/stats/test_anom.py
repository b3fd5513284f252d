"""Analysis of means: decision limits, flags, exact critical values and degenerate input.

Sources: Ott (1967) / Nelson (1982, 1983) formulas for the limits; critical values checked by a
seeded simulation of the ANOM statistic under H0 written here (independent of the quadrature);
published values quoted from memory are marked so.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from lotwatch.stats.anom import analysis_of_means
from lotwatch.stats.distributions import qanom
from scipy import stats


def test_limits_and_flags_by_formula():
    rng = np.random.default_rng(17)
    sizes = [6, 9, 12, 8]
    samples = [rng.normal(20.0, 1.0, n) for n in sizes]
    samples[1] = samples[1] + 3.0  # clearly high
    samples[3] = samples[3] - 3.0  # clearly low
    names = ["p", "q", "r", "s"]
    res = analysis_of_means(samples, names)
    n = np.array(sizes, dtype=float)
    big_n = n.sum()
    means = np.array([s.mean() for s in samples])
    grand = float(np.sum(n * means) / big_n)
    mse = sum(float(np.sum((s - s.mean()) ** 2)) for s in samples) / (big_n - 4)
    h = qanom(0.95, n, big_n - 4)
    # Limits grand ± h·s·sqrt((N − n_i)/(N n_i)) (Nelson 1982).
    half = h * math.sqrt(mse) * np.sqrt((big_n - n) / (big_n * n))
    assert res.status == "ok" and res.critical_value == pytest.approx(h)
    assert res.grand_mean == pytest.approx(grand, rel=1e-12)
    assert [g.group for g in res.groups] == names
    np.testing.assert_allclose([g.lower for g in res.groups], grand - half, rtol=1e-12)
    np.testing.assert_allclose([g.upper for g in res.groups], grand + half, rtol=1e-12)
    assert [g.flag for g in res.groups][1] == "above"
    assert [g.flag for g in res.groups][3] == "below"
    for g in res.groups:
        expected = "above" if g.mean > g.upper else ("below" if g.mean < g.lower else "within")
        assert g.flag == expected


def _simulate_false_flags(sizes, alpha, reps, seed):
    """Seeded simulation: the fraction of H0 data sets in which any group is flagged."""
    rng = np.random.default_rng(seed)
    n = np.array(sizes, dtype=float)
    big_n, k = n.sum(), len(sizes)
    df = big_n - k
    h = qanom(1 - alpha, n, df)
    means = rng.standard_normal((reps, k)) / np.sqrt(n)
    s = np.sqrt(rng.chisquare(df, reps) / df)
    grand = (means * n).sum(axis=1) / big_n
    half = h * s[:, None] * np.sqrt((big_n - n) / (big_n * n))
    return float(np.mean(np.any(np.abs(means - grand[:, None]) > half, axis=1)))


@pytest.mark.parametrize("sizes,alpha", [([5, 5, 5], 0.05), ([5] * 6, 0.01),
                                          ([3, 8, 8, 20, 4], 0.05), ([12, 30, 7, 7, 15, 40, 9], 0.10)])
def test_familywise_rate_by_simulation(sizes, alpha):
    # The exact h makes the chance that any group is flagged under equal means exactly alpha:
    # checked by 300,000 seeded H0 data sets (simulated sufficient statistics), 4.5 standard errors.
    rate = _simulate_false_flags(sizes, alpha, 300_000, seed=len(sizes) * 7 + int(alpha * 100))
    assert abs(rate - alpha) < 4.5 * math.sqrt(alpha * (1 - alpha) / 300_000)


def test_equal_n_table_values():
    # Nelson (1983) h(0.05; k, df) for equal n, from memory: h(0.05; 3, 12) ≈ 2.67 and
    # h(0.05; 4, 20) ≈ 2.69 (also verified by simulation in tests/stats/test_distributions.py).
    assert qanom(0.95, np.full(3, 5.0), 12.0) == pytest.approx(2.67, abs=0.006)
    assert qanom(0.95, np.full(4, 6.0), 20.0) == pytest.approx(2.69, abs=0.006)


def test_two_groups_reduce_to_t_test():
    # With k = 2 a group is flagged exactly when the two-sample pooled t test rejects
    # (common practice); oracle: scipy.stats.ttest_ind.
    a = np.array([10.1, 9.8, 10.4, 10.0, 9.9])
    b = np.array([10.6, 10.9, 10.5, 11.0])
    res = analysis_of_means([a, b], ["a", "b"])
    p = stats.ttest_ind(a, b).pvalue
    assert (p < 0.05) == any(g.flag != "within" for g in res.groups)
    assert res.critical_value == pytest.approx(stats.t.ppf(0.975, 7))


def test_degenerate_inputs():
    assert analysis_of_means([np.array([1.0, 2.0])], ["a"]).status == "fewer than two groups"
    r = analysis_of_means([np.array([1.0, 2.0]), np.array([])], ["a", "b"])
    assert r.status == "group 'b' is empty" and r.critical_value is None and r.groups == []
    r = analysis_of_means([np.array([1.0, np.nan]), np.array([2.0, 3.0])], ["a", "b"])
    assert r.status == "group 'a' has a missing or non-finite value"
    r = analysis_of_means([np.array([1.0]), np.array([2.0])], ["a", "b"])
    assert r.status.startswith("no within-group degrees of freedom")
    r = analysis_of_means([np.full(3, 1.0), np.full(3, 2.0), np.full(3, 1.5)], ["a", "b", "c"])
    assert r.status == "zero within-group variance"
    assert [g.flag for g in r.groups] == ["below", "above", "within"]
    with pytest.raises(ValueError, match="alpha must be between 0 and 1"):
        analysis_of_means([np.ones(2), np.ones(2)], ["a", "b"], alpha=1.5)


def test_deterministic():
    rng = np.random.default_rng(3)
    samples = [rng.normal(0, 1, n) for n in (7, 9, 11, 13)]
    a = analysis_of_means(samples, list("abcd"))
    b = analysis_of_means(samples, list("abcd"))
    assert a == b
