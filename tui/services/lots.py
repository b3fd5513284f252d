"""The lots behind a number: one group's stored values in the window shown, and a value's audit.

Voided values are listed too (marked), so a person can see what the statistics leave out.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

from lotwatch.tui.services.storefile import opened
from lotwatch.tui.services.view_models import AuditLine, LotsRequest, LotsView, LotValue

MAX_LOTS = 500  # a screenful of scrolling; the view says when more exist


def _outside(value: float, lsl: float | None, usl: float | None) -> bool:
    return (lsl is not None and value < lsl) or (usl is not None and value > usl)


def load_lots(path: Path, read_only: bool, request: LotsRequest) -> LotsView:
    """Values of the lots tagged ``factor = level`` in the latest (or chosen week's) window,
    newest first, with who logged them, their note, and whether they were corrected or voided.
    For "last lots per group" windows, the group's last N lots up to the window's end; with
    ``request.since``/``until`` (a chart point), the lots of those plant days instead."""
    import polars as pl
    from lotwatch.stats import monitor as mon
    from lotwatch.store.timeutil import format_local
    from lotwatch.store.values import format_units
    from lotwatch.tui.services.review_engine import resolve_as_of, review_settings

    with opened(path, read_only) as store:
        settings = review_settings(store, window=request.window)
        zone = store.plant_zone  # days and shown times are plant-local
        day = resolve_as_of(week=request.week, zone=zone)
        win = mon.window_plan(day, settings, 1)[-1]
        since, until, label = win.start, win.end, win.label
        if request.since and request.until:  # a chart point's plant days
            since, until = date.fromisoformat(request.since), date.fromisoformat(request.until)
            label = (f"plant day {since}" if since == until
                     else f"plant days {since} to {until}")
        ch = store.characteristic(request.characteristic)
        frame = store.measurements_frame(characteristic=request.characteristic,
                                         since=since, until=until)
    column = request.factor if request.factor in frame.columns else f"tag_{request.factor}"
    if column not in frame.columns:
        frame = frame.clear()
    else:
        frame = frame.filter(pl.col(column) == request.level)
    frame = frame.sort(["measured_at", "id"], descending=True)
    if since is None:  # last N lots of the group
        keep = frame.select("lot").unique(maintain_order=True).head(settings.last_n)["lot"]
        frame = frame.filter(pl.col("lot").is_in(keep.implode()))
    truncated = frame.height > MAX_LOTS
    values = []
    for r in frame.head(MAX_LOTS).iter_rows(named=True):
        current = format_units(int(r["current_units"]), ch.resolution)
        original = format_units(int(r["original_units"]), ch.resolution)
        values.append(LotValue(
            measurement_id=int(r["id"]), lot=str(r["lot"]),
            measured_at=format_local(r["measured_at"], "%Y-%m-%d %H:%M", zone),
            value=current, original=original if original != current else None,
            voided=bool(r["voided"]), by=str(r["logged_by"] or ""), note=str(r["note"] or ""),
            outside_spec=_outside(float(r["value"]), ch.lsl, ch.usl)))
    return LotsView(request=request, unit=ch.unit, resolution=ch.resolution,
                    window_label=label, values=values, truncated=truncated)


def value_history(path: Path, read_only: bool, measurement_id: int) -> list[AuditLine]:
    """The audit trail of one value, oldest first (the store's ``history``)."""
    from lotwatch.store.timeutil import format_local

    with opened(path, read_only) as store:
        trail = store.history(measurement_id)
        zone = store.plant_zone  # times shown in plant time
    return [AuditLine(action=e.action, at=format_local(e.at, "%Y-%m-%d %H:%M", zone), by=e.by,
                      old=e.old_value, new=e.new_value, reason=e.reason) for e in trail]
