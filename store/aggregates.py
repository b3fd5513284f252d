"""Sufficient statistics per (characteristic, factor, level, plant day): n, sum d, sum d^2, lots.

``n`` counts values (replicates included); ``lots`` counts distinct lots with at least one live
(non-voided) value of that characteristic in that bucket, so windows and group sizes can be read
in lots when a lot carries several replicates. The day is the plant-local date of
``measured_at`` (see ``store.plantzone``).

With ``d = units - origin`` an exact integer, a bucket's rows can be added and subtracted
exactly, so group means and the ANOVA sums of squares of any window are rebuilt from a few
thousand bucket rows instead of every measurement (SS_within = sum d^2 - (sum d)^2 / n per group;
e.g. Montgomery, Design and Analysis of Experiments, ch. 3, "computing formulas").
Every insert, correction and void changes the buckets in the same transaction; ``check``
recomputes them from the raw rows and compares exactly.
"""

from __future__ import annotations

import sqlite3
from collections import defaultdict
from collections.abc import Iterable
from typing import TYPE_CHECKING, Any

from lotwatch.store.errors import StoreError
from lotwatch.store.model import CheckReport
from lotwatch.store.values import MAX_ABS_D

if TYPE_CHECKING:
    from lotwatch.store.connection import Store

BucketKey = tuple[int, str, str, str]  # characteristic_id, factor, level, day


class Deltas:
    """Accumulates bucket changes in memory, then writes them with one UPSERT per bucket.

    Value changes go through ``add``/``add_measurement``; a lot joining or leaving a bucket
    (its first live value there arrives, or its last one is voided) through ``add_lot``."""

    def __init__(self) -> None:
        self._d: defaultdict[BucketKey, list[int]] = defaultdict(lambda: [0, 0, 0, 0])

    def add(self, key: BucketKey, d: int, sign: int = 1) -> None:
        cell = self._d[key]
        cell[0] += sign
        cell[1] += sign * d
        cell[2] += sign * d * d

    def add_lot(self, key: BucketKey, sign: int = 1) -> None:
        self._d[key][3] += sign

    def add_sums(self, key: BucketKey, n: int, sum_d: int, sum_d2: int, lots: int) -> None:
        """Add a bucket's change already summed (the bulk import aggregates in polars)."""
        cell = self._d[key]
        cell[0] += n
        cell[1] += sum_d
        cell[2] += sum_d2
        cell[3] += lots

    def add_measurement(self, characteristic_id: int, day: str, d: int,
                        factor_levels: Iterable[tuple[str, str]], sign: int = 1) -> None:
        for factor, level in factor_levels:
            self.add((characteristic_id, factor, level, day), d, sign)

    def add_lot_to(self, characteristic_id: int, day: str,
                   factor_levels: Iterable[tuple[str, str]], sign: int = 1) -> None:
        for factor, level in factor_levels:
            self.add_lot((characteristic_id, factor, level, day), sign)

    def __len__(self) -> int:
        return len(self._d)

    def apply(self, conn: sqlite3.Connection) -> None:
        rows = [(*k, *v) for k, v in self._d.items() if v != [0, 0, 0, 0]]
        for key, sums in self._d.items():
            if max(abs(x) for x in sums) > INT64_MAX:
                raise _overflow(conn, key)
        # A new row must satisfy the table's CHECKs before the UPSERT's conflict branch runs, so
        # only growing buckets go through INSERT ... ON CONFLICT; the others exist and UPDATE.
        def grows(r: tuple) -> bool:
            return r[4] > 0 and r[6] >= 0 and r[7] >= 0

        grow = [r for r in rows if grows(r)]
        shrink = [(r[4], r[5], r[6], r[7], *r[:4]) for r in rows if not grows(r)]
        try:
            conn.executemany(
                "INSERT INTO buckets(characteristic_id, factor, level, day, n, sum_d, sum_d2, "
                "lots) VALUES (?, ?, ?, ?, ?, ?, ?, ?) "
                "ON CONFLICT(characteristic_id, factor, level, day) DO UPDATE SET "
                "n = n + excluded.n, sum_d = sum_d + excluded.sum_d, "
                "sum_d2 = sum_d2 + excluded.sum_d2, lots = lots + excluded.lots",
                grow,
            )
        except sqlite3.IntegrityError as exc:
            # SQLite turns an overflowing integer sum into a REAL, which the STRICT column refuses
            if "REAL value in INTEGER column buckets." not in str(exc):
                raise
            raise _overflow(conn, _overflowing(conn, grow)) from None
        if shrink:
            cur = conn.executemany(
                "UPDATE buckets SET n = n + ?, sum_d = sum_d + ?, sum_d2 = sum_d2 + ?, "
                "lots = lots + ? "
                "WHERE characteristic_id = ? AND factor = ? AND level = ? AND day = ?",
                shrink,
            )
            if cur.rowcount != len(shrink):
                raise RuntimeError("bucket update found no bucket to subtract from (a bug)")
            # Emptied buckets are dropped so that the table equals a fresh recomputation.
            conn.executemany(
                "DELETE FROM buckets WHERE characteristic_id = ? AND factor = ? AND level = ? "
                "AND day = ? AND n = 0",
                [r[4:] for r in shrink],
            )
        self._d.clear()

