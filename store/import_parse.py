"""From an import frame of text columns to a frame of values, one row per value, with every
row problem found (the second step of ``store.importer``).

All checks are polars expressions over whole columns; Python only writes the message of each
refused row. A row is refused when its lot ID, timestamp, characteristic or value is empty or
unreadable, when its year is outside the plausible range, when its time is in the future
(``store.rules``, the rule of every door), or when its tags differ from the first row of the
same lot. Refused rows carry no value further.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lotwatch.store.errors import RowProblem
from lotwatch.store.import_cells import (
    BAD_TIME,
    normalised_number,
    number_reason,
    timestamps,
)
from lotwatch.store.rules import FUTURE_SLACK, FUTURE_TIME

if TYPE_CHECKING:
    import polars as pl

ROW = "__row"  # 1-based data row number (header excluded)
TAG = "__tag:"  # prefix of tag columns in the values frame


@dataclass
class Layout:
    """Which columns of the file mean what (resolved against the header by ``importer``)."""

    lot: str
    time: str | None
    tags: dict[str, str]  # tag key -> column
    note: str | None
    by: str | None
    values: list[tuple[str, str]]  # (column, characteristic name or "" = from char_column)
    char_column: str | None  # long layout: the characteristic column
    names_map: dict[str, str]  # long layout: name in the file -> characteristic
    by_default: str | None
    decimal_comma: bool
    thousands: str | None
    years: tuple[int, int]
    zone: str  # IANA zone of timestamps without an offset (the plant zone)


@dataclass
class ParsedValues:
    """The values frame and what was found on the way."""

    values: Any  # pl.DataFrame: __row, lot, characteristic, column, value, measured_at, note,
    #              by, __tag:<key>... ; sorted by row then column order
    tag_keys: list[str]
    problems: list[RowProblem]
    rows_read: int
    values_read: int
    notes: list[str] = field(default_factory=list)


def _cleaned(frame: pl.DataFrame) -> pl.DataFrame:
    """Every column with surrounding white space removed and empty text as null. Columns with no
    padded cell are not stripped (finding one is about half the cost of stripping them all)."""
    import polars as pl

    padded = frame.select(pl.col(c).str.contains(r"^\s|\s$").any() for c in frame.columns).row(0)

    def one(name: str, strip: bool) -> pl.Expr:
        col = pl.col(name).str.strip_chars() if strip else pl.col(name)
        return (pl.when(col.str.len_bytes() == 0).then(pl.lit(None, pl.String)).otherwise(col)
                .alias(name))

    return frame.select(one(c, bool(strip)) for c, strip in zip(frame.columns, padded,
                                                                  strict=True))


def _tags_consistent(work: pl.DataFrame, lot: str, tag_columns: list[str]) -> bool:
    """Whether every row of a lot carries the same tags. When each lot's rows are adjacent (the
    usual file) each row is compared with the one before; otherwise distinct (lot, tags) are
    counted against distinct lots."""
    import polars as pl

    if not tag_columns or work.height == 0:
        return True
    same_lot = pl.col(lot).eq_missing(pl.col(lot).shift())
    # lot IDs in order (each no less than the one before, none missing): their runs are the lots,
    # known without hashing the IDs to count them
    ordered, runs, differs = work.select(
        ~(pl.col(lot) < pl.col(lot).shift()).fill_null(True).slice(1).any()
        & pl.col(lot).is_not_null().all().alias("_ordered"),
        (pl.col(lot).rle_id().max() + 1).alias("_runs"),
        pl.any_horizontal([(same_lot & pl.col(c).ne_missing(pl.col(c).shift())).any()
                           for c in tag_columns]).alias("_differs")).row(0)
    if ordered or runs == work[lot].n_unique():
        return not differs
    return work.select(lot, *tag_columns).n_unique() == work[lot].n_unique()


def _problems(frame: pl.DataFrame, source: str, column: str | None, value: str | None,
              reason: str | None) -> list[RowProblem]:
    """RowProblems from a frame of refused rows; ``column``/``value``/``reason`` name a frame
    column holding the text, or (column only) a fixed column name given as ``=name``."""
    rows = frame[ROW].to_list()
    n = len(rows)

    def cells(spec: str | None) -> list:
        if spec is None:
            return [None] * n
        if spec.startswith("="):
            return [spec[1:]] * n
        return frame[spec].to_list()

    return [RowProblem(source, r, c, v, why)
            for r, c, v, why in zip(rows, cells(column), cells(value), cells(reason), strict=True)]


def parse_values(frame: pl.DataFrame, layout: Layout, source: str) -> ParsedValues:
    """Check every cell and lay the good values out one per row (see the module docstring)."""
    import polars as pl

    notes: list[str] = []
    problems: list[RowProblem] = []
    used = [layout.lot, *layout.tags.values(), *(c for c, _ in layout.values)]
    used += [c for c in (layout.time, layout.note, layout.by, layout.char_column) if c]
    used = list(dict.fromkeys(used))
    clean = _cleaned(frame)
    clean = clean.with_row_index(ROW, offset=1).with_columns(pl.col(ROW).cast(pl.Int64))
    blank = pl.all_horizontal(pl.exclude(ROW).is_null())
    if clean.select(blank.any()).item():  # (filtering copies every column: only when needed)
        clean = clean.filter(~blank)
    rows_read = clean.height
    if rows_read == 0:
        return ParsedValues(None, [], [], 0, 0, notes)

    # Identical rows (every cell equal): suspected copies, kept as replicates but named.
    # rows hashed first (cheap); only rows whose hash repeats are compared cell by cell
    hashed = clean.drop(ROW).hash_rows()
    maybe = clean.filter(hashed.is_duplicated())
    repeated = maybe.filter(~pl.struct(pl.exclude(ROW)).is_first_distinct())
    if repeated.height:
        shown = ", ".join(str(r) for r in repeated[ROW].head(10).to_list())
        more = " ..." if repeated.height > 10 else ""
        notes.append(
            f"{repeated.height:,} row(s) repeat an earlier row exactly (rows {shown}{more}): "
            "suspected duplicates, stored as replicate values of their lot. If they are copies, "
            "void the extra values (lotwatch history LOT shows their ids; lotwatch void ID "
            "--reason ...); importing a corrected file afterwards skips those lots as duplicates."
        )

    work = clean.select(ROW, *used)
    bad = pl.lit(False)
    lot = pl.col(layout.lot)
    problems += _problems(work.filter(lot.is_null()), source, f"={layout.lot}", None,
                          "=lot id is empty")
    bad = bad | lot.is_null()

    # timestamps, once per distinct text
    if layout.time is not None:
        ts = timestamps(work[layout.time], layout.zone).rename({"text": layout.time})
        work = work.join(ts, on=layout.time, how="left", maintain_order="left")
        lo, hi = layout.years
        year = pl.col("at").dt.year()
        empty = pl.col(layout.time).is_null()
        unread = ~empty & pl.col("at").is_null()
        odd_year = ~empty & ~unread & ((year < lo) | (year > hi))
        problems += _problems(work.filter(empty), source, f"={layout.time}", None,
                              "=timestamp is empty")
        problems += _problems(work.filter(unread).with_columns(pl.lit(BAD_TIME).alias("_r")),
                              source, f"={layout.time}", layout.time, "_r")
        problems += _problems(
            work.filter(odd_year).with_columns(pl.format(
                "year {} is outside the plausible range {}-{} (change it with --years FROM-TO)",
                year, pl.lit(lo), pl.lit(hi)).alias("_r")),
            source, f"={layout.time}", layout.time, "_r")
        # the rule every door applies (store.rules.time_problem): a lot is not measured later
        # than the clock (plus the slack for a lab PC's clock)
        future = (~empty & ~unread & ~odd_year
                  & (pl.col("at") > pl.lit(datetime.now(UTC) + FUTURE_SLACK)))
        problems += _problems(
            work.filter(future).with_columns(pl.lit(FUTURE_TIME).alias("_r")),
            source, f"={layout.time}", layout.time, "_r")
        bad = bad | empty | unread | odd_year | future
    else:
        work = work.with_columns(pl.lit(None, pl.Datetime("us", "UTC")).alias("at"))

    # tags: every row of a lot carries the tags of the lot's first row
    consistent = _tags_consistent(work, layout.lot, list(layout.tags.values()))
    for key, col in ([] if consistent else layout.tags.items()):
        marked = work.with_columns(
            pl.col(col).first().over(layout.lot).alias("_first"),
            pl.col(ROW).first().over(layout.lot).alias("_first_row"))
        differs = lot.is_not_null() & pl.col(col).ne_missing(pl.col("_first"))
        clash = marked.filter(differs)
        if clash.height:
            text = [f"lot {lot_id!r} has {key}={first!r} on row {r}; all rows of a lot must "
                    "carry the same tags"
                    for lot_id, first, r in clash.select(layout.lot, "_first", "_first_row")
                    .iter_rows()]
            problems += _problems(clash.with_columns(pl.Series("_r", text, pl.String)), source,
                                  f"={col}", col, "_r")
            bad = bad | pl.col(ROW).is_in(clash[ROW].implode())

    # values: one row per (file row, value column), each carrying its row's lot, time and tags
    keep = [pl.col(layout.lot).alias("lot"), pl.col("at").alias("measured_at"),
            (pl.col(layout.note) if layout.note else pl.lit(None, pl.String)).alias("note"),
            (pl.col(layout.by) if layout.by else pl.lit(None, pl.String))
            .fill_null(pl.lit(layout.by_default, pl.String)).alias("by"),
            *(pl.col(c).alias(TAG + k) for k, c in layout.tags.items())]
    parts = []
    values_read = 0
    for col, name in layout.values:
        base = work.select(ROW, pl.col(col).alias("raw"),
                           (pl.col(layout.char_column) if layout.char_column else
                            pl.lit(name)).alias("characteristic"),
                           pl.lit(col).alias("column"), bad.alias("bad"), *keep)
        if layout.char_column is not None:  # long: both cells must be there
            values_read += base.height
            problems += _problems(base.filter(pl.col("characteristic").is_null()), source,
                                  f"={layout.char_column}", None, "=characteristic is empty")
            problems += _problems(base.filter(pl.col("raw").is_null()), source, f"={col}", None,
                                  "=value is empty")
            base = base.with_columns(
                (pl.col("bad") | pl.col("raw").is_null() | pl.col("characteristic").is_null())
                .alias("bad"))
            base = base.with_columns(pl.col("characteristic").replace(layout.names_map))
        else:
            base = base.filter(pl.col("raw").is_not_null())
            values_read += base.height
        parts.append(base)
    vals = pl.concat(parts).with_columns(
        normalised_number(layout.decimal_comma, layout.thousands))
    vals = vals.with_columns(
        pl.when(pl.col("raw").is_null()).then(None)
        .otherwise(number_reason(layout.decimal_comma, layout.thousands)).alias("_r"))
    problems += _problems(vals.filter(pl.col("_r").is_not_null()), source, "column", "raw", "_r")
    # a row with any problem stores nothing, in any of its columns
    refused = pl.col("bad") | pl.col("_r").is_not_null()
    if len(parts) > 1:
        refused = refused.any().over(ROW)
    vals = vals.filter(~refused)
    if len(parts) > 1:  # wide: back in file order, a row's values in column order
        order = {c: i for i, (c, _) in enumerate(layout.values)}
        vals = vals.sort(ROW, pl.col("column").replace_strict(order, return_dtype=pl.Int32))
    values = vals.select(ROW, "lot", "characteristic", "column", pl.col("num").alias("value"),
                         pl.col("raw"), "measured_at", "note", "by",
                         *(TAG + k for k in layout.tags))
    return ParsedValues(values, list(layout.tags), problems, rows_read, values_read, notes)


__all__ = ["Layout", "ParsedValues", "Path", "parse_values"]
