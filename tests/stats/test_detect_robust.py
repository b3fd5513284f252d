"""The detectors' guards against data that are not the normal theory's: the extra dispersion
pooled over a comparison (correlated lots) and the threshold raised for skewed contrasts
(skewed lots), checked against Brook & Evans (1972) Markov chains with non-normal steps and
against simulation."""

from __future__ import annotations

import numpy as np
import pytest
from lotwatch.stats.detect import arl, cusum
from lotwatch.stats.detect import contrasts as dcon
from lotwatch.stats.detect.settings import DetectorSettings
from lotwatch.stats.detect.skewness import contrast_skewness, neighbour_correlation
from scipy import stats


def _chain_arl(cdf, k: float, h: float, states: int = 300) -> float:
    """One-sided ARL from zero of S = max(0, S + X - k), alarm at S > h, for steps X with the
    given cdf (Brook & Evans 1972: the same discretisation as ``arl.arl_markov``)."""
    w = 2.0 * h / (2 * states - 1)
    centre = np.arange(states) * w
    upper = centre[None, :] + w / 2 - centre[:, None] + k
    lower = centre[None, :] - w / 2 - centre[:, None] + k
    p = cdf(upper) - cdf(lower)
    p[:, 0] = cdf(upper[:, 0])
    return float(np.linalg.solve(np.eye(states) - p, np.ones(states))[0])


def _skewed(gamma: float):
    """cdf of a standardised gamma variable with skewness ``gamma`` (shape 4 / gamma^2)."""
    shape = 4.0 / gamma ** 2
    return lambda x: stats.gamma.cdf(x * np.sqrt(shape) + shape, shape)


def test_the_chain_here_is_the_projects_chain_for_normal_steps():
    assert _chain_arl(stats.norm.cdf, 0.5, 4.0, 200) == pytest.approx(arl.arl_markov(0.5, 4.0),
                                                                      rel=1e-9)


@pytest.mark.parametrize("gamma", [0.3, 0.6])
@pytest.mark.parametrize("a", [1.4, 2.8])
def test_a_threshold_raised_for_skewness_keeps_the_run_length(gamma, a):
    """Steps with skewness 0.3-0.6 toward the alarm side: at the normal theory's decision
    interval the in-control run length falls short of a 1e5 target many times over; divided by
    ``skew_factor`` it stays within a factor 3 of it (the factor is a third-order
    approximation)."""
    target = 1e5
    k = a / 2.0
    h_z = float(arl.decision_interval_markov(k, target))
    cdf = _skewed(gamma)
    plain = _chain_arl(cdf, k, h_z)
    theta = float(cusum.skew_factor(np.array(gamma), np.array(a)))
    raised = _chain_arl(cdf, k, h_z / theta)
    assert plain < target / 3  # the problem is real
    assert target / 3 < raised < target * 3


def test_no_skewness_no_change():
    assert cusum.skew_factor(np.array([0.0, -0.5]), np.array([2.0, 2.0])).tolist() == [1.0, 1.0]


def test_skewness_is_pooled_and_ignores_the_latest_days():
    """Eight slots of one comparison: normal contrasts give little allowance; gamma contrasts
    with skewness 0.8 give an upper allowance near 0.8 less one standard error and none below; a
    step in one slot during the last ``lag`` days changes nothing."""
    rng = np.random.default_rng(1)
    S, T, days, lag = 8, 200, 84, 14
    comp = np.zeros(S, dtype=np.int64)
    valid = np.ones((S, T), dtype=bool)
    up, lo = contrast_skewness(rng.standard_normal((S, T)), valid, days, lag, comp)
    assert up[:, -1].max() < 0.15 and lo[:, -1].max() < 0.15
    shape = 4.0 / 0.8 ** 2
    z = (rng.gamma(shape, size=(S, T)) - shape) / np.sqrt(shape)
    up, lo = contrast_skewness(z, valid, days, lag, comp)
    se = np.sqrt(6.0 / (days * S * 7 / 8))
    assert up[0, -1] == pytest.approx(0.8 - se, abs=0.2)
    assert lo[0, -1] == 0.0
    stepped = z.copy()
    stepped[3, T - lag:] += 4.0
    up2, _ = contrast_skewness(stepped, valid, days, lag, comp)
    np.testing.assert_array_equal(up2[:, -1], up[:, -1])


def test_dispersion_is_pooled_over_the_comparison():
    """Contrasts whose variance is 2 (the normal theory says 1) in every slot: the pooled
    estimate is about 2, raised a little for its own uncertainty; a slot with variance 5 keeps
    (at least) a lower bound of its own estimate."""
    rng = np.random.default_rng(2)
    S, T, days = 8, 240, 84
    comp = np.zeros(S, dtype=np.int64)
    sd = np.full((S, 1), np.sqrt(2.0))
    sd[5] = np.sqrt(5.0)
    z = rng.standard_normal((S, T)) * sd
    valid = np.ones((S, T), dtype=bool)
    log_arl = np.full((S, T), np.log(1e6))
    phi = dcon._dispersion(z, valid, days, 0, comp, log_arl, 1.0, np.zeros((S, T)))
    others = np.delete(phi[:, -1], 5)
    # the pooled mean square of all eight: (7 x 2 + 5) / 8 = 2.375, times 1 + L cv^2 / 2
    assert others == pytest.approx(2.375 * 1.03, rel=0.2)
    assert len(set(np.round(others, 12))) == 1
    assert phi[5, -1] > 3.0


