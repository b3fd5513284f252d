"""Review windows and the group sums inside them, from the store's per-day bucket sums.

A *window* is a span of days (or the last N lots of each group) ending on a given day; window sums
are differences of day-wise cumulative sums, so a window costs O(1) per group whatever its length
(see ``stats.monitor`` for the statistics computed from them). Pure numpy and polars.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import date, timedelta
from typing import TYPE_CHECKING, Protocol

import numpy as np
from lotwatch.stats.review_settings import ReviewSettings
from lotwatch.stats.weeks import iso_week_label

if TYPE_CHECKING:
    import polars as pl


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
    lots: np.ndarray | None = None  # distinct lots per group (None: count values, n)


@dataclass
class BucketCube:
    """Day-wise cumulative sums of a bucket frame: cum[c, g, t] = sum over days < day0 + t."""

    comparisons: list[Comparison]
    levels: list[list[str]]
    day0: date
    cum_n: np.ndarray
    cum_s1: np.ndarray
    cum_s2: np.ndarray
    cum_lots: np.ndarray | None = None  # lots per day, cumulated (None: the frame had no lots)


class DayRuns(Protocol):
    """Day sums in runs of one (characteristic, factor, level): ``keys[r]`` owns ``lengths[r]``
    consecutive rows; ``day`` counts days since 1970-01-01; ``lots`` may be None (count values).
    The store's ``day_sums`` read has this shape."""

    @property
    def keys(self) -> Sequence[tuple[str, str, str]]: ...
    @property
    def lengths(self) -> np.ndarray: ...
    @property
    def day(self) -> np.ndarray: ...
    @property
    def n(self) -> np.ndarray: ...
    @property
    def sum_d(self) -> np.ndarray: ...
    @property
    def sum_d2(self) -> np.ndarray: ...
    @property
    def lots(self) -> np.ndarray | None: ...


@dataclass(frozen=True)
class _Runs:
    keys: Sequence[tuple[str, str, str]]
    lengths: np.ndarray
    day: np.ndarray
    n: np.ndarray
    sum_d: np.ndarray
    sum_d2: np.ndarray
    lots: np.ndarray | None


def bucket_cube(buckets: pl.DataFrame, comparisons: Sequence[Comparison], *, first_day: date,
                last_day: date) -> BucketCube:
    """Lay a bucket frame (characteristic, factor, level, day, n, sum_d, sum_d2[, lots]) out as
    dense day-wise cumulative sums for the given comparisons over [first_day, last_day] (see
    ``day_runs_cube``). Runs of equal (characteristic, factor, level) are found with one
    ``rle_id``: one run per key when the frame is sorted (as the store returns it); correct,
    only slower, when it is not."""
    import polars as pl

    keys = ["characteristic", "factor", "level"]
    b = buckets
    run = b.select(pl.struct(keys).rle_id().alias("r"))["r"].to_numpy() if b.height else \
        np.zeros(0, dtype=np.int64)
    starts = np.flatnonzero(np.r_[True, run[1:] != run[:-1]]) if b.height else \
        np.zeros(0, dtype=np.int64)
    heads = b[starts, keys]
    lengths = np.diff(np.r_[starts, b.height]).astype(np.int64)
    day = b["day"].cast(pl.Int32).to_numpy().astype(np.int64)
    col = {name: b[name].to_numpy() for name in ("n", "sum_d", "sum_d2")}
    lots = b["lots"].to_numpy() if "lots" in b.columns else None
    runs = _Runs([(str(c), str(f), str(lv)) for c, f, lv in heads.iter_rows()], lengths, day,
                 col["n"], col["sum_d"], col["sum_d2"], lots)
    return day_runs_cube(runs, comparisons, first_day=first_day, last_day=last_day)


