"""Deterministic quadrature for the multivariate-t probabilities behind the post-hoc tests.

Three probabilities share one building block, the scale mixture over the Studentizing denominator:
a Student-type statistic is ``Z / s`` with ``s = sqrt(chi2_df / df)`` independent of ``Z``, so any
probability ``P(df)`` of a set of t statistics is ``∫ P_z(s) f_df(s) ds`` where ``P_z`` is the
probability for known variance with the limits multiplied by ``s``. We integrate in ``u = log s``,
where the density ``f_df(e^u)·e^u = C·exp(df·u − df·e^{2u}/2)`` is smooth and unimodal (mode at
u = 0) for every df, by composite Gauss-Legendre over the range where it exceeds e^-40 of its mode.
This is the outer integral of Copenhaver & Holland (1988), "Computation of the distribution of the
maximum studentized range statistic with application to multiple significance testing of simple
effects", J. Statist. Comput. Simul. 30, 1-15, used also by AS 190 (Lund & Lund 1983).

- ``dunnett_cdf``: P(max_i |T_i| ≤ c) for Dunnett's many-to-one statistics, whose correlation
  ρ_ij = λ_i λ_j with λ_i = sqrt(n_i/(n_i + n_0)) (Dunnett 1955, JASA 50, 1096-1121) is one-factor,
  so for known variance the probability is the one-dimensional integral
  ``∫ φ(z) Π_i [Φ((c + λ_i z)/τ_i) − Φ((−c + λ_i z)/τ_i)] dz`` with τ_i = sqrt(1 − λ_i²).
- ``anom_cdf``: P(max_i |T_i| ≤ h) for the analysis-of-means statistics (ȳ_i − ȳ)/SE_i, whose
  correlation ρ_ij = −sqrt(p_i p_j/((1 − p_i)(1 − p_j))) with p_i = n_i/N is negative and singular.
  Writing the "imaginary loading" of the one-factor form as a Fourier integral gives the real
  integral (derived in the docstring of ``_anom_known_variance``)
  ``P = sqrt(2/π) ∫_0^∞ Π_i g(v sqrt(p_i); h sqrt(1 − p_i)) dv`` with
  ``g(b; c) = ∫_{−c}^{c} φ(x) cos(bx) dx``, evaluated stably with the Faddeeva function.

Everything is fixed quadrature, so results are bit-identical from run to run.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from scipy import special

# Relative height (log) below the mode where the log-scale chi density is cut off.
_LOG_CUT = 40.0


@lru_cache(maxsize=64)
def gauss_legendre(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [-1, 1] (cached)."""
    x, w = np.polynomial.legendre.leggauss(n)
    return x, w


def composite_nodes(lo: float, hi: float, panels: int, order: int) -> tuple[np.ndarray, np.ndarray]:
    """Composite Gauss-Legendre nodes/weights on [lo, hi] with ``panels`` equal panels."""
    x, w = gauss_legendre(order)
    edges = np.linspace(lo, hi, panels + 1)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[:-1] + edges[1:])
    nodes = (mid[:, None] + half[:, None] * x[None, :]).ravel()
    weights = (half[:, None] * w[None, :]).ravel()
    return nodes, weights


class Piecewise:
    """Fast evaluation of a smooth function on [0, x_max] given its global Chebyshev series.

    The global series (accurate to ~1e-13) is re-expanded on ``pieces`` equal intervals as local
    polynomials of degree ``degree`` in t ∈ [−1, 1] (interpolation at Chebyshev points), so each
    evaluation is one table gather plus a short Horner loop instead of a degree-60+ Clenshaw
    recurrence: about 3x faster, with a re-expansion error below 1e-15 (measured).
    """

    def __init__(self, coef: np.ndarray, x_max: float, *, pieces: int = 64, degree: int = 11):
        t = np.cos(np.pi * (np.arange(degree + 1) + 0.5) / (degree + 1))
        self.width = x_max / pieces
        self.pieces, self.degree, self.x_max = pieces, degree, x_max
        x = (np.arange(pieces)[:, None] + 0.5 * (t[None, :] + 1.0)) * self.width
        values = np.polynomial.chebyshev.chebval(2.0 * x / x_max - 1.0, coef)
        vander = t[:, None] ** np.arange(degree + 1)[None, :]
        self.coef = np.linalg.solve(vander, values.T).T  # (pieces, degree + 1), monomials in t
        self.dcoef = self.coef[:, 1:] * np.arange(1, degree + 1)[None, :] * (2.0 / self.width)

    def __call__(self, x: np.ndarray, *, derivative: bool = False) -> np.ndarray:
        """Values (or first derivatives) at x; x outside [0, x_max] is clamped to the ends."""
        u = np.clip(np.asarray(x, dtype=float) / self.width, 0.0, float(self.pieces))
        idx = np.minimum(u.astype(np.intp), self.pieces - 1)
        t = 2.0 * (u - idx) - 1.0
        table = (self.dcoef if derivative else self.coef)[idx]
        acc = table[..., -1]
        for j in range(table.shape[-1] - 2, -1, -1):
            acc = acc * t + table[..., j]
        return acc


