"""Checking the cells of an import frame with polars expressions over whole columns.

Each check marks the rows it refuses; Python only builds the messages for those rows (file, row,
column, value, reason — the same words as the row-by-row reader this replaced). Timestamps are
parsed once per distinct text: ISO 8601 texts of the common shapes by ``str.to_datetime`` (a
text without an offset in the plant's time zone), anything else by ``parse_timestamp``.
"""

from __future__ import annotations

import re
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

from lotwatch.store.values import MAX_NUMBER_CHARS

if TYPE_CHECKING:
    import polars as pl

# Plain decimal text, optionally with an exponent; no thousands separators.
NUMBER = r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$"
DECIMAL_COMMA = r"^[+-]?\d*,\d+$"
_SLASH_DATE = re.compile(r"^(\d{4})/(\d{1,2})/(\d{1,2})")
# The ISO 8601 shapes read by polars; every other text goes through Python's fromisoformat.
_ISO_SHAPE = (r"^\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d{1,9})?)?)?"
              r"(?:Z|z|[+-]\d{2}:\d{2})?$")
BAD_TIME = ("not a timestamp (expected ISO 8601, e.g. 2026-11-03T08:15:00Z "
            "or 2026-11-03 08:15 local time)")


def parse_timestamp(text: str, zone: str | None = None) -> datetime:
    """ISO 8601 text to an aware UTC datetime; text without an offset is in ``zone`` (the plant
    zone), else the computer's local time.

    ``YYYY/MM/DD`` dates are accepted too. Raises ValueError with a short reason.
    """
    from lotwatch.store.timeutil import to_utc

    t = text.strip()
    m = _SLASH_DATE.match(t)
    if m:
        t = f"{m.group(1)}-{int(m.group(2)):02d}-{int(m.group(3)):02d}" + t[m.end():]
    return to_utc(t, zone)


def timestamps(texts: pl.Series, zone: str) -> pl.DataFrame:
    """Distinct timestamp texts -> ``text``, ``at`` (Datetime UTC, null when unreadable); a text
    without an offset is local time in ``zone`` (the first of a repeated autumn hour, as
    ``timeutil.to_utc``; a time in the spring gap is left to it)."""
    import polars as pl

    uniq = texts.drop_nulls().unique().alias("text").to_frame()
    t = (pl.col("text").str.replace(r"^(\d{4}-\d{2}-\d{2}) ", "${1}T")
         .str.replace(r"[zZ]$", "+00:00"))
    shaped = pl.col("text").str.contains(_ISO_SHAPE)
    aware = pl.coalesce(
        t.str.to_datetime("%Y-%m-%dT%H:%M:%S%.f%#z", strict=False, time_zone="UTC",
                          time_unit="us"),
        t.str.to_datetime("%Y-%m-%dT%H:%M%#z", strict=False, time_zone="UTC", time_unit="us"),
    )
    naive = pl.coalesce(
        t.str.to_datetime("%Y-%m-%dT%H:%M:%S%.f", strict=False, time_unit="us"),
        t.str.to_datetime("%Y-%m-%dT%H:%M", strict=False, time_unit="us"),
        t.str.to_date("%Y-%m-%d", strict=False).cast(pl.Datetime("us")),
    )
    has_offset = pl.col("text").str.contains(r"(?:[zZ]|[+-]\d{2}:\d{2})$") & (
        pl.col("text").str.len_chars() > 10)
    local = (naive.dt.replace_time_zone(zone, ambiguous="earliest", non_existent="null")
             .dt.convert_time_zone("UTC"))
    # the usual shape (seconds and an offset) first; only what it leaves goes through the rest
    done = uniq.with_columns(pl.when(shaped & has_offset).then(t.str.to_datetime(
        "%Y-%m-%dT%H:%M:%S%.f%#z", strict=False, time_zone="UTC", time_unit="us")).alias("at"))
    left = done.filter(pl.col("at").is_null()).with_columns(
        pl.when(~shaped).then(None).when(has_offset).then(aware).otherwise(local).alias("at"))
    frame = pl.concat([done.filter(pl.col("at").is_not_null()), left])
    rest = left.filter(pl.col("at").is_null())["text"].to_list()
    if rest:
        fixed: list[datetime | None] = []
        for text in rest:
            try:
                fixed.append(parse_timestamp(text, zone).astimezone(UTC))
            except (ValueError, OverflowError):
                fixed.append(None)
        patch = pl.DataFrame({"text": rest, "fixed": fixed},
                             schema={"text": pl.String, "fixed": pl.Datetime("us", "UTC")})
        frame = (frame.join(patch, on="text", how="left")
                 .with_columns(pl.coalesce("at", "fixed").alias("at")).drop("fixed"))
    return frame


def number_reason(decimal_comma: bool, thousands: str | None) -> pl.Expr:
    """Why the text in column ``raw`` is not a storable number (null when it is), for the
    convention chosen; ``num`` holds the text with the convention undone
    (``normalised_number``)."""
    import polars as pl

    raw, num = pl.col("raw"), pl.col("num")
    ok = num.str.contains(NUMBER)
    reason: Any = pl.when(raw.str.len_chars() > MAX_NUMBER_CHARS).then(  # a when/then chain
        pl.format("the value has {} characters; lotwatch reads numbers of at most "
                  f"{MAX_NUMBER_CHARS} characters (check the cell)", raw.str.len_chars()))
    if decimal_comma and thousands is None:
        # "1.250" is 1250 where '.' groups thousands and 1.25 where it is a decimal point.
        reason = reason.when(raw.str.contains(r"^[+-]?\d{1,3}(?:\.\d{3})+(?:,\d*)?$")).then(
            pl.lit("ambiguous with --decimal-comma: '.' may group thousands here (1.250 = one "
                   "thousand two hundred fifty) or be a decimal point; declare it with "
                   "--thousands . or write the value without it"))
    reason = (reason.when(ok & num.cast(pl.Float64, strict=False).is_finite()).then(None)
              .when(ok).then(pl.lit("not a finite number")))
    if not decimal_comma:
        reason = reason.when(raw.str.contains(DECIMAL_COMMA)).then(
            pl.lit("not a number (decimal comma? import with --decimal-comma)"))
    return reason.otherwise(pl.lit("not a number"))


def normalised_number(decimal_comma: bool, thousands: str | None) -> pl.Expr:
    """Column ``raw`` as plain decimal text: a declared thousands separator removed (only where
    it groups digits in threes; anywhere else the text is left unreadable), a decimal comma made a
    point."""
    import polars as pl

    num = pl.col("raw")
    point = "," if decimal_comma else "."
    if thousands is not None:
        sep = re.escape(thousands)
        grouped = num.str.contains(
            rf"^[+-]?\d{{1,3}}(?:{sep}\d{{3}})+(?:{re.escape(point)}\d*)?$")
        num = (pl.when(grouped).then(num.str.replace_all(sep, ""))
               .when(num.str.contains(sep, literal=True)).then(pl.lit("?")).otherwise(num))
    if decimal_comma:
        mixed = num.str.contains(",", literal=True) & num.str.contains(".", literal=True)
        num = pl.when(mixed).then(pl.lit("?")).otherwise(num.str.replace(",", ".", literal=True))
    return num.alias("num")
