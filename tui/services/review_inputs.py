"""What a review reads: its settings, its day, the comparisons of the store and their window
statistics from the bucket sums (headless; shared by the review, the trend and the detail)."""

from __future__ import annotations

import math
from datetime import UTC, date, datetime, timedelta
from typing import Any

from lotwatch.stats import monitor as mon
from lotwatch.stats import weeks
from lotwatch.stats.monitor import ReviewSettings


def _f(x: Any) -> float | None:
    if x is None:
        return None
    v = float(x)
    return v if math.isfinite(v) else None


def review_settings(store, *, fdr_method: str | None = None, fdr_level: float | None = None,
                    window: str | None = None) -> ReviewSettings:
    """The store's review settings (read in one query), with per-run overrides; ``ValueError``
    names a bad setting."""
    s = ReviewSettings.from_lookup(store.settings().get)
    changes: dict[str, Any] = {}
    if window is not None:
        changes["window"] = window
    if fdr_method is not None:
        changes["fdr_method"] = fdr_method.lower()
    if fdr_level is not None:
        changes["fdr_level"] = float(fdr_level)
    if changes:
        s = ReviewSettings(**{**s.__dict__, **changes}).validated()
    return s


def plant_today(zone: str | None) -> date:
    """Today's date in the plant zone (UTC when the store does not say)."""
    from zoneinfo import ZoneInfo

    return datetime.now(UTC).astimezone(ZoneInfo(zone or "UTC")).date()


def resolve_as_of(*, as_of: date | None = None, week: str | None = None,
                  zone: str | None = None) -> date:
    """The review day: the Sunday of ``week``, else ``as_of``, else today (plant time).

    A week that has not begun or a day after today is refused (``ValueError``): a review of the
    future would describe data that does not exist. The current week is allowed."""
    if week is not None and as_of is not None:
        raise ValueError("give either a week or an as-of date, not both")
    today = plant_today(zone)
    if week is not None:
        monday, sunday = weeks.parse_iso_week(week)
        if monday > today:
            raise ValueError(f"week {week.strip().upper()} has not begun (today is "
                             f"{today.isoformat()}, plant time); review a week up to this one")
        return sunday
    if as_of is not None:
        if as_of > today:
            raise ValueError(f"{as_of.isoformat()} is in the future (today is "
                             f"{today.isoformat()}, plant time)")
        return as_of
    return today


def comparisons_of(store, characteristic: str | None = None,
                   factor: str | None = None) -> tuple[list[mon.Comparison], dict[str, Any]]:
    """Every characteristic × factor of the store (or the one asked for), and the characteristics
    by name. Retired characteristics and factors are left out unless asked for by name."""
    chars = {c.name: c for c in store.characteristics() if c.retired_at is None}
    if characteristic is not None:
        chars = {characteristic: store.characteristic(characteristic)}
    all_factors = store.factors()
    factors = [f.name for f in all_factors if f.retired_at is None]
    if factor is not None:
        if factor not in {f.name for f in all_factors}:
            from lotwatch.store import NotFound

            raise NotFound(f"no grouping factor named {factor!r}; factors: {', '.join(factors)}")
        factors = [factor]
    comps = [mon.Comparison(c.name, f, int(c.origin_units), float(c.resolution_value),
                            lsl=c.lsl, usl=c.usl, min_shift=c.min_shift)
             for c in chars.values() for f in factors]
    return comps, chars


def compute_windows(store, comps: list[mon.Comparison], windows: list[mon.Window],
                    settings: ReviewSettings, *,
                    characteristic: str | None = None,
                    factor: str | None = None) -> mon.WindowStats:
    """Window statistics for the comparisons over the windows, from the store's day sums (read
    once, straight into numpy arrays: ``store.day_sums``)."""
    first, last = mon.window_span(windows, settings)
    sums = store.day_sums(characteristic=characteristic, factor=factor, since=first, until=last)
    if first is None:  # all history (last-N windows): from the first stored day
        first = date(1970, 1, 1) + timedelta(days=int(sums.day.min())) if sums.rows else last
        first = min(first, last)
    cube = mon.day_runs_cube(sums, comps, first_day=first, last_day=last)
    window = mon.window_sums(cube, windows, settings)
    return mon.window_statistics(window, min_n=settings.min_n, alpha=settings.alpha)
