"""Capability per group from the group's own spread (issue 11, items 1 and 5).

Sources: Montgomery, Introduction to Statistical Quality Control, §8.2 (Cp, Cpk, Pp, Ppk);
d2 = 1.128 for moving ranges of two (common practice; Montgomery Appendix VI); Bissell (1990)
for the Cpk interval; numpy/scipy as oracles for SDs and the skewness test.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from lotwatch.stats.battery import run_battery
from lotwatch.stats.capability import NO_SPREAD, capability
from lotwatch.stats.checks import brown_forsythe
from lotwatch.stats.spread import overall_sd, within_sd


def test_individuals_use_the_average_moving_range_over_d2() -> None:
    x = [10.0, 10.4, 10.1, 10.5, 10.2]
    # moving ranges 0.4, 0.3, 0.4, 0.3: mean 0.35; sigma = 0.35 / 1.128 (d2, common practice)
    sd, how = within_sd(x, resolution="0.1")
    assert sd == pytest.approx(0.35 / 1.128, rel=1e-12)
    assert how == "average moving range / 1.128"
    c = capability("A", x, lsl=9.0, usl=11.0, resolution="0.1")
    mean = float(np.mean(x))
    assert c.cpk == pytest.approx(min(11 - mean, mean - 9) / (3 * 0.35 / 1.128))
    assert c.ppk == pytest.approx(min(11 - mean, mean - 9) / (3 * np.std(x, ddof=1)))


def test_pooled_within_lots_when_lots_have_replicates() -> None:
    rng = np.random.default_rng(7)
    lots = np.repeat(np.arange(20), 2)
    x = np.round(np.repeat(rng.normal(50, 1, 20), 2) + rng.normal(0, 0.2, 40), 2)
    sd, how = within_sd(x, lots, resolution="0.01")
    # oracle: one-way ANOVA on lots; pooled within SD = sqrt(MS_within), by numpy
    groups = [x[lots == k] for k in range(20)]
    ms_within = sum(((g - g.mean()) ** 2).sum() for g in groups) / (40 - 20)
    assert how == "pooled within lots"
    assert sd == pytest.approx(math.sqrt(ms_within), rel=1e-12)


def test_each_group_reads_its_own_spread_in_the_battery() -> None:
    # a night shift with 2.5x the spread of the others, as in the demo's cap_torque
    rng = np.random.default_rng(11)
    tight = [np.round(rng.normal(5.0, 0.08, 60), 2) for _ in range(2)]
    wide = np.round(rng.normal(5.0, 0.21, 60), 2)
    r = run_battery([*tight, wide], ["early", "late", "night"], resolution="0.01",
                    lsl=4.5, usl=5.5)
    caps = {c.group: c for c in r.capability}
    for name, x in zip(["early", "late", "night"], [*tight, wide], strict=True):
        mean = float(np.mean(x))
        s = float(np.std(x, ddof=1))  # numpy oracle
        assert caps[name].ppk == pytest.approx(min(5.5 - mean, mean - 4.5) / (3 * s), rel=1e-9)
        mr = float(np.mean(np.abs(np.diff(x)))) / 1.128
        assert caps[name].cpk == pytest.approx(min(5.5 - mean, mean - 4.5) / (3 * mr), rel=1e-9)
    assert caps["night"].cpk < 0.6 * min(caps["early"].cpk, caps["late"].cpk)
    assert caps["night"].ppk < 0.6 * min(caps["early"].ppk, caps["late"].ppk)


def test_a_constant_group_has_sd_exactly_zero_and_no_capability() -> None:
    # np.std of 0.1 repeated leaves ~1.7e-17 (one-ulp error of the floating mean)
    assert overall_sd([0.1] * 3, "0.1") == 0.0
    assert overall_sd([500.1] * 30, "0.1") == 0.0
    r = run_battery([[500.1] * 5, [500.0, 500.2, 500.1, 499.9, 500.3]], ["A", "B"],
                    resolution="0.1", lsl=499.0, usl=501.0)
    a = next(g for g in r.groups if g.name == "A")
    assert a.sd == 0.0
    cap = next(c for c in r.capability if c.group == "A")
    assert cap.status == NO_SPREAD and cap.ppk is None and cap.pp is None


def test_brown_forsythe_with_two_values_per_group_is_undefined() -> None:
    # |x - median| is the same for both values of a pair: 0/0 by construction, not F = 1e31
    t = brown_forsythe([[0.1, 0.7], [0.2, 0.9], [0.3, 1.4]])
    assert t.status == "undefined" and t.statistic is None and t.p is None
    r = run_battery([[0.1, 0.7], [0.2, 0.9], [0.3, 1.4]], ["a", "b", "c"], resolution="0.1")
    assert "Brown-Forsythe" not in r.recommendation.reason


def test_clearly_skewed_data_carry_a_caveat() -> None:
    rng = np.random.default_rng(3)
    skewed = np.round(rng.lognormal(0.0, 0.8, 200), 3)
    from scipy import stats as sps

    assert sps.skewtest(skewed).pvalue < 0.01  # scipy oracle: clearly skewed
    c = capability("A", skewed, lsl=None, usl=10.0, resolution="0.001")
    assert c.caveat is not None and "skewed to the right" in c.caveat
    normal = np.round(rng.normal(0, 1, 200), 3)
    assert capability("B", normal, lsl=-4.0, usl=4.0, resolution="0.001").caveat is None
