"""Judging an import's values against the store, without its write lock (``store.bulk``'s first
half).

``plan_values`` applies the rules of ``store.lots`` (characteristic known, value exact at the
resolution and plausible, lot ID and tags storable, required factors tagged, duplicates skipped,
conflicting values refused) with polars expressions over all values at once; the entries with a
problem are handed to ``lots.prepare_entry`` so the messages are those of ``log_lots``. Stored lots are
read in one query (a JSON array of the file's lot IDs joined with ``json_each``). Nothing here
writes, so a refused import never takes the write lock.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from math import ceil, floor
from typing import TYPE_CHECKING, Any

from lotwatch.store.aggregates import refuse_overflowing_plan
from lotwatch.store.entry_checks import entry_problem, prepare_entry
from lotwatch.store.errors import RowProblem
from lotwatch.store.model import Characteristic, LotEntry
from lotwatch.store.text import _UNSAFE
from lotwatch.store.timeutil import STORED_FORMAT, now_utc
from lotwatch.store.values import MAX_ABS_D, format_units, scale_of, scaled_bound

if TYPE_CHECKING:
    import polars as pl
    from lotwatch.store.connection import Store

TAG = "__tag:"
STORED = "__stored"  # entries column: the lot was stored when the entry was judged
JUDGE_SLICE = 100_000  # entries judged against the stored lots at once


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
    # the store's PRAGMA data_version read before the plan read the store: while it is unchanged
    # no other connection has written, so the plan needs no second judgement (None: judge again)
    data_version: int | None = None


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


def _units() -> pl.Expr:
    """Exact units of plain decimal text (``-12.30``) at scale m / 10**k, null when the text
    is not plain, has more decimals than k or more than 15 digits, or is not a multiple of m
    (those go through ``values.text_to_units`` for the exact reason).

    With at most k decimals the text is N / 10**k for an integer N; with |N| < 10**15 < 2**53
    the nearest double to the text, times 10**k, is within far less than 0.5 of N (one rounding
    in the parse, relative error <= 2**-53, and one in the product), so rounding it gives N
    exactly (IEEE 754 round-to-nearest; Goldberg 1991, "What every computer scientist should
    know about floating-point arithmetic", section 1.2)."""
    import polars as pl

    text = pl.col("value")
    plain = text.str.contains(r"^-?\d{1,15}(?:\.\d{1,15})?$")
    point = text.str.find(".", literal=True)
    decimals = pl.when(point.is_null()).then(0).otherwise(text.str.len_bytes() - point - 1)
    digits = text.str.len_bytes() - text.str.starts_with("-").cast(pl.UInt32) - (decimals > 0)
    fits = plain & (decimals <= pl.col("k")) & (digits - decimals + pl.col("k") <= 15)
    n: pl.Expr = (text.cast(pl.Float64, strict=False) * pl.lit(10.0).pow(pl.col("k"))).round(0)
    n = pl.when(fits).then(n.cast(pl.Int64))
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
    )
    # lazily, so the sub-expressions ``_units`` and ``flag`` repeat are computed once each
    # (polars' common subexpression elimination runs only on lazy frames)
    return vals.lazy().with_columns(_units()).with_columns(flag.alias("flag")).collect()


