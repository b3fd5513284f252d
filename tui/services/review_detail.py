"""Trend, the full battery on a window's raw values, and the incrementally kept latest window
(headless; split from the review engine)."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Any

import polars as pl
from lotwatch.stats import monitor as mon
from lotwatch.stats.monitor import ReviewSettings
from lotwatch.tui.services.review_inputs import (
    _f,
    comparisons_of,
    compute_windows,
    resolve_as_of,
    review_settings,
)


@dataclass
class ComparisonDetail:
    """The full battery on the latest window's raw values, and each group's mean per window."""

    characteristic: Any  # store.Characteristic
    factor: str
    window_label: str
    battery: Any  # stats.BatteryResult
    trend: pl.DataFrame  # window_end: date, level: str, n: i64, mean: f64
    grand_mean: float | None
    lsl: float | None
    target: float | None
    usl: float | None
    summary: Any = None  # review_engine.ComparisonSummary
    grand_means: pl.DataFrame | None = None  # window_end, grand_mean


@dataclass
class TrendResult:
    characteristic: Any
    factor: str
    windows: list[mon.Window]
    frame: pl.DataFrame  # window_end, window, level, n, mean
    grand_means: pl.DataFrame  # window_end, window, grand_mean
    lsl: float | None
    target: float | None
    usl: float | None
    stats: mon.WindowStats | None = None


# --------------------------------------------------------------------------------------------
# trend and detail


def trend(store, characteristic: str, factor: str, *, as_of: date | None = None,
          week: str | None = None, windows: int | None = None,
          window: str | None = None) -> TrendResult:
    """Each group's mean per window (oldest first) with the grand mean, from bucket sums.

    ``window`` overrides the kind (trailing | last_n | week), ``windows`` the count.
    """
    settings = review_settings(store, window=window)
    day = resolve_as_of(as_of=as_of, week=week, zone=store.plant_zone)
    plan = mon.window_plan(day, settings, windows or settings.trend_windows)
    comps, chars = comparisons_of(store, characteristic, factor)
    ws = compute_windows(store, comps, plan, settings, characteristic=characteristic,
                         factor=factor)
    rows = []
    for w, win in enumerate(plan):
        for g, lv in enumerate(ws.sums.levels[0]):
            n = int(ws.sums.n[w, 0, g])
            if n > 0:
                rows.append((win.end, win.label, lv, n, float(ws.mean[w, 0, g])))
    frame = pl.DataFrame(rows, schema={"window_end": pl.Date, "window": pl.String,
                                       "level": pl.String, "n": pl.Int64, "mean": pl.Float64},
                         orient="row")
    gm = pl.DataFrame([(win.end, win.label, _f(ws.grand_mean[w, 0])) for w, win in enumerate(plan)],
                      schema={"window_end": pl.Date, "window": pl.String,
                              "grand_mean": pl.Float64}, orient="row")
    ch = chars[characteristic]
    return TrendResult(ch, factor, plan, frame, gm, ch.lsl, ch.target, ch.usl, ws)


def window_values(store, characteristic: str, factor: str, window: mon.Window,
                  settings: ReviewSettings,
                  first_days: dict[str, date | None] | None = None) -> pl.DataFrame:
    """The raw current values of one window (for the full battery).

    For "last_n" windows ``first_days`` gives each level's first day in the window (from
    ``GroupSums.first_day``), so the battery sees exactly the values the bucket sums covered.
    """
    if settings.window == "last_n":
        starts = {lv: d for lv, d in (first_days or {}).items() if d is not None}
        if not starts:
            return store.values_frame(characteristic, factor, until=window.end,
                                      last_n=settings.last_n)
        vals = store.values_frame(characteristic, factor, since=min(starts.values()),
                                  until=window.end)
        begin = pl.DataFrame({"level": list(starts), "first_day": list(starts.values())},
                             schema={"level": pl.String, "first_day": pl.Date})
        return (vals.join(begin, on="level", how="inner")
                .filter(pl.col("measured_at").dt.date() >= pl.col("first_day"))
                .drop("first_day"))
    return store.values_frame(characteristic, factor, since=window.start, until=window.end)


def comparison_detail(store, characteristic: str, factor: str, *, as_of: date | None = None,
                      week: str | None = None, alpha: float = 0.05,
                      summary: Any = None,
                      window: str | None = None,
                      reference: str | None = None) -> ComparisonDetail:
    """The full battery (``stats.run_battery``) on the latest window's raw values, plus the
    trend of each group's mean per window; ``reference`` adds Dunnett's test against it."""
    from lotwatch.stats import run_battery

    settings = review_settings(store, window=window)
    day = resolve_as_of(as_of=as_of, week=week, zone=store.plant_zone)
    tr = trend(store, characteristic, factor, as_of=day, window=window)
    latest = tr.windows[-1]
    ch = tr.characteristic
    firsts = None
    if tr.stats is not None and tr.stats.sums.first_day:
        firsts = dict(zip(tr.stats.sums.levels[0], tr.stats.sums.first_day[-1][0], strict=False))
    values = window_values(store, characteristic, factor, latest, settings, firsts)
    parts = sorted(values.partition_by("level", as_dict=True).items())
    names = [lv[0] if isinstance(lv, tuple) else lv for lv, _ in parts]
    samples, lots = [p["value"].to_numpy() for _, p in parts], [p["lot"].to_list() for _, p in parts]
    comp = mon.Comparison(ch.name, factor, ch.origin_units, ch.resolution_value, lsl=ch.lsl,
                          usl=ch.usl, min_shift=ch.min_shift)
    gate, _ = mon.practical_gate(comp, settings)
    battery = run_battery(samples, names, alpha=alpha, resolution=ch.resolution, lsl=ch.lsl,
                          usl=ch.usl, shift=gate, min_n=settings.min_n, reference=reference,
                          lots=lots)
    gm = tr.grand_means["grand_mean"][-1] if tr.grand_means.height else None
    return ComparisonDetail(ch, factor, latest.label, battery, tr.frame.select(
        "window_end", "level", "n", "mean"), gm, ch.lsl, ch.target, ch.usl, summary,
        tr.grand_means.select("window_end", "grand_mean"))
