"""Alert states and their event trail, kept in the ``alerts`` and ``alert_events`` tables.

An alert belongs to one characteristic × factor × kind ("mean" or "spread"). Its life: ``open`` → (``acknowledged``: who,
when, note) → ``cleared`` → ``open`` again when the signal returns (the same row is reopened, so
one alert carries its whole history). Every change appends an event (opened, held, acknowledged,
cleared, reopened); nothing is ever updated away or deleted. Each write is one ``store.write()``
transaction. What counts as a signal is decided elsewhere (``stats.monitor``); this module only
keeps the record.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any

from lotwatch.store.errors import Conflict, NotFound
from lotwatch.store.timeutil import format_stored, now_utc

EVENTS = ("opened", "held", "acknowledged", "cleared", "reopened")
STATES = ("open", "acknowledged", "cleared")


@dataclass(frozen=True)
class Alert:
    """One alert: where it points (characteristic, factor, groups), how big, and its state."""

    id: int
    characteristic: str
    factor: str
    state: str
    opened_at: str
    opened_window: str | None
    last_window: str | None
    groups: list[str]
    direction: str | None  # "higher" | "lower"
    size: float | None  # in the characteristic's unit
    size_fraction: float | None  # size / (USL − LSL), None without both limits
    q: float | None
    updated_at: str
    kind: str = "mean"  # "mean" | "spread"
    onset: str | None = None  # ISO plant day the change is estimated to have begun
    detected_on: str | None = None  # ISO plant day the detector raised it
    size_low: float | None = None  # 95% interval of the size, in the characteristic's unit
    size_high: float | None = None
    percent_of_tolerance: float | None = None  # 100 × size / (USL − LSL)
    evidence: float | None = None  # the detector's statistic / its threshold when last written
    # why a cleared alert was closed when it was not the detector's doing (the note of its
    # latest 'cleared' event, e.g. its characteristic was retired: store.retire); else None
    closed_because: str | None = None


@dataclass(frozen=True)
class AlertEvent:
    """One step in an alert's trail."""

    id: int
    alert_id: int
    at: str
    event: str
    by: str | None
    note: str | None
    window: str | None
    details: dict[str, Any] = field(default_factory=dict)


_SELECT = """
SELECT a.id, c.name, a.factor, a.state, a.opened_at, a.opened_window, a.last_window, a.groups,
       a.direction, a.size, a.size_fraction, a.q, a.updated_at, a.kind, a.onset, a.detected_on,
       a.size_low, a.size_high, a.percent_of_tolerance, a.evidence,
       CASE WHEN a.state = 'cleared' THEN (SELECT e.note FROM alert_events e
            WHERE e.alert_id = a.id AND e.event = 'cleared' ORDER BY e.id DESC LIMIT 1) END
FROM alerts a JOIN characteristics c ON c.id = a.characteristic_id
"""


def _alert(row: tuple) -> Alert:
    groups = json.loads(row[7]) if row[7] else []
    return Alert(int(row[0]), row[1], row[2], row[3], row[4], row[5], row[6], list(groups), row[8],
                 row[9], row[10], row[11], row[12], row[13], row[14], row[15], row[16], row[17],
                 row[18], row[19], row[20])


def list_alerts(store, *, state: str | None = None, characteristic: str | None = None,
                factor: str | None = None) -> list[Alert]:
    """Alerts, newest change first; filter by state ("open", "acknowledged", "cleared", or
    "active" for open or acknowledged), characteristic and factor."""
    where, args = [], []
    if state is not None:
        if state == "active":
            where.append("a.state IN ('open', 'acknowledged')")
        elif state in STATES:
            where.append("a.state = ?")
            args.append(state)
        else:
            raise NotFound(f"alert state {state!r}: use open, acknowledged, cleared or active")
    if characteristic is not None:
        where.append("c.name = ?")
        args.append(characteristic)
    if factor is not None:
        where.append("a.factor = ?")
        args.append(factor)
    sql = _SELECT + (" WHERE " + " AND ".join(where) if where else "") + \
        " ORDER BY a.updated_at DESC, a.id DESC"
    return [_alert(r) for r in store.conn.execute(sql, args).fetchall()]


