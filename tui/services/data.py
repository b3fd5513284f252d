"""Loaders and writers the app runs in thread workers; they return plain dataclasses.

Every function here runs off the event loop. Each opens its own :class:`store.Store` (a SQLite
connection is bound to the thread that opened it), does its work and closes it. ``store``, the
review engine, polars and scipy are imported inside the functions so the app's first screen is
painted before those heavy modules load.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import TYPE_CHECKING, Any

# The one login-name and file-identity helpers, re-exported for the app.
from lotwatch.store.identity import file_identity as file_identity
from lotwatch.store.identity import login_name as login_name

if TYPE_CHECKING:
    from lotwatch.stats.results import BatteryResult
    from lotwatch.store import Store
    from lotwatch.store.alerts import Alert, AlertEvent
    from lotwatch.tui.services.review_engine import ComparisonSummary


# --- what the screens show ---------------------------------------------------------------------

ALERTING = "alerting"
WATCHING = "watching"
NOT_ENOUGH = "not enough data"
CHECKING = "checking…"
ACTIVE = ("open", "acknowledged")  # alert states that still stand (not cleared)


@dataclass(frozen=True)
class CharacteristicInfo:
    """What the list and the entry form need about one characteristic."""

    name: str
    unit: str
    resolution: str
    lsl: float | None
    target: float | None
    usl: float | None
    min_shift: float | None
    plausible_low: float | None
    plausible_high: float | None


@dataclass(frozen=True)
class FactorInfo:
    name: str
    required: bool


@dataclass(frozen=True)
class ComparisonRow:
    """One comparison (characteristic × factor) of a review window."""

    characteristic: str
    factor: str
    window_label: str
    k: int
    n_total: int
    f: float | None
    p: float | None
    welch_p: float | None
    q: float | None
    omega_squared: float | None
    largest_shift: float | None
    largest_shift_group: str | None
    detectable_shift: float | None
    alert_state: str | None
    status: str
    alert_id: int | None = None


@dataclass(frozen=True)
class AlertEventRow:
    at: str
    event: str
    by: str | None
    note: str | None
    window: str | None
    text: str | None = None  # the sentence the review wrote with the event


@dataclass(frozen=True)
class AlertRow:
    """One alert as the alert list shows it."""

    id: int
    characteristic: str
    factor: str
    state: str
    opened_at: str
    opened_window: str | None
    last_window: str | None
    groups: str | None
    direction: str | None
    size: float | None
    q: float | None
    updated_at: str | None


@dataclass(frozen=True)
class Overview:
    """The main view's frame: characteristics with state, factors, tag values, open alerts."""

    characteristics: list[CharacteristicInfo]
    factors: list[FactorInfo]
    tag_values: dict[str, list[str]]
    states: dict[str, str]  # characteristic -> ALERTING | WATCHING | NOT_ENOUGH
    comparison_states: dict[tuple[str, str], str]
    open_alerts: list[AlertRow]  # active: open or acknowledged
    window_label: str
    data_version: int
    window_kind: str = "trailing"  # the store's review.window setting
    partial: bool = False  # True before the review has run (states are CHECKING)


@dataclass(frozen=True)
class DetailRequest:
    """What the main view asks for: one comparison in one window at one alpha."""

    characteristic: str
    factor: str
    week: str | None = None  # ISO week ("2026-W48"): windows end on its Sunday; None = today
    alpha: float = 0.05
    window: str | None = None  # trailing | last_n | week; None = the store's review setting


@dataclass(frozen=True)
class TrendPoint:
    window_end: str  # YYYY-MM-DD
    level: str
    n: int
    mean: float


@dataclass(frozen=True)
class RecentLot:
    """One of the latest lots of the shown characteristic (newest first)."""

    lot: str
    level: str
    values: str
    measured_at: str


@dataclass(frozen=True)
class DetailView:
    """The battery, trend and limits of one comparison, ready to show."""

    request: DetailRequest
    characteristic: CharacteristicInfo
    factor: str
    window_label: str
    battery: BatteryResult
    trend: list[TrendPoint]
    grand_mean: float | None
    lsl: float | None
    target: float | None
    usl: float | None
    window_kind: str = ""
    recent: list[RecentLot] = field(default_factory=list)
    grand_means: list[tuple[str, float]] = field(default_factory=list)  # (window end, mean)


