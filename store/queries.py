"""Read side: polars frames with fixed schemas (never inferred; see ECOSYSTEM.md on NULLs).

Day bounds (``since``/``until``) are inclusive plant dates, compared with each measurement's
``day`` (the plant-local date of ``measured_at``; see ``store.plantzone``).
"""

from __future__ import annotations

from datetime import UTC, date, datetime, time, timedelta
from typing import TYPE_CHECKING
from zoneinfo import ZoneInfo

import numpy as np
import polars as pl
from lotwatch.store.day_sums import DaySums, read_day_sums
from lotwatch.store.errors import BadInput, NotFound, RowProblem
from lotwatch.store.plantzone import read_zone
from lotwatch.store.timeutil import BadTime, date_text
from lotwatch.store.values import scale_of

if TYPE_CHECKING:
    from lotwatch.store.connection import Store

VALUES_SCHEMA = {
    "measurement_id": pl.Int64, "lot": pl.String, "level": pl.String,
    "measured_at": pl.String, "units": pl.Int64,
}
_TS = "%Y-%m-%dT%H:%M:%SZ"
_INDEXED_DAYS = 7  # spans up to this many days read buckets through the day index


def _bounds(since: date | None, until: date | None) -> tuple[str | None, str | None]:
    try:
        return date_text(since), date_text(until)
    except BadTime as exc:
        raise BadInput([RowProblem("command line", None, "date", None, str(exc))]) from None


def _day_range(column: str, lo: str | None, hi: str | None, where: list[str],
               params: list[object]) -> None:
    """Add ``column >= lo`` / ``column <= hi`` (inclusive plant days) where a bound is given."""
    if lo is not None:
        where.append(f"{column} >= ?")
        params.append(lo)
    if hi is not None:
        where.append(f"{column} <= ?")
        params.append(hi)


def _ts(col: str) -> pl.Expr:
    return pl.col(col).str.to_datetime(_TS, time_zone="UTC", time_unit="us")


def day_sums(store: Store, *, characteristic: str | None = None, factor: str | None = None,
             since: date | None = None, until: date | None = None) -> DaySums:
    """The stored day sums in numpy arrays, in runs of characteristic x factor x level (see
    ``store.day_sums``); one query, so one snapshot."""
    lo, hi = _bounds(since, until)
    where: list[str] = []
    params: list[object] = []
    if characteristic is not None:
        where.append("b.characteristic_id = ?")
        params.append(store.characteristic(characteristic).id)
    if factor is not None:
        where.append("b.factor = ?")
        params.append(factor)
    # The buckets_day index serves short spans (the review's one-day refresh). For a long span a
    # scan in primary-key order is far quicker than index lookups plus a sort, so the unary "+"
    # keeps SQLite's planner off the index there.
    short = (lo is not None and hi is not None
             and (date.fromisoformat(hi) - date.fromisoformat(lo)).days <= _INDEXED_DAYS)
    _day_range("b.day" if short else "+b.day", lo, hi, where, params)
    return read_day_sums(store, " AND ".join(where), params)


def bucket_frame(store: Store, *, characteristic: str | None = None, factor: str | None = None,
                 since: date | None = None, until: date | None = None) -> pl.DataFrame:
    """Bucket rows: characteristic:str, factor:str, level:str, day:date, n, sum_d, sum_d2,
    lots (i64), sorted by characteristic, factor, level, day. ``n`` counts values, ``lots``
    distinct lots (they differ when lots carry replicates); ``day`` is the plant-local date.
    Read by ``day_sums`` (the numbers never become Python objects)."""
    sums = day_sums(store, characteristic=characteristic, factor=factor, since=since,
                    until=until)
    run = np.repeat(np.arange(len(sums.keys)), sums.lengths)
    names = [pl.Series(name, [k[i] for k in sums.keys], dtype=pl.String)[run]
             for i, name in enumerate(("characteristic", "factor", "level"))]
    frame = pl.DataFrame([
        *names, pl.Series("day", sums.day.astype(np.int32)).cast(pl.Date),
        *(pl.Series(name, getattr(sums, name)) for name in ("n", "sum_d", "sum_d2", "lots"))])
    # group_concat's order inside a run is the scan's (primary key: by day), but SQL does not
    # promise it, and characteristic ids need not follow their names: sort unless sorted
    return frame if _sorted(sums) else frame.sort("characteristic", "factor", "level", "day",
                                                  maintain_order=True)