INT64_MAX = 2**63 - 1  # SQLite's INTEGER is a signed 64-bit number


class SumsOverflow(StoreError):
    """A write would take a day sum past SQLite's 64-bit integers; nothing was stored."""


def capacity(max_abs_d: int) -> int:
    """How many values one day sum (characteristic x level x day) holds when every value sits
    ``max_abs_d`` resolution steps from the origin: sum d^2 <= n * max_abs_d^2 <= 2^63 - 1."""
    return INT64_MAX // max(1, max_abs_d) ** 2


def _overflowing(conn: sqlite3.Connection, grow: list[tuple]) -> tuple:
    """The first bucket key whose stored sums plus the growing row pass INT64_MAX."""
    for r in grow:
        old = conn.execute("SELECT n, sum_d, sum_d2 FROM buckets WHERE characteristic_id = ? "
                           "AND factor = ? AND level = ? AND day = ?", r[:4]).fetchone()
        if old and any(abs(a + b) > INT64_MAX for a, b in zip(old, r[4:7], strict=True)):
            return r[:4]
    return grow[0][:4]


def _overflow(conn: sqlite3.Connection, key: tuple) -> SumsOverflow:
    cid, factor, level, day = key
    row = conn.execute("SELECT name FROM characteristics WHERE id = ?", (cid,)).fetchone()
    name = row[0] if row else f"characteristic {cid}"
    return SumsOverflow(
        f"too many extreme values of {name} for {factor} = {level} on {day}: the day's sum of "
        f"squared deviations would pass SQLite's largest integer (2^63 - 1), so nothing was "
        f"stored. A day and group holds at least {capacity(MAX_ABS_D):,} values at the "
        f"extreme of {MAX_ABS_D:,} resolution steps from the origin (more when the values stay "
        "nearer); check the values, or give the characteristic a plausible range "
        "(lotwatch characteristic edit --plausible) so such values are refused as typing errors")