def day_runs_cube(runs: DayRuns, comparisons: Sequence[Comparison], *, first_day: date,
                  last_day: date) -> BucketCube:
    """Dense day-wise cumulative sums of the day sums ``runs`` for the given comparisons over
    [first_day, last_day]: cum[c, g, t] = sum over days < first_day + t of group g.

    The rows hold at most one day sum per characteristic, factor, level and day (the store's
    primary key). Rows of other comparisons or outside the day range are ignored. Keys are
    resolved once per run, so no string work is done per row.
    """
    comps = list(comparisons)
    index = {(c.characteristic, c.factor): i for i, c in enumerate(comps)}
    ndays = (last_day - first_day).days + 1
    level_sets: list[set[str]] = [set() for _ in comps]
    run_key = []
    for ch, fa, lv in runs.keys:
        c = index.get((ch, fa), -1)
        if c >= 0:
            level_sets[c].add(lv)
        run_key.append((c, lv))
    levels = [sorted(x) for x in level_sets]
    lv_index = [{lv: g for g, lv in enumerate(x)} for x in levels]
    kmax = max([len(x) for x in levels] + [1])
    shape = (len(comps), kmax, ndays + 1)
    run_c = np.array([c for c, _ in run_key], dtype=np.int64)
    run_g = np.array([lv_index[c][lv] if c >= 0 else -1 for c, lv in run_key], dtype=np.int64)
    # flat index of each row into the (C, K, ndays + 1) cube: one repeat per run, then the day
    base = np.where(run_c >= 0, (run_c * kmax + run_g) * (ndays + 1), -1)
    t = runs.day - (_epoch_day(first_day) - 1)
    flat = np.repeat(base, runs.lengths) + t
    inside = np.repeat(run_c >= 0, runs.lengths) & (t >= 1) & (t <= ndays)
    keep = None if inside.all() else np.flatnonzero(inside)

    def kept(x: np.ndarray) -> np.ndarray:
        return x if keep is None else x[keep]

    flat, s2 = kept(flat), kept(runs.sum_d2)
    cum_n = np.zeros(shape, dtype=np.int64)
    # Each day sum fits SQLite's 64-bit integers, but a running total over many days need not,
    # and int64 would wrap around without a word: such sums are added in float64 instead
    # (relative error about 1e-16 per sum, no wrap-around). The test is on a float64 total,
    # whose rounding is far below the margin of 2^62 under 2^63.
    wide = s2.size > 0 and float(s2.sum(dtype=np.float64)) > _INT64_MAX // 2
    sums_type = np.float64 if wide else np.int64
    cum_s1 = np.zeros(shape, dtype=sums_type)
    cum_s2 = np.zeros(shape, dtype=sums_type)
    # a lot's values of one characteristic share one day, so lots add up over days exactly
    cum_lots = np.zeros(shape, dtype=np.int64) if runs.lots is not None else None
    # one day sum per (comparison, level, day), as the store's primary key guarantees: plain
    # assignment, no accumulation needed
    for cube, col in ((cum_n, runs.n), (cum_s1, runs.sum_d), (cum_s2, s2),
                      (cum_lots, runs.lots)):
        if cube is not None and col is not None and flat.size:
            cube.reshape(-1)[flat] = kept(col) if col is not s2 else s2
            np.cumsum(cube, axis=2, out=cube)
    return BucketCube(comps, levels, first_day, cum_n, cum_s1, cum_s2, cum_lots)


_INT64_MAX = 2**63 - 1


def _epoch_day(d: date) -> int:
    return (d - date(1970, 1, 1)).days


