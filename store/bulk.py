"""The store's bulk path for imports: judge a frame of values without the write lock
(``store.bulk_plan``), then write it here in bounded transactions.

``write_plan`` stores the accepted entries in transactions of about ``CHUNK_VALUES`` values,
never splitting a lot: new lots and their tags go through one ``executemany`` into a temporary
table and ``INSERT ... SELECT``, measurements through ``executemany``, their 'log' audit rows are
copied inside SQLite, and the day sums get one upsert per touched bucket, aggregated in polars.
Each transaction first re-reads the stored lots of its chunk, so a lot stored meanwhile by someone
else is judged again (skipped as a duplicate, or refused) instead of being written twice.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import TYPE_CHECKING

from lotwatch.store.aggregates import Deltas
from lotwatch.store.bulk_plan import TAG, Plan, _judge_stored, plan_values
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
    """Store ``plan.entries`` in bounded transactions; returns (measurement ids, lots)."""
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
    required = [f.name for f in store.factors() if f.required]
    for (_,), chunk in entries.partition_by("_chunk", as_dict=True, maintain_order=True).items():
        part = Plan(entries=chunk.drop("_chunk", "_n"), tag_keys=plan.tag_keys, problems=[],
                    duplicates=0, refused_values=0, rounded=0)
        with store.write():
            lot_ids = _judge_stored(store.conn, part, source, required)
            if part.problems and not skip_bad:
                raise BadInput(plan.problems + part.problems, stored_nothing=not ids)
            plan.problems += part.problems
            plan.duplicates += part.duplicates
            plan.refused_values += part.refused_values
            new_ids, new_lots = _write_chunk(store, part, lot_ids, now_s, source)
        ids += new_ids
        lots += new_lots
        if progress is not None:
            progress(len(ids))
    return ids, lots


def _insert_fresh_lots(conn, fresh: pl.DataFrame, tag_keys: list[str], now_s: str) -> None:
    """New lots and their tags: one ``executemany`` into a temporary table (a lot and its tags
    per row), then ``INSERT ... SELECT`` into ``lots`` and, once per tag key, ``lot_tags``."""
    import polars as pl

    cols = ", ".join(f"t{i} TEXT" for i in range(len(tag_keys)))
    conn.execute("DROP TABLE IF EXISTS temp.import_lots")
    conn.execute("CREATE TEMP TABLE import_lots (lot_id INTEGER PRIMARY KEY, lot_code TEXT"
                 + (", " + cols if cols else "") + ")")
    marks = ", ".join("?" * (2 + len(tag_keys)))
    conn.executemany(f"INSERT INTO temp.import_lots VALUES ({marks})",
                     fresh.select("lot_id", "lot", *(pl.col(TAG + k) for k in tag_keys))
                     .iter_rows())
    conn.execute("INSERT INTO lots(id, lot_code, created_at) SELECT lot_id, lot_code, ? "
                 "FROM temp.import_lots ORDER BY lot_id", (now_s,))
    for i, key in enumerate(tag_keys):  # t{i} are our own column names, never user text
        conn.execute(f"INSERT INTO lot_tags(lot_id, key, value) SELECT lot_id, ?, t{i} "
                     f"FROM temp.import_lots WHERE t{i} IS NOT NULL", (key,))
    conn.execute("DROP TABLE temp.import_lots")


def _write_chunk(store: Store, part: Plan, lot_ids: dict[str, int], now_s: str,
                 source: str) -> tuple[list[int], int]:
    """One transaction's inserts and bucket upserts (the caller holds the write lock)."""
    import polars as pl

    conn = store.conn
    e = part.entries
    if e.height == 0:
        return [], 0
    factor_names = {f.name for f in store.factors()}
    tags = [TAG + k for k in part.tag_keys]
    next_lot = conn.execute("SELECT coalesce(max(id), 0) + 1 FROM lots").fetchone()[0]
    next_meas = conn.execute("SELECT coalesce(max(id), 0) + 1 FROM measurements").fetchone()[0]
    lots = e.select("lot", *tags).unique("lot", keep="first", maintain_order=True)
    known = pl.DataFrame({"lot": list(lot_ids), "lot_id": list(lot_ids.values())},
                         schema={"lot": pl.String, "lot_id": pl.Int64})
    lots = lots.join(known, on="lot", how="left", maintain_order="left")
    fresh = lots.filter(pl.col("lot_id").is_null()).with_row_index("_i")
    fresh = fresh.with_columns((pl.col("_i").cast(pl.Int64) + next_lot).alias("lot_id"))
    _insert_fresh_lots(conn, fresh, part.tag_keys, now_s)
    lots = pl.concat([lots.filter(pl.col("lot_id").is_not_null()), fresh.drop("_i")])
    long_tags = (lots.unpivot(index=["lot", "lot_id"], on=tags, variable_name="key")
                 .drop_nulls("value").with_columns(pl.col("key").str.strip_prefix(TAG))
                 if tags else pl.DataFrame(schema={"lot": pl.String, "lot_id": pl.Int64,
                                                   "key": pl.String, "value": pl.String}))
    new_tags: list[tuple[int, str, str]] = []
    if lot_ids:  # stored lots may gain tags they did not have
        stored_keys = set(conn.execute(
            "SELECT lot_id, key FROM lot_tags WHERE lot_id IN (SELECT value FROM json_each(?))",
            (json.dumps(sorted(lot_ids.values())),)).fetchall())
        new_tags = [t for t in long_tags.filter(pl.col("lot_id").is_in(list(lot_ids.values())))
                    .select("lot_id", "key", "value").iter_rows()
                    if (t[0], t[1]) not in stored_keys]
        conn.executemany("INSERT INTO lot_tags(lot_id, key, value) VALUES (?, ?, ?)", new_tags)
    deltas = Deltas()
    gained = [t for t in new_tags if t[0] in set(lot_ids.values()) and t[1] in factor_names]
    for lot_id, key, value in gained:  # a stored lot gains a factor tag: its rows join buckets
        joined: set[tuple[int, str]] = set()
        for cid, day, cur, origin in conn.execute(
                "SELECT m.characteristic_id, m.day, m.current_units, c.origin_units "
                "FROM measurements m JOIN characteristics c ON c.id = m.characteristic_id "
                "WHERE m.lot_id = ? AND m.voided = 0", (lot_id,)):
            deltas.add((cid, key, value, day), cur - origin)
            joined.add((cid, day))
        for cid, day in joined:
            deltas.add_lot((cid, key, value, day))

    meas = (e.join(lots.select("lot", "lot_id"), on="lot", maintain_order="left")
            .with_columns(pl.int_ranges(pl.col("units").list.len()).alias("seq"))
            .explode("units", "seq", "rows")
            .with_row_index("_i")
            .with_columns((pl.col("_i").cast(pl.Int64) + next_meas).alias("id"),
                          (pl.col("units") - pl.col("origin")).alias("d"),
                          pl.col("by").fill_null(store.user)))
    conn.executemany(
        "INSERT INTO measurements(id, lot_id, characteristic_id, seq, original_units, "
        "current_units, measured_at, day, logged_at, logged_by, note, source) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        meas.select("id", "lot_id", "cid", "seq", "units", pl.col("units").alias("current"),
                    "measured_at", "day",
                    pl.lit(now_s).alias("logged_at"), "by", "note",
                    pl.lit(source).alias("source")).iter_rows())
    # the 'log' audit rows repeat what was just inserted: copied inside SQLite
    conn.execute(
        "INSERT INTO audit(measurement_id, action, at, by, new_units) SELECT id, 'log', "
        "logged_at, logged_by, original_units FROM measurements WHERE id >= ? ORDER BY id",
        (next_meas,))
    lot_tags_all = (long_tags.filter(pl.col("key").is_in(list(factor_names)))
                    if long_tags.height else long_tags)
    if lot_ids:  # stored lots: their stored factor tags count too
        stored_levels = pl.DataFrame(conn.execute(
            "SELECT t.lot_id, t.key, t.value FROM lot_tags t JOIN factors f ON f.name = t.key "
            "WHERE t.lot_id IN (SELECT value FROM json_each(?))",
            (json.dumps(sorted(lot_ids.values())),)).fetchall(), orient="row",
            schema={"lot_id": pl.Int64, "key": pl.String, "value": pl.String})
        levels = pl.concat([lot_tags_all.select("lot_id", "key", "value"), stored_levels]).unique()
    else:
        levels = lot_tags_all.select("lot_id", "key", "value")
    sums = (meas.select("lot_id", "cid", "day", "d").join(levels, on="lot_id")
            .group_by("cid", "key", "value", "day")
            .agg(pl.len().alias("n"), pl.col("d").sum().alias("s1"),
                 # 128-bit: a 64-bit sum of squares would wrap around without a word
                 (pl.col("d").cast(pl.Int128) ** 2).sum().alias("s2"),
                 pl.col("lot_id").n_unique().alias("lots")))
    # each new entry is a (lot, characteristic) not stored before, so its lot is new to its
    # bucket: the distinct lots of the chunk are the bucket's added lot count
    for cid, key, value, day, n, s1, s2, lots in sums.iter_rows():
        deltas.add_sums((cid, key, value, day), n, s1, s2, lots)
    deltas.apply(conn)
    return meas["id"].to_list(), fresh.height


__all__ = ["CHUNK_VALUES", "Plan", "plan_values", "write_plan"]