def _log_chi_bounds(df: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Solve df·(u − (e^{2u} − 1)/2) = −_LOG_CUT for u < 0 and u > 0 (vectorised Newton)."""
    lo = np.minimum(-_LOG_CUT / df - 0.5, -np.sqrt(_LOG_CUT / df))
    hi = 0.5 * np.log1p(2.0 * _LOG_CUT / df) + 0.5
    hi = np.minimum(hi, np.sqrt(_LOG_CUT / df) * 2.0 + 0.01)
    for _ in range(40):
        g_lo = df * (lo - 0.5 * np.expm1(2.0 * lo)) + _LOG_CUT
        g_hi = df * (hi - 0.5 * np.expm1(2.0 * hi)) + _LOG_CUT
        d_lo = df * (1.0 - np.exp(2.0 * lo))
        d_hi = df * (1.0 - np.exp(2.0 * hi))
        new_lo = lo - g_lo / d_lo
        new_hi = hi - g_hi / d_hi
        new_lo = np.minimum(new_lo, -1e-3)
        new_hi = np.maximum(new_hi, 1e-3)
        done = (np.abs(new_lo - lo) < 1e-10) & (np.abs(new_hi - hi) < 1e-10)
        lo, hi = new_lo, new_hi
        if np.all(done):
            break
    return lo, hi


def scale_nodes(df: np.ndarray, panels: int = 4, order: int = 16) -> tuple[np.ndarray, np.ndarray]:
    """Nodes ``s`` (shape (m, P)) and weights for ∫ f_df(s)·F(s) ds, one row per finite df.

    ``f_df`` is the density of sqrt(chi2_df/df). The weights include the density and are
    renormalised to sum to one, so a constant F integrates exactly (this removes the truncation
    error of the cut-off tails at first order).
    """
    df = np.asarray(df, dtype=float).ravel()
    lo, hi = _log_chi_bounds(df)
    x, w = composite_nodes(-1.0, 1.0, panels, order)
    half = 0.5 * (hi - lo)
    mid = 0.5 * (hi + lo)
    u = mid[:, None] + half[:, None] * x[None, :]
    log_dens = df[:, None] * (u - 0.5 * np.expm1(2.0 * u))
    weights = w[None, :] * half[:, None] * np.exp(log_dens)
    weights /= weights.sum(axis=1, keepdims=True)
    return np.exp(u), weights


_PANEL_SIZES = np.array([3, 6, 12, 24, 48])


def scale_panels(df: np.ndarray) -> np.ndarray:
    """Number of 16-point panels of the outer integral for each (finite) df, vectorised.

    The integrand varies on a scale of about one unit of u = log s (the transition of the inner
    probability from 0 to 1), and small df have a long left tail in u, so the number of panels
    follows the width of the u range (about 1.25 units per panel), rounded up to one of a few
    sizes so that many df values share one vectorised evaluation.
    """
    lo, hi = _log_chi_bounds(np.asarray(df, dtype=float).ravel())
    need = (hi - lo) / 1.25
    idx = np.minimum(np.searchsorted(_PANEL_SIZES, need), len(_PANEL_SIZES) - 1)
    return _PANEL_SIZES[idx]


def _scale_rule(df: float) -> tuple[int, int]:
    """(panels, order) of the outer integral for one finite df."""
    return int(scale_panels(np.array([df]))[0]), 16


# ---------------------------------------------------------------- Dunnett (positive one-factor)

def _dunnett_z_nodes(lam: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nodes on z ≥ 0 for the one-factor integral; finer when some λ_i is close to one.

    The factor Φ((c + λz)/τ) − Φ((−c + λz)/τ) changes over a z-scale of τ/λ, so the panel width is
    tied to min τ/λ.
    """
    tau = np.sqrt(1.0 - lam**2)
    scale = float(np.min(tau / lam))
    z_hi = 8.6
    panels = int(min(64, max(4, math.ceil(z_hi / (3.0 * scale)))))
    return composite_nodes(0.0, z_hi, panels, 12)


def _dunnett_known_variance(c: np.ndarray, lam: np.ndarray, mult: np.ndarray) -> np.ndarray:
    """P(max|Z_i| ≤ c) for one-factor normals, c of any shape; λ unique with multiplicities."""
    z, wz = _dunnett_z_nodes(lam)
    tau = np.sqrt(1.0 - lam**2)
    c = np.asarray(c, dtype=float)[..., None, None]
    lz = (lam[:, None] * z[None, :])  # (u, Z)
    upper = special.ndtr((c + lz) / tau[:, None])
    lower = special.ndtr((-c + lz) / tau[:, None])
    factor = np.clip(upper - lower, 0.0, 1.0) ** mult[:, None]
    prod = np.prod(factor, axis=-2)  # (..., Z)
    dens = 2.0 * wz * np.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)
    return prod @ dens


