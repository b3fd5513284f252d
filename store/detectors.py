"""The detectors' stored state: ``detector_days`` (each slot's CUSUM state and what it reads
after each plant day) and ``detector_progress`` (per characteristic: the last day advanced, the
earliest day touched by a write since, and a fingerprint of the settings the state was made
with).

``dirty_from`` is kept by triggers on ``buckets`` (schema migration 3): any insert, update or
delete of a bucket on a day at or before ``through_day`` lowers it to that day, whatever code path
wrote the bucket (logging, import, correction, void, a new factor's backfill). The detector
service recomputes from there. What the state means is decided in ``stats.detect``; this module
only keeps it. Callers hold ``store.write()`` around the writes.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

STATE_COLUMNS = ("s_hi", "s_lo", "onset_hi", "onset_lo", "w_hi", "wc_hi", "w_lo", "wc_lo",
                 "alarm", "detected", "alarm_onset", "aw", "awc")
SHOW_COLUMNS = ("used", "threshold", "evidence", "size", "size_low", "size_high", "ref_sd")
ALL_COLUMNS = ("characteristic_id", "day", "factor", "level", "kind") + STATE_COLUMNS + \
    SHOW_COLUMNS


@dataclass(frozen=True)
class Progress:
    """How far one characteristic's detectors are advanced."""

    characteristic_id: int
    through_day: str
    dirty_from: str | None
    fingerprint: str


def progress(store) -> dict[int, Progress]:
    """Every characteristic's progress row, by characteristic id (one query)."""
    rows = store.conn.execute(
        "SELECT characteristic_id, through_day, dirty_from, fingerprint FROM detector_progress"
    ).fetchall()
    return {int(r[0]): Progress(int(r[0]), r[1], r[2], r[3]) for r in rows}


def set_progress(store, characteristic_id: int, through_day: str, fingerprint: str) -> None:
    """Record that a characteristic is advanced through ``through_day`` with nothing dirty."""
    store.conn.execute(
        "INSERT INTO detector_progress(characteristic_id, through_day, dirty_from, fingerprint) "
        "VALUES (?, ?, NULL, ?) ON CONFLICT(characteristic_id) DO UPDATE SET "
        "through_day = excluded.through_day, dirty_from = NULL, "
        "fingerprint = excluded.fingerprint", (characteristic_id, through_day, fingerprint))


def bucket_span(store) -> dict[int, tuple[str, str]]:
    """(first day, last day) of each characteristic's buckets (one query)."""
    rows = store.conn.execute(
        "SELECT characteristic_id, min(day), max(day) FROM buckets GROUP BY characteristic_id"
    ).fetchall()
    return {int(r[0]): (r[1], r[2]) for r in rows}


def bucket_rows(store, characteristic_id: int, since: str, until: str) -> list[tuple]:
    """(factor, level, day, n, sum_d, sum_d2) of one characteristic's buckets in a day range."""
    return store.conn.execute(
        "SELECT factor, level, day, n, sum_d, sum_d2 FROM buckets WHERE characteristic_id = ? "
        "AND day >= ? AND day <= ? ORDER BY factor, level, day",
        (characteristic_id, since, until)).fetchall()


def state_on(store, characteristic_id: int, day: str) -> dict[tuple[str, str, str], tuple]:
    """The state columns after ``day``, by (factor, level, kind)."""
    cols = ", ".join(STATE_COLUMNS)
    rows = store.conn.execute(
        f"SELECT factor, level, kind, {cols} FROM detector_days "
        "WHERE characteristic_id = ? AND day = ?", (characteristic_id, day)).fetchall()
    return {(r[0], r[1], r[2]): tuple(r[3:]) for r in rows}


def replace_from(store, characteristic_id: int, day: str, rows: Iterable[Sequence]) -> None:
    """Drop a characteristic's rows from ``day`` on and insert ``rows`` (in ``ALL_COLUMNS``
    order)."""
    store.conn.execute("DELETE FROM detector_days WHERE characteristic_id = ? AND day >= ?",
                       (characteristic_id, day))
    marks = ", ".join("?" * len(ALL_COLUMNS))
    store.conn.executemany(
        f"INSERT INTO detector_days({', '.join(ALL_COLUMNS)}) VALUES ({marks})", rows)


def forget(store, characteristic_id: int) -> None:
    """Drop a characteristic's detector state (it is recomputed from its first day)."""
    store.conn.execute("DELETE FROM detector_days WHERE characteristic_id = ?",
                       (characteristic_id,))
    store.conn.execute("DELETE FROM detector_progress WHERE characteristic_id = ?",
                       (characteristic_id,))


def rows_on(store, day: str | None = None) -> list[tuple]:
    """Rows to show: each characteristic's state on its ``through_day`` (or on ``day`` when
    given, for those advanced that far). Columns: characteristic name, day, factor, level, kind,
    then ``STATE_COLUMNS`` and ``SHOW_COLUMNS``. One query."""
    cols = ", ".join(f"d.{c}" for c in ("day", "factor", "level", "kind") + STATE_COLUMNS
                     + SHOW_COLUMNS)
    if day is None:
        sql = (f"SELECT c.name, {cols} FROM detector_progress p "
               "JOIN detector_days d ON d.characteristic_id = p.characteristic_id "
               "AND d.day = p.through_day JOIN characteristics c ON c.id = d.characteristic_id "
               "ORDER BY c.name, d.factor, d.level, d.kind")
        return store.conn.execute(sql).fetchall()
    sql = (f"SELECT c.name, {cols} FROM detector_days d "
           "JOIN characteristics c ON c.id = d.characteristic_id WHERE d.day = ? "
           "ORDER BY c.name, d.factor, d.level, d.kind")
    return store.conn.execute(sql, (day,)).fetchall()


def evidence_rows(store, characteristic_id: int, factor: str, since: str,
                  until: str) -> list[tuple]:
    """(level, kind, day, evidence) of one comparison's detectors over a day range, the day
    by day history the run chart draws under the means (evidence may be NULL). One query."""
    return store.conn.execute(
        "SELECT level, kind, day, evidence FROM detector_days WHERE characteristic_id = ? "
        "AND factor = ? AND day >= ? AND day <= ? ORDER BY level, kind, day",
        (characteristic_id, factor, since, until)).fetchall()