def _ar1(rng, S: int, T: int, rho: float, var: float) -> np.ndarray:
    """S series of an AR(1) with coefficient rho and stationary variance var."""
    e = rng.standard_normal((S, T)) * np.sqrt(var * (1 - rho ** 2))
    z = np.empty((S, T))
    z[:, 0] = rng.standard_normal(S) * np.sqrt(var)
    for t in range(1, T):
        z[:, t] = rho * z[:, t - 1] + e[:, t]
    return z


def test_dispersion_sees_correlation_between_neighbouring_days():
    """Contrasts correlated 0.3 from one day to the next (variance 2): changes two days apart
    see 2 (1 - 0.09); with the neighbours' correlation the estimate reaches the long-run
    variance a CUSUM feels, 2 (1 + 0.3) / (1 - 0.3) = 3.71 (an AR(1)'s spectrum at zero;
    Box & Jenkins), less the correlation's shrinkage by one standard error."""
    rng = np.random.default_rng(3)
    S, T, days = 8, 400, 84
    z = _ar1(rng, S, T, 0.3, 2.0)
    valid = np.ones((S, T), dtype=bool)
    comp = np.zeros(S, dtype=np.int64)
    rho = neighbour_correlation(z, valid, days, 14, comp)
    phi = dcon._dispersion(z, valid, days, 0, comp, np.full((S, T), np.log(1e6)), 1.0, rho)
    assert 2.9 < np.median(phi[:, 200:]) < 4.5
    flat = dcon._dispersion(z, valid, days, 0, comp, np.full((S, T), np.log(1e6)), 1.0,
                            np.zeros((S, T)))
    assert np.median(flat[:, 200:]) == pytest.approx(2.0 * (1 - 0.09), rel=0.2)


@pytest.mark.parametrize("rho", [0.0, 0.3, 0.6])
def test_neighbour_correlation_estimates_an_ar1s_coefficient(rho):
    """The lag-one autocorrelation of an AR(1) is its coefficient (Box & Jenkins); the pooled
    estimate is shrunk by one standard error (about 0.04 here) and never negative."""
    rng = np.random.default_rng(8)
    S, T = 8, 300
    z = _ar1(rng, S, T, rho, 1.0) + rng.normal(0.0, 3.0, (S, 1))  # each slot its own level
    r = neighbour_correlation(z, np.ones((S, T), dtype=bool), 84, 14, np.zeros(S, np.int64))
    assert np.all(r >= 0.0)
    assert np.median(r[:, 150:]) == pytest.approx(max(rho - 0.04, 0.0), abs=0.08)
    assert np.all(r[:, :22] == 0.0)  # fewer than 60 pooled days (8 slots x (t - 14 days))


def test_one_lot_a_day_correlated_lots_are_standardised_to_their_long_run_variance():
    """Six lines with one lot a day each, lots AR(1) 0.3 from day to day: the standardised
    contrasts (phi included) have a long-run variance near 1 (sums over 10 days / 10), which is
    what keeps a CUSUM's false alerts at its budget; without the neighbours' correlation it
    was about 1.7."""
    rng = np.random.default_rng(12)
    S, T = 6, 500
    lots = _ar1(rng, S, T, 0.3, 1.0)
    units = np.rint(lots / 0.01)
    n = np.ones((S, T))
    comp = np.zeros(S, dtype=np.int64)
    con = dcon.contrasts(n, units, units ** 2, comp, np.array([100.0]), np.zeros(1, bool),
                         DetectorSettings(), 0)
    z = (con.c / np.sqrt(con.v))[:, 200:]
    sums = z[:, :300].reshape(S, 30, 10).sum(axis=2)
    assert 0.7 < sums.var() / 10 < 1.35


@pytest.mark.parametrize(("nu_g", "nu_r"), [(3.0, 20.0), (8.0, 56.0), (20.0, 100.0)])
def test_spread_llr_is_the_f_distributions_likelihood_ratio(nu_g, nu_r):
    """Against scipy's F density: l(F) = ln[f(F / rho) / rho] - ln f(F)."""
    from lotwatch.stats.detect.skewness import spread_llr

    rho = 1.5 ** 2
    ratio = np.array([0.2, 0.9, 1.0, 2.5, 7.0])
    expected = (stats.f.logpdf(ratio / rho, nu_g, nu_r) - np.log(rho)
                - stats.f.logpdf(ratio, nu_g, nu_r))
    np.testing.assert_allclose(spread_llr(ratio, nu_g, nu_r, rho), expected, rtol=1e-10)
    assert spread_llr(np.array(1e12), nu_g, nu_r, rho) < nu_r / 2 * np.log(rho)


def test_a_cusum_of_spread_llrs_keeps_lordens_bound():
    """Normal data, equal variances: the CUSUM of exact log-likelihood ratios with h = ln 300
    runs at least about 300 days before a false alarm (Lorden 1971: ARL >= e^h; simulated,
    2,000 runs cut at 5,000 days, so the mean is a lower bound)."""
    from lotwatch.stats.detect.skewness import spread_llr

    rng = np.random.default_rng(5)
    runs, h = 2000, np.log(300.0)
    s = np.zeros(runs)
    length = np.zeros(runs)
    alive = np.ones(runs, dtype=bool)
    cap = 5_000
    for step in range(1, cap):
        ratio = rng.f(8, 56, runs)
        s = np.maximum(0.0, s + spread_llr(ratio, 8.0, 56.0, 2.25))
        crossed = alive & (s > h)
        length[crossed] = step
        alive &= ~crossed
        if not alive.any():
            break
    length[alive] = cap
    assert length.mean() > 300 * 0.9
