"""One rule for reading Welch (issue 11, item 6): the battery's recommendation and the review's
routing both follow stats.welch_rule (Bartlett p < alpha). Oracle for the two spread tests:
scipy.stats.bartlett and scipy.stats.levene(center="median") (Brown-Forsythe)."""

from __future__ import annotations

import numpy as np
from lotwatch.stats.battery import run_battery
from lotwatch.stats.welch_rule import reads_welch
from scipy import stats as sps


def _groups() -> list[np.ndarray]:
    rng = np.random.default_rng(0)
    a = np.round(rng.normal(10, 1, 30), 1)
    b = np.round(rng.normal(10, 1, 30), 1)
    b[0], b[1] = 16.0, 4.5  # two outliers: Bartlett reacts, Brown-Forsythe does not
    return [a, b]


def test_the_battery_reads_welch_by_the_same_rule_as_the_review() -> None:
    a, b = _groups()
    assert sps.bartlett(a, b).pvalue < 0.05  # scipy oracle
    assert sps.levene(a, b, center="median").pvalue > 0.05  # scipy oracle
    r = run_battery([a, b], ["A", "B"], resolution="0.1")
    assert reads_welch(r.bartlett.p, 0.05)
    assert r.recommendation.test == "Welch ANOVA"  # Brown-Forsythe alone would say classical
    assert "Bartlett" in r.recommendation.reason


def test_reads_welch_is_elementwise_and_ignores_unknown_p() -> None:
    got = reads_welch(np.array([0.01, 0.2, np.nan]), 0.05)
    assert got.tolist() == [True, False, False]
    assert reads_welch(0.049, 0.05) is True and reads_welch(0.05, 0.05) is False