def get_alert(store, alert_id: int) -> Alert:
    """One alert by id; ``NotFound`` with the id when there is none."""
    row = store.conn.execute(_SELECT + " WHERE a.id = ?", (int(alert_id),)).fetchone()
    if row is None:
        raise NotFound(f"no alert with id {alert_id}; list them with: lotwatch alerts list")
    return _alert(row)


def latest_alert(store, characteristic: str, factor: str, kind: str | None = None) -> Alert | None:
    """The most recent alert of a characteristic × factor (of one kind, or any), or None."""
    sql = _SELECT + " WHERE c.name = ? AND a.factor = ?"
    args: list[Any] = [characteristic, factor]
    if kind is not None:
        sql += " AND a.kind = ?"
        args.append(kind)
    row = store.conn.execute(sql + " ORDER BY a.id DESC LIMIT 1", args).fetchone()
    return _alert(row) if row else None


def latest_alerts(store) -> dict[tuple[str, str, str], Alert]:
    """The most recent alert of every characteristic × factor × kind that has one, in one query
    (keyed by (characteristic, factor, kind))."""
    sql = (_SELECT + " WHERE a.id IN (SELECT max(id) FROM alerts "
           "GROUP BY characteristic_id, factor, kind)")
    return {(a.characteristic, a.factor, a.kind): a
            for a in map(_alert, store.conn.execute(sql).fetchall())}


def alert_history(store, alert_id: int) -> list[AlertEvent]:
    """Every event of an alert, oldest first."""
    get_alert(store, alert_id)
    rows = store.conn.execute(
        "SELECT id, alert_id, at, event, by, note, window, details FROM alert_events "
        "WHERE alert_id = ? ORDER BY id", (int(alert_id),)).fetchall()
    return [AlertEvent(int(r[0]), int(r[1]), r[2], r[3], r[4], r[5], r[6],
                       json.loads(r[7]) if r[7] else {}) for r in rows]


@dataclass(frozen=True)
class Transition:
    """What a review decided for one characteristic × factor (see ``record_transition``)."""

    characteristic: str
    factor: str
    event: str  # opened | reopened | held | cleared
    window: str
    groups: list[str]
    direction: str | None
    size: float | None
    size_fraction: float | None
    q: float | None
    details: dict[str, Any] = field(default_factory=dict)
    kind: str = "mean"
    onset: str | None = None
    detected_on: str | None = None
    size_low: float | None = None
    size_high: float | None = None
    percent_of_tolerance: float | None = None
    evidence: float | None = None


_DESCRIBE = ("groups = ?, direction = ?, size = ?, size_fraction = ?, q = ?, onset = ?, "
             "detected_on = ?, size_low = ?, size_high = ?, percent_of_tolerance = ?, "
             "evidence = ?")


def _describe(t: Transition) -> tuple:
    return (json.dumps(list(t.groups)), t.direction, t.size, t.size_fraction, t.q, t.onset,
            t.detected_on, t.size_low, t.size_high, t.percent_of_tolerance, t.evidence)