@dataclass(frozen=True)
class ReviewView:
    """Every comparison of one week, sorted by q (missing q last)."""

    week: str | None
    window_label: str
    family_size: int
    fdr_method: str
    fdr_level: float
    rows: list[ComparisonRow]


@dataclass(frozen=True)
class AlertsView:
    alerts: list[AlertRow]
    history: dict[int, list[AlertEventRow]] = field(default_factory=dict)


@dataclass(frozen=True)
class EntryDraft:
    """The entry form's content: one lot of one characteristic (values as typed)."""

    characteristic: str
    values: list[str]
    tags: dict[str, str]
    lot: str | None
    measured_at: str | None
    note: str | None


# --- opening the store -------------------------------------------------------------------------


@contextmanager
def opened(path: Path, read_only: bool) -> Iterator[Store]:
    """A Store on ``path`` for this thread, closed afterwards."""
    from lotwatch.store import Store

    store = Store.open(path, read_only=read_only)
    try:
        yield store
    finally:
        store.close()


def file_stamp(path: Path) -> tuple[int, ...]:
    """Modification times and sizes of the store file and its WAL: a change detector for stores
    opened ``immutable`` (read-only in a folder we cannot write), where SQLite's own
    ``data_version`` never moves."""
    out: list[int] = []
    for p in (path, Path(f"{path}-wal")):
        try:
            st = os.stat(p)
        except FileNotFoundError:
            out += [0, 0]
        else:
            out += [st.st_mtime_ns, st.st_size]
    return tuple(out)


# --- loaders -----------------------------------------------------------------------------------


def _char_info(c: Any) -> CharacteristicInfo:
    return CharacteristicInfo(
        name=c.name, unit=c.unit, resolution=c.resolution, lsl=c.lsl, target=c.target,
        usl=c.usl, min_shift=c.min_shift, plausible_low=c.plausible_low,
        plausible_high=c.plausible_high,
    )


def _alert_row(a: Alert) -> AlertRow:
    return AlertRow(id=a.id, characteristic=a.characteristic, factor=a.factor, state=a.state,
                    opened_at=a.opened_at, opened_window=a.opened_window,
                    last_window=a.last_window, groups=", ".join(a.groups) or None,
                    direction=a.direction, size=a.size, q=a.q, updated_at=a.updated_at)


def _event_row(e: AlertEvent) -> AlertEventRow:
    text = e.details.get("text") if isinstance(e.details, dict) else None
    return AlertEventRow(at=e.at, event=e.event, by=e.by, note=e.note, window=e.window,
                         text=str(text) if text else None)


def _comparison_row(c: ComparisonSummary) -> ComparisonRow:
    return ComparisonRow(
        characteristic=c.characteristic, factor=c.factor, window_label=c.window_label, k=c.k,
        n_total=c.n_total, f=c.f, p=c.p, welch_p=c.welch_p, q=c.q,
        omega_squared=c.omega_squared, largest_shift=c.largest_shift,
        largest_shift_group=c.largest_shift_group, detectable_shift=c.detectable_shift,
        alert_state=c.alert_state, status=c.status, alert_id=c.alert_id,
    )


