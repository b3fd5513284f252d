"""Fast, deterministic distribution functions for the post-hoc tests.

Studentized range (Tukey 1953; Copenhaver & Holland 1988)
    For k independent N(0,1) variables the range W has CDF
    ``W(w; k) = k ∫ φ(z) [Φ(z) − Φ(z − w)]^{k−1} dz`` (Hartley 1942), and the studentized range
    Q = W/s with s = sqrt(chi2_df/df) independent has ``P(q; k, df) = ∫ f_df(s) W(qs; k) ds``.
    As in Copenhaver & Holland (1988) and R's ptukey (AS 190 lineage) both integrals are fixed
    Gauss-Legendre quadratures. For speed, W(·; k) is computed once per k at Chebyshev points with
    a fine inner rule and kept as a Chebyshev interpolant on [0, w_max(k)] (W = 1 beyond, to within
    1e-17); the outer integral then costs one interpolant evaluation per node. Absolute accuracy
    is about 1e-9 (largest difference from scipy.stats.studentized_range measured over k = 2..50,
    df = 1..9e4 and inf: 2e-9; tests/stats/test_distributions.py checks 1e-8), so upper-tail
    p-values below ~1e-9 are only accurate in absolute terms.

Critical values (quantiles) are found by safeguarded Newton iteration on the CDF and kept in an
LRU cache (4096 entries) keyed on arguments rounded to 12 significant digits, so repeated windows
do not pay for them again.

Dunnett (1955) and analysis-of-means (Nelson 1982) critical values come from the deterministic
multivariate-t quadratures in ``stats._mvt``.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from functools import lru_cache

import numpy as np
from lotwatch.stats import _mvt
from numpy.polynomial import chebyshev as cheb
from scipy import optimize, special
from scipy import stats as sps

_QT_CACHE_SIZE = 4096


def _range_cdf_direct(w: np.ndarray, k: int) -> np.ndarray:
    """W(w; k) = k ∫ φ(z) [Φ(z) − Φ(z − w)]^{k−1} dz by fine composite Gauss-Legendre."""
    z, wz = _mvt.composite_nodes(-9.0, 9.0, 48, 16)
    dens = wz * np.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)
    w = np.asarray(w, dtype=float)[..., None]
    inner = np.clip(special.ndtr(z) - special.ndtr(z - w), 0.0, 1.0) ** (k - 1)
    return k * (inner @ dens)


def _w_max(k: int) -> float:
    """Range beyond which 1 − W(w; k) < 1e-17, from 1 − W ≤ k(k−1)·Φ(−w/√2) (Bonferroni)."""
    return float(-math.sqrt(2.0) * special.ndtri(1e-17 / (k * (k - 1))))


@lru_cache(maxsize=128)
def _range_interpolant(k: int) -> _mvt.Piecewise:
    """W(·; k) on [0, w_max(k)]: a global Chebyshev series, re-expanded piecewise for speed."""
    w_max = _w_max(k)
    # Degrees chosen by measuring the interpolation error against the direct rule (< 1e-12).
    degree = 60 if k <= 30 else (120 if k <= 120 else 200)
    # numpy's stub types the function's values as scalars; this one is vectorised over x.
    coef = cheb.chebinterpolate(  # type: ignore[type-var]
        lambda x: _range_cdf_direct(0.5 * w_max * (x + 1.0), k), degree)
    return _mvt.Piecewise(coef, w_max)


def _range_cdf(w: np.ndarray, k: int, *, derivative: bool = False) -> np.ndarray:
    """W(w; k) (or its density) from the cached interpolant; 0 below 0, 1 above w_max."""
    interp = _range_interpolant(k)
    w = np.asarray(w, dtype=float)
    if derivative:
        out = interp(w, derivative=True)
        return np.where((w <= 0.0) | (w >= interp.x_max), 0.0, np.maximum(out, 0.0))
    out = np.clip(interp(w), 0.0, 1.0)
    return np.where(w <= 0.0, 0.0, np.where(w >= interp.x_max, 1.0, out))


ScaleGroups = list[tuple[np.ndarray, np.ndarray, np.ndarray]]


def _scale_groups(df: np.ndarray) -> ScaleGroups:
    """Outer-integral nodes for the finite entries of ``df``, grouped by quadrature size:
    a list of (index into df, nodes s, weights), one vectorised evaluation per group."""
    fin = np.flatnonzero(np.isfinite(df))
    if fin.size == 0:
        return []
    panels = _mvt.scale_panels(df[fin])
    groups = []
    for size in np.unique(panels):
        idx = fin[panels == size]
        s, ws = _mvt.scale_nodes(df[idx], int(size), 16)
        groups.append((idx, s, ws))
    return groups


def _ptukey_flat(q: np.ndarray, k: int, df: np.ndarray, *, derivative: bool = False,
                 groups: ScaleGroups | None = None) -> np.ndarray:
    """CDF (or density) at 1-D arrays q, df of equal length; df may contain inf.

    ``groups`` are precomputed ``_scale_groups(df)`` (root searches reuse them).
    """
    out = np.empty_like(q)
    inf = ~np.isfinite(df)
    if inf.any():
        out[inf] = _range_cdf(q[inf], k, derivative=derivative)
    for idx, s, ws in (_scale_groups(df) if groups is None else groups):
        vals = _range_cdf(q[idx][:, None] * s, k, derivative=derivative)
        if derivative:
            vals = vals * s
        out[idx] = np.sum(vals * ws, axis=1)
    return out


def _check_k(k: int) -> int:
    if int(k) != k or k < 2:
        raise ValueError(f"the number of groups k must be an integer >= 2, got {k!r}")
    return int(k)


def ptukey(q: np.ndarray | float, k: int, df: np.ndarray | float) -> np.ndarray | float:
    """CDF of the studentized range: P(Q ≤ q) for k means and df error degrees of freedom.

    Vectorised over ``q`` and ``df`` (broadcast together); ``df = inf`` gives the range of k
    standard normals. Returns NaN where q or df is NaN or df ≤ 0; 0 for q ≤ 0.
    """
    k = _check_k(k)
    qa, dfa = np.broadcast_arrays(np.asarray(q, dtype=float), np.asarray(df, dtype=float))
    shape = qa.shape
    qf, dff = qa.ravel().astype(float), dfa.ravel().astype(float)
    out = np.full(qf.shape, np.nan)
    ok = ~np.isnan(qf) & ~np.isnan(dff) & (dff > 0)
    pos = ok & (qf > 0)
    out[ok & (qf <= 0)] = 0.0
    if pos.any():
        out[pos] = _ptukey_flat(qf[pos], k, dff[pos])
    shaped = out.reshape(shape)
    return float(shaped) if shaped.ndim == 0 else shaped


def _qtukey_start(p: np.ndarray, k: int, df: np.ndarray) -> np.ndarray:
    """Starting values: √2·t(1 − (1−p)/(k(k−1))), a Bonferroni-type upper bound for p ≥ 0.5."""
    tail = np.clip((1.0 - p) / (k * (k - 1)), 1e-300, 0.5)
    df_t = np.where(np.isfinite(df), df, 1e12)
    q = np.sqrt(2.0) * special.stdtrit(df_t, 1.0 - tail)
    return np.where(np.isfinite(q) & (q > 0), q, 3.0)


def _newton(q: np.ndarray, p: np.ndarray, k: int, df: np.ndarray) -> np.ndarray:
    """Safeguarded Newton iteration for P(q; k, df) = p (bisection when a step leaves the bracket)."""
    lo = np.zeros_like(q)
    hi = np.full_like(q, np.inf)
    groups = _scale_groups(df)
    for _ in range(100):
        f = _ptukey_flat(q, k, df, groups=groups) - p
        if np.all(np.abs(f) < 1e-14):
            break
        d = _ptukey_flat(q, k, df, derivative=True, groups=groups)
        lo = np.where(f < 0, np.maximum(lo, q), lo)
        hi = np.where(f > 0, np.minimum(hi, q), hi)
        with np.errstate(divide="ignore", invalid="ignore"):
            new = q - f / d
        bad = ~np.isfinite(new) | (new <= lo) | (new >= hi)
        fallback = np.where(np.isfinite(hi), 0.5 * (lo + hi), 2.0 * q)
        new = np.where(bad, fallback, new)
        done = np.abs(new - q) <= 1e-13 * np.maximum(q, 1.0)
        q = new
        if np.all(done):
            break
    return q


def _qtukey_solve(p: np.ndarray, k: int, df: np.ndarray) -> np.ndarray:
    """Quantiles for 0 < p < 1. Many nearby (p, df) pairs (Games-Howell) are solved by first
    solving one representative and starting everyone from it, which saves Newton steps."""
    if len(p) > 2:
        mid = np.array([np.median(p)]), np.array([np.median(df)])
        q_mid = _newton(_qtukey_start(*mid[:1], k, mid[1]), mid[0], k, mid[1])
        start = np.full_like(p, q_mid[0])
        # Keep the Bonferroni start where the representative is far off (different p or df).
        far = (np.abs(p - mid[0][0]) > 0.01) | (np.abs(np.log(df) - np.log(mid[1][0])) > 1.0)
        start = np.where(far, _qtukey_start(p, k, df), start)
    else:
        start = _qtukey_start(p, k, df)
    return _newton(start, p, k, df)


_qt_cache: OrderedDict[tuple[float, int, float], float] = OrderedDict()


def _key(p: float, k: int, df: float) -> tuple[float, int, float]:
    return (float(f"{p:.12g}"), k, float(f"{df:.12g}") if math.isfinite(df) else math.inf)


def qtukey(p: np.ndarray | float, k: int, df: np.ndarray | float) -> np.ndarray | float:
    """Quantile of the studentized range: q with P(Q ≤ q; k, df) = p.

    Vectorised over ``p`` and ``df``; results are cached (LRU, arguments rounded to 12 significant
    digits). NaN for p outside (0, 1), NaN p or df, or df ≤ 0.
    """
    k = _check_k(k)
    pa, dfa = np.broadcast_arrays(np.asarray(p, dtype=float), np.asarray(df, dtype=float))
    shape = pa.shape
    pf, dff = pa.ravel(), dfa.ravel()
    out = np.full(pf.shape, np.nan)
    ok = (pf > 0) & (pf < 1) & (dff > 0)  # False for NaN
    keys = [_key(pi, k, di) if oki else None for pi, di, oki in zip(pf, dff, ok, strict=True)]
    missing: dict[tuple[float, int, float], list[int]] = {}
    for i, key in enumerate(keys):
        if key is None:
            continue
        hit = _qt_cache.get(key)
        if hit is None:
            missing.setdefault(key, []).append(i)
        else:
            _qt_cache.move_to_end(key)
            out[i] = hit
    if missing:
        mk = list(missing)
        solved = _qtukey_solve(np.array([m[0] for m in mk]), k, np.array([m[2] for m in mk]))
        for key, val in zip(mk, solved, strict=True):
            _qt_cache[key] = float(val)
            out[missing[key]] = val
        while len(_qt_cache) > _QT_CACHE_SIZE:
            _qt_cache.popitem(last=False)
    shaped = out.reshape(shape)
    return float(shaped) if shaped.ndim == 0 else shaped


# ----------------------------------------------------------------------------- Dunnett and ANOM

def _solve_increasing(func, target: float, lo: float, hi: float) -> float:
    """Root of func(x) = target for increasing func on [lo, hi] (Brent, xtol 1e-9)."""
    f_lo = func(lo) - target
    while f_lo > 0 and lo > 1e-6:
        lo *= 0.5
        f_lo = func(lo) - target
    f_hi = func(hi) - target
    while f_hi < 0:
        hi *= 2.0
        f_hi = func(hi) - target
    return float(optimize.brentq(lambda x: func(x) - target, lo, hi, xtol=1e-9, rtol=1e-12))


def dunnett_loadings(n: np.ndarray, n_ref: float) -> np.ndarray:
    """λ_i = sqrt(n_i/(n_i + n_0)): corr(T_i, T_j) = λ_i λ_j for i ≠ j (Dunnett 1955, p. 1103)."""
    n = np.asarray(n, dtype=float)
    return np.sqrt(n / (n + float(n_ref)))


def pdunnett(c: np.ndarray | float, n: np.ndarray, n_ref: float, df: float) -> np.ndarray:
    """P(max_i |T_i| ≤ c) for Dunnett's two-sided many-to-one statistics.

    ``n`` are the sizes of the compared groups, ``n_ref`` of the reference group and ``df`` the
    error degrees of freedom (N − k). Deterministic quadrature (see ``stats._mvt``).
    """
    return _mvt.dunnett_cdf(np.asarray(c, dtype=float), dunnett_loadings(n, n_ref), float(df))


@lru_cache(maxsize=1024)
def _qdunnett_cached(conf: float, lam: tuple[float, ...], df: float) -> float:
    lam_a = np.array(lam)
    m = len(lam)
    df_t = df if math.isfinite(df) else 1e12
    lo = float(sps.t.ppf(0.5 + 0.5 * conf, df_t))
    hi = float(sps.t.ppf(0.5 + 0.5 * conf ** (1.0 / m), df_t))  # Šidák bound
    return _solve_increasing(lambda c: float(_mvt.dunnett_cdf(np.array([c]), lam_a, df)[0]),
                             conf, lo * 0.999, hi * 1.001)


def qdunnett(conf: float, n: np.ndarray, n_ref: float, df: float) -> float:
    """Two-sided Dunnett critical value c with P(max_i |T_i| ≤ c) = conf (cached)."""
    lam = tuple(float(f"{v:.12g}") for v in dunnett_loadings(n, n_ref))
    return _qdunnett_cached(float(f"{conf:.12g}"), lam, float(df))


def panom(h: np.ndarray | float, n: np.ndarray, df: float) -> np.ndarray:
    """P(max_i |ȳ_i − ȳ|/(s·sqrt((N − n_i)/(N·n_i))) ≤ h) under equal means (Nelson 1982)."""
    n = np.asarray(n, dtype=float)
    if len(n) == 2:
        # Both statistics equal the two-sample t statistic in absolute value.
        h = np.atleast_1d(np.asarray(h, dtype=float))
        if not math.isfinite(df):
            return 2.0 * special.ndtr(h) - 1.0
        return 2.0 * special.stdtr(df, h) - 1.0
    return _mvt.anom_cdf(np.asarray(h, dtype=float), n, float(df))


@lru_cache(maxsize=1024)
def _qanom_cached(conf: float, n: tuple[float, ...], df: float) -> float:
    n_a = np.array(n)
    k = len(n)
    df_t = df if math.isfinite(df) else 1e12
    if k == 2:
        return float(sps.t.ppf(0.5 + 0.5 * conf, df_t))
    lo = float(sps.t.ppf(0.5 + 0.5 * conf, df_t))
    hi = float(sps.t.ppf(0.5 + 0.5 * conf ** (1.0 / k), df_t))  # Šidák bound
    return _solve_increasing(lambda h: float(panom(np.array([h]), n_a, df)[0]), conf,
                             lo * 0.999, hi * 1.001)


def qanom(conf: float, n: np.ndarray, df: float) -> float:
    """Analysis-of-means critical value h with P(max_i |T_i| ≤ h) = conf (cached).

    Only the group fractions n_i/N enter, so they form the cache key.
    """
    n = np.asarray(n, dtype=float)
    frac = tuple(float(f"{v:.12g}") for v in n / n.sum())
    return _qanom_cached(float(f"{conf:.12g}"), frac, float(df))