def window_sums(cube: BucketCube, windows: Sequence[Window], settings: ReviewSettings) -> GroupSums:
    """Sum each group's buckets over each window (trailing/week: the window's days; last_n: the
    fewest most-recent whole days holding at least ``last_n`` lots of that group). Lots are
    counted as lots (distinct lots per day) when the cube has them, else as values."""
    cl = cube.cum_lots if cube.cum_lots is not None else cube.cum_n
    ndays = cube.cum_n.shape[2] - 1
    C, K = cube.cum_n.shape[:2]
    # exclusive end index into the cumulative sums, clipped to the cube (0: window before data)
    ends = np.clip(np.array([(w.end - cube.day0).days + 1 for w in windows]), 0, ndays)
    if settings.window != "last_n":
        starts = np.array([max((w.start - cube.day0).days, 0) for w in windows])  # type: ignore[operator]
        starts = np.minimum(starts, ends)
        n = cube.cum_n[:, :, ends] - cube.cum_n[:, :, starts]
        s1 = cube.cum_s1[:, :, ends] - cube.cum_s1[:, :, starts]
        s2 = cube.cum_s2[:, :, ends] - cube.cum_s2[:, :, starts]
        lots = np.moveaxis(cl[:, :, ends] - cl[:, :, starts], 2, 0)
        return GroupSums(list(windows), cube.comparisons, cube.levels, np.moveaxis(n, 2, 0),
                         np.moveaxis(s1, 2, 0), np.moveaxis(s2, 2, 0), lots=lots)
    start_idx = _last_n_starts(cl, ends, settings.last_n)
    ci = np.arange(C)[None, :, None]
    gi = np.arange(K)[None, None, :]
    ei = ends[:, None, None]
    n = cube.cum_n[ci, gi, ei] - cube.cum_n[ci, gi, start_idx]
    s1 = cube.cum_s1[ci, gi, ei] - cube.cum_s1[ci, gi, start_idx]
    s2 = cube.cum_s2[ci, gi, ei] - cube.cum_s2[ci, gi, start_idx]
    # each group's first day as datetime.date (None where the group has no data): numpy's
    # day-unit datetimes convert to dates in C, not in a W x C x K Python loop
    firsts = (np.datetime64(cube.day0, "D") + start_idx).astype(object)
    firsts[n == 0] = None
    first = firsts.tolist()
    lots = cl[ci, gi, ei] - cl[ci, gi, start_idx]
    return GroupSums(list(windows), cube.comparisons, cube.levels, n, s1, s2, first, lots)


def _last_n_starts(cl: np.ndarray, ends: np.ndarray, last_n: int) -> np.ndarray:
    """(W, C, K) index into the cumulative lots ``cl`` (C, K, days + 1) where each group's last
    ``last_n`` lots up to each end begin (see ``_last_n_starts_each``), with one
    ``searchsorted`` for all groups: every group's row is shifted by its own multiple of a span
    larger than any row's values, so the rows laid end to end stay sorted and no target reaches
    another row's values."""
    C, K, D = cl.shape
    rows = C * K
    span = int(cl[:, :, -1].max(initial=0)) + last_n + 1  # a row's values lie in [0, span - last_n)
    if rows * span >= 2**62:  # (beyond any real store) one search per group
        return _last_n_starts_each(cl, ends, last_n)
    shift = (np.arange(rows, dtype=np.int64) * span).reshape(C, K, 1)
    laid = (cl + shift).reshape(-1)
    target = cl[:, :, ends] - last_n + shift  # (C, K, W)
    pos = np.searchsorted(laid, target.reshape(-1), side="right").reshape(C, K, len(ends))
    s = pos - np.arange(rows, dtype=np.int64).reshape(C, K, 1) * D - 1
    return np.moveaxis(np.clip(s, 0, None), 2, 0)


def _last_n_starts_each(cl: np.ndarray, ends: np.ndarray, last_n: int) -> np.ndarray:
    """The same, one group at a time: the largest t with cl[c, g, t] <= cl[c, g, end] - last_n,
    0 when the group holds fewer than ``last_n`` lots by then."""
    C, K, _ = cl.shape
    out = np.empty((len(ends), C, K), dtype=np.int64)
    for c in range(C):
        for g in range(K):
            s = np.searchsorted(cl[c, g], cl[c, g, ends] - last_n, side="right") - 1
            out[:, c, g] = np.clip(s, 0, None)
    return out
