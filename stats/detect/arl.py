"""Average run length (ARL) of a one-sided CUSUM and the decision interval for a target ARL.

The CUSUM is ``S_t = max(0, S_{t-1} + X_t - k)`` with ``X_t ~ N(mu, 1)`` and an alarm when
``S_t > h`` (Page 1954), all in standard units. A two-sided chart runs an upper and a lower
one; for ``k > 0`` the two cannot both be above zero at once, so
``1/ARL = 1/ARL+ + 1/ARL-`` (Van Dobben de Bruyn 1968), i.e. half the one-sided ARL in control.

Two published computations are offered:

* Siegmund's (1985) approximation, one-sided, with ``Delta = mu - k`` and ``b = h + 1.166``::

      ARL ~ (exp(-2 Delta b) + 2 Delta b - 1) / (2 Delta^2),      ARL ~ b^2 when Delta = 0.

  The constant 1.166 (= 2 x 0.583) corrects for the overshoot of a normal random walk over the
  boundary. It is cheap, vectorises, and inverts by Newton's method (``decision_interval``).

* Brook & Evans (1972): the statistic discretised into ``m`` states on ``[0, h]`` (state 0 is
  "at zero", state i has centre ``i w`` with ``w = 2h / (2m - 1)``), the transition matrix
  ``P`` of the sub-stochastic chain before the alarm, and the vector of ARLs
  ``(I - P)^{-1} 1``; the ARL from a start at zero is its first element. Any step distribution
  can be used; here it is the normal one. ``arl_markov`` is the check on Siegmund's value.

Reference values: for k = 0.5 the two-sided in-control ARL is about 168 at h = 4 and about 465
at h = 5 (textbook tables of the tabular CUSUM; recalled from memory).
"""

from __future__ import annotations

import functools

import numpy as np
from scipy import special

OVERSHOOT = 1.166  # Siegmund's correction for a normal random walk, 2 x 0.583


def arl_siegmund(k: np.ndarray | float, h: np.ndarray | float,
                 mu: np.ndarray | float = 0.0) -> np.ndarray:
    """One-sided ARL of a CUSUM with reference ``k`` and interval ``h`` for ``N(mu, 1)`` steps
    (Siegmund's approximation, see the module docstring). Vectorised."""
    k = np.asarray(k, dtype=np.float64)
    h = np.asarray(h, dtype=np.float64)
    delta = np.asarray(mu, dtype=np.float64) - k
    b = h + OVERSHOOT
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        x = -2.0 * delta * b
        arl = (np.expm1(x) - x) / (2.0 * delta ** 2)
    return np.where(np.abs(delta) < 1e-9, b ** 2, arl)


def decision_interval(k: np.ndarray | float, arl: np.ndarray | float) -> np.ndarray:
    """The ``h`` whose in-control (mu = 0) one-sided ARL is ``arl`` by Siegmund's approximation.

    Solves ``e^x - x - 1 = 2 k^2 ARL`` for ``x = 2 k b`` by Newton's method (the left side is
    convex and increasing for x > 0, so Newton from above converges monotonically), then
    ``h = x / (2k) - 1.166``, floored at 0. For ``k -> 0`` it tends to ``sqrt(ARL) - 1.166``.
    Vectorised over ``k`` and ``arl`` (``k > 0``).
    """
    k = np.asarray(k, dtype=np.float64)
    arl = np.asarray(arl, dtype=np.float64)
    c = 2.0 * k ** 2 * arl
    x = np.log1p(c) + 1.0
    for _ in range(60):
        step = (np.expm1(x) - x - c) / np.expm1(x)
        x = x - step
        if np.all(np.abs(step) < 1e-12 * np.maximum(x, 1.0)):
            break
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.where(k > 1e-9, x / (2.0 * k), np.sqrt(arl)) - OVERSHOOT
    return np.maximum(h, 0.0)


def arl_markov(k: float, h: float, mu: float = 0.0, *, states: int = 200) -> float:
    """One-sided ARL from a start at zero by the Markov chain of Brook & Evans (1972), for
    ``N(mu, 1)`` steps, reference ``k``, interval ``h`` and ``states`` states (see the module
    docstring)."""
    if h <= 0:
        p_stay = special.ndtr(k - mu)  # each step ends at zero with this probability
        return float(1.0 / (1.0 - p_stay))
    m = int(states)
    w = 2.0 * h / (2 * m - 1)
    centre = np.arange(m) * w
    # P[i, j]: from centre i to state j; j >= 1 covers (j w - w/2, j w + w/2]; j = 0 covers
    # everything at or below w/2 (including the reflection at zero).
    upper = centre[None, :] + w / 2 - centre[:, None] + k - mu
    lower = centre[None, :] - w / 2 - centre[:, None] + k - mu
    p = special.ndtr(upper) - special.ndtr(lower)
    p[:, 0] = special.ndtr(upper[:, 0])
    arl = np.linalg.solve(np.eye(m) - p, np.ones(m))
    return float(arl[0])


def two_sided(arl_upper: np.ndarray | float, arl_lower: np.ndarray | float) -> np.ndarray:
    """ARL of a two-sided chart from its one-sided ARLs: ``1/ARL = 1/ARL+ + 1/ARL-``."""
    a = np.asarray(arl_upper, dtype=np.float64)
    b = np.asarray(arl_lower, dtype=np.float64)
    return 1.0 / (1.0 / a + 1.0 / b)


