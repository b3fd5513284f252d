"""Loaders the app runs in thread workers: each opens its own Store and returns view models.

``store``, the review engine, polars and scipy are imported inside the functions so the app's
first screen is painted before those heavy modules load.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import date
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lotwatch.tui.services.board import board_rows, early_rows
from lotwatch.tui.services.storefile import opened
from lotwatch.tui.services.view_models import (
    ACTIVE,
    ALERTING,
    CHECKING,
    NOT_ENOUGH,
    WATCHING,
    AlertEventRow,
    AlertRow,
    AlertsView,
    CharacteristicInfo,
    ComparisonRow,
    DetailRequest,
    DetailView,
    DetectorLine,
    FactorInfo,
    Overview,
    RecentLot,
    ReviewView,
    RunChart,
    SpreadRow,
)

if TYPE_CHECKING:
    from lotwatch.stats.results import BatteryResult
    from lotwatch.store import Store
    from lotwatch.store.alerts import Alert, AlertEvent
    from lotwatch.tui.services.review_engine import ComparisonSummary

def char_info(c: Any) -> CharacteristicInfo:
    return CharacteristicInfo(
        name=c.name, unit=c.unit, resolution=c.resolution, lsl=c.lsl, target=c.target,
        usl=c.usl, min_shift=c.min_shift, plausible_low=c.plausible_low,
        plausible_high=c.plausible_high,
    )


def _alert_row(a: Alert, unit: str = "", resolution: str = "") -> AlertRow:
    return AlertRow(id=a.id, characteristic=a.characteristic, factor=a.factor, state=a.state,
                    opened_at=a.opened_at, opened_window=a.opened_window,
                    last_window=a.last_window, groups=", ".join(a.groups) or None,
                    direction=a.direction, size=a.size, q=a.q, updated_at=a.updated_at,
                    kind=getattr(a, "kind", "mean"), onset=getattr(a, "onset", None),
                    evidence=getattr(a, "evidence", None),
                    percent_of_tolerance=getattr(a, "percent_of_tolerance", None),
                    unit=unit, resolution=resolution)


def _event_row(e: AlertEvent) -> AlertEventRow:
    text = e.details.get("text") if isinstance(e.details, dict) else None
    return AlertEventRow(at=e.at, event=e.event, by=e.by, note=e.note, window=e.window,
                         text=str(text) if text else None)


def _comparison_row(c: ComparisonSummary) -> ComparisonRow:
    return ComparisonRow(
        characteristic=c.characteristic, factor=c.factor, window_label=c.window_label, k=c.k,
        n_total=c.n_total, f=c.welch_f if c.test == "Welch" else c.f, p=c.p_used,
        welch_p=c.welch_p, q=c.q, test=c.test,
        omega_squared=c.omega_squared, largest_shift=c.largest_shift,
        largest_shift_group=c.largest_shift_group, detectable_shift=c.detectable_shift,
        alert_state=c.alert_state, status=c.status, alert_id=c.alert_id, unit=c.unit,
        groups=", ".join(c.groups) or c.largest_shift_group, direction=c.direction, gate=c.gate,
        lots_total=c.lots_total, resolution=c.resolution,
    )


def read_alerts(store: Store, state: str | None = None) -> list[AlertRow]:
    from lotwatch.store.alerts import list_alerts

    chars = {c.name: (c.unit, c.resolution) for c in store.characteristics()}
    return [_alert_row(a, *chars.get(a.characteristic, ("", "")))
            for a in list_alerts(store, state=state)]


def _sort_q(rows: list[ComparisonRow]) -> list[ComparisonRow]:
    return sorted(rows, key=lambda r: (r.q is None, r.q if r.q is not None else 0.0,
                                       r.characteristic, r.factor))


def load_overview(path: Path, read_only: bool, *, week: str | None = None,
                  on_frame: Callable[[Overview], None] | None = None) -> Overview:
    """Characteristics and their state this window, factors, known tags and open alerts.

    A characteristic is "alerting" when any of its comparisons has an active (open or
    acknowledged, not yet cleared) alert, "not enough data" when none of its comparisons could
    be computed, else "watching". The review is run with ``persist=False``: looking never opens
    or clears alerts. ``on_frame`` receives a partial overview (no review yet, states
    "checking") as soon as the cheap part is read, so the screen can fill in and the detail
    can start while the review runs.
    """
    with opened(path, read_only) as store:
        # retired characteristics and factors are hidden from the board and the form
        chars = [char_info(c) for c in store.characteristics() if c.retired_at is None]
        factors = [FactorInfo(f.name, bool(f.required)) for f in store.factors()
                   if f.retired_at is None]
        tags = {f.name: list(store.tag_values(f.name)) for f in factors}
        alerts = read_alerts(store)
        open_alerts = [a for a in alerts if a.state in ACTIVE]
        version = store.data_version()
        from lotwatch.store.tag_links import single_companions

        links = single_companions(store)
        if on_frame is not None:
            from lotwatch.tui.services.detection import detector_status

            early = early_rows(detector_status(store), chars, open_alerts)
            alerting = {a.characteristic for a in open_alerts}
            on_frame(Overview(chars, factors, tags,
                              {c.name: ALERTING if c.name in alerting else CHECKING
                               for c in chars}, {}, open_alerts, "", version, partial=True,
                              tag_links=links, board=early, plant_zone=store.plant_zone))
        from lotwatch.tui.services.review_engine import run_review

        review = run_review(store, week=week, persist=False)
        zone = store.plant_zone
    window_kind = review.settings.window
    comparison_states: dict[tuple[str, str], str] = {}
    for c in review.comparisons:
        if c.alert_state in ACTIVE:
            st = ALERTING
        elif c.status != "ok":
            st = NOT_ENOUGH
        else:
            st = WATCHING
        comparison_states[(c.characteristic, c.factor)] = st
    for a in open_alerts:
        comparison_states[(a.characteristic, a.factor)] = ALERTING
    states: dict[str, str] = {}
    for ch in chars:
        mine = [s for (cn, _), s in comparison_states.items() if cn == ch.name]
        if ALERTING in mine:
            states[ch.name] = ALERTING
        elif WATCHING in mine:
            states[ch.name] = WATCHING
        else:
            states[ch.name] = NOT_ENOUGH
    board = board_rows(review.comparisons, chars, open_alerts)
    return Overview(chars, factors, tags, states, comparison_states, open_alerts,
                    review.window_label, version, window_kind, board=board, tag_links=links,
                    plant_zone=zone)


RECENT_LOTS = 3


def recent_lots(store: Store, characteristic: str, factor: str) -> list[RecentLot]:
    """The lots logged last (highest measurement id) among each level's latest by time measured,
    with their level of ``factor``: the lot just typed shows up here."""
    import polars as pl

    frame = store.values_frame(characteristic, factor, last_n=RECENT_LOTS)
    if frame.height == 0:
        return []
    ch = store.characteristic(characteristic)
    from lotwatch.store.values import format_units

    lots = (frame.group_by("lot", maintain_order=True)
            .agg(pl.col("level").first(), pl.col("units"), pl.col("measured_at").max(),
                 pl.col("measurement_id").max())
            .sort("measurement_id", descending=True).head(RECENT_LOTS))
    out = []
    for r in lots.iter_rows(named=True):
        values = " ".join(format_units(int(u), ch.resolution) for u in r["units"])
        out.append(RecentLot(lot=str(r["lot"]), level=str(r["level"]), values=values,
                             measured_at=r["measured_at"].astimezone().strftime("%m-%d %H:%M")))
    return out


def load_detail(path: Path, read_only: bool, request: DetailRequest) -> DetailView:
    """The battery of the latest (or chosen) window, the run chart of daily means, and the
    limits."""
    from lotwatch.tui.services.review_engine import comparison_detail, review_settings

    with opened(path, read_only) as store:
        d = comparison_detail(store, request.characteristic, request.factor,
                              week=request.week, alpha=request.alpha, window=request.window,
                              reference=request.reference)
        kind = review_settings(store, window=request.window).window
        recent = recent_lots(store, request.characteristic, request.factor)
        detectors = detector_lines(store, request.characteristic, request.factor)
        chart = chart_of(store, request, detectors)
    pooled, spread = spread_rows(d.battery)
    return DetailView(request=request, characteristic=char_info(d.characteristic),
                      factor=d.factor, window_label=d.window_label, battery=d.battery,
                      grand_mean=d.grand_mean, lsl=d.lsl, target=d.target,
                      usl=d.usl, window_kind=kind, recent=recent, pooled_sd=pooled, spread=spread, detectors=detectors, chart=chart)


def chart_of(store: Store, request: DetailRequest, detectors: list[DetectorLine]) -> RunChart:
    """The run chart up to the shown window's end, reaching back to the alarmed detectors'
    onsets (and the strongest one's)."""
    from lotwatch.tui.services.review_engine import resolve_as_of
    from lotwatch.tui.services.run_chart import run_chart

    until = resolve_as_of(week=request.week, zone=store.plant_zone)
    marked = [d for d in detectors if d.alarmed] + detectors[:1]
    onsets = [date.fromisoformat(d.onset) for d in marked if d.onset and d.evidence]
    return run_chart(store, request.characteristic, request.factor, until=until,
                     onsets=onsets)


def detector_lines(store: Store, characteristic: str, factor: str) -> list[DetectorLine]:
    """The comparison's detectors as stored (``detection.detector_status`` reads, never
    recomputes), most evidence first; groups without enough history to be watched left out."""
    from lotwatch.tui.services.detection import detector_status

    lines = [DetectorLine(group=s.group, kind=s.kind, direction=s.direction,
                          evidence=s.evidence,
                          onset=s.onset.isoformat() if s.onset is not None else None,
                          size=s.size, alarmed=s.alarmed)
             for s in detector_status(store)
             if s.characteristic == characteristic and s.factor == factor
             and s.evidence is not None]
    lines.sort(key=lambda d: -(d.evidence or 0.0))
    return lines


def spread_rows(battery: BatteryResult) -> tuple[float | None, list[SpreadRow]]:
    """Pooled within-group SD = sqrt(MS Within) (NIST/SEMATECH e-Handbook 7.4.3) and each
    group's SD as a ratio of it: the spread view's numbers."""
    import math

    ms = battery.anova.ms_within
    pooled = math.sqrt(ms) if ms is not None and math.isfinite(ms) and ms >= 0 else None
    rows = [SpreadRow(g.name, g.n, g.sd,
                      g.sd / pooled if g.sd is not None and pooled else None)
            for g in battery.groups]
    return pooled, rows


def load_review(path: Path, read_only: bool, week: str | None) -> ReviewView:
    """Every comparison of ``week`` (None = up to today), sorted by q (undefined q last)."""
    from lotwatch.tui.services.review_engine import run_review

    with opened(path, read_only) as store:
        review = run_review(store, week=week, persist=False)
    rows = _sort_q([_comparison_row(c) for c in review.comparisons])
    return ReviewView(week=week, window_label=review.window_label,
                      family_size=review.family_size, fdr_method=review.fdr_method,
                      fdr_level=review.fdr_level, rows=rows, notes=tuple(review.notes))


def load_alerts(path: Path, read_only: bool) -> AlertsView:
    """Every alert (open, acknowledged, cleared) with its event history, newest first."""
    from lotwatch.store.alerts import alert_history

    with opened(path, read_only) as store:
        alerts = read_alerts(store)
        history = {a.id: [_event_row(e) for e in alert_history(store, a.id)] for a in alerts}
        zone = store.plant_zone
    alerts.sort(key=lambda a: (a.state != "open", -a.id))
    return AlertsView(alerts=alerts, history=history, plant_zone=zone)


