"""Rolling-window explanation: window plans, per-window group sums, vectorised one-way statistics
over every window × comparison, family-wise false-discovery control and the practical gate.
(Alerts come from the sequential detectors in ``stats.detect``.)

Pure computation on numpy arrays and polars frames; no SQLite. A *comparison* is one
characteristic × one grouping factor; a *window* is a span of days (or the last N lots of each
group) ending on a given day. The review engine (``tui/review_engine.py``) feeds this module the
store's per-day bucket sums and persists what it decides.

Sufficient statistics. For group i of a window the store keeps, per day, n, Σd and Σd² where
d = units − origin is an integer count of resolution steps from the characteristic's origin. Window
sums are differences of day-wise cumulative sums, so a window costs O(1) per group whatever its
length. From them (NIST/SEMATECH e-Handbook of Statistical Methods §7.4.3.3)::

    mean_i      = (origin + Σd_i / n_i) · resolution
    SS_within   = Σ_i (n_i·Σd²_i − (Σd_i)²) / n_i · resolution²     (numerator exact in integers)
    SS_between  = Σ_i n_i (m_i − m)² · resolution²                   (m_i = Σd_i/n_i, m = ΣΣd/N)
    F = (SS_between/(k−1)) / (SS_within/(N−k)),  p = P(F(k−1, N−k) > F)
    eta² = SS_between/SS_total;  omega² = (SS_between − (k−1)·MS_within)/(SS_total + MS_within)
           (Hays 1963)

Welch's heteroscedastic F (Welch 1951), with w_i = n_i/s_i², W = Σw_i, m_w = Σw_i·mean_i/W::

    A = Σ w_i (mean_i − m_w)² / (k − 1)
    T = Σ (1 − w_i/W)² / (n_i − 1)
    F_W = A / (1 + 2(k − 2)T/(k² − 1)),  df1 = k − 1,  df2 = (k² − 1)/(3T)

Bartlett's test of equal variances from the same sums (Bartlett 1937; NIST/SEMATECH §1.3.5.7),
with s_i² = (n_i·Σd²_i − (Σd_i)²)/(n_i(n_i − 1)) and s_p² = Σ(n_i − 1)s_i²/(N − k)::

    T = [(N − k)·ln s_p² − Σ(n_i − 1)·ln s_i²] / [1 + (Σ 1/(n_i − 1) − 1/(N − k)) / (3(k − 1))]

referred to χ²(k − 1). It routes a comparison to Welch: where Bartlett's p < alpha the review
reads (and feeds to the FDR family) Welch's p instead of the classical one. Bartlett is sensitive
to non-normality; a needless switch to Welch costs little power, which is why the simple sum-based
check is used here (the full battery on raw values adds Brown-Forsythe).

Largest shift: for each usable group, mean_i − mean of all other observations of the window,
= (Σd_i/n_i − (ΣΣd − Σd_i)/(N − n_i))·resolution; the group with the largest absolute value.

Detectable shift (80% power): the smallest shift δ of one average-sized group (n̄ = N/k) away
from the others that the classical F test at level alpha detects with probability 0.8. With
σ² = MS_within the noncentrality of that configuration is λ = δ²·n̄(N − n̄)/(N·σ²) (Cohen 1988
§8.2 for the noncentral-F power of the one-way design), so δ₈₀ = σ·√(λ₈₀·N/(n̄(N − n̄))) with
λ₈₀ solving P(F'(k−1, N−k, λ) > F_crit) = 0.8 (``scipy.special.ncfdtrinc``).

False-discovery control (Benjamini & Hochberg 1995; Benjamini & Yekutieli 2001): the family is
every comparison of one review (one window position) with a defined p. BH is the default. The
windows of one review share lots (a lot enters every characteristic and every factor it is tagged
with), so the tests are dependent; BH is proven under independence or positive regression
dependence, BY under arbitrary dependence at the price of the factor c(m) = Σ_{i≤m} 1/i, which is
why BY is offered.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import date, timedelta
from typing import TYPE_CHECKING

import numpy as np
from lotwatch.stats.weeks import iso_week_label

if TYPE_CHECKING:
    import polars as pl


WINDOW_KINDS = ("trailing", "last_n", "week")
FDR_METHODS = ("bh", "by")
NO_LIMITS_GATES = ("detectable", "skip")

NOT_ENOUGH = "not enough data"
ZERO_VARIANCE = "zero within-group variance"
OK = "ok"


# --------------------------------------------------------------------------------------------
# settings


@dataclass(frozen=True)
class ReviewSettings:
    """How reviews are windowed and when a signal becomes an alert (this tool's defaults).

    * ``window``: "trailing" (the last ``days`` days, evaluated every ``step_days``),
      "last_n" (the last ``last_n`` lots of each group, rounded out to whole days, evaluated every
      ``step_days``) or "week" (ISO calendar weeks, Monday to Sunday).
    * ``min_n``: a group with fewer lots than this in a window is left out of that window.
    * A window *signal* (shown beside the detectors, no longer what opens alerts): q ≤
      ``fdr_level`` and the largest shift ≥ the practical gate.
    * Practical gate: the characteristic's min_shift; else ``tolerance_fraction`` × (USL − LSL)
      when both limits exist (1/8 is this tool's default, not a standard); else
      ``no_limits_gate``: "detectable" (the shift must reach the window's 80%-power detectable
      shift) or "skip" (no alerts for that characteristic).
    """

    window: str = "trailing"
    days: int = 28
    step_days: int = 7
    last_n: int = 30
    min_n: int = 5
    fdr_level: float = 0.05
    fdr_method: str = "bh"
    tolerance_fraction: float = 0.125
    no_limits_gate: str = "detectable"
    trend_windows: int = 12
    alpha: float = 0.05

    KEYS = {  # settings-table key -> field
        "review.window": "window",
        "review.window_days": "days",
        "review.step_days": "step_days",
        "review.last_n": "last_n",
        "review.min_lots": "min_n",
        "review.fdr_level": "fdr_level",
        "review.fdr_method": "fdr_method",
        "review.tolerance_fraction": "tolerance_fraction",
        "review.no_limits_gate": "no_limits_gate",
        "review.trend_windows": "trend_windows",
    }

    @classmethod
    def from_lookup(cls, get: Callable[[str], str | None]) -> ReviewSettings:
        """Read every setting through ``get(key) -> text | None``; unset keys keep defaults.

        Raises ``ValueError`` naming the key and the bad value.
        """
        values: dict[str, object] = {}
        defaults = cls()
        for key, name in cls.KEYS.items():
            text = get(key)
            if text is None or str(text).strip() == "":
                continue
            kind = type(getattr(defaults, name))
            try:
                values[name] = kind(str(text).strip())
            except ValueError:
                raise ValueError(f"setting {key} = {text!r}: expected {kind.__name__}") from None
        return cls(**values).validated()

    def validated(self) -> ReviewSettings:
        """Return self, or raise ``ValueError`` saying which setting is out of range."""
        problems = []
        if self.window not in WINDOW_KINDS:
            problems.append(f"review.window = {self.window!r}: use one of {', '.join(WINDOW_KINDS)}")
        if self.fdr_method not in FDR_METHODS:
            problems.append(f"review.fdr_method = {self.fdr_method!r}: use bh or by")
        if self.no_limits_gate not in NO_LIMITS_GATES:
            problems.append(f"review.no_limits_gate = {self.no_limits_gate!r}: use detectable or skip")
        for name, lo in (("days", 1), ("step_days", 1), ("last_n", 2), ("min_n", 2),
                         ("trend_windows", 1)):
            if getattr(self, name) < lo:
                problems.append(f"{name} = {getattr(self, name)}: must be at least {lo}")
        if not 0 < self.fdr_level < 1:
            problems.append(f"review.fdr_level = {self.fdr_level}: must be between 0 and 1")
        from lotwatch.stats.settings_rules import combination_problems  # bounds, with reasons
        problems += combination_problems(self)
        if problems:
            raise ValueError("; ".join(problems))
        return self


# --------------------------------------------------------------------------------------------
# windows


@dataclass(frozen=True)
class Window:
    """One evaluation window. ``start`` is None for "last_n" windows (start differs per group)."""

    label: str  # full label, e.g. "28 days to 2026-11-29"
    short: str  # at most 11 characters, e.g. "W48/28d"
    start: date | None
    end: date  # inclusive


def _end_tag(end: date) -> str:
    return iso_week_label(end)[5:] if end.isoweekday() == 7 else end.strftime("%m-%d")


def window_plan(as_of: date, settings: ReviewSettings, count: int) -> list[Window]:
    """The ``count`` windows ending at or before ``as_of``, oldest first (the last is the latest).

    trailing: ends as_of, as_of − step, …; each spans ``days`` days up to its end inclusive.
    last_n: same ends; each group's span starts where its last ``last_n`` lots begin.
    week: the ISO week containing as_of (cut at as_of) and the ``count − 1`` weeks before it.
    """
    out: list[Window] = []
    for i in range(count - 1, -1, -1):
        if settings.window == "week":
            monday = as_of - timedelta(days=as_of.isoweekday() - 1) - timedelta(weeks=i)
            end = min(monday + timedelta(days=6), as_of)
            lab = iso_week_label(monday)
            out.append(Window(lab, lab[2:], monday, end))
            continue
        end = as_of - timedelta(days=i * settings.step_days)
        if settings.window == "trailing":
            start = end - timedelta(days=settings.days - 1)
            out.append(Window(f"{settings.days} days to {end.isoformat()}",
                              f"{_end_tag(end)}/{settings.days}d", start, end))
        else:
            out.append(Window(f"last {settings.last_n} lots to {end.isoformat()}",
                              f"{_end_tag(end)}/L{settings.last_n}", None, end))
    return out


def window_span(windows: Sequence[Window], settings: ReviewSettings) -> tuple[date | None, date]:
    """Days of bucket data the windows need: (first day or None for all history, last day)."""
    end = max(w.end for w in windows)
    if settings.window == "last_n":
        return None, end
    return min(w.start for w in windows if w.start is not None), end


# --------------------------------------------------------------------------------------------
# group sums per window


@dataclass(frozen=True)
class Comparison:
    """One characteristic × factor, with what is needed to turn deviation sums into values."""

    characteristic: str
    factor: str
    origin_units: int
    resolution: float
    lsl: float | None = None
    usl: float | None = None
    min_shift: float | None = None


@dataclass
class GroupSums:
    """Per-window, per-comparison, per-group sums: arrays of shape (W, C, K); K = most levels."""

    windows: list[Window]
    comparisons: list[Comparison]
    levels: list[list[str]]  # levels[c] = level names of comparison c (padded groups have n=0)
    n: np.ndarray
    s1: np.ndarray
    s2: np.ndarray
    first_day: list[list[list[date | None]]] = field(default_factory=list)  # last_n only [w][c][g]


@dataclass
class BucketCube:
    """Day-wise cumulative sums of a bucket frame: cum[c, g, t] = sum over days < day0 + t."""

    comparisons: list[Comparison]
    levels: list[list[str]]
    day0: date
    cum_n: np.ndarray
    cum_s1: np.ndarray
    cum_s2: np.ndarray


def bucket_cube(buckets: pl.DataFrame, comparisons: Sequence[Comparison], *, first_day: date,
                last_day: date) -> BucketCube:
    """Lay a bucket frame (characteristic, factor, level, day, n, sum_d, sum_d2) out as dense
    day-wise cumulative sums for the given comparisons over [first_day, last_day].

    The frame holds at most one row per characteristic, factor, level and day (the store's
    primary key). Rows of other comparisons or outside the day range are ignored.
    """
    import polars as pl

    comps = list(comparisons)
    index = {(c.characteristic, c.factor): i for i, c in enumerate(comps)}
    ndays = (last_day - first_day).days + 1
    b = buckets.filter((pl.col("day") >= first_day) & (pl.col("day") <= last_day))
    # Runs of equal (characteristic, factor, level): one run per key when the frame is sorted
    # (as the store returns it); correct, only slower, when it is not. Keys are resolved once
    # per run, so no string work is done per row.
    keys = ["characteristic", "factor", "level"]
    run = b.select(pl.struct(keys).rle_id().alias("r"))["r"].to_numpy() if b.height else \
        np.zeros(0, dtype=np.int64)
    heads = b[np.flatnonzero(np.r_[True, run[1:] != run[:-1]]) if b.height else [], keys]
    level_sets: list[set[str]] = [set() for _ in comps]
    run_key = []
    for ch, fa, lv in heads.iter_rows():
        c = index.get((str(ch), str(fa)), -1)
        if c >= 0:
            level_sets[c].add(str(lv))
        run_key.append((c, str(lv)))
    levels = [sorted(x) for x in level_sets]
    lv_index = [{lv: g for g, lv in enumerate(x)} for x in levels]
    kmax = max([len(x) for x in levels] + [1])
    shape = (len(comps), kmax, ndays + 1)
    cum_n = np.zeros(shape, dtype=np.int64)
    cum_s1 = np.zeros(shape, dtype=np.int64)
    cum_s2 = np.zeros(shape, dtype=np.int64)
    if b.height:
        run_c = np.array([c for c, _ in run_key], dtype=np.int64)
        run_g = np.array([lv_index[c][lv] if c >= 0 else -1 for c, lv in run_key], dtype=np.int64)
        ci, gi = run_c[run], run_g[run]
        keep = ci >= 0
        t = (b["day"].cast(pl.Int32).to_numpy() - _epoch_day(first_day)) + 1
        ci, gi, t = ci[keep], gi[keep], t[keep]
        # one bucket per (comparison, level, day), as the store's primary key guarantees:
        # plain assignment, no accumulation needed
        cum_n[ci, gi, t] = b["n"].to_numpy()[keep]
        cum_s1[ci, gi, t] = b["sum_d"].to_numpy()[keep]
        cum_s2[ci, gi, t] = b["sum_d2"].to_numpy()[keep]
        np.cumsum(cum_n, axis=2, out=cum_n)
        np.cumsum(cum_s1, axis=2, out=cum_s1)
        np.cumsum(cum_s2, axis=2, out=cum_s2)
    return BucketCube(comps, levels, first_day, cum_n, cum_s1, cum_s2)


def _epoch_day(d: date) -> int:
    return (d - date(1970, 1, 1)).days


def window_sums(cube: BucketCube, windows: Sequence[Window], settings: ReviewSettings) -> GroupSums:
    """Sum each group's buckets over each window (trailing/week: the window's days; last_n: the
    fewest most-recent whole days holding at least ``last_n`` lots of that group)."""
    ndays = cube.cum_n.shape[2] - 1
    C, K = cube.cum_n.shape[:2]
    W = len(windows)
    # exclusive end index into the cumulative sums, clipped to the cube (0: window before data)
    ends = np.clip(np.array([(w.end - cube.day0).days + 1 for w in windows]), 0, ndays)
    if settings.window != "last_n":
        starts = np.array([max((w.start - cube.day0).days, 0) for w in windows])  # type: ignore[operator]
        starts = np.minimum(starts, ends)
        n = cube.cum_n[:, :, ends] - cube.cum_n[:, :, starts]
        s1 = cube.cum_s1[:, :, ends] - cube.cum_s1[:, :, starts]
        s2 = cube.cum_s2[:, :, ends] - cube.cum_s2[:, :, starts]
        return GroupSums(list(windows), cube.comparisons, cube.levels,
                         np.moveaxis(n, 2, 0), np.moveaxis(s1, 2, 0), np.moveaxis(s2, 2, 0))
    start_idx = np.zeros((W, C, K), dtype=np.int64)
    for c in range(C):
        for g in range(K):
            cn = cube.cum_n[c, g]
            target = cn[ends] - settings.last_n
            s = np.searchsorted(cn, target, side="right") - 1
            start_idx[:, c, g] = np.clip(s, 0, None)
    ci = np.arange(C)[None, :, None]
    gi = np.arange(K)[None, None, :]
    ei = ends[:, None, None]
    n = cube.cum_n[ci, gi, ei] - cube.cum_n[ci, gi, start_idx]
    s1 = cube.cum_s1[ci, gi, ei] - cube.cum_s1[ci, gi, start_idx]
    s2 = cube.cum_s2[ci, gi, ei] - cube.cum_s2[ci, gi, start_idx]
    first = [[[cube.day0 + timedelta(days=int(start_idx[w, c, g])) if n[w, c, g] else None
               for g in range(K)] for c in range(C)] for w in range(W)]
    return GroupSums(list(windows), cube.comparisons, cube.levels, n, s1, s2, first)


# --------------------------------------------------------------------------------------------
# statistics over all windows x comparisons


@dataclass
class WindowStats:
    """One-way statistics for every window × comparison: arrays of shape (W, C) unless noted.

    Values are in the characteristic's unit (SS in unit²). ``status`` is "ok", "not enough data"
    or "zero within-group variance"; numbers are NaN where undefined. ``usable`` (W, C, K) marks
    groups with n ≥ min_n; ``mean``/``sd`` (W, C, K) are NaN for empty groups.
    """

    sums: GroupSums
    min_n: int
    usable: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    k: np.ndarray
    n_total: np.ndarray
    grand_mean: np.ndarray
    ss_between: np.ndarray
    ss_within: np.ndarray
    df_within: np.ndarray
    ms_within: np.ndarray
    f: np.ndarray
    p: np.ndarray
    welch_f: np.ndarray
    welch_df2: np.ndarray
    welch_p: np.ndarray
    bartlett_p: np.ndarray
    test: np.ndarray  # object array: "F" (classical) or "Welch", the test the review reads
    p_used: np.ndarray  # p of ``test``
    eta_squared: np.ndarray
    omega_squared: np.ndarray
    largest_shift: np.ndarray
    largest_group: np.ndarray  # int index into levels[c]; -1 when undefined
    status: np.ndarray  # object array of str

    def excluded(self, w: int, c: int) -> list[tuple[str, int]]:
        """Groups with 0 < n < min_n in window w of comparison c: (level, n)."""
        out = []
        for g, lv in enumerate(self.sums.levels[c]):
            nn = int(self.sums.n[w, c, g])
            if 0 < nn < self.min_n:
                out.append((lv, nn))
        return out

    def group_name(self, c: int, g: int) -> str | None:
        return self.sums.levels[c][g] if g >= 0 else None


def _within_numerator(n: np.ndarray, s1: np.ndarray, s2: np.ndarray) -> np.ndarray:
    """n·Σd² − (Σd)² per group, exact in int64 when it fits, else through Python integers."""
    big = float(np.max(np.abs(n.astype(np.float64) * s2.astype(np.float64)), initial=0.0))
    big = max(big, float(np.max(s1.astype(np.float64) ** 2, initial=0.0)))
    if big < 2.0 ** 62:
        return (n * s2 - s1 * s1).astype(np.float64)
    no, s1o, s2o = n.astype(object), s1.astype(object), s2.astype(object)
    return (no * s2o - s1o * s1o).astype(np.float64)


def window_statistics(sums: GroupSums, *, min_n: int, alpha: float = 0.05) -> WindowStats:
    """ANOVA, Welch, Bartlett, effect sizes and the largest shift for every window × comparison
    at once; ``alpha`` is the level of the Bartlett check that routes a comparison to Welch."""
    from scipy import special  # imported here: commands that only read settings stay quick

    n_all = sums.n
    usable = n_all >= max(min_n, 1)
    n = np.where(usable, n_all, 0)
    s1 = np.where(usable, sums.s1, 0)
    s2 = np.where(usable, sums.s2, 0)
    res = np.array([c.resolution for c in sums.comparisons], dtype=np.float64)[None, :]
    origin = np.array([c.origin_units for c in sums.comparisons], dtype=np.float64)[None, :]
    res3 = res[:, :, None]
    nf = n.astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = usable.sum(axis=2)
        N = nf.sum(axis=2)
        S = s1.sum(axis=2).astype(np.float64)
        m_i = np.where(usable, s1 / np.where(usable, nf, 1.0), np.nan)  # deviation units
        m = S / N
        num = np.where(usable, _within_numerator(n, s1, s2), 0.0)
        ssw_i = np.where(usable, num / np.where(usable, nf, 1.0), 0.0)
        ssw_u = ssw_i.sum(axis=2)
        ssb_u = np.nansum(np.where(usable, nf * (m_i - m[:, :, None]) ** 2, 0.0), axis=2)
        df_b = (k - 1).astype(np.float64)
        df_w = N - k
        enough = (k >= 2) & (df_w > 0)
        ok = enough & (ssw_u > 0)
        ssb = ssb_u * res ** 2
        ssw = ssw_u * res ** 2
        msw = np.where(df_w > 0, ssw / df_w, np.nan)
        f = np.where(ok, (ssb / np.where(ok, df_b, 1.0)) / msw, np.nan)
        p = np.where(ok, special.fdtrc(np.where(ok, df_b, 1.0), np.where(ok, df_w, 1.0),
                                       np.where(ok, f, 0.0)), np.nan)
        sst = ssb + ssw
        eta = np.where(enough & (sst > 0), ssb / sst, np.nan)
        omega = np.where(ok, (ssb - df_b * msw) / (sst + msw), np.nan)

        # Welch
        var_i = np.where(usable & (nf > 1), num / (nf * (nf - 1)), np.nan) * res3 ** 2
        w_ok = enough & np.all(~usable | (var_i > 0), axis=2)
        wi = np.where(usable & (var_i > 0), nf / var_i, 0.0)
        Wsum = wi.sum(axis=2)
        mw = np.where(usable, wi * np.nan_to_num(m_i * res3), 0.0).sum(axis=2) / Wsum
        A = np.where(usable, wi * (np.nan_to_num(m_i * res3) - mw[:, :, None]) ** 2,
                     0.0).sum(axis=2) / df_b
        T = np.where(usable, (1 - wi / Wsum[:, :, None]) ** 2 / np.where(usable, nf - 1, 1.0),
                     0.0).sum(axis=2)
        kk = k.astype(np.float64)
        wf = np.where(w_ok, A / (1 + 2 * (kk - 2) * T / (kk ** 2 - 1)), np.nan)
        wdf2 = np.where(w_ok, (kk ** 2 - 1) / (3 * T), np.nan)
        wp = np.where(w_ok, special.fdtrc(np.where(w_ok, df_b, 1.0), np.where(w_ok, wdf2, 1.0),
                                          np.where(w_ok, wf, 0.0)), np.nan)

        # Bartlett (scale-free: computed in deviation units)
        v_u = np.where(usable & (nf > 1), num / (nf * (nf - 1)), np.nan)
        sp2 = ssw_u / np.where(df_w > 0, df_w, np.nan)
        logs = np.where(usable, (nf - 1) * np.log(np.where(usable, v_u, 1.0)), 0.0).sum(axis=2)
        corr = 1 + (np.where(usable, 1 / np.where(usable, nf - 1, 1.0), 0.0).sum(axis=2)
                    - 1 / df_w) / (3 * df_b)
        b_stat = (df_w * np.log(sp2) - logs) / corr
        b_ok = w_ok & np.isfinite(b_stat)
        bp = np.where(b_ok, special.chdtrc(np.where(b_ok, df_b, 1.0),
                                           np.where(b_ok, np.maximum(b_stat, 0.0), 0.0)), np.nan)

        # largest shift: group mean minus the mean of all other observations
        rest_n = N[:, :, None] - nf
        other = (S[:, :, None] - s1) / rest_n
        diff = np.where(usable & (rest_n > 0) & enough[:, :, None], m_i - other, np.nan) * res3
        absd = np.where(np.isnan(diff), -1.0, np.abs(diff))
        lg = np.argmax(absd, axis=2)
        shift = np.take_along_axis(diff, lg[:, :, None], axis=2)[:, :, 0]
        lg = np.where(np.isnan(shift), -1, lg)
        sd = np.sqrt(np.where(n_all > 1, _within_numerator(n_all, sums.s1, sums.s2)
                              / (n_all * (n_all - 1.0)), np.nan)) * res3
        mean_all = np.where(n_all > 0, (origin[:, :, None] + sums.s1 / np.where(n_all > 0, n_all, 1))
                            * res3, np.nan)
    welch = np.isfinite(bp) & (bp < alpha) & np.isfinite(wp)
    test = np.where(welch, "Welch", "F").astype(object)
    p_used = np.where(welch, wp, p)
    status = np.where(~enough, NOT_ENOUGH, np.where(ssw_u > 0, OK, ZERO_VARIANCE)).astype(object)
    return WindowStats(
        sums=sums, min_n=min_n, usable=usable, mean=mean_all, sd=sd, k=k, n_total=N.astype(np.int64),
        grand_mean=np.where(N > 0, (origin + m) * res, np.nan), ss_between=np.where(enough, ssb, np.nan),
        ss_within=np.where(enough, ssw, np.nan), df_within=df_w, ms_within=msw, f=f, p=p,
        welch_f=wf, welch_df2=wdf2, welch_p=wp, bartlett_p=bp, test=test, p_used=p_used,
        eta_squared=eta, omega_squared=omega,
        largest_shift=shift, largest_group=lg, status=status)


def detectable_shift(stats: WindowStats, *, alpha: float = 0.05, power: float = 0.8,
                     rows: Sequence[int] | None = None) -> np.ndarray:
    """Smallest shift of one group from the others detected with ``power`` by the F test at
    ``alpha`` (hardest group; see the module docstring), for the given window rows (default all).

    Returns an array (len(rows), C) in the characteristic's unit; NaN where undefined.
    """
    from scipy import special  # imported here: commands that only read settings stay quick

    idx = list(range(stats.k.shape[0])) if rows is None else list(rows)
    k = stats.k[idx].astype(np.float64)
    N = stats.n_total[idx].astype(np.float64)
    msw = stats.ms_within[idx]
    ok = (k >= 2) & (N - k > 0) & np.isfinite(msw) & (msw > 0)
    dfb = np.where(ok, k - 1, 1.0)
    dfw = np.where(ok, N - k, 1.0)
    nn = np.where(stats.usable[idx], stats.sums.n[idx], 0).astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        coef = np.where(nn > 0, nn * (N[:, :, None] - nn) / N[:, :, None], np.inf).min(axis=2)
        fcrit = special.fdtri(dfb, dfw, 1 - alpha)
        lam = special.ncfdtrinc(dfb, dfw, 1 - power, fcrit)
        delta = np.sqrt(msw * lam / coef)
    return np.where(ok, delta, np.nan)


# --------------------------------------------------------------------------------------------
# false discovery rate


def family_fdr(p: np.ndarray, method: str = "bh") -> tuple[np.ndarray, np.ndarray]:
    """Adjust each row of ``p`` (W, C) as its own family; NaN entries are not in the family.

    BH adjusted p (Benjamini & Hochberg 1995): q_(i) = min_{j ≥ i} min(1, m·p_(j)/j);
    BY (Benjamini & Yekutieli 2001) multiplies by c(m) = Σ_{i=1..m} 1/i.
    Returns (q, family_size per row).
    """
    if method not in FDR_METHODS:
        raise ValueError(f"FDR method {method!r}: use bh or by")
    p2 = np.atleast_2d(np.asarray(p, dtype=np.float64))
    q = np.full_like(p2, np.nan)
    sizes = np.zeros(p2.shape[0], dtype=np.int64)
    for r in range(p2.shape[0]):
        valid = np.flatnonzero(np.isfinite(p2[r]))
        mfam = valid.size
        sizes[r] = mfam
        if mfam == 0:
            continue
        pv = p2[r, valid]
        order = np.argsort(pv, kind="mergesort")
        ranks = np.arange(1, mfam + 1, dtype=np.float64)
        scale = mfam * (np.sum(1.0 / ranks) if method == "by" else 1.0)
        adj = np.minimum.accumulate((pv[order] * scale / ranks)[::-1])[::-1]
        out = np.empty(mfam)
        out[order] = np.minimum(adj, 1.0)
        q[r, valid] = out
    return q, sizes


# --------------------------------------------------------------------------------------------
# practical gate and the alert rule


def practical_gate(comp: Comparison, settings: ReviewSettings) -> tuple[float | None, str]:
    """The smallest shift worth an alert for a comparison, and where it came from.

    Returns (gate, source): source "min_shift", "tolerance" (fraction × (USL − LSL)),
    "detectable" (gate None: use each window's detectable shift) or "skip" (no alerts).
    """
    if comp.min_shift is not None and comp.min_shift > 0:
        return float(comp.min_shift), "min_shift"
    if comp.lsl is not None and comp.usl is not None and comp.usl > comp.lsl:
        return settings.tolerance_fraction * (comp.usl - comp.lsl), "tolerance"
    return None, settings.no_limits_gate


def signals(stats: WindowStats, q: np.ndarray, settings: ReviewSettings,
            detectable: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Which window × comparison cells carry a signal: q ≤ fdr_level and |largest shift| ≥ gate.

    ``detectable`` has the same shape as ``q`` (used where the gate source is "detectable").
    Returns (signal bool array, gate array used).
    """
    gates = np.empty(q.shape, dtype=np.float64)
    for c, comp in enumerate(stats.sums.comparisons):
        g, src = practical_gate(comp, settings)
        if src == "skip":
            gates[:, c] = np.inf
        elif g is None:
            gates[:, c] = detectable[:, c]
        else:
            gates[:, c] = g
    with np.errstate(invalid="ignore"):
        sig = (q <= settings.fdr_level) & (np.abs(stats.largest_shift) >= gates)
    return np.where(np.isnan(q) | np.isnan(gates), False, sig), gates


def anom_critical_value(ns: Sequence[int], df: float, alpha: float = 0.05) -> float | None:
    """Two-sided ANOM critical value h (Nelson 1982) for group sizes ``ns`` and ``df`` degrees of
    freedom of s, from ``stats.distributions.qanom`` (cached on the group fractions). None for
    fewer than two groups or no degrees of freedom."""
    from lotwatch.stats.distributions import qanom

    sizes = [int(x) for x in ns if x > 0]
    if len(sizes) < 2 or not df > 0:
        return None
    return float(qanom(1.0 - alpha, np.asarray(sizes, dtype=np.float64), float(df)))


def anom_flags_from_summary(mean: Sequence[float], n: Sequence[int], grand_mean: float,
                            ms_within: float, critical_value: float) -> list[str]:
    """ANOM flags: a group is "above"/"below" when its mean is outside
    grand_mean ± h·s·√((N − n_i)/(N·n_i)) (Nelson 1982, unequal n), else "within"."""
    N = float(sum(n))
    s = math.sqrt(ms_within)
    out = []
    for mi, ni in zip(mean, n, strict=True):
        half = critical_value * s * math.sqrt((N - ni) / (N * ni))
        out.append("above" if mi > grand_mean + half else "below" if mi < grand_mean - half
                   else "within")
    return out
