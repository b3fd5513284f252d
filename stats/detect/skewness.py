"""The shape of the day contrasts beyond their variance (pure numpy): the skewness of a
comparison's standardised mean contrasts, for the thresholds, the correlation of neighbouring
days, for the dispersion, and the exact likelihood ratio of a day's variance ratio, for the
spread detector."""

from __future__ import annotations

import numpy as np

SKEW_MIN = 60  # pooled days of contrasts a skewness estimate needs
SKEW_SHRINK = 1.0  # standard errors the skewness is shrunk by


def _recent_sum(x: np.ndarray, days: int, lag: int) -> np.ndarray:
    """Per slot and day t, the sum of x over the days ``t - lag - days .. t - lag - 1``."""
    S, T = x.shape
    cs = np.zeros((S, T + 1))
    np.cumsum(x, axis=1, out=cs[:, 1:])
    t = np.arange(T)
    return cs[:, np.clip(t - lag, 0, T)] - cs[:, np.clip(t - lag - days, 0, T)]


def _pooled(comp: np.ndarray, cnt: np.ndarray, *parts: np.ndarray
            ) -> tuple[np.ndarray, np.ndarray]:
    """Sums over each comparison's slots of the day counts (slots with more than two days) and
    of ``parts``: an array (1 + len(parts), comparisons, days), and each comparison's slots."""
    C = int(comp.max()) + 1
    tot = np.zeros((1 + len(parts), C, cnt.shape[1]))
    for i, x in enumerate((np.where(cnt > 2, cnt, 0.0), *parts)):
        np.add.at(tot[i], comp, x)
    return tot, np.bincount(comp, minlength=C).astype(np.float64)[:, None]


def contrast_skewness(z: np.ndarray, valid: np.ndarray, days: int, lag: int, comp: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray]:
    """The skewness of the standardised contrasts that a detector may rely on, per slot and
    day: ``(upper, lower)``, each >= 0, for the upward and the downward side.

    Pooled over the comparison's slots, from the days ``t - lag - days .. t - lag - 1`` (the
    most recent ``lag`` days are left out, so a change being looked for does not feed it),
    each slot's values centred on its own mean over those days::

        g = M3 / M2^(3/2),   M_r = sum_s sum_days (z - zbar_s)^r / N

    and shrunk toward zero by one standard error, ``sqrt(6 / N_eff)`` (the large-sample SE of
    a sample skewness; ``N_eff = N (K - 1) / K`` for K mirrored group-vs-rest contrasts):
    ``upper = max(g - SE, 0)``, ``lower = max(-g - SE, 0)``. Normal data give (0, 0) mostly, and
    a small allowance otherwise (it only ever raises a threshold). Skewed values (a one-sided tail of the lots) make one side's CUSUM cross its
    threshold far more often than the normal theory says; ``cusum.thresholds`` raises that
    side's threshold by the skewness."""
    y = np.where(valid, z, 0.0)

    def window(x: np.ndarray) -> np.ndarray:
        return _recent_sum(x, days, lag)

    cnt, s1, s2, s3 = window(valid.astype(np.float64)), window(y), window(y * y), window(y ** 3)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = s1 / cnt
        m2 = np.where(cnt > 2, s2 - cnt * mean ** 2, 0.0)
        m3 = np.where(cnt > 2, s3 - 3.0 * mean * s2 + 2.0 * cnt * mean ** 3, 0.0)
    tot, members = _pooled(comp, cnt, m2, m3)
    with np.errstate(invalid="ignore", divide="ignore"):
        g = (tot[2] / tot[0]) / (tot[1] / tot[0]) ** 1.5
        se = np.sqrt(6.0 / (tot[0] * np.maximum(members - 1.0, 1.0) / members))
    ok = (tot[0] >= SKEW_MIN) & np.isfinite(g)
    upper = np.where(ok, np.maximum(g - SKEW_SHRINK * se, 0.0), 0.0)[comp]
    lower = np.where(ok, np.maximum(-g - SKEW_SHRINK * se, 0.0), 0.0)[comp]
    return upper, lower


