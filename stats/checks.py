"""Assumption checks and companions of the one-way ANOVA, and the choice of which test to read.

Every function returns a ``TestResult`` (or a sentence) with a plain-language sentence.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from decimal import Decimal
from typing import Any

import numpy as np
from lotwatch.stats._numeric import careful_mean, fmt_num, fmt_p, parse_resolution
from lotwatch.stats.anova import one_way_anova
from lotwatch.stats.results import OK, Recommendation, TestResult
from lotwatch.stats.welch_rule import reads_welch
from scipy import stats as sps

SHAPIRO_MAX_N = 5000


def _arrays(samples: Sequence[Any]) -> list[np.ndarray]:
    arrays = [np.asarray(s, dtype=float).ravel() for s in samples]
    return [a for a in arrays if a.size > 0]


def _bad(name: str, status: str, sentence: str) -> TestResult:
    return TestResult(name=name, statistic=None, p=None, sentence=f"{name}: {sentence}",
                      status=status)


def _nonfinite(arrays: list[np.ndarray]) -> bool:
    return any(not np.all(np.isfinite(a)) for a in arrays)


def kruskal_wallis(samples: Sequence[Any], *, alpha: float = 0.05) -> TestResult:
    """Kruskal-Wallis H with the tie correction (Kruskal & Wallis 1952).

    H = [12 / (N(N+1))] Σ R_i²/n_i − 3(N+1), divided by C = 1 − Σ(t³ − t)/(N³ − N) over tie
    groups of size t; p from χ²(k − 1).
    """
    name = "Kruskal-Wallis"
    arrays = _arrays(samples)
    if _nonfinite(arrays):
        return _bad(name, "non-finite values", "The data contain NaN or infinite values.")
    k = len(arrays)
    if k < 2:
        return _bad(name, "fewer than two groups", "Fewer than two groups: nothing to compare.")
    allv = np.concatenate(arrays)
    n_total = allv.size
    ranks = sps.rankdata(allv)
    _, counts = np.unique(allv, return_counts=True)
    c = 1.0 - float(np.sum(counts.astype(float) ** 3 - counts)) / (n_total ** 3 - n_total)
    if c <= 0:
        return _bad(name, "all values tied", "All values are equal, so ranks carry no information.")
    pos = 0
    total = 0.0
    for a in arrays:
        r = ranks[pos:pos + a.size]
        pos += a.size
        total += float(r.sum()) ** 2 / a.size
    h = (12.0 / (n_total * (n_total + 1)) * total - 3 * (n_total + 1)) / c
    h = max(h, 0.0)
    p = float(sps.chi2.sf(h, k - 1))
    verdict = ("the group distributions differ in location" if p < alpha
               else "no evidence that the group distributions differ in location")
    return TestResult(name=name, statistic=h, p=p, df=float(k - 1), status=OK,
                      sentence=f"Kruskal-Wallis H = {fmt_num(h)} on {k - 1} df ({fmt_p(p)}): "
                               f"{verdict} at alpha {alpha:g}.")


def brown_forsythe(samples: Sequence[Any], *, alpha: float = 0.05) -> TestResult:
    """Brown-Forsythe test of equal spreads (Brown & Forsythe 1974): Levene's test centred on medians.

    z_ij = |y_ij − median_i|; the statistic is the one-way ANOVA F of the z_ij on (k − 1, N − k) df.
    """
    name = "Brown-Forsythe"
    arrays = _arrays(samples)
    if _nonfinite(arrays):
        return _bad(name, "non-finite values", "The data contain NaN or infinite values.")
    if len(arrays) < 2:
        return _bad(name, "fewer than two groups", "Fewer than two groups: nothing to compare.")
    z = [np.abs(a - np.median(a)) for a in arrays]
    if all(float(np.ptp(a)) == 0 for a in arrays):
        same = float(np.ptp(np.concatenate(arrays))) == 0
        return _bad(name, "all values equal" if same else "zero within-group variance",
                    "All values are equal." if same else
                    "Every group is constant, so spreads cannot be compared.")
    if all(a.size <= 2 for a in arrays):
        # Two values sit equally far from their median, so every group's distances are equal
        # and the statistic is 0/0; floating point would turn it into rounding noise.
        return _bad(name, "undefined",
                    "Undefined: with at most two values per group each group's distances from "
                    "its median are equal, so Brown-Forsythe is 0/0.")
    t = one_way_anova(z, alpha=alpha)
    if t.status != OK or t.f is None or t.p is None or not math.isfinite(t.f):
        return _bad(name, t.status, "Spreads cannot be compared: " + t.decision)
    differ = t.p < alpha
    verdict = ("the group spreads differ" if differ
               else "no evidence that the group spreads differ")
    return TestResult(name=name, statistic=t.f, p=t.p, df=float(t.df_between), status=OK,
                      sentence=f"Brown-Forsythe F = {fmt_num(t.f)} ({fmt_p(t.p)}): {verdict} at "
                               f"alpha {alpha:g}.")


def bartlett_test(samples: Sequence[Any], *, alpha: float = 0.05) -> TestResult:
    """Bartlett's test of equal variances (Bartlett 1937); sensitive to non-normality.

    T = [(N − k) ln s_p² − Σ (n_i − 1) ln s_i²] / [1 + (Σ 1/(n_i − 1) − 1/(N − k)) / (3(k − 1))],
    p from χ²(k − 1).
    """
    name = "Bartlett"
    arrays = _arrays(samples)
    if _nonfinite(arrays):
        return _bad(name, "non-finite values", "The data contain NaN or infinite values.")
    k = len(arrays)
    if k < 2:
        return _bad(name, "fewer than two groups", "Fewer than two groups: nothing to compare.")
    if any(a.size < 2 for a in arrays):
        return _bad(name, "a group has fewer than two values",
                    "Bartlett's test needs at least two values in every group.")
    ns = np.array([a.size for a in arrays], dtype=float)
    v = np.array([float(np.var(a - careful_mean(a), ddof=1)) for a in arrays])
    if np.any(v <= 0):
        return _bad(name, "zero variance in a group",
                    "A group has no variation, so variances cannot be compared by Bartlett's test.")
    n_total = ns.sum()
    sp2 = float(np.sum((ns - 1) * v) / (n_total - k))
    num = (n_total - k) * math.log(sp2) - float(np.sum((ns - 1) * np.log(v)))
    den = 1 + (float(np.sum(1 / (ns - 1))) - 1 / (n_total - k)) / (3 * (k - 1))
    t = num / den
    p = float(sps.chi2.sf(t, k - 1))
    verdict = ("the group variances differ" if p < alpha
               else "no evidence that the group variances differ")
    return TestResult(name=name, statistic=t, p=p, df=float(k - 1), status=OK,
                      sentence=f"Bartlett chi-square = {fmt_num(t)} on {k - 1} df ({fmt_p(p)}): "
                               f"{verdict} at alpha {alpha:g} (this test also reacts to "
                               f"non-normal data).")


def residual_normality(samples: Sequence[Any], *, alpha: float = 0.05) -> TestResult:
    """Normality of the residuals y_ij − ȳ_i pooled over groups.

    Shapiro-Wilk (Shapiro & Wilk 1965; Royston 1995 algorithm as in scipy) for 3 ≤ N ≤ 5000;
    above 5000 the D'Agostino-Pearson K² omnibus test of skewness and kurtosis (D'Agostino &
    Pearson 1973; D'Agostino, Belanger & D'Agostino 1990), since Shapiro-Wilk p-values are not
    calibrated past n = 5000.
    """
    arrays = _arrays(samples)
    if _nonfinite(arrays):
        return _bad("Shapiro-Wilk", "non-finite values", "The data contain NaN or infinite values.")
    resid = np.concatenate([a - careful_mean(a) for a in arrays]) if arrays else np.array([])
    n = resid.size
    if n < 3:
        return _bad("Shapiro-Wilk", "too few values", "Fewer than three residuals: normality "
                    "cannot be checked.")
    scale = float(np.max(np.abs(resid)))
    if scale == 0 or float(np.ptp(resid)) <= 1e-12 * max(scale, 1.0):
        return _bad("Shapiro-Wilk", "zero within-group variance",
                    "Every residual is zero: normality cannot be checked.")
    if n <= SHAPIRO_MAX_N:
        name = "Shapiro-Wilk"
        res = sps.shapiro(resid)
        stat, p = float(res.statistic), float(res.pvalue)
        label = f"Shapiro-Wilk W = {stat:.4f}"
    else:
        name = "D'Agostino-Pearson"
        res = sps.normaltest(resid)
        stat, p = float(res.statistic), float(res.pvalue)
        label = f"D'Agostino-Pearson K2 = {fmt_num(stat)}"
    verdict = ("the residuals depart from a normal distribution" if p < alpha
               else "no evidence that the residuals depart from a normal distribution")
    return TestResult(name=name, statistic=stat, p=p, status=OK,
                      sentence=f"{label} on {n} residuals ({fmt_p(p)}): {verdict} at alpha "
                               f"{alpha:g}.")


def resolution_check(sd_within: float | None, resolution: str | float | Decimal | None,
                     tolerance: float | None = None) -> str | None:
    """A warning sentence when the measurement resolution is coarse, else None.

    Common practice (the "ten-to-one rule" of measurement-system analysis): the resolution should
    be no coarser than one tenth of the process spread (taken as 6·SD within groups) or of the
    tolerance (USL − LSL). Coarse resolution makes many ties, which distort rank tests, normality
    tests and variance comparisons.
    """
    if resolution is None:
        return None
    res = float(parse_resolution(resolution)) if not isinstance(resolution, float) else resolution
    problems = []
    if sd_within is not None and math.isfinite(sd_within):
        if sd_within == 0:
            problems.append("every group is constant at this resolution")
        elif res > 6 * sd_within / 10:
            problems.append(f"it is {res / (6 * sd_within):.2g} of the process spread "
                            f"(6 x within-group SD = {fmt_num(6 * sd_within)})")
    if tolerance is not None and math.isfinite(tolerance) and tolerance > 0 and res > tolerance / 10:
        problems.append(f"it is {res / tolerance:.2g} of the tolerance ({fmt_num(tolerance)})")
    if not problems:
        return None
    return (f"Measurement resolution {fmt_num(res)} is coarse: " + "; ".join(problems) +
            ". Aim for one tenth or finer; ties distort the rank, normality and spread tests.")


def recommend(spread: TestResult, normality: TestResult, ns: Sequence[int], *,
              alpha: float = 0.05, strong_alpha: float = 0.01,
              small_n: int = 30) -> Recommendation:
    """Which omnibus test and post-hoc procedure to read.

    * spreads differ (``spread``: Bartlett, the one rule of ``stats.welch_rule``): Welch ANOVA
      with Games-Howell, which do not
      assume equal variances (Welch 1951; Games & Howell 1976);
    * otherwise residuals strongly non-normal (p < ``strong_alpha``) and the smallest group has
      fewer than ``small_n`` values, where the central limit theorem gives little protection:
      Kruskal-Wallis with Dunn's test (Dunn 1964);
    * otherwise the classical ANOVA with Tukey-Kramer (Kramer 1956).
    The thresholds are common practice, not a published rule.
    """
    min_n = min(ns) if len(ns) else 0
    if spread.status == OK and spread.p is not None and reads_welch(spread.p, alpha):
        return Recommendation(
            test="Welch ANOVA", posthoc="Games-Howell",
            reason=f"The group spreads differ ({spread.name} {fmt_p(spread.p)}), so read "
                   "Welch's ANOVA and Games-Howell, which do not assume equal variances.")
    if (normality.status == OK and normality.p is not None and normality.p < strong_alpha
            and min_n < small_n):
        return Recommendation(
            test="Kruskal-Wallis", posthoc="Dunn",
            reason=f"The residuals are strongly non-normal ({normality.name} "
                   f"{fmt_p(normality.p)}) and the smallest group has only {min_n} values, so "
                   "read the rank-based Kruskal-Wallis test and Dunn's comparisons.")
    why = []
    why.append("spreads are similar" if spread.status == OK else
               f"spreads could not be compared ({spread.status})")
    if normality.status != OK:
        why.append(f"normality could not be checked ({normality.status})")
    elif normality.p is not None and normality.p < strong_alpha:
        why.append(f"groups are large enough (smallest {min_n}) for the mild non-normality")
    else:
        why.append("residuals look close enough to normal")
    return Recommendation(test="classical ANOVA", posthoc="Tukey-Kramer",
                          reason="The " + " and ".join(why) + ", so read the classical ANOVA and "
                                 "Tukey-Kramer comparisons.")
