"""Corrections and voids: stored measurements change only here, and never disappear.

``original_units`` is kept forever; ``correct`` changes ``current_units``; ``void`` sets the
``voided`` flag. Each step appends to the ``audit`` table and moves the buckets (subtract the
old d and d^2, add the new) in the same transaction.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from lotwatch.store.aggregates import Deltas, lot_factor_levels
from lotwatch.store.entry_checks import range_problem
from lotwatch.store.errors import BadInput, Conflict, NotFound, RowProblem
from lotwatch.store.model import AuditEntry
from lotwatch.store.timeutil import format_stored, now_utc
from lotwatch.store.values import BadValue, FinerThanResolution, format_units, text_to_units

if TYPE_CHECKING:
    from lotwatch.store.connection import Store


def _load(store: Store, measurement_id: int) -> tuple:
    try:
        mid = int(measurement_id)
    except (TypeError, ValueError):
        raise NotFound(f"{measurement_id!r} is not a measurement id (a whole number)") from None
    row = store.conn.execute(
        "SELECT m.id, m.lot_id, m.characteristic_id, m.current_units, m.voided, m.day, "
        "l.lot_code FROM measurements m JOIN lots l ON l.id = m.lot_id WHERE m.id = ?",
        (mid,),
    ).fetchone()
    if row is None:
        raise NotFound(f"no measurement with id {mid}")
    return row


def _reason(reason: object, measurement_id: int) -> str:
    text = reason.strip() if isinstance(reason, str) else ""
    if not text:
        raise BadInput([RowProblem("command line", None, "reason", None,
                                   f"say why measurement {measurement_id} is changed (a reason "
                                   "is required and kept in the audit trail)")])
    return text


def correct(store: Store, measurement_id: int, new_value: str, *, reason: str,
            by: str | None = None, round_value: bool = False) -> AuditEntry:
    """Replace the current value of a measurement (the original stays), with a reason."""
    why = _reason(reason, measurement_id)
    who = (by or "").strip() or store.user
    with store.write():
        mid, lot_id, cid, cur, voided, day, lot = _load(store, measurement_id)
        char = store.characteristic_by_id(cid)
        if voided:
            raise Conflict(f"measurement {mid} (lot {lot!r}, {char.name}) is voided; "
                           "a voided measurement cannot be corrected")
        try:
            units, _ = text_to_units(new_value, char.resolution, round_values=round_value)
        except FinerThanResolution as exc:
            raise BadInput([RowProblem(
                "command line", None, "value", str(new_value),
                f"{exc.value} is finer than the resolution {char.resolution}"
                f"{' ' + char.unit if char.unit else ''} of {char.name}; "
                "use --round to round half-even")]) from None
        except BadValue as exc:
            raise BadInput([RowProblem("command line", None, "value", str(new_value),
                                       f"{exc} ({char.name})")]) from None
        problem = range_problem(units, char)
        if problem:
            raise BadInput([RowProblem("command line", None, "value", str(new_value), problem)])
        if units == cur:
            raise Conflict(f"measurement {mid} already has the value "
                           f"{format_units(cur, char.resolution)}; nothing to correct")
        at = format_stored(now_utc())
        store.conn.execute("UPDATE measurements SET current_units = ? WHERE id = ?", (units, mid))
        store.conn.execute(
            "INSERT INTO audit(measurement_id, action, at, by, old_units, new_units, reason) "
            "VALUES (?, 'correct', ?, ?, ?, ?, ?)", (mid, at, who, cur, units, why))
        levels = lot_factor_levels(store.conn, lot_id)
        deltas = Deltas()
        deltas.add_measurement(cid, day, cur - char.origin_units, levels, sign=-1)
        deltas.add_measurement(cid, day, units - char.origin_units, levels, sign=+1)
        deltas.apply(store.conn)
    return AuditEntry("correct", at, who, format_units(cur, char.resolution),
                      format_units(units, char.resolution), why)


def void(store: Store, measurement_id: int, *, reason: str, by: str | None = None) -> AuditEntry:
    """Mark a measurement as void (kept, but left out of every statistic), with a reason."""
    why = _reason(reason, measurement_id)
    who = (by or "").strip() or store.user
    with store.write():
        mid, lot_id, cid, cur, voided, day, lot = _load(store, measurement_id)
        char = store.characteristic_by_id(cid)
        if voided:
            raise Conflict(f"measurement {mid} (lot {lot!r}, {char.name}) is already voided")
        at = format_stored(now_utc())
        store.conn.execute("UPDATE measurements SET voided = 1 WHERE id = ?", (mid,))
        store.conn.execute(
            "INSERT INTO audit(measurement_id, action, at, by, old_units, new_units, reason) "
            "VALUES (?, 'void', ?, ?, ?, NULL, ?)", (mid, at, who, cur, why))
        levels = lot_factor_levels(store.conn, lot_id)
        deltas = Deltas()
        deltas.add_measurement(cid, day, cur - char.origin_units, levels, sign=-1)
        still_there = store.conn.execute(
            "SELECT 1 FROM measurements WHERE lot_id = ? AND characteristic_id = ? AND day = ? "
            "AND voided = 0 LIMIT 1", (lot_id, cid, day)).fetchone()
        if still_there is None:  # its last live value there: the lot leaves the buckets
            deltas.add_lot_to(cid, day, levels, sign=-1)
        deltas.apply(store.conn)
    return AuditEntry("void", at, who, format_units(cur, char.resolution), None, why)


def history(store: Store, measurement_id: int) -> list[AuditEntry]:
    """The audit trail of one measurement, oldest first."""
    mid, _lot_id, cid, *_ = _load(store, measurement_id)
    res = store.characteristic_by_id(cid).resolution
    rows = store.conn.execute(
        "SELECT action, at, by, old_units, new_units, reason FROM audit "
        "WHERE measurement_id = ? ORDER BY id", (mid,)).fetchall()

    def fmt(u: int | None) -> str | None:
        return None if u is None else format_units(u, res)

    return [AuditEntry(a, at, by, fmt(o), fmt(n), r) for a, at, by, o, n, r in rows]
