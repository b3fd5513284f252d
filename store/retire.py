"""Retiring and renaming what a store watches.

A retired characteristic or grouping factor is hidden from reviews, detectors, the board and
the entry form from then on; its lots, values, day sums, detector history and alerts are kept,
and ``restore`` brings it back (the detectors then catch up from its first day). A retired
factor is no longer required.

An alert still open (or acknowledged) on what is retired would stay open forever, since no
detector looks at it any more, and an alerts list full of alerts nobody can clear teaches people
to ignore it. Retiring therefore closes them in the same transaction, each with a ``cleared``
event that names who retired what, and says the signal was not resolved (common practice: a
record is closed with its reason, never left dangling or deleted). If the characteristic or
factor is restored and the signal is still there, the detectors reopen the alert. Renaming a factor renames the tag key on every lot and every
place that names the factor (day sums, alerts, detector state) in one transaction.
"""

from __future__ import annotations

import json
from typing import TYPE_CHECKING

from lotwatch.store.errors import Conflict, NotFound
from lotwatch.store.fields import clean_name
from lotwatch.store.rules import tag_key_problem
from lotwatch.store.timeutil import format_stored, now_utc

if TYPE_CHECKING:
    from lotwatch.store.transaction import Session

# Every table with a column naming a grouping factor (table, column).
_FACTOR_COLUMNS = (("buckets", "factor"), ("alerts", "factor"), ("detector_days", "factor"))


def _char_row(s: Session, name: str) -> tuple[int, str | None]:
    row = s.conn.execute("SELECT id, retired_at FROM characteristics WHERE name = ?",
                         (name,)).fetchone()
    if row is None:
        known = ", ".join(r[0] for r in s.conn.execute(
            "SELECT name FROM characteristics ORDER BY name")) or "none yet"
        raise NotFound(f"no characteristic named {name!r} (known: {known})")
    return int(row[0]), row[1]


def _factor_row(s: Session, name: str) -> str | None:
    row = s.conn.execute("SELECT retired_at FROM factors WHERE name = ?", (name,)).fetchone()
    if row is None:
        known = ", ".join(r[0] for r in s.conn.execute("SELECT name FROM factors")) or "none"
        raise NotFound(f"no grouping factor named {name!r} (factors: {known})")
    return row[0]


RETIRED_NOTE = ("the {what} {name!r} was retired, so no detector watches it any more; the "
                "signal was not resolved: review the data before relying on it.")


def _close_alerts(s: Session, where: str, params: tuple, what: str, name: str) -> int:
    """Clear every alert not yet cleared matching ``where`` with an event saying why."""
    stamp = format_stored(now_utc())
    ids = [int(r[0]) for r in s.conn.execute(
        f"SELECT id FROM alerts WHERE state != 'cleared' AND {where} ORDER BY id", params)]
    note = RETIRED_NOTE.format(what=what, name=name)
    details = json.dumps({"reason": f"{what} retired", what: name})
    for alert_id in ids:
        s.conn.execute("UPDATE alerts SET state = 'cleared', updated_at = ? WHERE id = ?",
                       (stamp, alert_id))
        s.conn.execute(
            "INSERT INTO alert_events(alert_id, at, event, by, note, window, details) "
            "VALUES (?, ?, 'cleared', ?, ?, NULL, ?)", (alert_id, stamp, s.user, note, details))
    return len(ids)


def retire_characteristic(s: Session, name: str, *, retire: bool = True) -> int:
    """Hide ``name`` from reviews (``retire=False`` brings it back). Data is kept; alerts still
    active on it are cleared with an event giving the reason. Returns how many were cleared."""
    with s.write():
        cid, retired = _char_row(s, name)
        if retire and retired is not None:
            raise Conflict(f"characteristic {name!r} was already retired at {retired}")
        if not retire and retired is None:
            raise Conflict(f"characteristic {name!r} is not retired")
        s.conn.execute("UPDATE characteristics SET retired_at = ? WHERE id = ?",
                       (format_stored(now_utc()) if retire else None, cid))
        if not retire:
            # the detectors skipped it while retired: recompute from its first day
            s.conn.execute("DELETE FROM detector_days WHERE characteristic_id = ?", (cid,))
            s.conn.execute("DELETE FROM detector_progress WHERE characteristic_id = ?", (cid,))
            return 0
        return _close_alerts(s, "characteristic_id = ?", (cid,), "characteristic", name)


def retire_factor(s: Session, name: str, *, retire: bool = True) -> int:
    """Hide factor ``name`` from reviews and stop requiring it (``retire=False`` brings it back,
    not required). Tags and day sums are kept; alerts still active on comparisons by it are
    cleared with an event giving the reason. Returns how many were cleared."""
    with s.write():
        retired = _factor_row(s, name)
        if retire and retired is not None:
            raise Conflict(f"factor {name!r} was already retired at {retired}")
        if not retire and retired is None:
            raise Conflict(f"factor {name!r} is not retired")
        s.conn.execute("UPDATE factors SET retired_at = ?, required = 0 WHERE name = ?",
                       (format_stored(now_utc()) if retire else None, name))
        return _close_alerts(s, "factor = ?", (name,), "factor", name) if retire else 0


def rename_factor(s: Session, old: str, new: str) -> None:
    """Rename grouping factor ``old`` to ``new``: the factor, every lot's tag key, and every
    day sum, alert and detector state that names it, in one transaction."""
    new = clean_name(new, "factor")
    if (why := tag_key_problem(new)) is not None:
        raise Conflict(f"cannot rename {old!r} to {new!r}: {why}")
    with s.write():
        _factor_row(s, old)
        if s.conn.execute("SELECT 1 FROM factors WHERE name = ?", (new,)).fetchone():
            raise Conflict(f"{new!r} is already a grouping factor")
        if s.conn.execute("SELECT 1 FROM lot_tags WHERE key = ? LIMIT 1", (new,)).fetchone():
            raise Conflict(f"some lots already carry a tag {new!r}; choose another name")
        # buckets reference factors(name): check the references at commit, not per statement
        s.conn.execute("PRAGMA defer_foreign_keys = ON")
        s.conn.execute("UPDATE factors SET name = ? WHERE name = ?", (new, old))
        s.conn.execute("UPDATE lot_tags SET key = ? WHERE key = ?", (new, old))
        for table, column in _FACTOR_COLUMNS:
            s.conn.execute(f"UPDATE {table} SET {column} = ? WHERE {column} = ?", (new, old))