def _solve_markov(k: float, arl: float, states: int) -> float:
    """``h`` with Markov-chain ARL = ``arl`` (relative error < 0.5%): Newton-like steps on
    ``ln ARL(h)``, whose slope tends to ``2k`` for large h, from Siegmund's starting value."""
    target = np.log(arl)
    h = float(decision_interval(k, arl))
    lo, hi = 0.0, np.inf
    for _ in range(40):
        err = np.log(arl_markov(k, h, states=states)) - target
        if abs(err) < 0.005:
            break
        if err > 0:
            hi = min(hi, h)
        else:
            lo = max(lo, h)
        step = h - err / max(2.0 * k, 0.2)
        # keep inside the bracket found so far (bisect when the step leaves it)
        h = step if lo < step < hi else (0.5 * (lo + hi) if np.isfinite(hi) else 2.0 * h + 1.0)
    return h


K_MIN, K_MAX = 0.25, 8.0  # the table's range of k; below it Siegmund's formula is within ~5%
_GRID_K, _GRID_H = 32, 33


def table_grid() -> tuple[np.ndarray, np.ndarray]:
    """The table's grid: k log-spaced over [K_MIN, K_MAX], and for each k, h from 0 to beyond
    ARL 1e11 (Siegmund's h for 1e11, times 1.3, plus 1)."""
    ks = np.exp(np.linspace(np.log(K_MIN), np.log(K_MAX), _GRID_K))
    hs = np.empty((_GRID_K, _GRID_H))
    for i, k in enumerate(ks):
        hs[i] = np.linspace(0.0, float(decision_interval(k, 1e11)) * 1.3 + 1.0, _GRID_H)
    return ks, hs


def table_row(i: int) -> np.ndarray:
    """ln ARL of the Markov chain (100 states) along row ``i`` of the grid; NaN where the chain
    loses precision (ARL far beyond 1e15)."""
    ks, hs = table_grid()
    vals = np.array([arl_markov(float(ks[i]), float(h), states=100) for h in hs[i]])
    return np.log(np.where(np.isfinite(vals) & (vals >= 1.0), vals, np.nan))


def write_table(path: str) -> None:
    """Compute the whole table and write it as a Python module (``_arl_table.py``).

    About a thousand 100 x 100 linear solves: a fraction of a second with one BLAS thread, many
    seconds when BLAS threads contend for a busy machine, which is why the table ships with the
    code instead of being computed at run time. ``tests/stats/test_detect_arl.py`` recomputes rows
    and compares."""
    rows = [table_row(i) for i in range(_GRID_K)]
    lines = ['"""ln ARL of the one-sided CUSUM by the Brook & Evans (1972) Markov chain on the grid of',
             '``arl.table_grid()``; written by ``arl.write_table`` (do not edit by hand)."""', "",
             "LN_ARL: list[list[float | None]] = ["]
    for r in rows:
        vals = ", ".join("None" if not np.isfinite(v) else f"{v:.10g}" for v in r)
        lines.append(f"    [{vals}],")
    lines.append("]")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("\n".join(lines) + "\n")


@functools.lru_cache(maxsize=1)
def _table() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    from lotwatch.stats.detect._arl_table import LN_ARL

    ks, hs = table_grid()
    la = np.array([[np.nan if v is None else v for v in row] for row in LN_ARL], dtype=np.float64)
    # keep ln ARL increasing along h where the chain lost precision
    return ks, hs, np.fmax.accumulate(np.nan_to_num(la, nan=-np.inf), axis=1)


def decision_interval_markov(k: np.ndarray | float, arl: np.ndarray | float) -> np.ndarray:
    """Vectorised ``h`` whose in-control one-sided Markov-chain ARL (Brook & Evans 1972) is
    ``arl``: interpolated (linear in ln ARL along h, then in ln k) in a table of the chain's ARL.

    Siegmund's formula is several percent to several-fold off for ``k >= 1`` (checked against
    the chain in the tests), which is where a day with many lots sits, so thresholds come from
    the chain; for ``k < 0.25`` (very few lots a day) Siegmund's formula is used, being within a
    few percent there. ``k`` above 8 is treated as 8 (its h is 0 for any ARL of interest).
    """
    k_b, a_b = np.broadcast_arrays(np.asarray(k, dtype=np.float64),
                                   np.asarray(arl, dtype=np.float64))
    out = np.empty(k_b.shape, dtype=np.float64)
    ks, hs, la = _table()
    big = k_b >= K_MIN
    if (~big).any():
        out[~big] = decision_interval(k_b[~big], a_b[~big])
    if not big.any():
        return out
    kk = np.minimum(k_b[big], K_MAX)
    target = np.log(np.maximum(a_b[big], 1.0))
    pos = np.clip(np.searchsorted(ks, kk, side="right") - 1, 0, _GRID_K - 2)
    frac = (np.log(kk) - np.log(ks[pos])) / (np.log(ks[pos + 1]) - np.log(ks[pos]))
    h = np.empty(kk.shape)
    for i in np.unique(pos):
        sel = pos == i
        lo = np.interp(target[sel], la[i], hs[i])
        hi = np.interp(target[sel], la[i + 1], hs[i + 1])
        h[sel] = lo + frac[sel] * (hi - lo)
    out[big] = h
    return out
