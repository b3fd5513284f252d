"""Run lengths of the CUSUM: Siegmund's approximation and the Brook & Evans Markov chain against
published tabular-CUSUM values, against each other, and the detector's own recursion
(stats.detect.cusum.run) simulated against the chain."""

from __future__ import annotations

import numpy as np
import pytest
from lotwatch.stats.detect import arl, cusum
from lotwatch.stats.detect.contrasts import Contrasts
from lotwatch.stats.detect.settings import DetectorSettings


@pytest.mark.parametrize(("h", "published"), [(4.0, 168.0), (5.0, 465.0)])
def test_two_sided_in_control_arl_matches_the_tabular_cusum_tables(h, published):
    # Two-sided tabular CUSUM, k = 0.5: ARL0 ~ 168 (h = 4) and ~ 465 (h = 5); textbook tables
    # of the tabular CUSUM (e.g. Montgomery, Introduction to Statistical Quality Control, the
    # table of ARLs for k = 1/2) -- recalled from memory, not checked against the printed page.
    chain = arl.two_sided(arl.arl_markov(0.5, h), arl.arl_markov(0.5, h))
    assert chain == pytest.approx(published, rel=0.01)
    siegmund = arl.two_sided(arl.arl_siegmund(0.5, h), arl.arl_siegmund(0.5, h))
    assert float(siegmund) == pytest.approx(published, rel=0.02)


@pytest.mark.parametrize(("h", "published"), [(4.0, 8.38), (5.0, 10.4)])
def test_one_sigma_shift_arl_matches_the_tables(h, published):
    # Same tables, shift of 1 sigma: ~8.38 (h = 4) and ~10.4 (h = 5), from memory.
    assert arl.arl_markov(0.5, h, mu=1.0) == pytest.approx(published, rel=0.02)


@pytest.mark.parametrize("k", [0.1, 0.25, 0.5, 0.75])
@pytest.mark.parametrize("h", [2.0, 5.0, 10.0])
def test_siegmund_agrees_with_the_chain_for_small_k(k, h):
    """Siegmund's formula is an approximation for a normal random walk: within 8% of the chain
    for k <= 0.75 (the chain with 400 states is the reference)."""
    assert float(arl.arl_siegmund(k, h)) == pytest.approx(arl.arl_markov(k, h, states=400),
                                                          rel=0.08)


def test_decision_interval_inverts_siegmund():
    ks = np.array([0.05, 0.3, 1.0, 2.0])
    target = np.array([1e3, 1e5, 1e7, 1e9])
    h = arl.decision_interval(ks, target)
    np.testing.assert_allclose(arl.arl_siegmund(ks, h), target, rtol=1e-8)


@pytest.mark.parametrize("k", [0.3, 0.9, 1.7, 3.0])
@pytest.mark.parametrize("target", [2e3, 5e5, 4e7])
def test_thresholds_from_the_table_reach_the_target_by_the_chain(k, target):
    """decision_interval_markov interpolates the shipped table; the chain (400 states) at that h
    gives the target ARL within 12% (interpolation error of the 32 x 33 table)."""
    h = float(arl.decision_interval_markov(k, target))
    assert arl.arl_markov(k, h, states=400) == pytest.approx(target, rel=0.12)


@pytest.mark.parametrize("row", [0, 13, 31])
def test_the_shipped_table_equals_a_fresh_computation(row):
    from lotwatch.stats.detect._arl_table import LN_ARL

    fresh = arl.table_row(row)
    shipped = np.array([np.nan if v is None else v for v in LN_ARL[row]])
    finite = np.isfinite(fresh) & (fresh < np.log(1e14))
    # the chain's linear solve differs slightly between BLAS builds and thread counts
    np.testing.assert_allclose(shipped[finite], fresh[finite], rtol=1e-4)


def _contrasts(z: np.ndarray) -> Contrasts:
    """Standard normal contrasts with unit variance and design shift 1: the LLR step is
    z - 1/2, i.e. a tabular CUSUM with k = 0.5 in sigma units."""
    S, T = z.shape
    ones = np.ones((S, T))
    return Contrasts(c=z, v=ones, mean_ok=ones.astype(bool), delta=ones, u=np.zeros((S, T)),
                     var_u=ones, spread_ok=np.zeros((S, T), dtype=bool), phi_m=ones, phi_s=ones,
                     a_typ_m=ones, a_typ_s=ones, days_per_year=ones, groups=2 * ones,
                     ref_sd=ones)


@pytest.mark.parametrize("h", [4.0])
def test_the_detectors_recursion_has_the_chains_run_length(h, monkeypatch):
    """600 independent null runs through cusum.run (in 100-day chunks, carrying the state as the
    store does), threshold fixed at h, practical gate off: the mean run length to the first alarm
    is the chain's two-sided ARL (168 for h = 4) within 12% (simulation error about 4%)."""
    def fixed(con, s, first):
        shape = (con.c.shape[0], con.c.shape[1] - first)
        return {"mean": {"hi": np.full(shape, h), "lo": np.full(shape, h)},
                "spread": {"hi": np.full(shape, np.inf), "lo": np.full(shape, np.inf)}}

    monkeypatch.setattr(cusum, "thresholds", fixed)
    monkeypatch.setattr(cusum, "Z95", 1e9)  # the gate always passes
    rng = np.random.default_rng(2024)
    S, chunk = 600, 100
    first_alarm = np.full(S, -1)
    state = None
    settings = DetectorSettings(clear_days=10_000)
    for i in range(30):
        con = _contrasts(rng.standard_normal((S, chunk)))
        rec, events = cusum.run(con, settings, 0, state, origin=i * chunk + 1)
        for e in events:
            if e.event == "raised" and first_alarm[e.slot] < 0:
                first_alarm[e.slot] = e.t
        state = cusum.final_state(rec)
    assert (first_alarm > 0).mean() > 0.99
    expected = arl.two_sided(arl.arl_markov(0.5, h), arl.arl_markov(0.5, h))
    assert first_alarm[first_alarm > 0].mean() == pytest.approx(expected, rel=0.12)