def _sorted(sums: DaySums) -> bool:
    """Runs in name order and days rising inside each run."""
    inside = np.ones(sums.rows, dtype=bool)
    inside[np.cumsum(sums.lengths)[:-1]] = False  # the first row of each run but the first
    inside[:1] = False
    rising = bool(np.all(np.diff(sums.day)[inside[1:]] > 0)) if sums.rows > 1 else True
    return rising and sums.keys == sorted(sums.keys)


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
    latest measured_at; ties go to the newer measurement id). A lot counts for a level if it is
    tagged with it; since/until apply before picking the last lots."""
    char = store.characteristic(characteristic)
    if factor not in store.tag_keys():
        raise NotFound(f"no factor or tag key named {factor!r} "
                       f"(known: {', '.join(store.tag_keys())})")
    lo, hi = _bounds(since, until)
    where = ["m.characteristic_id = ?", "m.voided = 0"]
    params: list[object] = [factor, char.id]
    _day_range("m.day", lo, hi, where, params)
    base = ("SELECT m.id, l.lot_code, t.value, m.measured_at, m.current_units "
            "FROM measurements m JOIN lots l ON l.id = m.lot_id "
            "JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = ? "
            "WHERE " + " AND ".join(where))
    if last_n is not None:
        if int(last_n) < 1:
            raise BadInput([RowProblem("command line", None, "last", str(last_n),
                                       "the number of lots must be at least 1")])
        lot_ids = _last_lots(store, char.id, factor, where[2:], params[2:], int(last_n))
        if not lot_ids:
            return _values_out(pl.DataFrame([], schema=VALUES_SCHEMA, orient="row"),
                               char.resolution)
        temp = "temp.lotwatch_pick"
        store.conn.execute(f"CREATE TEMP TABLE IF NOT EXISTS {temp[5:]} (id INTEGER PRIMARY KEY)")
        try:
            store.conn.execute(f"DELETE FROM {temp}")
            store.conn.executemany(f"INSERT INTO {temp}(id) VALUES (?)",
                                   [(i,) for i in lot_ids])
            # CROSS JOIN fixes the loop order: picked lots first, then their measurements.
            sql = ("SELECT m.id, l.lot_code, t.value, m.measured_at, m.current_units "
                   f"FROM {temp} p CROSS JOIN measurements m ON m.lot_id = p.id "
                   "CROSS JOIN lots l ON l.id = m.lot_id "
                   "CROSS JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = ? "
                   "WHERE " + " AND ".join(where) + " ORDER BY m.measured_at, m.id")
            rows = store.conn.execute(sql, params).fetchall()
        finally:
            store.conn.execute(f"DELETE FROM {temp}")
        return _values_out(pl.DataFrame(rows, schema=VALUES_SCHEMA, orient="row"),
                           char.resolution)
    sql = base + " ORDER BY m.measured_at, m.id"
    rows = store.conn.execute(sql, params).fetchall()
    return _values_out(pl.DataFrame(rows, schema=VALUES_SCHEMA, orient="row"), char.resolution)


def _values_out(frame: pl.DataFrame, resolution: str) -> pl.DataFrame:
    return frame.select(
        "measurement_id", "lot", "level", _ts("measured_at").alias("measured_at"),
        _float_values(frame["units"], resolution, "value"), "units",
    )


def _last_lots(store: Store, characteristic_id: int, factor: str, day_where: list[str],
               day_params: list[object], n: int) -> list[int]:
    """Ids of the last ``n`` lots of each level.

    A lot's values for one characteristic share one measured_at, so each lot lies in one UTC
    day. For a grouping factor the buckets say which days each level has and how many values
    (>= lots) each holds: read just the newest days whose counts reach ``n``, widening (doubling)
    if replicates leave fewer than ``n`` lots. Other tag keys walk the measurements newest first.
    """
    is_factor = store.conn.execute(
        "SELECT 1 FROM factors WHERE name = ?", (factor,)).fetchone() is not None
    if not is_factor:
        return _last_lots_walk(store, characteristic_id, factor, day_where, day_params, n)
    days: dict[str, list[tuple[str, int]]] = {}
    for level, day, count in store.conn.execute(
            "SELECT level, day, n FROM buckets b WHERE characteristic_id = ? AND factor = ?"
            + "".join(" AND " + w.replace("m.day", "b.day") for w in day_where)
            + " ORDER BY level, day DESC", [characteristic_id, factor, *day_params]):
        days.setdefault(level, []).append((day, count))
    # A bucket day is the plant's local day and measured_at is UTC: the time range is the UTC
    # span of those local days, and the day bounds apply as well. One query per level, walked
    # newest first and stopped at n lots: measured against a single UNION ALL of grouped
    # per-level queries, this early stop was 20-2,000x faster.
    span = _utc_span(read_zone(store.conn))
    sql = ("SELECT m.lot_id FROM measurements m "
           "JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = ? AND t.value = ? "
           "WHERE m.characteristic_id = ? AND m.voided = 0 "
           "AND m.measured_at >= ? AND m.measured_at <= ?"  # day range, via the time index
           + "".join(" AND " + w for w in day_where)
           + " ORDER BY m.measured_at DESC, m.id DESC")
    picked: list[int] = []
    for level, level_days in days.items():
        need, k, acc = n, 0, 0
        while True:
            while k < len(level_days) and acc < need:
                acc += level_days[k][1]
                k += 1
            lots = _distinct_first(store.conn.execute(
                sql, (factor, level, characteristic_id, *span(level_days[k - 1][0], level_days[0][0]),
                      *day_params)), n)
            if len(lots) >= n or k == len(level_days):
                break
            need *= 2
        picked.extend(lots)
    return picked


def _utc_span(zone_name: str):
    """A function (first day, last day) -> the UTC measured_at texts bounding those plant-local
    days: from the first day's local midnight to the last second before the next day's."""
    tz = ZoneInfo(zone_name)

    def span(first: str, last: str) -> tuple[str, str]:
        lo = datetime.combine(date.fromisoformat(first), time.min, tzinfo=tz).astimezone(UTC)
        hi = datetime.combine(date.fromisoformat(last) + timedelta(days=1), time.min,
                              tzinfo=tz).astimezone(UTC) - timedelta(seconds=1)
        return lo.strftime(_TS), hi.strftime(_TS)

    return span


def _distinct_first(cursor, n: int) -> list[int]:
    seen: dict[int, None] = {}
    for (lot_id,) in cursor:
        seen.setdefault(lot_id)
        if len(seen) == n:
            break
    cursor.close()
    return list(seen)


def _last_lots_walk(store: Store, characteristic_id: int, key: str, day_where: list[str],
                    day_params: list[object], n: int) -> list[int]:
    sql = ("SELECT m.lot_id FROM measurements m "
           "JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = ? AND t.value = ? "
           "WHERE m.characteristic_id = ? AND m.voided = 0"
           + "".join(" AND " + w for w in day_where)
           + " ORDER BY m.measured_at DESC, m.id DESC")
    picked: list[int] = []
    for level in store.tag_values(key):
        picked.extend(_distinct_first(
            store.conn.execute(sql, [key, level, characteristic_id, *day_params]), n))
    return picked


_MEAS_SCHEMA = {
    "id": pl.Int64, "lot": pl.String, "characteristic_id": pl.Int64,
    "current_units": pl.Int64, "original_units": pl.Int64, "voided": pl.Int64,
    "measured_at": pl.String, "logged_at": pl.String, "logged_by": pl.String,
    "note": pl.String, "source": pl.String,
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


# Names an export frame uses for its own columns; a tag key equal to one of them is prefixed.
_RESERVED = {*FIXED_COLUMNS, *_MEAS_SCHEMA, "measurement_id", "characteristic_id", "resolution",
             "lot_id"}


def tag_column_names(keys: list[str]) -> list[str]:
    """One distinct column name per tag key: the key itself, or ``tag_`` + key (repeated) while
    it would clash with a fixed column or another key's column (keys ``value`` and
    ``tag_value`` become ``tag_value`` and ``tag_tag_value``)."""
    taken: set[str] = set(_RESERVED)
    plain = {k for k in keys if k not in _RESERVED}
    names = []
    for key in keys:
        name = key
        while name in taken or (name != key and name in plain):
            name = "tag_" + name
        taken.add(name)
        names.append(name)
    return names


def _with_tags(store: Store, frame: pl.DataFrame, keys: list[str], tag_cols: list[str],
               cond: str, params: list) -> pl.DataFrame:
    """``frame`` (with lot_id) plus one text column per tag key. The tags are read in one query
    and pivoted in polars: a join per key would stop at SQLite's 64 tables in a join."""
    if not keys:
        return frame
    rows = store.conn.execute(
        "SELECT t.lot_id, t.key, t.value FROM lot_tags t WHERE t.lot_id IN "
        "(SELECT DISTINCT m.lot_id FROM measurements m" + cond + ")", params).fetchall()
    tags = pl.DataFrame(rows, schema={"lot_id": pl.Int64, "key": pl.String, "value": pl.String},
                        orient="row")
    del rows
    column = dict(zip(keys, tag_cols, strict=True))
    tags = tags.with_columns(pl.col("key").replace_strict(column, return_dtype=pl.String))
    wide = tags.pivot(on="key", index="lot_id", values="value") if tags.height else \
        pl.DataFrame(schema={"lot_id": pl.Int64})
    missing = [pl.lit(None, pl.String).alias(c) for c in tag_cols if c not in wide.columns]
    wide = wide.with_columns(missing).select("lot_id", *tag_cols)
    return frame.join(wide, on="lot_id", how="left")