def read_alerts(store: Store, state: str | None = None) -> list[AlertRow]:
    from lotwatch.store.alerts import list_alerts

    return [_alert_row(a) for a in list_alerts(store, state=state)]


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
        chars = [_char_info(c) for c in store.characteristics()]
        factors = [FactorInfo(f.name, bool(f.required)) for f in store.factors()]
        tags = {f.name: list(store.tag_values(f.name)) for f in factors}
        alerts = read_alerts(store)
        open_alerts = [a for a in alerts if a.state in ACTIVE]
        version = store.data_version()
        if on_frame is not None:
            alerting = {a.characteristic for a in open_alerts}
            on_frame(Overview(chars, factors, tags,
                              {c.name: ALERTING if c.name in alerting else CHECKING
                               for c in chars}, {}, open_alerts, "", version, partial=True))
        from lotwatch.tui.services.review_engine import run_review

        review = run_review(store, week=week, persist=False)
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
    return Overview(chars, factors, tags, states, comparison_states, open_alerts,
                    review.window_label, version, window_kind)


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
    """The battery of the latest (or chosen) window, the trend of group means, and the limits."""
    from lotwatch.tui.services.review_engine import comparison_detail, review_settings

    with opened(path, read_only) as store:
        d = comparison_detail(store, request.characteristic, request.factor,
                              week=request.week, alpha=request.alpha, window=request.window)
        kind = review_settings(store, window=request.window).window
        recent = recent_lots(store, request.characteristic, request.factor)
    trend = [
        TrendPoint(window_end=_day_text(r["window_end"]), level=str(r["level"]), n=int(r["n"]),
                   mean=float(r["mean"]))
        for r in d.trend.iter_rows(named=True)
        if r["mean"] is not None
    ]
    grand_means = []
    if getattr(d, "grand_means", None) is not None:
        grand_means = [(_day_text(r["window_end"]), float(r["grand_mean"]))
                       for r in d.grand_means.iter_rows(named=True)
                       if r["grand_mean"] is not None]
    return DetailView(request=request, characteristic=_char_info(d.characteristic),
                      factor=d.factor, window_label=d.window_label, battery=d.battery,
                      trend=trend, grand_mean=d.grand_mean, lsl=d.lsl, target=d.target,
                      usl=d.usl, window_kind=kind, recent=recent, grand_means=grand_means)


def _day_text(value: Any) -> str:
    if isinstance(value, date):
        return value.isoformat()
    return str(value)[:10]


def load_review(path: Path, read_only: bool, week: str | None) -> ReviewView:
    """Every comparison of ``week`` (None = up to today), sorted by q (undefined q last)."""
    from lotwatch.tui.services.review_engine import run_review

    with opened(path, read_only) as store:
        review = run_review(store, week=week, persist=False)
    rows = _sort_q([_comparison_row(c) for c in review.comparisons])
    return ReviewView(week=week, window_label=review.window_label,
                      family_size=review.family_size, fdr_method=review.fdr_method,
                      fdr_level=review.fdr_level, rows=rows)


def load_alerts(path: Path, read_only: bool) -> AlertsView:
    """Every alert (open, acknowledged, cleared) with its event history, newest first."""
    from lotwatch.store.alerts import alert_history

    with opened(path, read_only) as store:
        alerts = read_alerts(store)
        history = {a.id: [_event_row(e) for e in alert_history(store, a.id)] for a in alerts}
    alerts.sort(key=lambda a: (a.state != "open", -a.id))
    return AlertsView(alerts=alerts, history=history)


# --- writers -----------------------------------------------------------------------------------


def log_draft(path: Path, draft: EntryDraft, by: str) -> tuple[int, int, int, str | None]:
    """Store one lot in one transaction; returns (stored, duplicates, rounded, lot ID)."""
    from lotwatch.store import LotEntry

    entry = LotEntry(characteristic=draft.characteristic, values=list(draft.values),
                     tags=dict(draft.tags), lot=draft.lot, measured_at=draft.measured_at,
                     note=draft.note, by=by, source="terminal interface")
    with opened(path, False) as store:
        outcome = store.log_lots([entry])
    lot = outcome.lots[0] if getattr(outcome, "lots", None) else draft.lot
    return outcome.stored, outcome.duplicates, outcome.rounded, lot


def record_review(path: Path, week: str | None, by: str) -> tuple[int, int, list[str]]:
    """Run the review with ``persist=True``: alert transitions are written (one transaction).

    Returns (opened, cleared, notes); the engine refuses to change states with a review dated
    before the latest recorded one and says so in the notes.
    """
    from lotwatch.tui.services.review_engine import run_review

    with opened(path, False) as store:
        result = run_review(store, week=week, persist=True, by=by)
    return len(result.opened), len(result.cleared), list(result.notes)


def acknowledge_alert(path: Path, alert_id: int, by: str, note: str) -> None:
    """Record that ``by`` acknowledged the alert, with the note."""
    from lotwatch.store.alerts import acknowledge

    with opened(path, False) as store:
        acknowledge(store, alert_id, by=by, note=note)
