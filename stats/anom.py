"""Analysis of means (ANOM): which group means stand out from the grand mean.

Ott (1967), "Analysis of means - a graphical procedure", Industrial Quality Control 24, 101-109;
unequal group sizes and exact critical values per Nelson (1982), "Exact critical points for the
analysis of means", Communications in Statistics A 11, 699-709, and Nelson (1983), "Exact critical
values for use with the analysis of means", J. Quality Technology 15, 40-44.

Decision limits for group i are ȳ ± h·s·sqrt((N − n_i)/(N·n_i)), where ȳ = Σ n_i ȳ_i/N is the
grand mean, s = sqrt(MSE) on N − k degrees of freedom, and h is the exact two-sided critical value:
P(max_i |ȳ_i − ȳ|/(s·sqrt((N − n_i)/(N n_i))) ≤ h) = 1 − alpha under equal means. The statistics
are multivariate t with the negative, singular correlation
ρ_ij = −sqrt(n_i n_j/((N − n_i)(N − n_j))) (−1/(k − 1) for equal n); h is computed by a
deterministic Fourier-type quadrature (``stats._mvt.anom_cdf``), accurate to about 1e-6.
A group whose mean lies above the upper limit is flagged "above", below the lower "below", else
"within".
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from lotwatch.stats.distributions import qanom
from lotwatch.stats.results import OK, AnomGroup, AnomResult
from numpy.typing import ArrayLike


def _problem(arrays: list[np.ndarray], names: Sequence[str]) -> str | None:
    if len(arrays) != len(names):
        return f"{len(arrays)} samples but {len(names)} names"
    if len(arrays) < 2:
        return "fewer than two groups"
    for a, name in zip(arrays, names, strict=True):
        if a.size == 0:
            return f"group {name!r} is empty"
        if not np.all(np.isfinite(a)):
            return f"group {name!r} has a missing or non-finite value"
    if sum(a.size for a in arrays) - len(arrays) < 1:
        return "no within-group degrees of freedom (every group has one value)"
    return None


def analysis_of_means(samples: Sequence[ArrayLike], names: Sequence[str], *,
                      alpha: float = 0.05) -> AnomResult:
    """Ott's analysis of means with Nelson's exact critical value (see module docstring).

    Degenerate input gives an AnomResult whose ``status`` says why and whose numbers are None
    (no groups) or whose limits collapse onto the grand mean (zero within-group variance, where
    every group off the grand mean is flagged).
    """
    if not 0.0 < alpha < 1.0:
        raise ValueError(f"alpha must be between 0 and 1, got {alpha!r}")
    arrays = [np.asarray(s, dtype=float).ravel() for s in samples]
    problem = _problem(arrays, names)
    if problem is not None:
        return AnomResult(grand_mean=None, alpha=alpha, critical_value=None, groups=[],
                          status=problem)
    n = np.array([a.size for a in arrays], dtype=float)
    means = np.array([a.mean() for a in arrays])
    big_n = float(n.sum())
    k = len(arrays)
    df = big_n - k
    ss = float(sum(np.sum((a - m) ** 2) for a, m in zip(arrays, means, strict=True)))
    s = math.sqrt(ss / df)
    grand = float(np.sum(n * means) / big_n)
    h = qanom(1.0 - alpha, n, df)
    half = h * s * np.sqrt((big_n - n) / (big_n * n))
    groups = []
    for name, m, w in zip(names, means, half, strict=True):
        lo, hi = grand - float(w), grand + float(w)
        flag = "above" if m > hi else ("below" if m < lo else "within")
        groups.append(AnomGroup(group=name, mean=float(m), lower=lo, upper=hi, flag=flag))
    status = OK if ss > 0 else "zero within-group variance"
    return AnomResult(grand_mean=grand, alpha=alpha, critical_value=h, groups=groups,
                      status=status)
