"""The store's bulk path for imports: judge a frame of values against the store without the write
lock, then write it in bounded transactions.

``plan_values`` applies the rules of ``store.lots`` (characteristic known, value exact at the
resolution and plausible, lot ID and tags storable, required factors tagged, duplicates skipped,
conflicting values refused) with polars expressions over all values at once; the entries with a
problem are handed to ``lots._prepare`` so the messages are those of ``log_lots``. Stored lots are
read in one query (a JSON array of the file's lot IDs joined with ``json_each``). Nothing here
writes, so a refused import never takes the write lock.

``write_plan`` then stores the accepted entries in transactions of about ``CHUNK_VALUES`` values,
never splitting a lot: lots, tags, measurements and their 'log' audit rows go in with
``executemany``, and the day sums get one upsert per touched bucket, aggregated in polars. Each
transaction first re-reads the stored lots of its chunk, so a lot stored meanwhile by someone
else is judged again (skipped as a duplicate, or refused) instead of being written twice.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass, field
from math import ceil, floor
from typing import TYPE_CHECKING, Any

from lotwatch.store.aggregates import Deltas
from lotwatch.store.errors import BadInput, RowProblem
from lotwatch.store.lots import _prepare, _problem
from lotwatch.store.model import Characteristic, LotEntry
from lotwatch.store.text import _UNSAFE
from lotwatch.store.timeutil import STORED_FORMAT, format_stored, now_utc
from lotwatch.store.values import MAX_ABS_D, format_units, scale_of, scaled_bound

if TYPE_CHECKING:
    import polars as pl
    from lotwatch.store.connection import Store

# Values per write transaction: at the measured pace this holds the write lock well under a
# second, so a floor terminal logging a lot waits little behind a big import.
CHUNK_VALUES = 50_000
TAG = "__tag:"


@dataclass
class Plan:
    """Entries to store (one row per lot x characteristic) and what was refused or skipped."""

    entries: Any  # pl.DataFrame: lot, cid, units (list[i64]), rows (list[i64]), measured_at,
    #               day, by, note, column, source, tag columns
    tag_keys: list[str]
    problems: list[RowProblem]
    duplicates: int  # values
    refused_values: int
    rounded: int
    values: int = 0
    notes: list[str] = field(default_factory=list)


def _char_table(chars: list[Characteristic]) -> pl.DataFrame:
    """Per characteristic: id, scale m / 10**k, origin and the plausible limits as integer
    bounds on ``units * m`` (exact: an integer x < b exactly when x < ceil(b))."""
    import polars as pl

    rows = []
    for c in chars:
        m, k = scale_of(c.resolution)
        lo = None if c.plausible_low is None else ceil(scaled_bound(c.plausible_low, c.resolution))
        hi = (None if c.plausible_high is None
              else floor(scaled_bound(c.plausible_high, c.resolution)))
        rows.append((c.name, c.id, m, k, c.origin_units, lo, hi))
    return pl.DataFrame(rows, orient="row", schema={
        "characteristic": pl.String, "cid": pl.Int64, "m": pl.Int64, "k": pl.Int32,
        "origin": pl.Int64, "lo": pl.Int64, "hi": pl.Int64})


def _units(scales: list[int]) -> pl.Expr:
    """Exact units of plain decimal text (``-12.30``) at scale m / 10**k, null when the text
    is not plain, has more decimals than k, more than 18 digits, or is not a multiple of m (those
    go through ``values.text_to_units`` for the exact reason). ``scales``: the k in use."""
    import polars as pl

    text = pl.col("value")
    plain = text.str.contains(r"^-?\d+(?:\.\d+)?$")
    whole = text.str.extract(r"^-?(\d+)", 1)
    frac = text.str.extract(r"\.(\d+)$", 1).fill_null("")
    digits = pl.lit(None, pl.String)
    for k in scales:  # a file holds a few characteristics: one branch per decimal count
        digits = pl.when(pl.col("k") == k).then(
            pl.when(frac.str.len_chars() <= k).then(whole + frac.str.pad_end(k, "0"))
        ).otherwise(digits)
    n = pl.when(plain & (digits.str.len_chars() <= 18)).then(digits.cast(pl.Int64, strict=False))
    n = pl.when(text.str.starts_with("-")).then(-n).otherwise(n)
    return pl.when(n % pl.col("m") == 0).then(n // pl.col("m")).alias("units")


def _value_checks(vals: pl.DataFrame) -> pl.DataFrame:
    """Mark values whose entry must go through the row-by-row rules: ``flag`` true."""
    import polars as pl

    u = pl.col("units")
    scaled = u * pl.col("m")
    flag = (
        pl.col("cid").is_null() | u.is_null()
        | (pl.col("lo").is_not_null() & (scaled < pl.col("lo")))
        | (pl.col("hi").is_not_null() & (scaled > pl.col("hi")))
        | ((u - pl.col("origin")).abs() > MAX_ABS_D)
        | (pl.col("lot").str.len_chars() > 100) | pl.col("lot").str.contains(_UNSAFE.pattern)
    )
    scales = [int(k) for k in vals["k"].drop_nulls().unique().to_list()]
    return vals.with_columns(_units(scales)).with_columns(flag.alias("flag"))


def plan_values(store: Store, values: pl.DataFrame, tag_keys: list[str], *, source: str,
                round_values: bool, now_s: str) -> Plan:
    """Judge every value against the store as it is now (no write lock; see the module
    docstring). ``values`` is ``import_parse.parse_values``'s frame."""
    import polars as pl

    chars = store.characteristics()
    factors = store.factors()
    zone = store.plant_zone
    required = [f.name for f in factors if f.required]
    tags = [TAG + k for k in tag_keys]
    unsafe_tag = pl.lit(False)
    for k, c in zip(tag_keys, tags, strict=True):
        unsafe_tag = unsafe_tag | pl.col(c).str.contains(_UNSAFE.pattern).fill_null(False)
        if _UNSAFE.search(k):
            unsafe_tag = pl.lit(True)
    missing_required = pl.lit(False)
    for k in required:
        missing_required = missing_required | (
            pl.col(TAG + k).is_null() if k in tag_keys else pl.lit(True))
    vals = values.join(_char_table(chars), on="characteristic", how="left",
                       maintain_order="left")
    vals = _value_checks(vals).with_columns((pl.col("flag") | unsafe_tag).alias("flag"))
    at = pl.col("measured_at").fill_null(pl.lit(now_s).str.to_datetime(
        STORED_FORMAT, time_zone="UTC", time_unit="us")).dt.truncate("1s")
    # the bucket day is the plant-local date of the time (store.plantzone)
    vals = vals.with_columns(at.dt.strftime(STORED_FORMAT).alias("measured_at"),
                             at.dt.convert_time_zone(zone).dt.strftime("%Y-%m-%d").alias("day"))
    entries = (vals.group_by("lot", "characteristic", maintain_order=True).agg(
        pl.col("cid").first(), pl.col("units"), pl.col("value"), pl.col("__row").alias("rows"),
        pl.col("measured_at").first(), pl.col("day").first(), pl.col("by").first(),
        pl.col("column").first(),
        pl.col("note").drop_nulls().unique(maintain_order=True).str.join("; ").alias("note"),
        pl.col("flag").any(), pl.col("origin").first(), *(pl.col(c).first() for c in tags)))
    entries = entries.with_columns(
        (pl.col("flag") | missing_required).alias("flag"),
        pl.col("note").replace("", None))
    flagged = entries.filter(pl.col("flag"))
    good = entries.filter(~pl.col("flag"))
    problems: list[RowProblem] = []
    rounded = 0
    refused_values = 0
    rescued: list[dict] = []
    if flagged.height:  # the row-by-row rules, for their messages (and exact rounding)
        by_name = {c.name: c for c in chars}
        times: dict[object, str] = {}
        for r in flagged.iter_rows(named=True):
            e = _entry(r, tag_keys, source)
            p = _prepare(0, e, by_name, now_utc(), round_values, store.user, times, zone)
            if isinstance(p, list):
                problems += p
                refused_values += len(r["value"])
                continue
            missing = [k for k in required if k not in p.tags]
            if missing:
                problems.append(_missing(e, missing, required))
                refused_values += len(r["value"])
                continue
            rounded += p.rounded
            rescued.append({**r, "units": list(p.units), "flag": False})
    if rescued:
        good = pl.concat([good, pl.DataFrame(rescued, schema=good.schema)])
    plan = Plan(entries=good.drop("flag", "value"), tag_keys=tag_keys, problems=problems,
                duplicates=0, refused_values=refused_values, rounded=rounded,
                values=int(vals.height))
    _judge_stored(store.conn, plan, source)
    return plan