def measurements_frame(store: Store, *, characteristic: str | None = None,
                       since: date | None = None, until: date | None = None) -> pl.DataFrame:
    """Every measurement (voided included), one row each, for export and review:
    id, lot, characteristic, value (current, f64), value_text (exact), unit, one column per tag
    key (factors first; a key clashing with a fixed column is prefixed ``tag_``), measured_at
    and logged_at (datetime UTC), logged_by, note, source, voided (bool), current_units,
    original_units, original_value, original_text. Sorted by measured_at, id."""
    lo, hi = _bounds(since, until)
    where: list[str] = []
    params: list[object] = []
    if characteristic is not None:
        where.append("m.characteristic_id = ?")
        params.append(store.characteristic(characteristic).id)
    _day_range("m.day", lo, hi, where, params)
    keys = [f.name for f in store.factors()]
    keys += [k for k in store.tag_keys() if k not in keys]
    tag_cols = tag_column_names(keys)
    cond = " WHERE " + " AND ".join(where) if where else ""
    sql = ("SELECT m.id, l.lot_code, m.characteristic_id, m.current_units, m.original_units, "
           "m.voided, m.measured_at, m.logged_at, m.logged_by, m.note, m.source, m.lot_id"
           " FROM measurements m JOIN lots l ON l.id = m.lot_id" + cond)
    schema = dict(_MEAS_SCHEMA) | {"lot_id": pl.Int64}
    rows = store.conn.execute(sql, params).fetchall()
    frame = pl.DataFrame(rows, schema=schema, orient="row")
    del rows
    frame = _with_tags(store, frame, keys, tag_cols, cond, params).drop("lot_id")
    chars = pl.DataFrame(
        [(c.id, c.name, c.unit, c.resolution) for c in store.characteristics()],
        schema={"characteristic_id": pl.Int64, "characteristic": pl.String, "unit": pl.String,
                "resolution": pl.String}, orient="row")
    frame = frame.join(chars, on="characteristic_id", how="left")
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
        frame = pl.concat(parts)
    else:
        frame = frame.with_columns(pl.lit(None, pl.Float64).alias("value"),
                                   pl.lit(None, pl.String).alias("value_text"),
                                   pl.lit(None, pl.Float64).alias("original_value"),
                                   pl.lit(None, pl.String).alias("original_text"))
    # measured_at text sorts like the instant it names (fixed-width UTC form)
    frame = frame.sort("measured_at", "id")
    return frame.select(
        "id", "lot", "characteristic", "value", "value_text", "unit", *tag_cols,
        _ts("measured_at").alias("measured_at"), _ts("logged_at").alias("logged_at"),
        "logged_by", "note", "source", (pl.col("voided") == 1).alias("voided"),
        "current_units", "original_units", "original_value", "original_text",
    )
