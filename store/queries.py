"""Read side: polars frames with fixed schemas (never inferred; see ECOSYSTEM.md on NULLs).

Day bounds (``since``/``until``) are inclusive UTC dates, compared with each measurement's
``day`` (the UTC date of ``measured_at``).
"""

from __future__ import annotations

from datetime import date
from typing import TYPE_CHECKING

import numpy as np
import polars as pl

from store.errors import BadInput, NotFound, RowProblem
from store.timeutil import BadTime, date_text
from store.values import scale_of

if TYPE_CHECKING:
    from store.connection import Store

BUCKET_SCHEMA = {
    "characteristic": pl.String, "factor": pl.String, "level": pl.String, "day": pl.String,
    "n": pl.Int64, "sum_d": pl.Int64, "sum_d2": pl.Int64,
}
VALUES_SCHEMA = {
    "measurement_id": pl.Int64, "lot": pl.String, "level": pl.String,
    "measured_at": pl.String, "units": pl.Int64,
}
_TS = "%Y-%m-%dT%H:%M:%SZ"


def _bounds(since: date | None, until: date | None) -> tuple[str | None, str | None]:
    try:
        return date_text(since), date_text(until)
    except BadTime as exc:
        raise BadInput([RowProblem("command line", None, "date", None, str(exc))]) from None


def _ts(col: str) -> pl.Expr:
    return pl.col(col).str.to_datetime(_TS, time_zone="UTC", time_unit="us")


def tag_values(store: Store, key: str) -> list[str]:
    """Known values of a tag key, sorted (empty if the key is unused)."""
    rows = store.conn.execute(
        "SELECT DISTINCT value FROM lot_tags WHERE key = ? ORDER BY value", (key,)).fetchall()
    return [r[0] for r in rows]


def bucket_frame(store: Store, *, characteristic: str | None = None, factor: str | None = None,
                 since: date | None = None, until: date | None = None) -> pl.DataFrame:
    """Bucket rows: characteristic:str, factor:str, level:str, day:date, n, sum_d, sum_d2 (i64),
    sorted by characteristic, factor, level, day."""
    lo, hi = _bounds(since, until)
    where, params = [], []
    if characteristic is not None:
        where.append("b.characteristic_id = ?")
        params.append(store.characteristic(characteristic).id)
    if factor is not None:
        where.append("b.factor = ?")
        params.append(factor)
    if lo is not None:
        where.append("b.day >= ?")
        params.append(lo)
    if hi is not None:
        where.append("b.day <= ?")
        params.append(hi)
    sql = ("SELECT c.name, b.factor, b.level, b.day, b.n, b.sum_d, b.sum_d2 FROM buckets b "
           "JOIN characteristics c ON c.id = b.characteristic_id"
           + (" WHERE " + " AND ".join(where) if where else "")
           + " ORDER BY c.name, b.factor, b.level, b.day")
    rows = store.conn.execute(sql, params).fetchall()
    frame = pl.DataFrame(rows, schema=BUCKET_SCHEMA, orient="row")
    return frame.with_columns(pl.col("day").str.to_date("%Y-%m-%d"))


def _float_values(units: pl.Series, resolution: str, name: str) -> pl.Series:
    """units * resolution as f64 with one rounding: the exact integer m*units divided by 10**k
    (IEEE 754 division is correctly rounded). numpy, because polars turns division by a scalar
    into multiplication by its reciprocal (5004 * 0.1 = 500.40000000000003)."""
    m, k = scale_of(resolution)
    exact = units.to_numpy().astype(np.int64) * m
    return pl.Series(name, exact.astype(np.float64) / float(10**k), dtype=pl.Float64)


def values_frame(store: Store, characteristic: str, factor: str, *, since: date | None = None,
                 until: date | None = None, last_n: int | None = None) -> pl.DataFrame:
    """Current, non-voided values of one characteristic by the levels of one factor:
    measurement_id:i64, lot:str, level:str, measured_at:datetime[UTC], value:f64, units:i64,
    sorted by measured_at then id. ``last_n`` keeps the last N lots of each level (by the lot's
    latest measured_at, then lot id)."""
    char = store.characteristic(characteristic)
    if factor not in store.tag_keys():
        raise NotFound(f"no factor or tag key named {factor!r} "
                       f"(known: {', '.join(store.tag_keys())})")
    lo, hi = _bounds(since, until)
    where = ["m.characteristic_id = ?", "m.voided = 0"]
    params: list[object] = [factor, char.id]
    if lo is not None:
        where.append("m.day >= ?")
        params.append(lo)
    if hi is not None:
        where.append("m.day <= ?")
        params.append(hi)
    base = ("SELECT m.id AS id, l.lot_code AS lot, t.value AS level, m.measured_at AS at, "
            "m.current_units AS units, m.lot_id AS lot_id FROM measurements m "
            "JOIN lots l ON l.id = m.lot_id "
            "JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = ? "
            "WHERE " + " AND ".join(where))
    if last_n is not None:
        if int(last_n) < 1:
            raise BadInput([RowProblem("command line", None, "last", str(last_n),
                                       "the number of lots must be at least 1")])
        sql = (f"WITH v AS ({base}), "
               "w AS (SELECT v.*, max(at) OVER (PARTITION BY lot_id) AS lot_at FROM v), "
               "r AS (SELECT w.*, dense_rank() OVER (PARTITION BY level "
               "ORDER BY lot_at DESC, lot_id DESC) AS rk FROM w) "
               "SELECT id, lot, level, at, units FROM r WHERE rk <= ? ORDER BY at, id")
        params.append(int(last_n))
    else:
        sql = f"SELECT id, lot, level, at, units FROM ({base}) ORDER BY at, id"
    rows = store.conn.execute(sql, params).fetchall()
    frame = pl.DataFrame(rows, schema=VALUES_SCHEMA, orient="row")
    return frame.select(
        "measurement_id", "lot", "level", _ts("measured_at").alias("measured_at"),
        _float_values(frame["units"], char.resolution, "value"), "units",
    )