def refuse_overflowing_plan(conn: sqlite3.Connection, entries: Any, factors: list[str],
                            tag_prefix: str) -> None:
    """Before an import writes anything: SumsOverflow if the file's values would take a day sum
    (stored sums included) past INT64_MAX. ``entries`` is a polars frame with ``cid``, ``day``,
    ``origin``, ``units`` (a list per row) and one ``tag_prefix + factor`` column per factor the
    file carries; sums are taken in 128-bit integers so they cannot wrap."""
    import polars as pl

    cols = [f for f in factors if tag_prefix + f in entries.columns]
    if not cols or entries.height == 0:
        return
    # stored + new passes the limit only if one of the two is over half of it
    half = INT64_MAX // 2
    # a bound first: no bucket's new sum of squares can pass half the limit when the number of
    # values times the largest square does not (the usual case; then nothing is grouped)
    u = pl.col("units").cast(pl.List(pl.Int128))
    widest = pl.max_horizontal((u.list.max() - pl.col("origin")).abs(),
                               (u.list.min() - pl.col("origin")).abs()).max()
    bound = entries.select(pl.col("units").list.len().sum().cast(pl.Int128) * widest ** 2).item()
    small = bound is not None and bound <= half
    d = (pl.col("units").cast(pl.Int128) - pl.col("origin")).alias("d")
    for f in cols:
        big = {r[:3]: r[3] for r in conn.execute(
            "SELECT characteristic_id, level, day, sum_d2 FROM buckets WHERE factor = ? AND "
            "sum_d2 > ?", (f, half))}
        if small and not big:
            continue
        sums = (entries.filter(pl.col(tag_prefix + f).is_not_null())
                .select("cid", "day", "origin", "units", tag_prefix + f)
                .explode("units").with_columns(d)
                .group_by("cid", tag_prefix + f, "day")
                .agg(pl.len().alias("n"), pl.col("d").sum().alias("s1"),
                     (pl.col("d") ** 2).sum().alias("s2")))
        for cid, level, day, _n, _s1, s2 in sums.iter_rows():
            if s2 > half or (cid, level, day) in big:
                stored = big.get((cid, level, day))
                if stored is None:
                    row = conn.execute(
                        "SELECT sum_d2 FROM buckets WHERE characteristic_id = ? AND factor = ? "
                        "AND level = ? AND day = ?", (cid, f, level, day)).fetchone()
                    stored = row[0] if row else 0
                if stored + s2 > INT64_MAX:
                    raise _overflow(conn, (cid, f, level, day))


def lot_factor_levels(conn: sqlite3.Connection, lot_id: int) -> list[tuple[str, str]]:
    """(factor, level) pairs of a lot: its tags whose key is a grouping factor."""
    return conn.execute(
        "SELECT t.key, t.value FROM lot_tags t JOIN factors f ON f.name = t.key "
        "WHERE t.lot_id = ? ORDER BY t.key",
        (lot_id,),
    ).fetchall()


# One factor at a time: grouping 1M rows three times is faster than 3M rows once.
_RECOMPUTE = """
SELECT m.characteristic_id AS characteristic_id, t.key AS factor, t.value AS level, m.day AS day,
       count(*) AS n,
       sum(m.current_units - c.origin_units) AS sum_d,
       sum((m.current_units - c.origin_units) * (m.current_units - c.origin_units)) AS sum_d2,
       count(DISTINCT m.lot_id) AS lots
FROM measurements m
JOIN characteristics c ON c.id = m.characteristic_id
JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = ?
WHERE m.voided = 0
GROUP BY m.characteristic_id, t.value, m.day
"""


def backfill_factor(conn: sqlite3.Connection, factor: str) -> int:
    """Build the buckets of a newly added factor from stored lots' tags (caller holds the
    write transaction). Returns the number of bucket rows made."""
    sql = ("INSERT INTO buckets(characteristic_id, factor, level, day, n, sum_d, sum_d2, lots) "
           + _RECOMPUTE)
    cur = conn.execute(sql, (factor,))
    return cur.rowcount


def rebuild_all(conn: sqlite3.Connection) -> int:
    """Drop every bucket and rebuild all of them from the raw rows (caller holds the write
    transaction; used when the days move, e.g. a new plant zone). Returns the rows made."""
    conn.execute("DELETE FROM buckets")
    made = 0
    for (factor,) in conn.execute("SELECT name FROM factors").fetchall():
        made += backfill_factor(conn, factor)
    return made