def unique_with_counts(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct values (rounded to 12 significant digits) and how many times each occurs."""
    rounded = np.asarray([float(f"{v:.12g}") for v in np.asarray(values, dtype=float)])
    uniq, counts = np.unique(rounded, return_counts=True)
    return uniq, counts.astype(float)


_CDF_DEGREE = 64


def _known_variance_interpolant(func, x_max: float) -> Piecewise:
    """Chebyshev coefficients (degree 64) of a known-variance CDF x ↦ P_z(x) on [0, x_max].

    The studentized probability is E_s[P_z(c·s)], so one interpolant per correlation structure
    serves every df, every c and every step of a root search. The degree was chosen by measuring
    the interpolation error against direct evaluation (about 1e-11; tests/stats).
    """
    coef = np.polynomial.chebyshev.chebinterpolate(lambda u: func(0.5 * x_max * (u + 1.0)),
                                                   _CDF_DEGREE)
    return Piecewise(coef, x_max)


def _eval_interpolant(interp: Piecewise, x: np.ndarray) -> np.ndarray:
    val = np.clip(interp(x), 0.0, 1.0)
    return np.where(x <= 0.0, 0.0, np.where(x >= interp.x_max, 1.0, val))


def _tail_bound_x(m: int) -> float:
    """x beyond which a two-sided max of m standard normals stays inside (±x) except 1e-17."""
    return float(-special.ndtri(1e-17 / (2.0 * m)))


@lru_cache(maxsize=256)
def _dunnett_interpolant(lam: tuple[float, ...], mult: tuple[float, ...]) -> Piecewise:
    x_max = _tail_bound_x(int(sum(mult)))
    lam_a, mult_a = np.array(lam), np.array(mult)
    return _known_variance_interpolant(lambda x: _dunnett_known_variance(x, lam_a, mult_a), x_max)


@lru_cache(maxsize=256)
def scalar_scale_nodes(df: float) -> tuple[np.ndarray, np.ndarray]:
    """``scale_nodes`` for one finite df (cached): nodes s and weights, 1-D."""
    s, ws = scale_nodes(np.array([df]), *_scale_rule(df))
    return s[0], ws[0]


def _studentize(interp: Piecewise, c: np.ndarray, df: float) -> np.ndarray:
    """E_s[P_z(c·s)] with s = sqrt(chi2_df/df) (P_z itself when df is infinite)."""
    if not math.isfinite(df):
        return _eval_interpolant(interp, c)
    s, ws = scalar_scale_nodes(float(df))
    return _eval_interpolant(interp, c[:, None] * s[None, :]) @ ws


def dunnett_cdf(c: np.ndarray, lam: np.ndarray, df: float) -> np.ndarray:
    """P(max_i |T_i| ≤ c) for Dunnett's statistics with loadings ``lam`` and ``df`` (may be inf)."""
    c = np.atleast_1d(np.asarray(c, dtype=float))
    uniq, mult = unique_with_counts(lam)
    return _studentize(_dunnett_interpolant(tuple(uniq), tuple(mult)), c, df)


# ------------------------------------------------------------- ANOM (negative singular structure)

def _g_cos(b: np.ndarray, c: np.ndarray) -> np.ndarray:
    """g(b; c) = ∫_{−c}^{c} φ(x) cos(bx) dx = Re[e^{−b²/2} erf((c + ib)/√2)].

    With erf(z) = 1 − e^{−z²} w(iz) (w the Faddeeva function, scipy.special.wofz) this is
    e^{−b²/2} − e^{−c²/2} Re[e^{−icb} w((−b + ic)/√2)], free of the cancellation of the direct form.
    """
    w = special.wofz((-b + 1j * c) / math.sqrt(2.0))
    return np.exp(-0.5 * b * b) - np.exp(-0.5 * c * c) * np.real(np.exp(-1j * c * b) * w)


def _anom_v_nodes(k_eff: float, p_min: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes for the Fourier variable v ≥ 0.

    The integrand is a Gaussian-like bump of width ~1 plus an oscillating tail whose envelope
    decays like v^{-k}; k = 3 needs the longest range. A factor with group fraction p enters its
    tail only for v ≫ 1/√p, so a design with one very small group (p_min ≪ 1/k) stretches the
    range by sqrt(1/(k·p_min)) (capped at 16).
    """
    v_hi = 80.0 if k_eff < 3.5 else (48.0 if k_eff < 4.5 else (32.0 if k_eff < 5.5 else 16.0))
    v_hi *= min(16.0, max(1.0, math.sqrt(1.0 / (k_eff * p_min))))
    # The error is set by the truncation at v_hi, not by the node density (measured: 12 nodes per
    # 4 units are as accurate as 12 per 2 units).
    return composite_nodes(0.0, v_hi, int(math.ceil(v_hi / 4.0)), 12)


def _anom_known_variance(h: np.ndarray, p: np.ndarray, mult: np.ndarray) -> np.ndarray:
    """P(max_i |(x̄_i − x̄)/SE_i| ≤ h) for known variance; group fractions p (unique) with counts.

    Derivation. Let x_i = √n_i·ȳ_i/σ be iid N(0,1) and S = Σ √n_i x_i. The event
    {|T_i| ≤ h ∀i} is invariant under x → x + t·(√n_i)_i (it depends on the deviations from the
    weighted grand mean only), so it has the same probability conditionally on S = 0, where it is
    the box |x_i| ≤ c_i = h·sqrt(1 − p_i). Hence P = f_{S,box}(0)/f_S(0) with f_S(0) = 1/√(2πN),
    and by Fourier inversion of the box-restricted characteristic function of S,
    f_{S,box}(0) = (1/2π) ∫ Π_i g(ω√n_i; c_i) dω. Substituting ω = v/√N gives
    P = sqrt(2/π) ∫_0^∞ Π_i g(v√p_i; c_i) dv (the integrand is even in v).
    """
    v, wv = _anom_v_nodes(float(mult.sum()), float(np.min(p)))
    h = np.asarray(h, dtype=float)[..., None, None]
    b = v[None, :] * np.sqrt(p)[:, None]  # (u, V)
    c = h * np.sqrt(1.0 - p)[:, None]
    g = _g_cos(b, c) ** mult[:, None]
    prod = np.prod(g, axis=-2)
    return math.sqrt(2.0 / math.pi) * (prod @ wv)


@lru_cache(maxsize=256)
def _anom_interpolant(p: tuple[float, ...], mult: tuple[float, ...]) -> Piecewise:
    x_max = _tail_bound_x(int(sum(mult)))
    p_a, mult_a = np.array(p), np.array(mult)
    return _known_variance_interpolant(lambda x: _anom_known_variance(x, p_a, mult_a), x_max)


def anom_cdf(h: np.ndarray, n: np.ndarray, df: float) -> np.ndarray:
    """P(max_i |ȳ_i − ȳ|/(s·sqrt((N − n_i)/(N n_i))) ≤ h) with ``df`` for s (may be inf)."""
    h = np.atleast_1d(np.asarray(h, dtype=float))
    n = np.asarray(n, dtype=float)
    p_uniq, mult = unique_with_counts(n / n.sum())
    return _studentize(_anom_interpolant(tuple(p_uniq), tuple(mult)), h, df)
