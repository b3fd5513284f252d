"""Classical one-way ANOVA (fixed effects): the table from raw samples or from sufficient statistics.

Formulas (NIST/SEMATECH e-Handbook of Statistical Methods, §7.4.3.3)::

    SS_between = Σ n_i (ȳ_i − ȳ)²        df_between = k − 1
    SS_within  = Σ Σ (y_ij − ȳ_i)²       df_within  = N − k
    MS = SS / df,  F = MS_between / MS_within,  p = P(F(k−1, N−k) > F)
    R² = SS_between / SS_total,  residual SD = √MS_within

Two numerical routes:

* **Exact** (a resolution is declared): every value is an integer number of resolution units u. With
  d = u − origin (origin an integer near the centre), n_i, Σd and Σd² are accumulated as Python
  integers and

      SS_between = Σ (Σd)_i² / n_i − (ΣΣd)² / N,     SS_within = Σ [ (Σd²)_i − (Σd)_i² / n_i ]

  are exact fractions; MS, F and R² stay exact and are rounded to double only at the end. Every
  certified value of the 11 NIST StRD one-way ANOVA datasets (Simon & Lesage 1989) is reproduced
  with a log relative error (LRE) of at least 13 (measured ≥ 14.5; tests/stats/test_anova_nist.py).
* **Float** (no resolution): values are shifted by the overall median, each group mean is the fsum
  mean with one refinement pass, and SS_within is the fsum of squared deviations from it (two-pass
  algorithm; Chan, Golub & LeVeque 1983). Measured minimum LRE over the certified values, per NIST
  dataset (tests/stats/test_anova_nist.py::test_float_path_lre_floor): SmLs01-03 15 (all
  digits), SiRstv 13.1, AtmWtAg 10.2, SmLs04-06 9.9-10.1, SmLs07-09 3.9-4.0. The lower figures
  on SmLs04-09 come from the input, not the algorithm: 1000000000000.4 as a binary double is
  already off by up to 6e-5, a sizeable part of the 0.1 spread. Declare the
  resolution to get the exact route.

Degenerate inputs give a table whose ``status`` says what happened:
``"fewer than two groups"``; ``"no within-group degrees of freedom"`` (N = k, every group has one
value: SS_between is reported, F is not); ``"all values equal"`` (F undefined, p None);
``"zero within-group variance"`` when every group is constant but the means differ: F is reported as
infinite (``math.inf``, ``None`` in JSON) and p as 0.0, since the data leave no doubt that the
means differ, and the decision sentence says so. NaN is never returned silently: non-finite input
gives status ``"non-finite values"``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal
from fractions import Fraction
from typing import Any

import numpy as np
from lotwatch.stats._numeric import (
    careful_mean,
    careful_ss,
    fmt_num,
    fmt_p,
    int_sums,
    parse_resolution,
    sqrt_fraction,
    to_units,
)
from lotwatch.stats.results import OK, AnovaTable
from scipy import special
from scipy import stats as sps

Number = Fraction | float


def one_way_anova(samples: Sequence[Any], names: Sequence[str] | None = None, *,
                  alpha: float = 0.05, resolution: str | float | None = None) -> AnovaTable:
    """One-way ANOVA table of ``samples`` (one array-like per group; empty groups are ignored).

    With ``resolution`` (text such as ``"0.1"`` is best) the exact integer route is used; values
    must be multiples of it (ValueError naming the value otherwise). ``names`` only labels error
    messages.
    """
    arrays = [np.asarray(s, dtype=float).ravel() for s in samples]
    labels = list(names) if names is not None else [f"group {i + 1}" for i in range(len(arrays))]
    kept = [(lab, a) for lab, a in zip(labels, arrays, strict=False) if a.size > 0]
    if any(not np.all(np.isfinite(a)) for _, a in kept):
        return _empty(len(kept), sum(a.size for _, a in kept), alpha, "non-finite values",
                      "The data contain NaN or infinite values; no ANOVA was computed.")
    if resolution is not None:
        res = parse_resolution(resolution)
        units = [to_units(a, res, label=f"{lab}: ") for lab, a in kept]
        flat = sorted(u for g in units for u in g)
        origin = flat[(len(flat) - 1) // 2] if flat else 0
        sums = [int_sums(g, origin) for g in units]
        return _exact_table([s[0] for s in sums], [s[1] for s in sums], [s[2] for s in sums],
                            res, origin, alpha)
    return _float_table([a for _, a in kept], alpha)


def anova_from_sums(n: Sequence[int], sum_d: Sequence[Any], sum_d2: Sequence[Any], *,
                    names: Sequence[str] | None = None, resolution: str | float | None = None,
                    origin: float = 0.0, alpha: float = 0.05) -> AnovaTable:
    """ANOVA table from per-group n, Σd and Σd² of deviations d from an origin.

    With ``resolution``: d are integer counts of resolution units and ``origin`` is an integer
    count of units, value = (origin + d) · resolution; the exact route is used (sums must be
    integers, e.g. the store's ``sum_d``/``sum_d2``). Without: d are deviations in the value's own
    units, value = origin + d, and the float route uses SS_between = Σ n_i (m_i − m)² with
    m_i = Σd/n_i. ``names`` is accepted for symmetry with the other functions and not used.
    """
    del names
    ns = [int(v) for v in n]
    keep = [i for i, v in enumerate(ns) if v > 0]
    if resolution is not None:
        res = parse_resolution(resolution)
        s1 = [_as_int(sum_d[i], "sum_d") for i in keep]
        s2 = [_as_int(sum_d2[i], "sum_d2") for i in keep]
        org = origin if isinstance(origin, int) else _as_int(origin, "origin")
        return _exact_table([ns[i] for i in keep], s1, s2, res, org, alpha)
    nk = np.array([ns[i] for i in keep], dtype=float)
    s1f = np.array([float(sum_d[i]) for i in keep])
    s2f = np.array([float(sum_d2[i]) for i in keep])
    if not (np.all(np.isfinite(s1f)) and np.all(np.isfinite(s2f))):
        return _empty(len(keep), int(nk.sum()), alpha, "non-finite values",
                      "The sums contain NaN or infinite values; no ANOVA was computed.")
    if nk.size == 0:
        return _finish(0, 0, 0.0, 0.0, None, alpha, exact=False)
    means = s1f / nk
    n_total = int(nk.sum())
    m = math.fsum((nk * means).tolist()) / n_total
    ssb = math.fsum((nk * (means - m) ** 2).tolist())
    ssw = math.fsum(np.maximum(s2f - s1f * means, 0.0).tolist())
    return _finish(len(keep), n_total, ssb, ssw, float(origin) + m, alpha, exact=False)


def _as_int(v: Any, what: str) -> int:
    if isinstance(v, (int, np.integer)):
        return int(v)
    f = float(v)
    if not math.isfinite(f) or f != int(f):
        raise ValueError(f"{what} value {v!r} is not an integer, as the exact route needs")
    return int(f)


def _exact_table(ns: list[int], s1: list[int], s2: list[int], res: Decimal, origin: int,
                 alpha: float) -> AnovaTable:
    k = len(ns)
    n_total = sum(ns)
    if k == 0:
        return _finish(0, 0, Fraction(0), Fraction(0), None, alpha, exact=True)
    r2 = Fraction(res) ** 2
    t = sum(s1)
    between_terms = [Fraction(a * a, n) for a, n in zip(s1, ns, strict=True)]
    ssb = (sum(between_terms, Fraction(0)) - Fraction(t * t, n_total)) * r2
    ssw = sum((Fraction(b) - c for b, c in zip(s2, between_terms, strict=True)), Fraction(0)) * r2
    if ssw < 0:
        raise ValueError("inconsistent sums: Σd² < (Σd)²/n in a group")
    grand = float((origin + Fraction(t, n_total)) * Fraction(res))
    return _finish(k, n_total, ssb, ssw, grand, alpha, exact=True)


def _float_table(arrays: list[np.ndarray], alpha: float) -> AnovaTable:
    k = len(arrays)
    if k == 0:
        return _finish(0, 0, 0.0, 0.0, None, alpha, exact=False)
    c = float(np.median(np.concatenate(arrays)))
    shifted = [a - c for a in arrays]
    ns = [a.size for a in shifted]
    means = [careful_mean(a) for a in shifted]
    ssw = math.fsum(careful_ss(a, m) for a, m in zip(shifted, means, strict=True))
    n_total = sum(ns)
    m = math.fsum(n * mi for n, mi in zip(ns, means, strict=True)) / n_total
    ssb = math.fsum(n * (mi - m) ** 2 for n, mi in zip(ns, means, strict=True))
    return _finish(k, n_total, ssb, ssw, c + m, alpha, exact=False)


def _to_float(x: Number) -> float:
    try:
        return float(x)
    except OverflowError:  # an exact Fraction beyond the float range
        raise ValueError("a sum of squares is too large for floating point") from None


def _sqrt(x: Number) -> float:
    return sqrt_fraction(x) if isinstance(x, Fraction) else math.sqrt(max(x, 0.0))


def _finish(k: int, n_total: int, ssb: Number, ssw: Number, grand: float | None, alpha: float,
            *, exact: bool) -> AnovaTable:
    """Fill the table from SS_between and SS_within (Fractions on the exact route)."""
    dfb, dfw = k - 1, n_total - k
    base: dict[str, Any] = dict(k=k, n_total=n_total, df_between=max(dfb, 0),
                                df_within=max(dfw, 0), alpha=alpha, grand_mean=grand, exact=exact)
    if k < 2:
        return AnovaTable(**base, ss_between=None, ss_within=None, ss_total=None,
                          ms_between=None, ms_within=None, f=None, p=None, f_crit=None,
                          r_squared=None, resid_sd=None, status="fewer than two groups",
                          decision="Fewer than two groups with data: nothing to compare.")
    sst = ssb + ssw
    msb = ssb / dfb
    f_crit = float(sps.f.isf(alpha, dfb, dfw)) if dfw > 0 else None
    common: dict[str, Any] = dict(ss_between=_to_float(ssb), ss_within=_to_float(ssw), ss_total=_to_float(sst),
                  ms_between=_to_float(msb), f_crit=f_crit,
                  r_squared=_to_float(ssb / sst) if sst > 0 else None)
    if dfw == 0:
        return AnovaTable(**base, **common, ms_within=None, f=None, p=None, resid_sd=None,
                          status="no within-group degrees of freedom",
                          decision="Every group has a single value, so the within-group "
                                   "variation cannot be estimated and F cannot be computed.")
    msw = ssw / dfw
    if ssw == 0 or msw == 0:  # msw can underflow to 0 when ssw is subnormal
        if ssb == 0:
            return AnovaTable(**base, **common, ms_within=0.0, f=None, p=None, resid_sd=0.0,
                              status="all values equal",
                              decision="All values are equal: there is no variation to test.")
        return AnovaTable(**base, **common, ms_within=0.0, f=math.inf, p=0.0, resid_sd=0.0,
                          status="zero within-group variance",
                          decision="Every group is constant but the group means differ, so F "
                                   "is infinite: the means differ beyond doubt (p = 0). Check "
                                   "the measurement resolution.")
    f_exact = msb / msw
    f = _to_float(f_exact)
    p = float(special.fdtrc(dfb, dfw, f))
    if f_crit is not None and f > f_crit:
        decision = (f"F = {fmt_num(f)} > critical F {fmt_num(f_crit)}: the group means differ at "
                    f"alpha {alpha:g} ({fmt_p(p)}).")
    else:
        decision = (f"F = {fmt_num(f)} <= critical F {fmt_num(f_crit)}: no evidence at alpha "
                    f"{alpha:g} that the group means differ ({fmt_p(p)}).")
    return AnovaTable(**base, **common, ms_within=_to_float(msw), f=f, p=p, resid_sd=_sqrt(msw),
                      status=OK, decision=decision)


def _empty(k: int, n_total: int, alpha: float, status: str, decision: str) -> AnovaTable:
    return AnovaTable(k=k, n_total=n_total, df_between=max(k - 1, 0),
                      df_within=max(n_total - k, 0), ss_between=None, ss_within=None,
                      ss_total=None, ms_between=None, ms_within=None, f=None, p=None, f_crit=None,
                      alpha=alpha, r_squared=None, resid_sd=None, grand_mean=None,
                      decision=decision, status=status)


@dataclass(frozen=True)
class AnovaBatch:
    """Arrays of shape (m,) for m comparisons; NaN where a comparison has no defined value."""

    f: np.ndarray
    p: np.ndarray
    df_between: np.ndarray
    df_within: np.ndarray
    ss_between: np.ndarray
    ss_within: np.ndarray
    eta_squared: np.ndarray
    omega_squared: np.ndarray


def within_numerator(n: np.ndarray, s1: np.ndarray, s2: np.ndarray) -> np.ndarray:
    """n·Σd² − (Σd)² per group (n times the group's sum of squared deviations from its mean),
    exact for integer sums: in int64 when it fits, else through Python integers; as float64."""
    big = float(np.max(np.abs(n.astype(np.float64) * s2.astype(np.float64)), initial=0.0))
    big = max(big, float(np.max(s1.astype(np.float64) ** 2, initial=0.0)))
    if big < 2.0 ** 62:
        return (n * s2 - s1 * s1).astype(np.float64)
    no, s1o, s2o = n.astype(object), s1.astype(object), s2.astype(object)
    return (no * s2o - s1o * s1o).astype(np.float64)


def anova_batch(n: Any, s1: Any, s2: Any) -> AnovaBatch:
    """Classical ANOVA for m comparisons at once from arrays of shape (m, k).

    ``n`` counts per group (0 pads an absent group), ``s1``/``s2`` sums and sums of squares of
    deviations from any origin shared within a comparison (float, or integer sums of integer
    deviations, whose within-group sums of squares are then exact: ``within_numerator``).
    SS_between = Σ n_i (m_i − m)², SS_within = Σ max(s2_i − s1_i·m_i, 0) with m_i = s1_i/n_i;
    eta² = SS_b/SS_t, omega² = (SS_b − df_b·MS_w)/(SS_t + MS_w) (Hays 1963). Comparisons with
    fewer than two groups, no within df, or zero SS_within get NaN for F and p. This route is
    floating point (int64 sums beyond 2^53 lose digits on conversion); ``anova_from_sums`` with a
    resolution is the exact route for a single comparison.
    """
    raw = [np.atleast_2d(np.asarray(x)) for x in (n, s1, s2)]
    exact = all(np.issubdtype(x.dtype, np.integer) for x in raw)
    nn, a1, a2 = (x.astype(np.float64) for x in raw)
    present = nn > 0
    safe_n = np.where(present, nn, 1.0)
    means = np.where(present, a1 / safe_n, 0.0)
    k = present.sum(axis=1)
    n_total = nn.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        gm = (a1 * present).sum(axis=1) / n_total
        ssb = (nn * (means - gm[:, None]) ** 2).sum(axis=1)
        if exact:
            ssw_i = within_numerator(*raw) / np.where(present, nn, 1.0)
        else:
            ssw_i = a2 - a1 * means
        ssw = np.where(present, np.maximum(ssw_i, 0.0), 0.0).sum(axis=1)
        dfb = (k - 1).astype(np.float64)
        dfw = n_total - k
        ok = (k >= 2) & (dfw > 0) & (ssw > 0)
        msw = np.where(dfw > 0, ssw / dfw, np.nan)
        f = np.where(ok, (ssb / dfb) / msw, np.nan)
        p = np.where(ok, special.fdtrc(np.where(ok, dfb, 1.0), np.where(ok, dfw, 1.0),
                                       np.where(ok, f, 0.0)), np.nan)
        sst = ssb + ssw
        eta = np.where((k >= 2) & (sst > 0), ssb / sst, np.nan)
        omega = np.where(ok, (ssb - dfb * msw) / (sst + msw), np.nan)
    return AnovaBatch(f=f, p=p, df_between=np.where(k >= 1, dfb, np.nan), df_within=dfw,
                      ss_between=ssb, ss_within=ssw, eta_squared=eta, omega_squared=omega)