def plan_values(store: Store, values: pl.DataFrame, tag_keys: list[str], *, source: str,
                round_values: bool, now_s: str, problems_only: bool = False) -> Plan:
    """Judge every value against the store as it is now (no write lock; see the module
    docstring). ``values`` is ``import_parse.parse_values``'s frame. With ``problems_only``
    (the import is refused anyway: the file has bad rows) only the problems are wanted, so the
    entries' times are not written out as stored text and the day-sum overflow check, which
    guards a write, is left out."""
    import polars as pl

    version = store.data_version()
    chars = store.characteristics()
    factors = store.factors()
    zone = store.plant_zone
    required = [f.name for f in factors if f.required]
    tags = [TAG + k for k in tag_keys]
    vals = values.join(_char_table(chars), on="characteristic", how="left",
                       maintain_order="left")
    vals = _value_checks(vals)
    key = ["lot", "characteristic"]
    entries = _grouped(vals, key, [
        pl.col("cid").first(), pl.col("units"), pl.col("value"), pl.col("__row").alias("rows"),
        pl.col("measured_at").first(), pl.col("by").first(), pl.col("column").first(),
        pl.col("flag").any(), pl.col("origin").first(), *(pl.col(c).first() for c in tags),
        pl.col("measured_at").n_unique().alias("_times")])
    mixed = mixed_times_note(int((entries["_times"] > 1).sum()))
    entries = entries.drop("_times")
    if vals["note"].null_count() < vals.height:  # usually no note: joined only if there
        noted = vals.select(*key, "note").filter(pl.col("note").is_not_null())
        entries = entries.join(noted.group_by(key).agg(pl.col("note").unique(maintain_order=True)
                                                       .str.join("; ")),
                               on=key, how="left", maintain_order="left")
    else:
        entries = entries.with_columns(pl.lit(None, pl.String).alias("note"))
    at = pl.col("measured_at").fill_null(pl.lit(now_s).str.to_datetime(
        STORED_FORMAT, time_zone="UTC", time_unit="us")).dt.truncate("1s")
    # the bucket day is the plant-local date of the time (store.plantzone)
    entries = entries.with_columns(at.alias("measured_at")) if problems_only else (
        entries.with_columns(at.dt.strftime(STORED_FORMAT).alias("measured_at"),
                             at.dt.convert_time_zone(zone).dt.strftime("%Y-%m-%d").alias("day")))
    # lot IDs and tags are checked once per entry, not once per value
    bad_lot = (pl.col("lot").str.len_chars() > 100) | pl.col("lot").str.contains(_UNSAFE.pattern)
    for k, c in zip(tag_keys, tags, strict=True):
        bad_lot = bad_lot | pl.col(c).str.contains(_UNSAFE.pattern).fill_null(False)
        if _UNSAFE.search(k):
            bad_lot = pl.lit(True)
    entries = entries.with_columns(pl.col("note").replace("", None),
                                   (pl.col("flag") | bad_lot).alias("flag"))
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
            p = prepare_entry(0, e, by_name, now_utc(), round_values, store.user, times, zone)
            if isinstance(p, list):
                problems += p
                refused_values += len(r["value"])
                continue
            rounded += p.rounded
            rescued.append({**r, "units": list(p.units), "flag": False})
    if rescued:  # back in file order
        good = pl.concat([good, pl.DataFrame(rescued, schema=good.schema)]).sort(
            pl.col("rows").list.first())
    plan = Plan(entries=good.drop("flag", "value"), tag_keys=tag_keys, problems=problems,
                duplicates=0, refused_values=refused_values, rounded=rounded,
                values=int(vals.height), data_version=version, notes=[mixed] if mixed else [])
    # stored lots are judged a slice of entries at a time, so a re-import of a big file never
    # holds all its stored rows in memory at once
    kept = []
    whole = plan.entries
    for start in range(0, whole.height, JUDGE_SLICE):
        plan.entries = whole.slice(start, JUDGE_SLICE)
        _judge_stored(store.conn, plan, source, required)
        kept.append(plan.entries)
    plan.entries = pl.concat(kept) if kept else whole
    if not problems_only:
        refuse_overflowing_plan(store.conn, plan.entries, [f.name for f in factors], TAG)
    return plan


