"""The store's bulk path for imports: judge a frame of values without the write lock
(``store.bulk_plan``), then write it here in bounded transactions.

``write_plan`` stores the accepted entries in transactions of about ``CHUNK_VALUES`` values,
never splitting a lot: new lots and their tags go through one ``executemany`` into a temporary
table and ``INSERT ... SELECT``, measurements through ``executemany``, their 'log' audit rows are
copied inside SQLite, and the day sums get one upsert per touched bucket, aggregated in polars.
Once another connection has written since the plan, each transaction first re-reads the stored
lots of its chunk, so a lot stored meanwhile by someone else is judged again (skipped as a
duplicate, or refused) instead of being written twice.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass
from itertools import repeat
from typing import TYPE_CHECKING

from lotwatch.store.aggregates import Deltas
from lotwatch.store.bulk_plan import STORED, TAG, Plan, _judge_stored, plan_values
from lotwatch.store.errors import BadInput
from lotwatch.store.timeutil import format_stored, now_utc

if TYPE_CHECKING:
    import polars as pl
    from lotwatch.store.connection import Store

# Values per write transaction: the write lock is held for one chunk at a time (about a second
# on a busy 2-core machine), so a floor terminal waits little behind a big import.
CHUNK_VALUES = 25_000


def write_plan(store: Store, plan: Plan, *, source: str, skip_bad: bool,
               progress: Callable[[int], None] | None = None) -> tuple[list[int], int]:
    """Store ``plan.entries`` in bounded transactions; returns (measurement ids, lots).

    A chunk whose lots were all new when the plan was made is laid out (``_prepare``) before its
    transaction begins, so the write lock is held only for the inserts, and the pause between two
    transactions lets a waiting writer (a floor terminal) in. Inside the transaction the chunk is
    judged again once another connection has written since the plan (``PRAGMA data_version``
    moved; https://www.sqlite.org/pragma.html#pragma_data_version), or when it holds a stored lot;
    if that finds a lot stored meanwhile, the layout is redone under the lock."""
    import polars as pl

    entries = plan.entries.with_columns(pl.col("units").list.len().alias("_n"))
    if entries.height == 0:
        if progress is not None:
            progress(0)
        return [], 0
    per_lot = entries.group_by("lot", maintain_order=True).agg(pl.col("_n").sum())
    per_lot = per_lot.with_columns(
        ((pl.col("_n").cum_sum() - pl.col("_n")) // CHUNK_VALUES).alias("_chunk"))
    entries = entries.join(per_lot.select("lot", "_chunk"), on="lot", maintain_order="left")
    ids: list[int] = []
    lots = 0
    now_s = format_stored(now_utc())
    seen = plan.data_version
    factors = store.factors()
    required = [f.name for f in factors if f.required]
    factor_names = {f.name for f in factors}
    for (_,), chunk in entries.partition_by("_chunk", as_dict=True, maintain_order=True).items():
        part = Plan(entries=chunk.drop("_chunk", "_n", STORED), tag_keys=plan.tag_keys,
                    problems=[], duplicates=0, refused_values=0, rounded=0)
        ready = (None if chunk[STORED].any() else
                 _prepare(part.entries, {}, None, plan.tag_keys, factor_names, store.user))
        with store.write():
            height = part.entries.height
            # PRAGMA data_version moves only when another connection commits: unchanged since
            # the plan was judged, nobody else has written, so the plan's judgement still holds
            # (this import's own chunks never share a lot with a later chunk)
            if seen is not None and store.data_version() != seen:
                seen = None
            judged_new = seen is not None and ready is not None  # no lot stored, then or now
            lot_ids = {} if judged_new else _judge_stored(store.conn, part, source, required)
            if part.problems and not skip_bad:
                raise BadInput(plan.problems + part.problems, stored_nothing=not ids)
            plan.problems += part.problems
            plan.duplicates += part.duplicates
            plan.refused_values += part.refused_values
            if lot_ids or part.entries.height != height:  # the store changed since the plan
                ready = None
            new_ids, new_lots = _write_chunk(store, part, lot_ids, now_s, source, ready,
                                             factor_names)
        ids += new_ids
        lots += new_lots
        if progress is not None:
            progress(len(ids))
    return ids, lots


def _insert_fresh_lots(conn, fresh: pl.DataFrame, tag_keys: list[str], now_s: str,
                       next_lot: int) -> None:
    """New lots and their tags: one ``executemany`` into a temporary table (a lot and its tags
    per row), then ``INSERT ... SELECT`` into ``lots`` and, once per tag key, ``lot_tags``.
    ``fresh`` numbers its lots from 0 (``_i``); they get the ids from ``next_lot`` on."""
    import polars as pl

    if fresh.height == 0:
        return
    cols = ", ".join(f"t{i} TEXT" for i in range(len(tag_keys)))
    conn.execute("DROP TABLE IF EXISTS temp.import_lots")
    conn.execute("CREATE TEMP TABLE import_lots (lot_id INTEGER PRIMARY KEY, lot_code TEXT"
                 + (", " + cols if cols else "") + ")")
    marks = ", ".join("?" * (2 + len(tag_keys)))
    rows = fresh.select(pl.col("_i").cast(pl.Int64) + next_lot, "lot",
                        *(pl.col(TAG + k) for k in tag_keys))
    conn.executemany(f"INSERT INTO temp.import_lots VALUES ({marks})",
                     zip(*(s.to_list() for s in rows.iter_columns()), strict=True))
    conn.execute("INSERT INTO lots(id, lot_code, created_at) SELECT lot_id, lot_code, ? "
                 "FROM temp.import_lots ORDER BY lot_id", (now_s,))
    for i, key in enumerate(tag_keys):  # t{i} are our own column names, never user text
        conn.execute(f"INSERT INTO lot_tags(lot_id, key, value) SELECT lot_id, ?, t{i} "
                     f"FROM temp.import_lots WHERE t{i} IS NOT NULL", (key,))
    conn.execute("DROP TABLE temp.import_lots")


@dataclass
class _Prepared:
    """A chunk laid out for its inserts. Lot keys: a stored lot's id, or ``-(i + 1)`` for the
    chunk's new lot number ``i`` (its id is known only under the write lock)."""

    fresh: pl.DataFrame  # _i, lot, tag columns: the new lots
    long_tags: pl.DataFrame  # lot, lot_key, key, value: every tag the file gives its lots
    meas: pl.DataFrame  # _i (0, 1, ...), lot_key, cid, seq, units, measured_at, day, by, note
    sums: pl.DataFrame  # cid, key, value, day, n, s1, s2, lots: the day-sum deltas


def _prepare(e: pl.DataFrame, lot_ids: dict[str, int], stored_levels: pl.DataFrame | None,
             tag_keys: list[str], factor_names: set[str], user: str) -> _Prepared:
    """Lay out one chunk's entries (no SQL): lots, tags, one row per value, and the day sums
    aggregated per bucket. ``lot_ids`` are the chunk's stored lots, ``stored_levels`` their
    stored factor tags (lot_id, key, value)."""
    import polars as pl

    tags = [TAG + k for k in tag_keys]
    lots = e.select("lot", *tags).unique("lot", keep="first", maintain_order=True)
    known = pl.DataFrame({"lot": list(lot_ids), "lot_key": list(lot_ids.values())},
                         schema={"lot": pl.String, "lot_key": pl.Int64})
    lots = lots.join(known, on="lot", how="left", maintain_order="left")
    fresh = lots.filter(pl.col("lot_key").is_null()).drop("lot_key").with_row_index("_i")
    lots = pl.concat([lots.filter(pl.col("lot_key").is_not_null()),
                      fresh.select("lot", *tags, (-pl.col("_i").cast(pl.Int64) - 1)
                                   .alias("lot_key"))])
    long_tags = (lots.unpivot(index=["lot", "lot_key"], on=tags, variable_name="key")
                 .drop_nulls("value").with_columns(pl.col("key").str.strip_prefix(TAG))
                 if tags else pl.DataFrame(schema={"lot": pl.String, "lot_key": pl.Int64,
                                                   "key": pl.String, "value": pl.String}))
    meas = (e.join(lots.select("lot", "lot_key"), on="lot", maintain_order="left")
            .with_columns(pl.int_ranges(pl.col("units").list.len()).alias("seq"))
            .explode("units", "seq", "rows")
            .with_row_index("_i")
            .with_columns((pl.col("units") - pl.col("origin")).alias("d"),
                          pl.col("by").fill_null(user)))
    levels = long_tags.filter(pl.col("key").is_in(list(factor_names))).select(
        "lot_key", "key", "value")
    if stored_levels is not None:  # stored lots: their stored factor tags count too
        levels = pl.concat([levels, stored_levels.rename({"lot_id": "lot_key"})]).unique()
    sums = (meas.select("lot_key", "cid", "day", "d").join(levels, on="lot_key")
            .group_by("cid", "key", "value", "day")
            .agg(pl.len().alias("n"), pl.col("d").sum().alias("s1"),
                 # 128-bit: a 64-bit sum of squares would wrap around without a word
                 (pl.col("d").cast(pl.Int128) ** 2).sum().alias("s2"),
                 pl.col("lot_key").n_unique().alias("lots")))
    return _Prepared(fresh, long_tags, meas.drop("d"), sums)


def _stored_lots_gain_tags(conn, ready: _Prepared, lot_ids: dict[str, int],
                           factor_names: set[str], deltas: Deltas) -> None:
    """Stored lots may gain tags they did not have; a gained factor tag brings the lot's stored
    values into that factor's buckets."""
    import polars as pl

    stored_keys = set(conn.execute(
        "SELECT lot_id, key FROM lot_tags WHERE lot_id IN (SELECT value FROM json_each(?))",
        (json.dumps(sorted(lot_ids.values())),)).fetchall())
    new_tags = [t for t in ready.long_tags.filter(pl.col("lot_key") >= 0)
                .select("lot_key", "key", "value").iter_rows()
                if (t[0], t[1]) not in stored_keys]
    conn.executemany("INSERT INTO lot_tags(lot_id, key, value) VALUES (?, ?, ?)", new_tags)
    for lot_id, key, value in (t for t in new_tags if t[1] in factor_names):
        joined: set[tuple[int, str]] = set()
        for cid, day, cur, origin in conn.execute(
                "SELECT m.characteristic_id, m.day, m.current_units, c.origin_units "
                "FROM measurements m JOIN characteristics c ON c.id = m.characteristic_id "
                "WHERE m.lot_id = ? AND m.voided = 0", (lot_id,)):
            deltas.add((cid, key, value, day), cur - origin)
            joined.add((cid, day))
        for cid, day in joined:
            deltas.add_lot((cid, key, value, day))


def _write_chunk(store: Store, part: Plan, lot_ids: dict[str, int], now_s: str, source: str,
                 ready: _Prepared | None, factor_names: set[str]) -> tuple[list[int], int]:
    """One transaction's inserts and bucket upserts (the caller holds the write lock). ``ready``
    is the chunk laid out before the lock when it had no stored lot; else it is laid out here."""
    import polars as pl

    conn = store.conn
    if part.entries.height == 0:
        return [], 0
    deltas = Deltas()
    if ready is None:
        stored_levels = None
        if lot_ids:
            stored_levels = pl.DataFrame(conn.execute(
                "SELECT t.lot_id, t.key, t.value FROM lot_tags t JOIN factors f ON f.name = t.key "
                "WHERE t.lot_id IN (SELECT value FROM json_each(?))",
                (json.dumps(sorted(lot_ids.values())),)).fetchall(), orient="row",
                schema={"lot_id": pl.Int64, "key": pl.String, "value": pl.String})
        ready = _prepare(part.entries, lot_ids, stored_levels, part.tag_keys, factor_names,
                         store.user)
    next_lot = conn.execute("SELECT coalesce(max(id), 0) + 1 FROM lots").fetchone()[0]
    next_meas = conn.execute("SELECT coalesce(max(id), 0) + 1 FROM measurements").fetchone()[0]
    _insert_fresh_lots(conn, ready.fresh, part.tag_keys, now_s, next_lot)
    if lot_ids:
        _stored_lots_gain_tags(conn, ready, lot_ids, factor_names, deltas)
    _insert_measurements(conn, ready.meas, next_meas, next_lot, now_s, source)
    _apply_sums(conn, ready.sums, deltas)
    return list(range(next_meas, next_meas + ready.meas.height)), ready.fresh.height


def _insert_measurements(conn, meas: pl.DataFrame, next_meas: int, next_lot: int, now_s: str,
                         source: str) -> None:
    """The chunk's measurements (ids from ``next_meas`` on; a new lot's key ``-(i + 1)`` is lot
    id ``next_lot + i``) and their 'log' audit rows. The rows are zipped from whole columns
    (about half the cost of ``DataFrame.iter_rows``)."""
    import polars as pl

    lot_key = pl.col("lot_key")
    cols = meas.select(
        pl.col("_i").cast(pl.Int64) + next_meas,
        pl.when(lot_key < 0).then(next_lot - 1 - lot_key).otherwise(lot_key),
        "cid", "seq", "units", "measured_at", "day", "by", "note")
    conn.executemany(
        "INSERT INTO measurements(id, lot_id, characteristic_id, seq, original_units, "
        "current_units, measured_at, day, logged_at, logged_by, note, source) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
        zip(*(cols.to_series(i).to_list() for i in range(7)), repeat(now_s),
            cols.to_series(7).to_list(), cols.to_series(8).to_list(), repeat(source),
            strict=False))  # the repeats are endless; the columns end together
    # the 'log' audit rows repeat what was just inserted: copied inside SQLite
    conn.execute(
        "INSERT INTO audit(measurement_id, action, at, by, new_units) SELECT id, 'log', "
        "logged_at, logged_by, original_units FROM measurements WHERE id >= ? ORDER BY id",
        (next_meas,))


def _apply_sums(conn, sums: pl.DataFrame, deltas: Deltas) -> None:
    """The chunk's day-sum deltas, one upsert per touched bucket. Each new entry is a (lot,
    characteristic) not stored before, so its lot is new to its bucket: the distinct lots of the
    chunk are the bucket's added lot count."""
    for cid, key, value, day, n, s1, s2, lots in sums.iter_rows():
        deltas.add_sums((cid, key, value, day), n, s1, s2, lots)
    deltas.apply(conn)


__all__ = ["CHUNK_VALUES", "Plan", "plan_values", "write_plan"]
