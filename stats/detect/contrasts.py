"""Day-by-day group-vs-rest contrasts from per-day sufficient statistics (pure numpy).

For one characteristic, every *slot* (a level of a grouping factor) has per plant day ``n``,
``S1 = sum d`` and ``S2 = sum d^2`` with ``d`` the integer units from the characteristic's
origin (arrays of shape (slots, days)). The *rest* of a slot on a day is every other level of
the same factor on that day, so a move of the whole plant changes a group and its rest alike and
leaves the contrast alone.

Within-day sums of squares ``SS = S2 - S1^2 / n`` (``df = n - 1``) are not inflated by a shift of
a group's mean (the shift is constant within the day), so the spread estimates below are robust
to the mean change being looked for. All quantities are in ``d`` units.

Mean contrast (a two-sample z on the day's means)::

    c_t = S1_g / n_g - S1_r / n_r,       v_t = s_g^2 / n_g + s_r^2 / n_r
    s_g^2 = sum SS_g / sum df_g over the trailing L days before t (the group's own
            within-day variance); s_r^2 the same pooled over the rest's levels. A group or rest
            with fewer than 10 trailing degrees of freedom (one lot a day) uses the
            day-to-day estimate of ``_sparse_variance`` instead, the median of its
            comparison's (one group's, from about 40 changes, has a standard error near 27%
            -- too noisy for a CUSUM tuned to a long run length; a group clearly noisier than
            the others keeps its own through the dispersion below).

Spread contrast (log of the day's variance ratio; for normal data ``ln(s^2/sigma^2)`` has mean
``psi(nu/2) - ln(nu/2)`` and variance ``psi'(nu/2)`` with ``nu`` the degrees of freedom, from
the log of a scaled chi-square; Bartlett & Kendall 1946)::

    u_t = ln(v_g + 1/12) - ln(v_r + 1/12) - [psi(nu_g/2) - ln(nu_g/2) - psi(nu_r/2) + ln(nu_r/2)]
    var(u_t) = psi'(nu_g/2) + psi'(nu_r/2)

with ``v_g = SS_g / nu_g`` the group's variance that day and ``v_r`` the rest's pooled within-level
variance. The ``1/12`` (the variance of rounding to one resolution step, Sheppard) keeps the log
finite for coarse gauges and pulls the ratio toward 1, i.e. errs toward silence.

Extra dispersion: skewed values and correlated lots make the standardised contrasts vary more
than the normal theory says. ``phi`` is estimated from the changes of the standardised contrast
two days with data apart (``CHANGE_LAG``), over the trailing ``dispersion_days`` (a
step adds two large changes, which are trimmed; heavy tails are what the estimate is for, so
only the largest 2% are left out): the mean of the smallest 98% of ``(z_t - z_{t-2})^2``,
divided by their expectation under N(0, 2):
``2 x 0.8735`` (the second moment of a standard normal below the 99% point of |X|; from the
share actually kept in short windows, ``trimmed_second_moment``). It is
pooled over the groups of the comparison and raised for its own uncertainty (``_dispersion``:
a CUSUM tuned to a long run length feels an underestimated scale exponentially; Hawkins &
Olwell 1998 discuss the CUSUM's sensitivity to a misjudged scale), and kept within [1, 9].

Skewness: the contrasts' skewness, pooled over the comparison
(``skewness.contrast_skewness``), lets ``cusum.thresholds`` raise the threshold of the side the tail points to.

Replicates: ``n`` counts values, and a day's mean of lots measured several times varies more
than ``var / n`` says (the lot-to-lot part is shared by a lot's values); ``phi``, measured on
the contrasts themselves, carries that (up to 9 times the variance).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from lotwatch.stats.detect.settings import DetectorSettings
from lotwatch.stats.detect.skewness import contrast_skewness, neighbour_correlation, spread_llr
from scipy import special

MIN_DF = 10  # trailing degrees of freedom a group and its rest need before they are watched
MIN_CONTRAST_DAYS = 15  # days with a contrast the dispersion needs before a group is watched
SHEPPARD = 1.0 / 12.0
PHI_FLOOR = 1.0  # the normal theory's dispersion is the least believed


def _trailing(x: np.ndarray, length: int) -> np.ndarray:
    """Sum of x over the ``length`` days before each day (excluding the day itself)."""
    cs = np.zeros((x.shape[0], x.shape[1] + 1))
    np.cumsum(x, axis=1, out=cs[:, 1:])
    t = np.arange(x.shape[1])
    return cs[:, t] - cs[:, np.maximum(t - length, 0)]


def trigamma(x: np.ndarray) -> np.ndarray:
    """psi'(x) for x > 0: the recurrence psi'(x) = psi'(x + 1) + 1/x^2 up to x >= 6, then the
    asymptotic series 1/x + 1/(2x^2) + 1/(6x^3) - 1/(30x^5) + 1/(42x^7) - 1/(30x^9)
    (Abramowitz & Stegun 6.4.12; error below 1e-10 there). Much quicker than
    ``scipy.special.polygamma`` on small arrays, which matters for one lot's update."""
    x = np.asarray(x, dtype=np.float64).copy()
    acc = np.zeros_like(x)
    for _ in range(6):
        low = x < 6.0
        if not low.any():
            break
        acc += np.where(low, 1.0 / (x * x), 0.0)
        x = np.where(low, x + 1.0, x)
    inv = 1.0 / x
    i2 = inv * inv
    series = inv + i2 / 2 + inv * i2 * (1 / 6 - i2 * (1 / 30 - i2 * (1 / 42 - i2 / 30)))
    return acc + series


