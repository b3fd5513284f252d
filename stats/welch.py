"""Welch's heteroscedastic one-way ANOVA (Welch 1951, Biometrika 38, 330-336).

With weights w_i = n_i / s_i², W = Σ w_i, weighted mean m' = Σ w_i ȳ_i / W::

    A   = Σ w_i (ȳ_i − m')² / (k − 1)
    tmp = Σ (1 − w_i/W)² / (n_i − 1)
    F   = A / (1 + 2(k − 2) tmp / (k² − 1))
    df1 = k − 1,  df2 = (k² − 1) / (3 tmp),  p = P(F(df1, df2) > F)

Every group needs n_i ≥ 2 and s_i² > 0; otherwise the result's status says which condition
failed (no NaN is returned by the scalar functions; the batch function marks such rows NaN).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from lotwatch.stats._numeric import careful_mean, careful_ss
from lotwatch.stats.results import OK, WelchResult
from scipy import special


def welch_from_moments(n: Sequence[int], mean: Sequence[float],
                       var: Sequence[float]) -> WelchResult:
    """Welch's F from per-group n, mean and sample variance (ddof = 1); groups with n = 0 ignored."""
    rows = [(int(a), float(b), float(c)) for a, b, c in zip(n, mean, var, strict=True) if a > 0]
    k = len(rows)
    if k < 2:
        return WelchResult(None, None, None, None, status="fewer than two groups")
    if any(r[0] < 2 for r in rows):
        return WelchResult(None, None, None, None, status="a group has fewer than two values")
    if not all(math.isfinite(r[1]) and math.isfinite(r[2]) for r in rows):
        return WelchResult(None, None, None, None, status="non-finite values")
    if any(r[2] <= 0 for r in rows):
        return WelchResult(None, None, None, None, status="zero variance in a group")
    w = [r[0] / r[2] for r in rows]
    big_w = math.fsum(w)
    mw = math.fsum(wi * r[1] for wi, r in zip(w, rows, strict=True)) / big_w
    a = math.fsum(wi * (r[1] - mw) ** 2 for wi, r in zip(w, rows, strict=True)) / (k - 1)
    tmp = math.fsum((1 - wi / big_w) ** 2 / (r[0] - 1) for wi, r in zip(w, rows, strict=True))
    f = a / (1 + 2 * (k - 2) * tmp / (k * k - 1))
    df2 = (k * k - 1) / (3 * tmp)
    p = float(special.fdtrc(k - 1, df2, f))
    return WelchResult(f=f, df_between=float(k - 1), df_within=df2, p=p, status=OK)


def welch_anova(samples: Sequence[Any]) -> WelchResult:
    """Welch's F from raw samples (careful two-pass means and variances; empty groups ignored)."""
    arrays = [np.asarray(s, dtype=float).ravel() for s in samples]
    arrays = [a for a in arrays if a.size > 0]
    if any(not np.all(np.isfinite(a)) for a in arrays):
        return WelchResult(None, None, None, None, status="non-finite values")
    ns, means, vars_ = [], [], []
    for a in arrays:
        m = careful_mean(a)
        ns.append(a.size)
        means.append(m)
        vars_.append(careful_ss(a, m) / (a.size - 1) if a.size > 1 else 0.0)
    return welch_from_moments(ns, means, vars_)


@dataclass(frozen=True)
class WelchBatch:
    """Arrays of shape (m,): Welch F, df1, df2, p; NaN where a comparison is not computable."""

    f: np.ndarray
    df_between: np.ndarray
    df_within: np.ndarray
    p: np.ndarray


def welch_batch(n: Any, mean: Any, var: Any) -> WelchBatch:
    """Welch's F for m comparisons from arrays of shape (m, k); n = 0 pads an absent group.

    A comparison with fewer than two present groups, any present group with n < 2, or any zero
    variance gets NaN.
    """
    nn = np.atleast_2d(np.asarray(n, dtype=np.float64))
    mm = np.atleast_2d(np.asarray(mean, dtype=np.float64))
    vv = np.atleast_2d(np.asarray(var, dtype=np.float64))
    present = nn > 0
    k = present.sum(axis=1).astype(np.float64)
    bad = (present & ((nn < 2) | ~(vv > 0))).any(axis=1) | (k < 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(present & (vv > 0), nn / np.where(vv > 0, vv, 1.0), 0.0)
        big_w = w.sum(axis=1)
        mw = (w * np.where(present, mm, 0.0)).sum(axis=1) / big_w
        a = (w * (np.where(present, mm, 0.0) - mw[:, None]) ** 2).sum(axis=1) / (k - 1)
        tmp = np.where(present, (1 - w / big_w[:, None]) ** 2 / np.maximum(nn - 1, 1.0),
                       0.0).sum(axis=1)
        f = a / (1 + 2 * (k - 2) * tmp / (k * k - 1))
        df2 = (k * k - 1) / (3 * tmp)
        ok = ~bad & np.isfinite(f) & np.isfinite(df2)
        p = special.fdtrc(np.where(ok, k - 1, 1.0), np.where(ok, df2, 1.0), np.where(ok, f, 0.0))
    nan = np.nan
    return WelchBatch(f=np.where(ok, f, nan), df_between=np.where(ok, k - 1, nan),
                      df_within=np.where(ok, df2, nan), p=np.where(ok, p, nan))