_MEAS_SCHEMA = {
    "id": pl.Int64, "lot_id": pl.Int64, "lot": pl.String, "characteristic": pl.String,
    "unit": pl.String, "resolution": pl.String, "current_units": pl.Int64,
    "original_units": pl.Int64, "voided": pl.Int64, "measured_at": pl.String,
    "logged_at": pl.String, "logged_by": pl.String, "note": pl.String, "source": pl.String,
}
FIXED_COLUMNS = ("id", "lot", "characteristic", "value", "value_text", "unit", "measured_at",
                 "logged_at", "logged_by", "note", "source", "voided", "current_units",
                 "original_units", "original_value", "original_text")


def _text_expr(units: str, resolution: str) -> pl.Expr:
    """units * resolution as exact decimal text with the resolution's decimals ("500.10")."""
    m, k = scale_of(resolution)
    n = pl.col(units) * m
    sign = pl.when(n < 0).then(pl.lit("-")).otherwise(pl.lit(""))
    a = n.abs()
    if k == 0:
        return pl.concat_str([sign, a.cast(pl.String)])
    p = 10**k
    return pl.concat_str([sign, (a // p).cast(pl.String), pl.lit("."),
                          (a % p).cast(pl.String).str.zfill(k)])


def measurements_frame(store: Store, *, characteristic: str | None = None,
                       since: date | None = None, until: date | None = None) -> pl.DataFrame:
    """Every measurement (voided included), one row each, for export and review:
    id, lot, characteristic, value (current, f64), value_text (exact), unit, one column per tag
    key (factors first; a key clashing with a fixed column is prefixed ``tag_``), measured_at
    and logged_at (datetime UTC), logged_by, note, source, voided (bool), current_units,
    original_units, original_value, original_text. Sorted by measured_at, id."""
    lo, hi = _bounds(since, until)
    where, params = [], []
    if characteristic is not None:
        where.append("m.characteristic_id = ?")
        params.append(store.characteristic(characteristic).id)
    if lo is not None:
        where.append("m.day >= ?")
        params.append(lo)
    if hi is not None:
        where.append("m.day <= ?")
        params.append(hi)
    sql = ("SELECT m.id, m.lot_id, l.lot_code, c.name, c.unit, c.resolution, m.current_units, "
           "m.original_units, m.voided, m.measured_at, m.logged_at, m.logged_by, m.note, "
           "m.source FROM measurements m JOIN lots l ON l.id = m.lot_id "
           "JOIN characteristics c ON c.id = m.characteristic_id"
           + (" WHERE " + " AND ".join(where) if where else "") + " ORDER BY m.measured_at, m.id")
    frame = pl.DataFrame(store.conn.execute(sql, params).fetchall(), schema=_MEAS_SCHEMA,
                         orient="row")
    parts = []
    for res in frame["resolution"].unique().sort().to_list():
        part = frame.filter(pl.col("resolution") == res)
        parts.append(part.with_columns(
            _float_values(part["current_units"], res, "value"),
            _text_expr("current_units", res).alias("value_text"),
            _float_values(part["original_units"], res, "original_value"),
            _text_expr("original_units", res).alias("original_text"),
        ))
    if parts:
        frame = pl.concat(parts).sort("measured_at", "id")
    else:
        frame = frame.with_columns(pl.lit(None, pl.Float64).alias("value"),
                                   pl.lit(None, pl.String).alias("value_text"),
                                   pl.lit(None, pl.Float64).alias("original_value"),
                                   pl.lit(None, pl.String).alias("original_text"))
    keys = [f.name for f in store.factors()]
    keys += [k for k in store.tag_keys() if k not in keys]
    tags = pl.DataFrame(
        store.conn.execute("SELECT lot_id, key, value FROM lot_tags").fetchall(),
        schema={"lot_id": pl.Int64, "key": pl.String, "value": pl.String}, orient="row")
    tag_cols: list[str] = []
    for key in keys:
        col = f"tag_{key}" if key in FIXED_COLUMNS or key == "lot_id" else key
        sub = tags.filter(pl.col("key") == key).select("lot_id", pl.col("value").alias(col))
        frame = frame.join(sub, on="lot_id", how="left", maintain_order="left")
        tag_cols.append(col)
    return frame.select(
        "id", "lot", "characteristic", "value", "value_text", "unit", *tag_cols,
        _ts("measured_at").alias("measured_at"), _ts("logged_at").alias("logged_at"),
        "logged_by", "note", "source", (pl.col("voided") == 1).alias("voided"),
        "current_units", "original_units", "original_value", "original_text",
    )
