"""Retiring and renaming what a store watches.

A retired characteristic or grouping factor is hidden from reviews, detectors, the board and
the entry form from then on; its lots, values, day sums, detector history and alerts are kept,
and ``restore`` brings it back (the detectors then catch up from its first day). A retired
factor is no longer required. Renaming a factor renames the tag key on every lot and every
place that names the factor (day sums, alerts, detector state) in one transaction.
"""

from __future__ import annotations

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


def retire_characteristic(s: Session, name: str, *, retire: bool = True) -> None:
    """Hide ``name`` from reviews (``retire=False`` brings it back). Data is kept."""
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


def retire_factor(s: Session, name: str, *, retire: bool = True) -> None:
    """Hide factor ``name`` from reviews and stop requiring it (``retire=False`` brings it back,
    not required). Tags and day sums are kept."""
    with s.write():
        retired = _factor_row(s, name)
        if retire and retired is not None:
            raise Conflict(f"factor {name!r} was already retired at {retired}")
        if not retire and retired is None:
            raise Conflict(f"factor {name!r} is not retired")
        s.conn.execute("UPDATE factors SET retired_at = ?, required = 0 WHERE name = ?",
                       (format_stored(now_utc()) if retire else None, name))


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
