"""Post-hoc pairwise comparisons against reference libraries and hand computation.

Oracles: scipy.stats.tukey_hsd (Tukey-Kramer; equal_var=False is Games-Howell),
pingouin.pairwise_gameshowell, scipy.stats.dunnett (seeded randomized integration),
statsmodels.stats.multitest.multipletests (p-value adjustment), and a by-hand Dunn (1964)
computation with scipy.stats.rankdata and the normal distribution.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from lotwatch.stats import _mvt, distributions
from lotwatch.stats.posthoc import (
    ADJUST_METHODS,
    adjust_p,
    dunn,
    dunnett,
    games_howell,
    posthoc_problem,
    tukey_kramer,
)
from scipy import stats
from statsmodels.stats.multitest import multipletests


def _data(seed: int, sizes, shifts=None, sds=None):
    rng = np.random.default_rng(seed)
    k = len(sizes)
    shifts = shifts if shifts is not None else [0.4 * (i % 3) for i in range(k)]
    sds = sds if sds is not None else [1.0 + 0.3 * (i % 2) for i in range(k)]
    samples = [rng.normal(10 + s, sd, n) for n, s, sd in zip(sizes, shifts, sds, strict=True)]
    names = [f"g{i:02d}" for i in range(k)]  # sort in the given order (pingouin sorts names)
    return samples, names


CASES = [(1, [8, 8, 8]), (2, [5, 9, 14, 6]), (3, [30, 41, 25, 60, 33, 47]),
         (4, list(range(60, 120, 5)))]


@pytest.mark.parametrize("seed,sizes", CASES)
def test_tukey_kramer_matches_scipy(seed, sizes):
    samples, names = _data(seed, sizes)
    ours = tukey_kramer(samples, names)
    ref = stats.tukey_hsd(*samples)  # oracle: scipy.stats.tukey_hsd
    ci = ref.confidence_interval(0.95)
    i, j = np.triu_indices(len(samples), 1)
    assert [(c.a, c.b) for c in ours] == [(names[a], names[b]) for a, b in zip(i, j, strict=True)]
    np.testing.assert_allclose([c.diff for c in ours], ref.statistic[i, j], rtol=1e-12)
    np.testing.assert_allclose([c.p for c in ours], ref.pvalue[i, j], rtol=1e-6, atol=1e-10)
    np.testing.assert_allclose([c.lower for c in ours], ci.low[i, j], rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose([c.upper for c in ours], ci.high[i, j], rtol=1e-6, atol=1e-9)
    assert [c.significant for c in ours] == list(ref.pvalue[i, j] < 0.05)


def test_tukey_kramer_other_alpha():
    samples, names = _data(7, [6, 7, 8, 9, 10])
    ours = tukey_kramer(samples, names, alpha=0.01)
    ci = stats.tukey_hsd(*samples).confidence_interval(0.99)  # oracle: scipy
    i, j = np.triu_indices(5, 1)
    np.testing.assert_allclose([c.lower for c in ours], ci.low[i, j], rtol=1e-6)


# scipy's Games-Howell interval calls studentized_range.ppf once per pair (~0.4 s each), so the
# 12-group case (66 pairs) runs only with the slow tests.
GH_CASES = CASES[:3] + [pytest.param(*CASES[3], marks=pytest.mark.slow)]


@pytest.mark.parametrize("seed,sizes", GH_CASES)
def test_games_howell_matches_scipy_and_pingouin(seed, sizes):
    samples, names = _data(seed, sizes, sds=[0.5 + 0.4 * i for i in range(len(sizes))])
    ours = games_howell(samples, names)
    ref = stats.tukey_hsd(*samples, equal_var=False)  # oracle: scipy (Games-Howell)
    ci = ref.confidence_interval(0.95)
    i, j = np.triu_indices(len(samples), 1)
    np.testing.assert_allclose([c.p for c in ours], ref.pvalue[i, j], rtol=1e-6, atol=1e-10)
    np.testing.assert_allclose([c.lower for c in ours], ci.low[i, j], rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose([c.upper for c in ours], ci.high[i, j], rtol=1e-6, atol=1e-9)
    frame = pd.DataFrame({"g": np.repeat(names, [len(s) for s in samples]),
                          "y": np.concatenate(samples)})
    pgr = pg.pairwise_gameshowell(frame, dv="y", between="g")  # oracle: pingouin
    assert list(zip(pgr["A"], pgr["B"], strict=True)) == [(c.a, c.b) for c in ours]
    np.testing.assert_allclose([c.diff for c in ours], pgr["diff"], rtol=1e-10)
    np.testing.assert_allclose([c.p for c in ours], pgr["pval"], rtol=1e-5, atol=1e-9)


def _scipy_dunnett(samples, names, reference, seed=2024):
    r = names.index(reference)
    others = [s for t, s in enumerate(samples) if t != r]
    return stats.dunnett(*others, control=samples[r], rng=np.random.default_rng(seed))


@pytest.mark.parametrize("seed,sizes,ref", [(11, [10, 10, 10, 10], "g00"),
                                            (12, [6, 15, 9, 20, 12], "g02"),
                                            (13, [40, 35, 52, 47, 38, 44, 50], "g06")])
def test_dunnett_matches_scipy(seed, sizes, ref):
    samples, names = _data(seed, sizes, shifts=[0.3 * i for i in range(len(sizes))])
    ours = dunnett(samples, names, reference=ref)
    sp = _scipy_dunnett(samples, names, ref)  # oracle: scipy.stats.dunnett (randomized QMC)
    assert [c.group for c in ours] == [nm for nm in names if nm != ref]
    r = names.index(ref)
    diffs = [np.mean(s) - np.mean(samples[r]) for t, s in enumerate(samples) if t != r]
    np.testing.assert_allclose([c.diff for c in ours], diffs, rtol=1e-12)
    np.testing.assert_allclose([c.p for c in ours], sp.pvalue, atol=1e-3)
    ci = sp.confidence_interval(0.95)
    np.testing.assert_allclose([c.lower for c in ours], ci.low, atol=2e-3)
    np.testing.assert_allclose([c.upper for c in ours], ci.high, atol=2e-3)


def test_dunnett_is_deterministic_bit_for_bit():
    samples, names = _data(21, [12, 9, 15, 11, 14], shifts=[0, 0.2, 0.5, 0.1, 0.8])
    first = [c.p for c in dunnett(samples, names, reference="g00")]
    # Clear every cache so the second run recomputes from scratch (common practice: an alert
    # must not flip between reruns of the same data).
    distributions._qdunnett_cached.cache_clear()
    _mvt._dunnett_interpolant.cache_clear()
    second = [c.p for c in dunnett(samples, names, reference="g00")]
    assert first == second


def test_dunnett_critical_value_matches_table_through_ci():
    # Equal n = 8, 3 treatments, df = 28: half-width / (s·sqrt(2/8)) is the critical value; compare
    # with the scipy.stats.dunnett interval (seeded) for the same data.
    samples, names = _data(31, [8, 8, 8, 8])
    ours = dunnett(samples, names, reference="g00")
    sp = _scipy_dunnett(samples, names, "g00")
    ci = sp.confidence_interval(0.95)
    np.testing.assert_allclose([c.upper - c.lower for c in ours], ci.high - ci.low, rtol=1e-3)


def _dunn_by_hand(samples, method):
    """Dunn (1964): z from mean ranks with the tie-corrected variance, two-sided normal p."""
    pooled = np.concatenate(samples)
    ranks = stats.rankdata(pooled)
    big_n = pooled.size
    _, t = np.unique(pooled, return_counts=True)
    var = big_n * (big_n + 1) / 12 - np.sum(t**3 - t) / (12 * (big_n - 1))
    cuts = np.cumsum([0] + [len(s) for s in samples])
    rbar = [ranks[cuts[g]:cuts[g + 1]].mean() for g in range(len(samples))]
    diffs, ps = [], []
    for a in range(len(samples)):
        for b in range(a + 1, len(samples)):
            d = rbar[a] - rbar[b]
            z = d / math.sqrt(var * (1 / len(samples[a]) + 1 / len(samples[b])))
            diffs.append(d)
            ps.append(2 * stats.norm.sf(abs(z)))
    sm = {"holm": "holm", "bh": "fdr_bh", "by": "fdr_by", "bonferroni": "bonferroni"}
    adj = np.array(ps) if method == "none" else multipletests(ps, method=sm[method])[1]
    return np.array(diffs), adj


@pytest.mark.parametrize("method", ADJUST_METHODS)
def test_dunn_matches_hand_computation_with_ties(method):
    rng = np.random.default_rng(5)
    # Rounded values give many ties, exercising the tie correction.
    samples = [np.round(rng.normal(mu, 1.0, n), 0) for mu, n in ((0, 9), (0.8, 12), (1.5, 7),
                                                                   (0.2, 10))]
    names = ["w", "x", "y", "z"]
    ours = dunn(samples, names, adjust=method)
    diffs, adj = _dunn_by_hand(samples, method)
    np.testing.assert_allclose([c.diff for c in ours], diffs, rtol=1e-12)
    np.testing.assert_allclose([c.p for c in ours], adj, rtol=1e-10)
    assert all(c.lower is None and c.upper is None for c in ours)


def test_dunn_agrees_with_kruskal_for_two_groups():
    # For two groups Dunn's z is the tie-corrected Kruskal-Wallis statistic's square root
    # (common practice); oracle: scipy.stats.kruskal.
    samples = [np.array([1.0, 2, 2, 4, 7]), np.array([3.0, 5, 5, 8, 9, 9])]
    ours = dunn(samples, ["a", "b"], adjust="none")
    assert ours[0].p == pytest.approx(stats.kruskal(*samples).pvalue, rel=1e-12)


@pytest.mark.parametrize("method,sm", [("holm", "holm"), ("bh", "fdr_bh"), ("by", "fdr_by"),
                                       ("bonferroni", "bonferroni")])
def test_adjust_matches_statsmodels(method, sm):
    p = np.random.default_rng(8).uniform(0, 0.2, 25) ** 2
    np.testing.assert_allclose(adjust_p(p, method), multipletests(p, method=sm)[1], rtol=1e-12)


def test_unknown_adjustment_is_a_clear_error():
    with pytest.raises(ValueError, match="unknown p-value adjustment 'sidak'"):
        dunn([np.arange(3.0), np.arange(4.0)], ["a", "b"], adjust="sidak")


def test_degenerate_inputs_return_empty_with_reason():
    ok = [np.array([1.0, 2.0, 3.0]), np.array([2.0, 3.0, 5.0])]
    cases = {
        "fewer than two groups": ([ok[0]], ["a"]),
        "group 'b' is empty": ([ok[0], np.array([])], ["a", "b"]),
        "group 'b' has a missing or non-finite value": ([ok[0], np.array([1.0, np.nan])],
                                                        ["a", "b"]),
        "zero within-group variance": ([np.ones(3), np.full(4, 2.0)], ["a", "b"]),
    }
    for reason, (samples, names) in cases.items():
        assert posthoc_problem(samples, names, "tukey") == reason
        assert tukey_kramer(samples, names) == []
        assert games_howell(samples, names) == []
        assert dunnett(samples, names, reference="a") == []
    single = [ok[0], np.array([4.0])]
    assert len(tukey_kramer(single, ["a", "b"])) == 1  # one value is fine with a pooled MSE
    assert games_howell(single, ["a", "b"]) == []
    assert "single value" in posthoc_problem(single, ["a", "b"], "games-howell")
    assert dunnett(ok, ["a", "b"], reference="nope") == []
    assert dunn([np.ones(3), np.ones(4)], ["a", "b"]) == []
    assert posthoc_problem([np.ones(3), np.ones(4)], ["a", "b"], "dunn") == "all values are tied"
    assert posthoc_problem([np.ones(1), np.ones(1)], ["a", "b"]).startswith("no within-group")
    assert posthoc_problem(ok, ["a", "a"]) == "group names are not unique"


@pytest.mark.filterwarnings("ignore:invalid value encountered:RuntimeWarning")  # scipy's diagonal
def test_one_zero_variance_group_is_fine_for_games_howell():
    samples = [np.full(5, 3.0), np.array([1.0, 2.5, 3.5, 4.0, 2.0])]
    ours = games_howell(samples, ["a", "b"])
    ref = stats.tukey_hsd(*samples, equal_var=False)  # oracle: scipy
    assert ours[0].p == pytest.approx(ref.pvalue[0, 1], rel=1e-6)