def _entry(r: dict, tag_keys: list[str], source: str) -> LotEntry:
    return LotEntry(characteristic=r["characteristic"], values=list(r["value"]),
                    tags={k: r[TAG + k] for k in tag_keys if r[TAG + k] is not None},
                    lot=r["lot"], measured_at=r["measured_at"], note=r["note"] or None,
                    by=r["by"], source=source, rows=list(r["rows"]), column=r["column"])


def _missing(e: LotEntry, missing: list[str], required: list[str]) -> RowProblem:
    return _problem(e, missing[0], None,
                    f"missing required tag{'s' if len(missing) > 1 else ''} "
                    f"{', '.join(repr(k) for k in missing)} (required: {', '.join(required)})")


def _stored_lots(conn, codes: list[str]) -> dict[str, int]:
    return dict(conn.execute(
        "SELECT l.lot_code, l.id FROM json_each(?) j JOIN lots l ON l.lot_code = j.value",
        (json.dumps(codes),)).fetchall())


def _judge_stored(conn, plan: Plan, source: str) -> dict[str, int]:
    """Entries of lots already stored: tags must agree, values equal to the stored ones (the
    values as first logged, or those not voided) are duplicates, other values are refused.
    Entries of required tags judged on the lot's stored plus new tags. Returns the stored lots'
    ids; ``plan.entries`` keeps only what is to be written."""
    import polars as pl

    entries = plan.entries
    if entries.height == 0:
        return {}
    lot_ids = _stored_lots(conn, entries["lot"].unique().to_list())
    if not lot_ids:
        return {}
    ids = json.dumps(sorted(lot_ids.values()))
    stored_tags: dict[int, dict[str, str]] = {i: {} for i in lot_ids.values()}
    for lot_id, key, value in conn.execute(
            "SELECT lot_id, key, value FROM lot_tags WHERE lot_id IN "
            "(SELECT value FROM json_each(?))", (ids,)):
        stored_tags[lot_id][key] = value
    first: dict[tuple[int, int], list[int]] = {}
    live: dict[tuple[int, int], list[int]] = {}
    for lot_id, cid, orig, voided in conn.execute(
            "SELECT lot_id, characteristic_id, original_units, voided FROM measurements "
            "WHERE lot_id IN (SELECT value FROM json_each(?)) ORDER BY lot_id, "
            "characteristic_id, seq", (ids,)):
        first.setdefault((lot_id, cid), []).append(orig)
        if not voided:
            live.setdefault((lot_id, cid), []).append(orig)
    chars = {r[0]: r[1] for r in conn.execute("SELECT id, resolution FROM characteristics")}
    keep = []
    for r in entries.iter_rows(named=True):
        lot_id = lot_ids.get(r["lot"])
        if lot_id is None:
            keep.append(True)
            continue
        e = _entry({**r, "value": r["units"]}, plan.tag_keys, source)
        old = stored_tags[lot_id]
        clash = [(k, old[k], v) for k, v in e.tags.items() if k in old and old[k] != v]
        units = list(r["units"])
        res = chars[r["cid"]]
        keep.append(False)
        if clash:
            k, was, new = clash[0]
            plan.problems.append(_problem(e, k, new, f"lot {r['lot']!r} is stored with "
                                          f"{k}={was!r}; this entry says {k}={new!r}"))
            plan.refused_values += len(units)
            continue
        stored = first.get((lot_id, r["cid"]))
        if stored is None:
            keep[-1] = True
            continue
        if units in (stored, live.get((lot_id, r["cid"]), [])):
            plan.duplicates += len(units)
            continue
        was = ", ".join(format_units(u, res) for u in stored)
        now_v = ", ".join(format_units(u, res) for u in units)
        plan.problems.append(_problem(
            e, r["column"] or "value", now_v,
            f"lot {r['lot']!r} already has {r['characteristic']} = {was}; this entry has "
            f"{now_v}. Stored values change only by a correction: if the file is right, "
            "correct or void the stored values (lotwatch history, correct, void) and import "
            "again; if the store is right, remove the row from the file"))
        plan.refused_values += len(units)
    plan.entries = entries.filter(pl.Series(keep, dtype=pl.Boolean))
    return lot_ids


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
    for (_,), chunk in entries.partition_by("_chunk", as_dict=True, maintain_order=True).items():
        part = Plan(entries=chunk.drop("_chunk", "_n"), tag_keys=plan.tag_keys, problems=[],
                    duplicates=0, refused_values=0, rounded=0)
        with store.write():
            lot_ids = _judge_stored(store.conn, part, source)
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
                 (pl.col("d") * pl.col("d")).sum().alias("s2"),
                 pl.col("lot_id").n_unique().alias("lots")))
    # each new entry is a (lot, characteristic) not stored before, so its lot is new to its
    # bucket: the distinct lots of the chunk are the bucket's added lot count
    for cid, key, value, day, n, s1, s2, lots in sums.iter_rows():
        deltas.add_sums((cid, key, value, day), n, s1, s2, lots)
    deltas.apply(conn)
    return meas["id"].to_list(), fresh.height


__all__ = ["CHUNK_VALUES", "Plan", "plan_values", "write_plan"]