def _trailing_median(x: np.ndarray, days: int, first: int) -> tuple[np.ndarray, np.ndarray]:
    """Median and count of the finite values of x over the ``days`` days before each day t >=
    first (excluding t); NaN and 0 before ``first``."""
    S, T = x.shape
    med = np.full((S, T), np.nan)
    count = np.zeros((S, T))
    if first >= T:
        return med, count
    padded = np.full((S, T + days), np.nan)
    padded[:, days:] = x
    # the window for day t covers days t-days .. t-1: padded positions t .. t+days-1
    win = np.lib.stride_tricks.sliding_window_view(padded[:, first:T + days - 1], days, axis=1)
    count[:, first:] = np.sum(np.isfinite(win), axis=2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        med[:, first:] = np.nanmedian(win, axis=2)
    return med, count


def _successive(x: np.ndarray, valid: np.ndarray, f, lag: int = 1) -> np.ndarray:
    """``f(earlier, current, i_earlier, i_cur, slot)`` of each slot's valid days ``lag`` valid
    days apart, placed on the later day (NaN elsewhere)."""
    out = np.full(x.shape, np.nan)
    for s in range(x.shape[0]):
        idx = np.flatnonzero(valid[s])
        if idx.size > lag:
            out[s, idx[lag:]] = f(x[s, idx[:-lag]], x[s, idx[lag:]], idx[:-lag], idx[lag:], s)
    return out


TRIM = 0.02  # share of the largest changes left out of the dispersion estimate (at least
# CHANGE_LAG of them: a step in a group's level makes that many large changes)


def trimmed_second_moment(p: np.ndarray) -> np.ndarray:
    """E[X^2 | |X| <= q] for X ~ N(0, 1) and q the point with P(|X| <= q) = p:
    ``(p - 2 q pdf(q)) / p``, ``q = Phi^-1((1 + p) / 2)`` (0.8735 for p = 0.98)."""
    p = np.clip(np.asarray(p, dtype=np.float64), 1e-9, 1.0)
    q = special.ndtri((1.0 + p) / 2.0)
    with np.errstate(invalid="ignore"):
        pdf = np.where(np.isfinite(q), np.exp(-q * q / 2.0) / np.sqrt(2.0 * np.pi), 0.0)
        return np.where(np.isfinite(q), (p - 2.0 * q * pdf) / p, 1.0)


PHI_MAX = 9.0  # largest extra dispersion believed (beyond it the data are not a CUSUM's to judge)
CHANGE_LAG = 2  # changes over two days with data: z_t - z_{t-2} has variance 2 var(z) (1 - rho_2),
# blind only to the (much smaller) correlation two days apart, where the change from one day to
# the next would lose the correlation between neighbouring days (lots correlated in time order
# carry it across midnight) and so underestimate the scatter
CHANGE_CORR = 1.5  # variance inflation of a mean of squared consecutive differences (lag-1
# correlation of the squares of two changes sharing a day is 1/4 for iid normal z: 1 + 2 x 1/4)


def _trimmed_changes(z: np.ndarray, valid: np.ndarray, days: int, first: int
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Per slot and day t >= first, over the trailing ``days`` days: the sum of the kept
    squared changes CHANGE_LAG days with data apart (the largest TRIM share, at least CHANGE_LAG,
    left out), what that sum would be for phi = 1, the number kept, and whether enough were
    seen."""
    diffs = _successive(z, valid, lambda a, b, *_: (b - a) ** 2, lag=CHANGE_LAG)
    S, T = z.shape
    padded = np.full((S, T + days), np.nan)
    padded[:, days:] = diffs
    win = np.lib.stride_tricks.sliding_window_view(padded[:, first:T + days - 1], days, axis=1)
    ordered = np.sort(win, axis=2)  # NaN last
    count = np.sum(np.isfinite(win), axis=2)
    keep = np.maximum(np.minimum(np.floor((1.0 - TRIM) * count), count - CHANGE_LAG), 0.0)
    used = np.arange(days)[None, None, :] < keep[:, :, None]
    num = np.where(used, ordered, 0.0).sum(axis=2)
    # what the kept changes' mean square would be for phi = 1: 2 E[X^2 | X below the cut]
    expect = 2.0 * keep * trimmed_second_moment(keep / np.maximum(count, 1.0))
    return num, expect, keep, count >= MIN_CONTRAST_DAYS - CHANGE_LAG


def _dispersion(z: np.ndarray, valid: np.ndarray, days: int, first: int, comp: np.ndarray,
                log_arl: np.ndarray, floor: float, rho: np.ndarray) -> np.ndarray:
    """phi for each slot and day t >= first (see the module docstring); NaN (not watched yet)
    with fewer than MIN_CONTRAST_DAYS days of the slot's own.

    The trimmed mean square change is pooled over the slots of the comparison (so its noise,
    which a CUSUM tuned to a long run length feels exponentially, is that of all its groups'
    days), and a slot whose own estimate is clearly larger keeps its own (lower bound at two
    standard errors). The pooled estimate is then raised for its remaining uncertainty: if
    ``phi_hat = phi (1 + e)`` with ``var(e) = cv^2``, a false alarm, whose probability goes as
    ``exp(-L phi / phi_hat)`` for a chart of in-control run length ``e^L``, becomes on average
    ``exp(L^2 cv^2 / 2)`` times likelier; scaling phi by ``1 + L cv^2 / 2`` restores it
    (first order). ``cv^2 = 2 x 1.5 / kept changes`` (chi-square with 1 df per change, the
    overlap of consecutive changes counted). Last, it is divided by ``(1 - rho)^2`` for the
    correlation ``rho`` of neighbouring days (``neighbour_correlation``): for an AR(1) the
    long-run variance is ``var (1 + rho) / (1 - rho)`` and changes two days apart measure
    ``var (1 - rho^2)``. The result is kept within [floor, PHI_MAX]."""
    S, T = z.shape
    phi = np.ones((S, T))
    if first >= T:
        return phi
    num, expect, keep, ok = _trimmed_changes(z, valid, days, first)
    C = int(comp.max()) + 1
    pooled_num = np.zeros((C, num.shape[1]))
    pooled_expect = np.zeros((C, num.shape[1]))
    pooled_keep = np.zeros((C, num.shape[1]))
    np.add.at(pooled_num, comp, np.where(ok, num, 0.0))
    np.add.at(pooled_expect, comp, np.where(ok, expect, 0.0))
    np.add.at(pooled_keep, comp, np.where(ok, keep, 0.0))
    members = np.bincount(comp, minlength=C).astype(np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        own = num / expect
        own_low = own * (1.0 - 2.0 * np.sqrt(2.0 * CHANGE_CORR / keep))
        pool = (pooled_num / pooled_expect)[comp]
        # K group-vs-rest contrasts carry about K - 1 independent pieces (two are one, mirrored)
        eff = (pooled_keep * np.maximum(members - 1.0, 1.0)[:, None] / members[:, None])[comp]
        cv2 = 2.0 * CHANGE_CORR / eff
        pool = pool * (1.0 + log_arl[:, first:] * cv2 / 2.0)
        # neighbouring days correlated (``neighbour_correlation``): the long-run variance a
        # CUSUM feels is 1 / (1 - rho)^2 times what changes two days apart measure (AR(1))
        est = np.fmax(pool, own_low) / (1.0 - rho[:, first:]) ** 2
    phi[:, first:] = np.where(ok, np.clip(np.nan_to_num(est, nan=1.0), floor, PHI_MAX), np.nan)
    return phi


def _sparse_variance(n: np.ndarray, s1: np.ndarray, days: int) -> np.ndarray:
    """A group's within-day variance when it has too few lots a day to measure it: from the
    changes of its day means between consecutive days with data,
    ``median(d^2 / (1/n_prev + 1/n_cur)) / 0.4549`` over the trailing days (0.4549 is the median
    of chi-square with 1 df; the median keeps a step change from inflating it; day-to-day
    movement of the whole plant inflates it, which errs toward silence). NaN with fewer than 8
    changes."""
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = s1 / np.where(n > 0, n, 1.0)
    q = _successive(mean, n > 0, lambda a, b, i, j, s: (b - a) ** 2
                    / (1.0 / n[s, i] + 1.0 / n[s, j]))
    med, count = _trailing_median(q, days, 0)
    return np.where(count >= 8, med / 0.454936423119572, np.nan)


@dataclass
class Contrasts:
    """Per slot and day: the mean and spread contrasts, their variances and the design.

    Arrays have shape (slots, days). ``mean_ok``/``spread_ok`` mark days that count.
    """

    c: np.ndarray  # mean contrast (d units)
    v: np.ndarray  # its variance times phi_m (d units^2)
    mean_ok: np.ndarray
    delta: np.ndarray  # mean design shift / gate (d units)
    u: np.ndarray  # log variance ratio, bias-corrected
    var_u: np.ndarray  # its variance times phi_s
    spread_ok: np.ndarray
    phi_m: np.ndarray
    phi_s: np.ndarray
    a_typ_m: np.ndarray  # typical day's design shift in standard errors (threshold input)
    a_typ_s: np.ndarray
    days_per_year: np.ndarray  # the group's reporting days per year (trailing)
    groups: np.ndarray  # watched levels in the slot's comparison (trailing)
    ref_sd: np.ndarray  # the rest's trailing within-day SD (d units)
    llr_s: np.ndarray | None = None  # the day's spread log-likelihood ratio (``spread_llr``)
    skew_m: tuple[np.ndarray, np.ndarray] | None = None  # (upper, lower) skewness allowed for
    skew_s: tuple[np.ndarray, np.ndarray] | None = None  # (``contrast_skewness``), mean and spread
    comp: np.ndarray | None = None  # (slots,) comparison of each slot
    n: np.ndarray | None = None  # the day's values of the group, their sum (d units),
    s1: np.ndarray | None = None  # and the trailing variances of the group and of its rest:
    var_g: np.ndarray | None = None  # what the detector needs to set an alarmed group apart
    var_r: np.ndarray | None = None  # from the rests of the others (``cusum.run``)


def contrasts(n: np.ndarray, s1: np.ndarray, s2: np.ndarray, comp: np.ndarray,
              gate_d: np.ndarray, skip: np.ndarray, settings: DetectorSettings,
              first: int) -> Contrasts:
    """Compute the contrasts for every slot and day (the dispersion from day ``first -
    clear_days`` on, the days the detector or its clearing rule will read).

    ``comp`` (slots,) is each slot's comparison (factor) index; ``gate_d`` (comparisons,) the
    minimum mean shift in d units (NaN: ``no_limits_sigmas`` pooled SDs); ``skip``
    (comparisons,) turns the mean detector of a comparison off.
    """
    n = np.asarray(n, dtype=np.float64)
    s1 = np.asarray(s1, dtype=np.float64)
    s2 = np.asarray(s2, dtype=np.float64)
    S, T = n.shape
    C = int(comp.max()) + 1 if S else 0
    L = settings.trailing_days
    with np.errstate(divide="ignore", invalid="ignore"):
        ss = np.where(n > 0, np.maximum(s2 - s1 * s1 / np.where(n > 0, n, 1.0), 0.0), 0.0)
        df = np.maximum(n - 1.0, 0.0)

        def total(x: np.ndarray) -> np.ndarray:
            out = np.zeros((C, T))
            np.add.at(out, comp, x)
            return out[comp]

        rn, rs1 = total(n) - n, total(s1) - s1
        rss, rdf = total(ss) - ss, total(df) - df
        has = (n > 0).astype(np.float64)
        t_days = _trailing(has, L)
        t_n, t_rn = _trailing(n, L), _trailing(rn, L)
        t_rdays = _trailing((rn > 0).astype(np.float64), L)
        t_ss, t_df = _trailing(ss, L), _trailing(df, L)
        t_rss, t_rdf = _trailing(rss, L), _trailing(rdf, L)
        # sparse groups (too few lots a day for a within-day spread), and sparse rests: the
        # median of their comparison's day-to-day estimates
        sparse = np.full((S, T), np.nan)
        comp_sparse = np.full((C, T), np.nan)
        if ((t_df < MIN_DF) | (t_rdf < MIN_DF))[:, max(first - 1, 0):].any():
            sparse = _sparse_variance(n, s1, L)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                for c_ in range(C):
                    comp_sparse[c_] = np.nanmedian(sparse[comp == c_], axis=0)
        var_g = np.where(t_df >= MIN_DF, t_ss / t_df, comp_sparse[comp])
        var_r = np.where(t_rdf >= MIN_DF, t_rss / t_rdf, comp_sparse[comp])
        warm = ((t_days >= settings.warmup_days) & np.isfinite(var_g) & np.isfinite(var_r)
                & (var_g > 0) & (var_r > 0))
        watched = np.zeros((C, T))
        np.add.at(watched, comp, warm.astype(np.float64))
        groups = np.maximum(watched[comp], 2.0)

        # mean
        mean_ok = warm & (n > 0) & (rn > 0) & ~skip[comp][:, None]
        c = np.where(mean_ok, s1 / np.where(n > 0, n, 1.0) - rs1 / np.where(rn > 0, rn, 1.0), 0.0)
        v0 = np.where(mean_ok, var_g / np.where(n > 0, n, 1.0) + var_r / np.where(rn > 0, rn, 1.0),
                      1.0)
        pooled_sd = np.where(t_df + t_rdf >= MIN_DF, np.sqrt((t_ss + t_rss) / (t_df + t_rdf)),
                             np.sqrt(var_r))
        gate = gate_d[comp][:, None]
        delta = np.where(np.isnan(gate), settings.no_limits_sigmas * pooled_sd, gate)
        z = c / np.sqrt(v0)
        start_phi = max(first - settings.clear_days, 0)
        # reporting days per year over the trailing days the group has existed
        first_seen = np.where((n > 0).any(axis=1), np.argmax(n > 0, axis=1), T)
        span = np.clip(np.arange(T)[None, :] - first_seen[:, None], 1, L)
        days_per_year = 365.0 * t_days / span
        # ln of a one-sided detector's in-control run length (as ``cusum.thresholds``)
        log_arl = np.log(np.maximum(settings.run_length(groups, days_per_year), 1.0))

        def shape(zz: np.ndarray, ok: np.ndarray):
            """(skewness, phi, ok where phi is known) of one kind's standardised contrasts.
            The skewness is taken on the days with a contrast, whatever the dispersion: the
            same in a catch-up and day by day, as the history read before the first day
            covers its window."""
            sk = contrast_skewness(zz, ok, settings.dispersion_days, settings.clear_days, comp)
            rho = neighbour_correlation(zz, ok, settings.dispersion_days, settings.clear_days,
                                        comp)
            phi = _dispersion(zz, ok, settings.dispersion_days, start_phi, comp, log_arl,
                              PHI_FLOOR, rho)
            return sk, np.nan_to_num(phi, nan=1.0), ok & np.isfinite(phi)

        skew_m, phi_m, mean_ok = shape(z, mean_ok)

        # spread
        spread_ok = warm & (n >= 2) & (rdf >= 2)
        nu_g = np.where(spread_ok, df, 2.0)
        nu_r = np.where(spread_ok, rdf, 2.0)
        vg = np.where(spread_ok, ss / nu_g, 1.0) + SHEPPARD
        vr = np.where(spread_ok, rss / nu_r, 1.0) + SHEPPARD
        bias = (special.digamma(nu_g / 2) - np.log(nu_g / 2)
                - special.digamma(nu_r / 2) + np.log(nu_r / 2))
        u = np.where(spread_ok, np.log(vg) - np.log(vr) - bias, 0.0)
        var_u0 = trigamma(nu_g / 2) + trigamma(nu_r / 2)
        zs = u / np.sqrt(var_u0)
        skew_s, phi_s, spread_ok = shape(zs, spread_ok)
        llr_s = spread_llr(vg / vr, nu_g / phi_s, nu_r / phi_s, settings.spread_ratio ** 2)
        llr_s = np.where(spread_ok, llr_s, 0.0)

        # a typical day (the group's actual lot rate over the trailing days)
        nbar_g = t_n / t_days
        nbar_r = t_rn / t_rdays
        a_typ_m = delta / np.sqrt(phi_m * (var_g / nbar_g + var_r / nbar_r))
        nubar_g = np.maximum(nbar_g - 1.0, 1.0)
        nubar_r = np.maximum(t_rdf / t_rdays, 2.0)
        var_u_typ = trigamma(nubar_g / 2) + trigamma(nubar_r / 2)
        a_typ_s = 2.0 * np.log(settings.spread_ratio) / np.sqrt(phi_s * var_u_typ)
    return Contrasts(c=c, v=v0 * phi_m, mean_ok=mean_ok, delta=delta, u=u,
                     var_u=var_u0 * phi_s, spread_ok=spread_ok, phi_m=phi_m, phi_s=phi_s,
                     a_typ_m=a_typ_m, a_typ_s=a_typ_s, days_per_year=days_per_year,
                     groups=groups, ref_sd=np.sqrt(var_r), llr_s=llr_s, skew_m=skew_m,
                     skew_s=skew_s,
                     comp=comp, n=n, s1=s1,
                     var_g=var_g, var_r=var_r)
