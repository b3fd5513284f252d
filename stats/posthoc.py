"""Post-hoc pairwise comparisons after a one-way layout: which groups differ.

All functions take ``samples`` (a sequence of 1-D float arrays) and ``names`` (group names in the
same order). Pairwise results are ordered (a, b) with a before b in the given order and
``diff = mean(a) − mean(b)``; ``significant`` means adjusted p < alpha.

Degenerate input never raises from deep code: when a method cannot be computed (fewer than two
groups, an empty group, non-finite values, no error degrees of freedom, zero variance where a
variance divides, a group of one where its own variance is needed) the function returns ``[]``.
``posthoc_problem(samples, names, method)`` returns the reason as a short phrase (or None), so a
caller can say why a table is empty.

Sources
- Tukey-Kramer: Tukey (1953); Kramer (1956), "Extension of multiple range tests to group means
  with unequal numbers of replications", Biometrics 12, 307-310.
- Games-Howell: Games & Howell (1976), "Pairwise multiple comparison procedures with unequal n's
  and/or variances", J. Educational Statistics 1, 113-125.
- Dunnett: Dunnett (1955), "A multiple comparison procedure for comparing several treatments with
  a control", JASA 50, 1096-1121 (two-sided, single step).
- Dunn: Dunn (1964), "Multiple comparisons using rank sums", Technometrics 6, 241-252.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from lotwatch.stats.distributions import pdunnett, ptukey, qdunnett, qtukey
from lotwatch.stats.results import DunnettComparison, PairComparison
from numpy.typing import ArrayLike
from scipy import special
from scipy import stats as sps

ADJUST_METHODS = ("holm", "bh", "by", "bonferroni", "none")
# All-pairs methods (Tukey-Kramer, Games-Howell, Dunn) stop here: k groups make k(k-1)/2 pairs
# (4,950 at 100 groups, about 130 MB; 499,500 at 1,000 groups needed many GB), and a table of
# thousands of pairs is not read by anyone. Dunnett (k - 1 comparisons) and ANOM have no limit.
MAX_PAIRWISE_GROUPS = 100


def _as_arrays(samples: Sequence[ArrayLike]) -> list[np.ndarray]:
    return [np.asarray(s, dtype=float).ravel() for s in samples]


def posthoc_problem(samples: Sequence[ArrayLike], names: Sequence[str],
                    method: str = "tukey") -> str | None:
    """Why ``method`` ("tukey", "games-howell", "dunnett", "dunn") cannot run, or None if it can."""
    arrays = _as_arrays(samples)
    if len(arrays) != len(names):
        return f"{len(arrays)} samples but {len(names)} names"
    if len(set(names)) != len(names):
        return "group names are not unique"
    if len(arrays) < 2:
        return "fewer than two groups"
    if method != "dunnett" and len(arrays) > MAX_PAIRWISE_GROUPS:
        k = len(arrays)
        return (f"{k:,} groups would make {k * (k - 1) // 2:,} pairs; all-pairs comparisons "
                f"are made for up to {MAX_PAIRWISE_GROUPS} groups. Analysis of means compares "
                "each group with the grand mean instead")
    for a, name in zip(arrays, names, strict=True):
        if a.size == 0:
            return f"group {name!r} is empty"
        if not np.all(np.isfinite(a)):
            return f"group {name!r} has a missing or non-finite value"
    n = np.array([a.size for a in arrays])
    if method == "dunn":
        pooled = np.concatenate(arrays)
        if np.all(pooled == pooled[0]):
            return "all values are tied"
        return None
    if n.sum() - len(n) < 1:
        return "no within-group degrees of freedom (every group has one value)"
    if method == "games-howell":
        small = [nm for nm, k in zip(names, n, strict=True) if k < 2]
        if small:
            return f"group {small[0]!r} has a single value (Games-Howell needs each group's variance)"
        v = np.array([np.var(a, ddof=1) for a in arrays])
        for i in range(len(v)):
            for j in range(i + 1, len(v)):
                if v[i] == 0 and v[j] == 0:
                    return f"groups {names[i]!r} and {names[j]!r} both have zero variance"
        return None
    sse = sum(float(np.sum((a - a.mean()) ** 2)) for a in arrays)
    if sse == 0:
        return "zero within-group variance"
    return None


def _pairs(k: int) -> tuple[np.ndarray, np.ndarray]:
    i, j = np.triu_indices(k, 1)
    return i, j


def _moments(arrays: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    n = np.array([a.size for a in arrays], dtype=float)
    mean = np.array([a.mean() for a in arrays])
    ss = np.array([np.sum((a - m) ** 2) for a, m in zip(arrays, mean, strict=True)])
    return n, mean, ss


def _pair_list(names: Sequence[str], i: np.ndarray, j: np.ndarray, diff: np.ndarray,
               lower: np.ndarray | None, upper: np.ndarray | None, p: np.ndarray,
               alpha: float) -> list[PairComparison]:
    out = []
    for t, (a, b) in enumerate(zip(i, j, strict=True)):
        out.append(PairComparison(
            a=names[a], b=names[b], diff=float(diff[t]),
            lower=None if lower is None else float(lower[t]),
            upper=None if upper is None else float(upper[t]),
            p=float(p[t]), significant=bool(p[t] < alpha)))
    return out


def tukey_kramer(samples: Sequence[ArrayLike], names: Sequence[str], *,
                 alpha: float = 0.05) -> list[PairComparison]:
    """Tukey-Kramer simultaneous comparisons of all pairs (equal variances).

    MSE = Σ(n_i − 1)s_i²/(N − k); SE_ab = sqrt(MSE/2·(1/n_a + 1/n_b)); q_ab = |ȳ_a − ȳ_b|/SE_ab;
    p_ab = 1 − P(q_ab; k, N − k) (studentized range); CI diff ± q(1 − alpha; k, N − k)·SE_ab.
    """
    if posthoc_problem(samples, names, "tukey") is not None:
        return []
    arrays = _as_arrays(samples)
    n, mean, ss = _moments(arrays)
    k = len(arrays)
    df = float(n.sum() - k)
    mse = float(ss.sum()) / df
    i, j = _pairs(k)
    diff = mean[i] - mean[j]
    se = np.sqrt(mse / 2.0 * (1.0 / n[i] + 1.0 / n[j]))
    p = np.clip(1.0 - np.asarray(ptukey(np.abs(diff) / se, k, df)), 0.0, 1.0)
    crit = float(qtukey(1.0 - alpha, k, df))
    return _pair_list(names, i, j, diff, diff - crit * se, diff + crit * se, p, alpha)


def games_howell(samples: Sequence[ArrayLike], names: Sequence[str], *,
                 alpha: float = 0.05) -> list[PairComparison]:
    """Games-Howell comparisons of all pairs (unequal variances).

    v_i = s_i²/n_i; SE_ab = sqrt((v_a + v_b)/2); Welch-Satterthwaite
    df_ab = (v_a + v_b)² / (v_a²/(n_a − 1) + v_b²/(n_b − 1)); p_ab = 1 − P(|diff|/SE_ab; k, df_ab);
    CI diff ± q(1 − alpha; k, df_ab)·SE_ab.
    """
    if posthoc_problem(samples, names, "games-howell") is not None:
        return []
    arrays = _as_arrays(samples)
    n, mean, ss = _moments(arrays)
    k = len(arrays)
    v = ss / (n - 1.0) / n
    i, j = _pairs(k)
    diff = mean[i] - mean[j]
    se = np.sqrt((v[i] + v[j]) / 2.0)
    df = (v[i] + v[j]) ** 2 / (v[i] ** 2 / (n[i] - 1.0) + v[j] ** 2 / (n[j] - 1.0))
    p = np.clip(1.0 - np.asarray(ptukey(np.abs(diff) / se, k, df)), 0.0, 1.0)
    crit = np.asarray(qtukey(np.full_like(df, 1.0 - alpha), k, df))
    return _pair_list(names, i, j, diff, diff - crit * se, diff + crit * se, p, alpha)


def dunnett(samples: Sequence[ArrayLike], names: Sequence[str], *, reference: str,
            alpha: float = 0.05) -> list[DunnettComparison]:
    """Dunnett's two-sided comparisons of every group with ``reference`` (single step).

    T_i = (ȳ_i − ȳ_0)/(s·sqrt(1/n_i + 1/n_0)) with s² the pooled MSE on N − k df; the T_i are
    multivariate t with ρ_ij = λ_iλ_j, λ_i = sqrt(n_i/(n_i + n_0)). p_i = 1 − P(max|T| ≤ |t_i|);
    CI diff ± c·s·sqrt(1/n_i + 1/n_0) with P(max|T| ≤ c) = 1 − alpha. Probabilities are
    deterministic Gauss quadratures (stats._mvt), so p-values are identical from run to run.
    Returns [] when the reference is not one of ``names`` or the input is degenerate.
    """
    if reference not in names or posthoc_problem(samples, names, "dunnett") is not None:
        return []
    arrays = _as_arrays(samples)
    n, mean, ss = _moments(arrays)
    k = len(arrays)
    df = float(n.sum() - k)
    s = math.sqrt(float(ss.sum()) / df)
    r = list(names).index(reference)
    others = [t for t in range(k) if t != r]
    n_o = n[others]
    diff = mean[others] - mean[r]
    se = s * np.sqrt(1.0 / n_o + 1.0 / n[r])
    t = np.abs(diff) / se
    p = np.clip(1.0 - pdunnett(t, n_o, n[r], df), 0.0, 1.0)
    crit = qdunnett(1.0 - alpha, n_o, n[r], df)
    return [DunnettComparison(group=names[g], diff=float(diff[u]),
                              lower=float(diff[u] - crit * se[u]),
                              upper=float(diff[u] + crit * se[u]),
                              p=float(p[u]), significant=bool(p[u] < alpha))
            for u, g in enumerate(others)]


def adjust_p(p: np.ndarray, method: str) -> np.ndarray:
    """Adjusted p-values: Holm (1979) step-down, Benjamini-Hochberg (1995), Benjamini-Yekutieli
    (2001), Bonferroni, or none. Monotone, capped at 1."""
    p = np.asarray(p, dtype=float)
    m = p.size
    if m == 0 or method == "none":
        return p.copy()
    if method == "bonferroni":
        return np.minimum(p * m, 1.0)
    order = np.argsort(p, kind="mergesort")
    ps = p[order]
    if method == "holm":
        adj = np.maximum.accumulate((m - np.arange(m)) * ps)
    elif method in ("bh", "by"):
        c = float(np.sum(1.0 / np.arange(1, m + 1))) if method == "by" else 1.0
        adj = np.minimum.accumulate((c * m / np.arange(1, m + 1) * ps)[::-1])[::-1]
    else:
        raise ValueError(f"unknown p-value adjustment {method!r}; use one of {ADJUST_METHODS}")
    out = np.empty_like(p)
    out[order] = np.minimum(adj, 1.0)
    return out


def dunn(samples: Sequence[ArrayLike], names: Sequence[str], *, adjust: str = "holm",
         alpha: float = 0.05) -> list[PairComparison]:
    """Dunn's (1964) pairwise z tests on mean ranks with the tie correction.

    Ranks are midranks of the pooled sample; z_ab = (R̄_a − R̄_b)/sqrt(σ²·(1/n_a + 1/n_b)) with
    σ² = N(N+1)/12 − Σ(t³ − t)/(12(N − 1)) (t = sizes of tied groups); two-sided p = 2(1 − Φ(|z|)),
    then adjusted over the k(k−1)/2 pairs. ``diff`` is R̄_a − R̄_b; lower/upper are None.
    """
    if adjust not in ADJUST_METHODS:
        raise ValueError(f"unknown p-value adjustment {adjust!r}; use one of {ADJUST_METHODS}")
    if posthoc_problem(samples, names, "dunn") is not None:
        return []
    arrays = _as_arrays(samples)
    k = len(arrays)
    n = np.array([a.size for a in arrays], dtype=float)
    pooled = np.concatenate(arrays)
    big_n = pooled.size
    ranks = sps.rankdata(pooled)
    bounds = np.concatenate([[0], np.cumsum(n).astype(int)])
    mean_rank = np.array([ranks[bounds[g]:bounds[g + 1]].mean() for g in range(k)])
    _, ties = np.unique(pooled, return_counts=True)
    ties = ties.astype(float)
    sigma2 = big_n * (big_n + 1) / 12.0 - float(np.sum(ties**3 - ties)) / (12.0 * (big_n - 1))
    i, j = _pairs(k)
    diff = mean_rank[i] - mean_rank[j]
    z = diff / np.sqrt(sigma2 * (1.0 / n[i] + 1.0 / n[j]))
    p_raw = 2.0 * special.ndtr(-np.abs(z))
    p = adjust_p(p_raw, adjust)
    return _pair_list(names, i, j, diff, None, None, p, alpha)