def _grouped(vals: pl.DataFrame, key: list[str], aggs: list[pl.Expr]) -> pl.DataFrame:
    """``vals.group_by(key, maintain_order=True).agg(*aggs)``, quicker when each key's rows
    are adjacent (the usual file: a lot's replicates one after the other). Then the groups are
    the runs of equal keys, numbered in order, and grouping by that sorted number needs no
    hashing of the text keys. The runs are the groups when the keys are in order, or else when
    no key has two runs; otherwise the text keys are hashed after all."""
    import polars as pl

    a, b = (pl.col(k) for k in key)
    back = (a < a.shift()) | ((a == a.shift()) & (b < b.shift()))
    ordered = not vals.select(back.fill_null(True).slice(1).any()).item()  # (a null: hash)
    run = (a.ne_missing(a.shift()) | b.ne_missing(b.shift())).cum_sum().set_sorted()
    runs = (vals.with_columns(run.alias("_run")).group_by("_run", maintain_order=True)
            .agg(a.first(), b.first(), *aggs).drop("_run"))
    if ordered or runs.select(pl.struct(key).n_unique()).item() == runs.height:
        return runs
    return vals.group_by(key, maintain_order=True).agg(*aggs)


def mixed_times_note(pairs: int) -> str | None:
    """The note for ``pairs`` lot/characteristic pairs whose replicate values carry different
    times (counted in ``plan_values``' grouping), None for none."""
    if not pairs:
        return None
    return (f"{pairs} lot/characteristic pair(s) have replicate values at different times; each "
            "pair is stamped with the time of its first row")


def _entry(r: dict, tag_keys: list[str], source: str) -> LotEntry:
    at = r["measured_at"]  # stored text, or (problems_only) the UTC time it is written from
    return LotEntry(characteristic=r["characteristic"], values=list(r["value"]),
                    tags={k: r[TAG + k] for k in tag_keys if r[TAG + k] is not None},
                    lot=r["lot"], note=r["note"] or None,
                    measured_at=at if isinstance(at, str) else at.strftime(STORED_FORMAT),
                    by=r["by"], source=source, rows=list(r["rows"]), column=r["column"])


def _missing(e: LotEntry, missing: list[str], required: list[str]) -> RowProblem:
    return entry_problem(e, missing[0], None,
                    f"missing required tag{'s' if len(missing) > 1 else ''} "
                    f"{', '.join(repr(k) for k in missing)} (required: {', '.join(required)})")


def _stored_lots(conn, codes: list[str]) -> dict[str, int]:
    return dict(conn.execute(
        "SELECT l.lot_code, l.id FROM json_each(?) j JOIN lots l ON l.lot_code = j.value",
        (json.dumps(codes),)).fetchall())