def record_transitions(store, transitions: list[Transition], *, by: str | None = None,
                       at: str | None = None) -> list[Alert]:
    """Apply decisions in one transaction; returns the alerts as written.

    "opened" inserts a new alert; the others update the characteristic × factor × kind's latest
    alert ("reopened" requires it cleared, "held"/"cleared" require it open or acknowledged;
    "held" keeps an acknowledgement and refreshes what the alert says). An event is appended for
    each. "updated" refreshes what an active alert says without an event (its size and evidence
    move every day; the trail keeps the changes of state).
    """
    stamp = at or format_stored(now_utc())
    ids: list[int] = []
    with store.write():
        for t in transitions:
            if t.event not in ("opened", "reopened", "held", "cleared", "updated"):
                raise ValueError(f"unknown alert event {t.event!r}")
            row = store.conn.execute("SELECT id FROM characteristics WHERE name = ?",
                                     (t.characteristic,)).fetchone()
            if row is None:
                raise NotFound(f"no characteristic named {t.characteristic!r}")
            char_id = int(row[0])
            current = store.conn.execute(
                "SELECT id, state FROM alerts WHERE characteristic_id = ? AND factor = ? "
                "AND kind = ? ORDER BY id DESC LIMIT 1", (char_id, t.factor, t.kind)).fetchone()
            if t.event == "opened" or current is None:
                if current is not None and current[1] != "cleared":
                    raise Conflict(f"{t.characteristic} by {t.factor} already has an active "
                                   f"{t.kind} alert (id {current[0]})")
                cur = store.conn.execute(
                    "INSERT INTO alerts(characteristic_id, factor, kind, state, opened_at, "
                    "opened_window, last_window, updated_at, groups, direction, size, "
                    "size_fraction, q, onset, detected_on, size_low, size_high, "
                    "percent_of_tolerance, evidence) "
                    "VALUES (?, ?, ?, 'open', ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (char_id, t.factor, t.kind, stamp, t.window, t.window, stamp, *_describe(t)))
                alert_id = int(cur.lastrowid)
                event = "opened"
            else:
                alert_id, state = int(current[0]), current[1]
                event = t.event
                if event == "reopened":
                    if state != "cleared":
                        raise Conflict(f"alert {alert_id} is {state}, not cleared; cannot reopen")
                    store.conn.execute(
                        f"UPDATE alerts SET state = 'open', opened_window = ?, last_window = ?, "
                        f"{_DESCRIBE}, updated_at = ? WHERE id = ?",
                        (t.window, t.window, *_describe(t), stamp, alert_id))
                elif state == "cleared":
                    raise Conflict(f"alert {alert_id} is cleared; cannot record {event}")
                elif event in ("held", "updated"):
                    store.conn.execute(
                        f"UPDATE alerts SET last_window = ?, {_DESCRIBE}, updated_at = ? "
                        "WHERE id = ?", (t.window, *_describe(t), stamp, alert_id))
                else:  # cleared
                    store.conn.execute(
                        "UPDATE alerts SET state = 'cleared', last_window = ?, updated_at = ? "
                        "WHERE id = ?", (t.window, stamp, alert_id))
            if event != "updated":
                store.conn.execute(
                    "INSERT INTO alert_events(alert_id, at, event, by, note, window, details) "
                    "VALUES (?, ?, ?, ?, NULL, ?, ?)",
                    (alert_id, stamp, event, by, t.window, json.dumps(t.details, default=str)))
            ids.append(alert_id)
    if not ids:
        return []
    marks = ", ".join("?" * len(set(ids)))
    got = {a.id: a for a in map(_alert, store.conn.execute(
        _SELECT + f" WHERE a.id IN ({marks})", sorted(set(ids))).fetchall())}
    return [got[i] for i in ids]


def acknowledge(store, alert_id: int, *, by: str, note: str = "") -> Alert:
    """Mark an open alert as seen by ``by`` with a note (required: what was checked or done).
    An acknowledged or cleared alert cannot be acknowledged again; the same rule holds for the
    command line and the app (``store.rules``). Returns the alert as written."""
    who = (by or "").strip()
    if not who:
        raise Conflict("an acknowledgement needs a name: say who is acknowledging (--by NAME)")
    if not (note or "").strip():
        raise Conflict("an acknowledgement needs a note: say what you checked or did (--note)")
    stamp = format_stored(now_utc())
    with store.write():
        alert = get_alert(store, alert_id)
        if alert.state == "cleared":
            raise Conflict(f"alert {alert_id} is cleared (last window {alert.last_window}); "
                           "there is nothing to acknowledge")
        if alert.state == "acknowledged":
            raise Conflict(f"alert {alert_id} is already acknowledged; it stays so until the "
                           "signal clears (see lotwatch alerts show)")
        store.conn.execute("UPDATE alerts SET state = 'acknowledged', updated_at = ? WHERE id = ?",
                           (stamp, alert.id))
        store.conn.execute(
            "INSERT INTO alert_events(alert_id, at, event, by, note, window, details) "
            "VALUES (?, ?, 'acknowledged', ?, ?, ?, '{}')",
            (alert.id, stamp, who, note.strip(), alert.last_window))
    return get_alert(store, alert_id)