def check(store: Store) -> CheckReport:
    """Recompute every bucket (sums and lot counts) from the current, non-voided raw rows and
    compare exactly; check each measurement's day against its plant-local date; also
    run ``PRAGMA integrity_check`` and ``PRAGMA foreign_key_check`` and look for measurements
    without their 'log' audit entry or with an impossible state."""
    conn = store.conn
    problems: list[str] = []
    integrity = [r[0] for r in conn.execute("PRAGMA integrity_check").fetchall()]
    if integrity != ["ok"]:
        problems.extend(f"integrity: {msg}" for msg in integrity[:20])
        # the rows of a damaged file cannot be trusted (or even typed): compare nothing more
        problems.append("the store file is damaged; the sums were not compared. Restore it "
                        "from a backup (see lotwatch restore)")
        return CheckReport(False, problems, 0, 0)
    from lotwatch.store.file_generation import disk_problem

    if not store.immutable and (copied := disk_problem(conn, store.path)) is not None:
        problems.append(copied)
    for table, rowid, parent, _fk in conn.execute("PRAGMA foreign_key_check").fetchall()[:20]:
        problems.append(f"foreign key: {table} row {rowid} points to a missing {parent} row")
    # A few thousand rows each way: compare in Python after one pass of the recomputation.
    cols = "characteristic_id, factor, level, day, n, sum_d, sum_d2, lots"
    fresh: dict[tuple[Any, ...], tuple[Any, ...]] = {}
    for (factor,) in conn.execute("SELECT name FROM factors").fetchall():
        fresh.update((r[:4], r[4:]) for r in conn.execute(_RECOMPUTE, (factor,)))
    kept = {r[:4]: r[4:] for r in conn.execute(f"SELECT {cols} FROM buckets")}
    bad_keys = sorted(k for k in fresh.keys() | kept.keys() if fresh.get(k) != kept.get(k))
    for key in bad_keys[:20]:
        problems.append(f"bucket mismatch at {_fmt_key(key)}: stored {_fmt_sums(kept.get(key))}, "
                        f"raw rows give {_fmt_sums(fresh.get(key))}")
    if len(bad_keys) > 20:
        problems.append(f"... and {len(bad_keys) - 20} more bucket mismatches")
    problems.extend(_format_problems(conn))
    problems.extend(_day_problems(conn))
    no_log = conn.execute(
        "SELECT m.id FROM measurements m WHERE NOT EXISTS "
        "(SELECT 1 FROM audit a WHERE a.measurement_id = m.id AND a.action = 'log') LIMIT 20"
    ).fetchall()
    problems.extend(f"measurement {r[0]} has no 'log' entry in the audit trail" for r in no_log)
    n_buckets = len(kept)
    n_meas = conn.execute("SELECT count(*) FROM measurements").fetchone()[0]
    return CheckReport(ok=not problems, problems=problems, buckets_checked=int(n_buckets),
                       measurements=int(n_meas))


_DAY_GLOB = "[0-9][0-9][0-9][0-9]-[01][0-9]-[0-3][0-9]"
_STAMP_GLOB = _DAY_GLOB + "T[0-2][0-9]:[0-5][0-9]:[0-6][0-9]Z"


def _format_problems(conn: sqlite3.Connection) -> list[str]:
    """Every stored time must be in the stored form (``2026-11-30T14:05:00Z``, a four-digit
    year) and every day ``YYYY-MM-DD``: text sorts as time only in that form."""
    bad = conn.execute(
        "SELECT id, measured_at, day, logged_at FROM measurements WHERE measured_at NOT GLOB ? "
        "OR day NOT GLOB ? OR logged_at NOT GLOB ? LIMIT 20",
        (_STAMP_GLOB, _DAY_GLOB, _STAMP_GLOB)).fetchall()
    return [f"measurement {mid} has a malformed time or day (measured_at {at!r}, day {day!r}, "
            f"logged_at {logged!r})" for mid, at, day, logged in bad]


def _day_problems(conn: sqlite3.Connection) -> list[str]:
    """Every measurement's day must be the plant-local date of its ``measured_at``."""
    from lotwatch.store.plantzone import day_function, read_zone

    zone = read_zone(conn)
    day_of = day_function(zone)
    wrong = [(stamp, day) for stamp, day in conn.execute(
        "SELECT DISTINCT measured_at, day FROM measurements WHERE measured_at GLOB ?",
        (_STAMP_GLOB,)) if day_of(stamp) != day]
    return [f"measurements taken at {stamp} are filed under day {day}; in the plant zone "
            f"{zone} that is {day_of(stamp)}" for stamp, day in wrong[:20]]


def _fmt_key(key: tuple) -> str:
    cid, factor, level, day = key
    return f"characteristic {cid}, {factor}={level!r}, {day}"


def _fmt_sums(sums: tuple | None) -> str:
    if sums is None:
        return "nothing"
    n, s1, s2, lots = sums
    return f"n={n}, sum_d={s1}, sum_d2={s2}, lots={lots}"
