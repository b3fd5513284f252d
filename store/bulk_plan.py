"""Judging an import's values against the store, without its write lock (``store.bulk``'s first
half).

``plan_values`` applies the rules of ``store.lots`` (characteristic known, value exact at the
resolution and plausible, lot ID and tags storable, required factors tagged, duplicates skipped,
conflicting values refused) with polars expressions over all values at once; the entries with a
problem are handed to ``lots._prepare`` so the messages are those of ``log_lots``. Stored lots are
read in one query (a JSON array of the file's lot IDs joined with ``json_each``). Nothing here
writes, so a refused import never takes the write lock.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from math import ceil, floor
from typing import TYPE_CHECKING, Any

from lotwatch.store.errors import RowProblem
from lotwatch.store.lots import _prepare, _problem
from lotwatch.store.model import Characteristic, LotEntry
from lotwatch.store.text import _UNSAFE
from lotwatch.store.timeutil import STORED_FORMAT, now_utc
from lotwatch.store.values import MAX_ABS_D, format_units, scale_of, scaled_bound

if TYPE_CHECKING:
    import polars as pl
    from lotwatch.store.connection import Store

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
    n: pl.Expr = pl.when(plain & (digits.str.len_chars() <= 18)).then(
        digits.cast(pl.Int64, strict=False))
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