def _judge_stored(conn, plan: Plan, source: str, required: list[str]) -> dict[str, int]:
    """Entries of lots already stored: tags must agree; values equal to the stored ones (the
    values as first logged, or those not voided) are duplicates, other values are refused. Every
    remaining entry must carry each required factor, in the file or stored with its lot. All by
    joins in polars; Python writes the message of each refused entry. Returns the stored lots'
    ids; ``plan.entries`` keeps only what is to be written, marked ``STORED`` where its lot is
    stored."""
    import polars as pl

    entries = plan.entries
    if entries.height == 0:
        plan.entries = entries.with_columns(pl.lit(False).alias(STORED))
        return {}
    lot_ids = (_stored_lots(conn, entries["lot"].unique().to_list())
               if conn.execute("SELECT 1 FROM lots LIMIT 1").fetchone() else {})
    known = pl.DataFrame({"lot": list(lot_ids), "lot_id": list(lot_ids.values())},
                         schema={"lot": pl.String, "lot_id": pl.Int64})
    e = entries.with_row_index("_e").join(known, on="lot", how="left", maintain_order="left")
    ids = json.dumps(sorted(lot_ids.values()))
    stored_tags = pl.DataFrame(conn.execute(
        "SELECT lot_id, key, value FROM lot_tags WHERE lot_id IN (SELECT value FROM json_each(?))",
        (ids,)).fetchall() if lot_ids else [], orient="row",
        schema={"lot_id": pl.Int64, "key": pl.String, "stored": pl.String})
    for k in dict.fromkeys([*plan.tag_keys, *required]):
        e = e.join(stored_tags.filter(pl.col("key") == k).select("lot_id", pl.col("stored")
                                                                  .alias("__st:" + k)),
                   on="lot_id", how="left", maintain_order="left")
    clash = pl.lit(False)
    for k in plan.tag_keys:
        clash = clash | (pl.col(TAG + k) != pl.col("__st:" + k)).fill_null(False)
    missing = pl.lit(False)
    for k in required:
        here = pl.col(TAG + k).is_not_null() if k in plan.tag_keys else pl.lit(False)
        missing = missing | (~here & pl.col("__st:" + k).is_null())
    stored_meas = pl.DataFrame(conn.execute(
        "SELECT lot_id, characteristic_id, original_units, voided FROM measurements "
        "WHERE lot_id IN (SELECT value FROM json_each(?)) ORDER BY lot_id, characteristic_id, "
        "seq", (ids,)).fetchall() if lot_ids else [], orient="row",
        schema={"lot_id": pl.Int64, "cid": pl.Int64, "u": pl.Int64, "voided": pl.Int64})
    per_entry = stored_meas.group_by("lot_id", "cid", maintain_order=True).agg(
        pl.col("u").alias("first"), pl.col("u").filter(pl.col("voided") == 0).alias("live"))
    e = e.join(per_entry, on=["lot_id", "cid"], how="left", maintain_order="left")
    has = pl.col("first").is_not_null()
    same = pl.col("units").eq_missing(pl.col("first")) | pl.col("units").eq_missing(pl.col("live"))
    e = e.with_columns(pl.when(clash).then(pl.lit("clash"))
                       .when(has & same).then(pl.lit("duplicate"))
                       .when(has).then(pl.lit("conflict"))
                       .when(missing).then(pl.lit("missing")).alias("_fate"))
    plan.duplicates += int(e.filter(pl.col("_fate") == "duplicate")["units"].list.len().sum())
    refused = e.filter(pl.col("_fate").is_in(["clash", "conflict", "missing"]))
    if refused.height:
        chars = {r[0]: r[1] for r in conn.execute("SELECT id, resolution FROM characteristics")}
        for r in refused.iter_rows(named=True):
            plan.problems.append(_refusal(r, plan.tag_keys, required, chars, source))
            plan.refused_values += len(r["units"])
    plan.entries = entries.with_columns(e["lot_id"].is_not_null().alias(STORED)).filter(
        e["_fate"].is_null())
    return lot_ids


def _refusal(r: dict, tag_keys: list[str], required: list[str], resolution: dict[int, str],
             source: str) -> RowProblem:
    """The message for one refused entry of ``_judge_stored`` (the words of ``log_lots``)."""
    e = _entry({**r, "value": r["units"]}, tag_keys, source)
    if r["_fate"] == "clash":
        k = next(k for k in tag_keys if r[TAG + k] is not None and r["__st:" + k] is not None
                 and r[TAG + k] != r["__st:" + k])
        return entry_problem(e, k, r[TAG + k], f"lot {r['lot']!r} is stored with {k}="
                        f"{r['__st:' + k]!r}; this entry says {k}={r[TAG + k]!r}")
    if r["_fate"] == "missing":
        gone = [k for k in required if r.get(TAG + k) is None and r["__st:" + k] is None]
        return _missing(e, gone, required)
    res = resolution[r["cid"]]
    was = ", ".join(format_units(u, res) for u in r["first"])
    now_v = ", ".join(format_units(u, res) for u in r["units"])
    return entry_problem(
        e, r["column"] or "value", now_v,
        f"lot {r['lot']!r} already has {r['characteristic']} = {was}; this entry has {now_v}. "
        "Stored values change only by a correction: if the file is right, correct or void the "
        "stored values (lotwatch history, correct, void) and import again; if the store is "
        "right, remove the row from the file")
