"""Reading an import file into a frame of text columns (the first step of ``store.importer``).

CSV is decoded here (UTF-8 with or without a byte order mark, UTF-16 with one, or a file that is
Latin-1 throughout) and read with polars, every column as text, so the exact decimal text of each
value reaches the store's resolution check. Parquet columns are turned into text. A file that
cannot be read as a whole (unreadable, empty, a workbook, mixed encodings, absurdly wide, a
repeated or pattern-like header) is refused with ``FileRefused`` naming the file.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path
from typing import TYPE_CHECKING

from lotwatch.store.errors import BadInput, RowProblem, StoreError

if TYPE_CHECKING:
    import polars as pl

FORMATS = ("auto", "csv", "parquet")
# A lab export has tens of columns; hundreds of thousands make polars slow for nothing.
MAX_COLUMNS = 2_000
_NEUTRALISED = r"^'([=+\-@\t\r])"
# A valid UTF-8 multi-byte sequence (RFC 3629, section 4): a Latin-1 file almost never holds one.
_UTF8_MULTIBYTE = re.compile(rb"[\xc2-\xdf][\x80-\xbf]|[\xe0-\xef][\x80-\xbf]{2}"
                             rb"|[\xf0-\xf4][\x80-\xbf]{3}")


class FileRefused(StoreError):
    """The file as a whole cannot be imported (unreadable, empty, missing a column ...)."""


def _decode(path: Path, data: bytes, notes: list[str]) -> tuple[str, bool]:
    """Text of a CSV file: UTF-8 (with or without BOM), UTF-16 with a BOM (spreadsheets'
    "Unicode text"), or Latin-1 throughout (with a note); and whether the bytes were UTF-8. A file that is partly UTF-8 and partly
    something else is refused naming its first bad line: read either way, some of its text would
    be stored mangled (a false extra group in every review)."""
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        try:
            return data.decode("utf-16"), False
        except UnicodeDecodeError:
            raise FileRefused(f"{path.name}: starts like UTF-16 text but cannot be decoded "
                              "as UTF-16; save it as CSV (UTF-8)") from None
    if b"\x00" in data[:65536]:
        raise FileRefused(
            f"{path.name}: not a text CSV file (it contains NUL bytes). "
            "Save it as CSV (UTF-8) or Parquet and import that."
        )
    try:
        return data.decode("utf-8-sig"), True
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        utf8 = _UTF8_MULTIBYTE.search(data)
        if utf8 is not None:
            good = data[: utf8.start()].count(b"\n") + 1
            raise FileRefused(
                f"{path.name}: mixes text encodings: line {good} is UTF-8 but line {line} is not "
                "(its first bad byte). Nothing was stored. Save the whole file in one encoding "
                "(CSV UTF-8) and import it again."
            ) from None
        notes.append(
            f"{path.name} is not valid UTF-8 (first bad byte on line {line}); "
            "it was read as Latin-1 (ISO-8859-1). Check accented text after import."
        )
        return data.decode("latin-1"), False


def _guess_delimiter(header: str) -> str:
    counts = {d: header.count(d) for d in (",", ";", "\t", "|")}
    best = max(counts, key=lambda d: counts[d])
    return best if counts[best] > 0 else ","


def _detect_format(path: Path, data: bytes) -> str:
    if data[:4] == b"PAR1":
        return "parquet"
    if data[:4] == b"PK\x03\x04":
        raise FileRefused(
            f"{path.name} looks like a spreadsheet workbook (zip file). "
            "Save the sheet as CSV and import that."
        )
    return "csv"


def read_frame(path: Path, fmt: str, delimiter: str | None, notes: list[str]) -> pl.DataFrame:
    """Read the file into a frame whose columns are all text (``pl.String``)."""
    import polars as pl

    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise FileRefused(f"{path}: no such file") from None
    except IsADirectoryError:
        raise FileRefused(f"{path}: is a directory, not a file") from None
    except OSError as exc:
        raise FileRefused(f"{path}: cannot be read ({exc.strerror or exc})") from None
    if not data or data.isspace():  # (no stripped copy of a big file)
        raise FileRefused(f"{path.name}: the file is empty (no header, no rows)")

    if fmt not in FORMATS:
        raise FileRefused(f"unknown format {fmt!r}; choose one of {', '.join(FORMATS)}")
    if fmt == "auto":
        fmt = _detect_format(path, data)

    if fmt == "parquet":
        try:
            width = len(pl.read_parquet_schema(io.BytesIO(data)))
        except Exception as exc:  # polars raises several types for damaged files
            raise FileRefused(f"{path.name}: not a readable Parquet file ({exc})") from None
        _refuse_width(path, width)
        try:
            frame = pl.read_parquet(io.BytesIO(data))
        except Exception as exc:  # polars raises several types for damaged files
            raise FileRefused(f"{path.name}: not a readable Parquet file ({exc})") from None
        _refuse_pattern_names(path, frame)
        return _parquet_as_text(frame)

    text, was_utf8 = _decode(path, data, notes)
    end = text.find("\n")
    first_line = text if end < 0 else text[:end]
    # Plain UTF-8 goes to polars as read (no second copy of a large file); anything decoded
    # from another encoding goes as UTF-8.
    utf8 = data[3:] if data[:3] == b"\xef\xbb\xbf" else data
    if was_utf8 is False:
        utf8 = text.encode("utf-8")
    guessed = delimiter is None
    delimiter = delimiter or _guess_delimiter(first_line)
    _refuse_width(path, first_line.count(delimiter) + 1)
    if guessed and delimiter != ",":
        notes.append(f"columns are separated by {delimiter!r} (guessed from the header)")
    try:
        frame = pl.read_csv(
            io.BytesIO(utf8),
            infer_schema=False,
            separator=delimiter,
            quote_char='"',
        )
    except Exception as exc:  # polars.exceptions.ComputeError and friends
        ragged = _ragged_rows(path.name, text, delimiter)
        if ragged:
            raise BadInput(ragged) from None
        message = str(exc).split("\n", 1)[0]
        raise FileRefused(f"{path.name}: cannot be read as CSV ({message})") from None
    if frame.width == 0:
        raise FileRefused(f"{path.name}: no header row")
    try:
        header = next(csv.reader(io.StringIO(first_line), delimiter=delimiter), [])
    except csv.Error as exc:
        raise FileRefused(f"{path.name}: the header line cannot be read ({exc})") from None
    # a header name neutralised by lotwatch's export ("'@key") reads back as it was stored
    names = [re.sub(_NEUTRALISED, r"\1", h.strip()) for h in header]
    repeated = sorted({h for h in names if names.count(h) > 1})
    if repeated:
        raise FileRefused(f"{path.name}: the header names column(s) "
                          f"{', '.join(repr(h) for h in repeated)} more than once")
    if len(names) == frame.width:
        frame = frame.rename(dict(zip(frame.columns, names, strict=True)))
    _refuse_pattern_names(path, frame)
    # undo the formula neutralisation of lotwatch's CSV export ("'=x" -> "=x"; store.export),
    # only in columns that have a cell starting with a quote (a regex over every cell is slow)
    quoted = frame.select(pl.col(c).str.starts_with("'").any() for c in frame.columns).row(0)
    return frame.with_columns(pl.col(c).str.replace(_NEUTRALISED, "$1")
                              for c, q in zip(frame.columns, quoted, strict=True) if q)


def _refuse_width(path: Path, width: int) -> None:
    """Refuse a file with more columns than any lab export has, before polars reads it."""
    if width > MAX_COLUMNS:
        raise FileRefused(
            f"{path.name}: the header has {width:,} columns; lotwatch reads at most "
            f"{MAX_COLUMNS:,}. Check the delimiter (--delimiter) or keep only the columns to import."
        )


def _refuse_pattern_names(path: Path, frame) -> None:
    """polars reads ``pl.col("*")`` as every column and ``pl.col("^...$")`` as a regex, so a
    header naming a column like that would break every later step: refuse it up front."""
    odd = [c for c in frame.columns if c == "*" or (c.startswith("^") and c.endswith("$"))]
    if odd:
        raise FileRefused(
            f"{path.name}: column name(s) {', '.join(repr(c) for c in odd)} cannot be used "
            "(lotwatch reads them as patterns); rename them in the header"
        )


def _ragged_rows(source: str, text: str, delimiter: str) -> list[RowProblem]:
    """Every data row with more fields than the header (polars reports only the first)."""
    reader = csv.reader(io.StringIO(text), delimiter=delimiter)
    try:
        width = len(next(reader))
        return [
            RowProblem(source, i, None, None,
                       f"the row has {len(fields)} fields but the header has {width}")
            for i, fields in enumerate(reader, start=1)
            if len(fields) > width
        ]
    except (StopIteration, csv.Error):
        return []


def _parquet_as_text(frame):  # pl.DataFrame -> pl.DataFrame of String columns
    """Parquet columns as text. Timestamps become ISO text (a time zone is kept when present)."""
    import polars as pl

    exprs = []
    for name, dtype in frame.schema.items():
        col = pl.col(name)
        if isinstance(dtype, pl.Datetime):
            fmt = "%Y-%m-%dT%H:%M:%S%.f%:z" if dtype.time_zone else "%Y-%m-%dT%H:%M:%S%.f"
            exprs.append(col.dt.strftime(fmt).alias(name))
        elif dtype == pl.Date:
            exprs.append(col.dt.strftime("%Y-%m-%d").alias(name))
        elif dtype == pl.Boolean:
            exprs.append(col.cast(pl.String).alias(name))
        else:
            exprs.append(col.cast(pl.String).alias(name))
    return frame.select(exprs)