RHO_MAX = 0.8  # the largest correlation of neighbouring days allowed for (a factor of 25)


def neighbour_correlation(z: np.ndarray, valid: np.ndarray, days: int, lag: int,
                          comp: np.ndarray) -> np.ndarray:
    """The correlation of a comparison's standardised contrasts on neighbouring days with data,
    per slot and day, for the dispersion (``contrasts._dispersion``): from the same days as
    ``contrast_skewness`` (the most recent ``lag`` left out, so a change being looked for does
    not feed it), each slot centred on its own mean::

        r = sum_s sum (z_t - zbar_s)(z_prev - zbar_s) / sum_s sum (z_t - zbar_s)^2

    pooled over the comparison, shrunk toward zero by one standard error ``1 / sqrt(N_eff)``
    (``N_eff`` as for the skewness), and kept within [0, RHO_MAX]: only a positive correlation
    makes a CUSUM's in-control run shorter. 0 with fewer than 60 pooled days."""
    S, T = z.shape
    # each day's previous day with data: the running maximum of the valid days' indices
    last = np.maximum.accumulate(np.where(valid, np.arange(T), -1), axis=1)
    before = np.full((S, T), -1)
    before[:, 1:] = last[:, :-1]
    prev = np.where(before >= 0, np.take_along_axis(z, np.maximum(before, 0), axis=1), np.nan)
    pair = valid & (before >= 0) & np.isfinite(prev)
    y = np.where(valid, z, 0.0)
    yp = np.where(pair, prev, 0.0)
    yc = np.where(pair, y, 0.0)

    def window(x: np.ndarray) -> np.ndarray:
        return _recent_sum(x, days, lag)

    cnt, s1, s2 = window(valid.astype(np.float64)), window(y), window(y * y)
    npair, sxy, sx, sy = window(pair.astype(np.float64)), window(yc * yp), window(yc), window(yp)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = s1 / cnt
        m2 = np.where(cnt > 2, s2 - cnt * mean ** 2, 0.0)
        c1 = np.where(npair > 2, sxy - mean * (sx + sy) + npair * mean ** 2, 0.0)
    tot, members = _pooled(comp, cnt, m2, c1)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = tot[2] / tot[1]
        se = 1.0 / np.sqrt(tot[0] * np.maximum(members - 1.0, 1.0) / members)
    ok = (tot[0] >= 60) & np.isfinite(r)
    return np.where(ok, np.clip(r - se, 0.0, RHO_MAX), 0.0)[comp]


def spread_llr(ratio: np.ndarray, nu_g: np.ndarray, nu_r: np.ndarray, rho: float) -> np.ndarray:
    """The log-likelihood ratio of "the group's variance is ``rho`` times the rest's" against
    "they are equal", from one day's ratio ``F = v_g / v_r`` of the two within-day variances
    with ``nu_g`` and ``nu_r`` degrees of freedom (F-distributed under equality for normal
    data; the density of ``F / rho`` divided by ``rho`` under the alternative)::

        l = -(nu_g / 2) ln rho - ((nu_g + nu_r) / 2) ln[(1 + nu_g F / (rho nu_r))
                                                          / (1 + nu_g F / nu_r)]

    Increasing in F and bounded above by ``(nu_r / 2) ln rho``. A CUSUM of exact
    log-likelihood ratios has an in-control run length of at least ``e^h`` (Lorden 1971), so
    its threshold needs no normal approximation; scale CUSUMs: Hawkins & Olwell (1998), ch. 6.
    Non-normal data (heavy tails) are allowed for by shrinking both degrees of freedom by the
    measured extra dispersion of the log ratio (a chi-square with the same variance of its
    log)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        a = nu_g * ratio / nu_r
        return (-(nu_g / 2.0) * np.log(rho)
                - ((nu_g + nu_r) / 2.0) * (np.log1p(a / rho) - np.log1p(a)))
