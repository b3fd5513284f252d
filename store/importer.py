"""Import lot measurements from a CSV or Parquet file into the store.

Reading is done here; judging the values is the store's job. The file is read with polars, every
CSV column as text, so the exact decimal text of each value (``"500.30"``) reaches the store's
resolution check. Rows are grouped by (lot, characteristic) into ``LotEntry`` objects (the
replicate values of one lot; the store keeps one set of values per lot and characteristic) and
handed to ``Store.log_lots`` in one transaction. A group takes the time, tags and logged_by of its
first row; its notes are joined.

Two layouts:

* long: one value per row, with a characteristic column and a value column;
* wide: one column per characteristic (the column name is the characteristic name, or is mapped
  to one with ``characteristic_map``); an empty cell means "not measured".

Problems found while reading (text that is not a number, a timestamp that cannot be read, a
missing lot id, a lot whose tags disagree between rows) are collected for every bad row and merged
with the problems the store finds, so the person importing sees all bad rows at once. Unless
``skip_bad`` is set nothing is stored when any row is bad.

Timestamps are ISO 8601 (``2026-11-03T08:15:00Z``, ``2026-11-03 08:15``, ``2026-11-03``). A
timestamp without a UTC offset is read as local time of this computer (the usual convention of lab
exports), then converted to UTC; so is a Parquet timestamp column without a time zone.

A CSV text cell starting with a single quote followed by ``=``, ``+``, ``-``, ``@``, tab or CR
loses the quote: that is how ``lotwatch export`` neutralises formulas, so an export imports back
unchanged.

Encodings: UTF-8 with or without a byte order mark, UTF-16 with a byte order mark; a file that is
not valid UTF-8 is read as Latin-1 and the summary says so.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field, replace
from datetime import datetime
from pathlib import Path
from typing import Any

from lotwatch.store.errors import BadInput, RowProblem, StoreError
from lotwatch.store.export import NeutralWriter

FORMATS = ("auto", "csv", "parquet")
LAYOUTS = ("auto", "long", "wide")

# Plain decimal text, optionally with an exponent; no thousands separators.
_NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d*,\d+$")
_NEUTRALISED = r"^'([=+\-@\t\r])"
_SLASH_DATE = re.compile(r"^(\d{4})/(\d{1,2})/(\d{1,2})")


class FileRefused(StoreError):
    """The file as a whole cannot be imported (unreadable, empty, missing a column ...)."""


@dataclass
class ImportOptions:
    """How to read an import file. Column options name columns of the file."""

    format: str = "auto"
    layout: str = "auto"
    lot_column: str = "lot"
    time_column: str = "measured_at"
    value_column: str = "value"
    characteristic_column: str = "characteristic"
    note_column: str = "note"
    by_column: str = "logged_by"
    # tag key -> column of the file; columns named like a known factor are added automatically
    tag_columns: dict[str, str] = field(default_factory=dict)
    # wide: column -> characteristic name; long: name used in the file -> characteristic name
    characteristic_map: dict[str, str] = field(default_factory=dict)
    decimal_comma: bool = False
    delimiter: str | None = None  # None: guess from the header line (, ; tab |)
    round_values: bool = False
    skip_bad: bool = False
    by: str | None = None


@dataclass
class ParsedImport:
    """A file read into ``LotEntry`` groups, before anything is stored."""

    path: Path
    source: str
    layout: str
    frame: Any  # pl.DataFrame of the file as read (text columns), for the rejected-rows file
    entries: list  # list[store.LotEntry]
    problems: list[RowProblem]
    rows_read: int
    values_read: int
    notes: list[str] = field(default_factory=list)


@dataclass
class ImportSummary:
    """What an import did. Counts are values (one measurement each) unless named otherwise:
    ``stored`` values written, ``duplicates`` values skipped because the store already had them
    (or they repeat earlier rows), ``lots`` lots that received values, ``rejected`` every refused
    row (parse and store problems, one per problem)."""

    path: Path
    layout: str
    rows_read: int
    values_read: int
    stored: int
    duplicates: int
    rejected: list[RowProblem]
    rounded: int
    lots: int
    measurement_ids: list[int]
    notes: list[str] = field(default_factory=list)
    rejected_file: Path | None = None

    @property
    def rejected_rows(self) -> int:
        """Number of distinct file rows with at least one refused value."""
        return len({p.row for p in self.rejected})


# ---------------------------------------------------------------------------------------------
# reading the file


def _decode(path: Path, data: bytes, notes: list[str]) -> str:
    """Text of a CSV file: UTF-8 (with or without BOM), UTF-16 with a BOM (spreadsheets'
    "Unicode text"), else Latin-1 with a note."""
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        try:
            return data.decode("utf-16")
        except UnicodeDecodeError:
            raise FileRefused(f"{path.name}: starts like UTF-16 text but cannot be decoded "
                              "as UTF-16; save it as CSV (UTF-8)") from None
    if b"\x00" in data[:65536]:
        raise FileRefused(
            f"{path.name}: not a text CSV file (it contains NUL bytes). "
            "Save it as CSV (UTF-8) or Parquet and import that."
        )
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        notes.append(
            f"{path.name} is not valid UTF-8 (first bad byte on line {line}); "
            "it was read as Latin-1 (ISO-8859-1). Check accented text after import."
        )
        return data.decode("latin-1")


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


def read_frame(path: Path, options: ImportOptions, notes: list[str]):  # -> pl.DataFrame
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
    if not data.strip():
        raise FileRefused(f"{path.name}: the file is empty (no header, no rows)")

    fmt = options.format
    if fmt not in FORMATS:
        raise FileRefused(f"unknown format {fmt!r}; choose one of {', '.join(FORMATS)}")
    if fmt == "auto":
        fmt = _detect_format(path, data)

    if fmt == "parquet":
        try:
            frame = pl.read_parquet(io.BytesIO(data))
        except Exception as exc:  # polars raises several types for damaged files
            raise FileRefused(f"{path.name}: not a readable Parquet file ({exc})") from None
        _refuse_pattern_names(path, frame)
        return _parquet_as_text(frame)

    text = _decode(path, data, notes)
    first_line = text.split("\n", 1)[0]
    delimiter = options.delimiter or _guess_delimiter(first_line)
    if options.delimiter is None and delimiter != ",":
        notes.append(f"columns are separated by {delimiter!r} (guessed from the header)")
    try:
        frame = pl.read_csv(
            io.BytesIO(text.encode("utf-8")),
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
    names = [h.strip() for h in header]
    repeated = sorted({h for h in names if names.count(h) > 1})
    if repeated:
        raise FileRefused(f"{path.name}: the header names column(s) "
                          f"{', '.join(repr(h) for h in repeated)} more than once")
    if len(names) == frame.width:
        frame = frame.rename(dict(zip(frame.columns, names, strict=True)))
    _refuse_pattern_names(path, frame)
    # undo the formula neutralisation of lotwatch's CSV export ("'=x" -> "=x"; store.export)
    return frame.with_columns(pl.col(c).str.replace(_NEUTRALISED, "$1") for c in frame.columns)


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


# ---------------------------------------------------------------------------------------------
# cells


def parse_timestamp(text: str) -> datetime:
    """ISO 8601 text to an aware UTC datetime; text without an offset is local time.

    ``YYYY/MM/DD`` dates are accepted too. Raises ValueError with a short reason.
    """
    from lotwatch.store.timeutil import to_utc

    t = text.strip()
    m = _SLASH_DATE.match(t)
    if m:
        t = f"{m.group(1)}-{int(m.group(2)):02d}-{int(m.group(3)):02d}" + t[m.end():]
    return to_utc(t)


def _number_problem(text: str, decimal_comma: bool) -> str | None:
    if _NUMBER.match(text):
        try:
            if not math.isfinite(float(text)):
                return "not a finite number"
        except ValueError:
            return "not a number"
        return None
    if not decimal_comma and _DECIMAL_COMMA.match(text):
        return "not a number (decimal comma? import with --decimal-comma)"
    return "not a number"


def _stripped(name: str):  # -> pl.Expr
    """Column ``name`` with surrounding white space removed and empty text as null."""
    import polars as pl

    col = pl.col(name).str.strip_chars()
    return pl.when(col.str.len_bytes() == 0).then(pl.lit(None, pl.String)).otherwise(col).alias(name)


# ---------------------------------------------------------------------------------------------
# grouping rows into entries


def _match(columns: list[str], name: str) -> str:
    """``name`` if it is a column, else the one column equal to it ignoring case, else ``name``."""
    if name in columns:
        return name
    folded = [c for c in columns if c.casefold() == name.casefold()]
    return folded[0] if len(folded) == 1 else name


def _require(path: Path, columns: list[str], name: str, option: str) -> None:
    if name not in columns:
        present = ", ".join(repr(c) for c in columns)
        raise FileRefused(
            f"{path.name}: no column {name!r} (columns present: {present}). "
            f"Name the right column with {option}."
        )


def parse_import(
    path: str | Path,
    options: ImportOptions,
    *,
    factors: Iterable[str],
    characteristics: Iterable[str],
):  # -> ParsedImport
    """Read ``path`` and group its rows into ``LotEntry`` objects, collecting every parse problem.

    ``factors`` and ``characteristics`` are the names known to the store (used for the default
    tag columns and, in the wide layout, the default characteristic columns).
    """
    import polars as pl
    from lotwatch.store import LotEntry

    path = Path(path)
    notes: list[str] = []
    frame = read_frame(path, options, notes)
    columns = list(frame.columns)
    source = path.name
    factors = list(factors)
    known_chars = set(characteristics)

    # column names match exactly, else ignoring case ("Lot" for lot)
    options = replace(
        options,
        lot_column=_match(columns, options.lot_column),
        time_column=_match(columns, options.time_column),
        value_column=_match(columns, options.value_column),
        characteristic_column=_match(columns, options.characteristic_column),
        note_column=_match(columns, options.note_column),
        by_column=_match(columns, options.by_column),
    )
    layout = options.layout
    if layout not in LAYOUTS:
        raise FileRefused(f"unknown layout {layout!r}; choose one of {', '.join(LAYOUTS)}")
    if layout == "auto":
        layout = "long" if options.value_column in columns else "wide"

    _require(path, columns, options.lot_column, "--lot-column")
    tag_cols: dict[str, str] = {f: _match(columns, f) for f in factors
                                if _match(columns, f) in columns}
    for key, col in options.tag_columns.items():
        _require(path, columns, col, f"--tag-column {key}=COLUMN")
        tag_cols[key] = col
    has_time = options.time_column in columns
    if not has_time:
        notes.append(
            f"no {options.time_column!r} column: values are stamped with the time of import"
        )
    note_col = options.note_column if options.note_column in columns else None
    by_col = options.by_column if options.by_column in columns else None

    if layout == "long":
        _require(path, columns, options.value_column, "--value-column")
        _require(path, columns, options.characteristic_column, "--characteristic-column")
        value_cols: list[tuple[str, str | None]] = [(options.value_column, None)]
    else:
        mapped = dict(options.characteristic_map)
        for col in mapped:
            _require(path, columns, col, f"--characteristic-map {col}=NAME")
        for col in columns:
            if col in known_chars and col not in mapped:
                mapped[col] = col
        if not mapped:
            present = ", ".join(repr(c) for c in columns)
            raise FileRefused(
                f"{path.name}: no characteristic columns found (columns present: {present}). "
                "In the wide layout each characteristic's values are in a column named like it; "
                "map other names with --characteristic-map COLUMN=NAME, or use --layout long."
            )
        value_cols = [(col, name) for col, name in mapped.items()]

    used = {options.lot_column, *tag_cols.values(), *(c for c, _ in value_cols)}
    used |= {c for c in (note_col, by_col) if c}
    if has_time:
        used.add(options.time_column)
    if layout == "long":
        used.add(options.characteristic_column)
    ignored = [c for c in columns if c not in used]
    if ignored:
        notes.append("ignored columns: " + ", ".join(ignored))

    problems: list[RowProblem] = []
    groups: dict[tuple, dict[str, Any]] = {}
    lot_tags: dict[str, tuple[int, dict[str, str]]] = {}
    ts_cache: dict[str, datetime | str] = {}
    mixed_times: set[tuple[str, str]] = set()
    rows_read = 0
    values_read = 0
    names_map = options.characteristic_map if layout == "long" else {}

    # cells stripped, empty -> None; one Python list per used column (fast row access)
    clean = frame.select(_stripped(c) for c in columns)
    blank = clean.select(pl.all_horizontal(pl.all().is_null())).to_series().to_list()
    data = {c: clean[c].to_list() for c in columns if c in used}
    for i in range(clean.height):
        if blank[i]:
            continue  # blank line
        row = i + 1
        rows_read += 1

        bad = False
        lot = data[options.lot_column][i]
        if lot is None:
            problems.append(RowProblem(source, row, options.lot_column, None, "lot id is empty"))
            bad = True

        measured_at: datetime | None = None
        if has_time:
            ts_text = data[options.time_column][i]
            if ts_text is None:
                problems.append(
                    RowProblem(source, row, options.time_column, None, "timestamp is empty")
                )
                bad = True
            else:
                parsed = ts_cache.get(ts_text)
                if parsed is None:
                    try:
                        parsed = parse_timestamp(ts_text)
                    except (ValueError, OverflowError):
                        parsed = "bad"
                    ts_cache[ts_text] = parsed
                if parsed == "bad":
                    problems.append(
                        RowProblem(
                            source, row, options.time_column, ts_text,
                            "not a timestamp (expected ISO 8601, e.g. 2026-11-03T08:15:00Z "
                            "or 2026-11-03 08:15 local time)",
                        )
                    )
                    bad = True
                else:
                    measured_at = parsed  # type: ignore[assignment]

        tags = {}
        for key, col in tag_cols.items():
            v = data[col][i]
            if v is not None:
                tags[key] = v
        if lot is not None:
            seen = lot_tags.get(lot)
            if seen is None:
                lot_tags[lot] = (row, tags)
            elif seen[1] != tags:
                first_row, first = seen
                for key in sorted(set(first) | set(tags)):
                    if first.get(key) != tags.get(key):
                        problems.append(
                            RowProblem(
                                source, row, tag_cols[key], tags.get(key),
                                f"lot {lot!r} has {key}={first.get(key)!r} on row {first_row}; "
                                "all rows of a lot must carry the same tags",
                            )
                        )
                bad = True

        note = data[note_col][i] if note_col else None
        by = (data[by_col][i] if by_col else None) or options.by

        row_values: list[tuple[str, str, str]] = []  # (characteristic, value, column)
        if layout == "long":
            char = data[options.characteristic_column][i]
            value = data[options.value_column][i]
            values_read += 1
            if char is None:
                problems.append(
                    RowProblem(source, row, options.characteristic_column, None,
                               "characteristic is empty")
                )
                bad = True
            if value is None:
                problems.append(RowProblem(source, row, options.value_column, None,
                                           "value is empty"))
                bad = True
            if char is not None and value is not None:
                row_values.append((names_map.get(char, char), value, options.value_column))
        else:
            for col, name in value_cols:
                value = data[col][i]
                if value is not None:
                    values_read += 1
                    row_values.append((name or col, value, col))

        checked: list[tuple[str, str, str]] = []
        for char, value, col in row_values:
            text = value.replace(",", ".") if options.decimal_comma else value
            reason = _number_problem(text, options.decimal_comma)
            if reason is not None:
                problems.append(RowProblem(source, row, col, value, reason))
                bad = True
            checked.append((char, text, col))

        if bad:
            continue
        for char, value, col in checked:
            group = groups.get((lot, char))
            if group is None:
                group = groups[(lot, char)] = {
                    "tags": tags, "values": [], "rows": [], "column": col,
                    "measured_at": measured_at, "notes": [], "by": by,
                }
            elif group["measured_at"] != measured_at:
                mixed_times.add((lot, char))
            group["values"].append(value)
            group["rows"].append(row)
            if note and note not in group["notes"]:
                group["notes"].append(note)

    if rows_read == 0:
        raise FileRefused(f"{path.name}: the file has a header but no data rows")
    if mixed_times:
        notes.append(
            f"{len(mixed_times)} lot/characteristic pair(s) have replicate values at different "
            "times; each pair is stamped with the time of its first row"
        )

    entries = [
        LotEntry(
            characteristic=char,
            values=g["values"],
            tags=g["tags"],
            lot=lot,
            measured_at=g["measured_at"],
            note="; ".join(g["notes"]) or None,
            by=g["by"],
            source=source,
            rows=g["rows"],
            column=g["column"],
        )
        for (lot, char), g in groups.items()
    ]
    return ParsedImport(
        path=path, source=source, layout=layout, frame=frame, entries=entries,
        problems=problems, rows_read=rows_read, values_read=values_read, notes=notes,
    )


# ---------------------------------------------------------------------------------------------
# storing


def store_import(
    store,
    parsed: ParsedImport,
    *,
    round_values: bool = False,
    skip_bad: bool = False,
    progress: Callable[[int], None] | None = None,
) -> ImportSummary:
    """Hand the parsed entries to ``store.log_lots``; merge parse and store problems.

    Without ``skip_bad``: raises ``BadInput`` listing every bad row (parse problems and the
    store's own) and stores nothing. With ``skip_bad``: stores the good rows, returns the rest in
    ``ImportSummary.rejected``.
    """
    parse_problems = list(parsed.problems)
    if parse_problems and not skip_bad:
        store_problems = _validate_only(store, parsed.entries, round_values=round_values)
        raise BadInput(_sorted(parse_problems + store_problems))
    if parsed.entries:
        try:
            outcome = store.log_lots(
                parsed.entries, round_values=round_values, skip_bad=skip_bad, progress=progress
            )
        except BadInput as exc:
            raise BadInput(_sorted(parse_problems + list(exc.problems))) from None
        ids = list(outcome.measurement_ids)
        store_rejected = list(outcome.rejected)
        refused_values = _values_of_refused(parsed.entries, store_rejected)
        sent = sum(len(e.values) for e in parsed.entries)
        duplicates = max(0, sent - len(ids) - refused_values)
        rejected = parse_problems + store_rejected
        rounded = outcome.rounded
        lots = len(set(outcome.lots))
    else:
        duplicates = rounded = lots = 0
        rejected = parse_problems
        ids = []
    return ImportSummary(
        path=parsed.path,
        layout=parsed.layout,
        rows_read=parsed.rows_read,
        values_read=parsed.values_read,
        stored=len(ids),
        duplicates=duplicates,
        rejected=_sorted(rejected),
        rounded=rounded,
        lots=lots,
        measurement_ids=ids,
        notes=list(parsed.notes),
    )


def _values_of_refused(entries: list, problems: list[RowProblem]) -> int:
    """How many values the store refused: the store refuses whole entries, and names one of
    the entry's rows; a problem in a value column belongs to the entry of that column."""
    if not problems:
        return 0
    value_columns = {e.column for e in entries}
    hits: dict[int, set[str | None]] = {}
    for p in problems:
        if p.row is not None:
            hits.setdefault(p.row, set()).add(p.column)
    refused = 0
    for e in entries:
        for r in e.rows or []:
            cols = hits.get(r)
            if cols and (e.column in cols or any(c not in value_columns for c in cols)):
                refused += len(e.values)
                break
    return refused


class _ValidationDone(Exception):
    """Raised from inside a rolled-back transaction once the store has judged every row."""


def _validate_only(store, entries: list, *, round_values: bool) -> list[RowProblem]:
    """The store's problems with ``entries``, storing nothing.

    ``log_lots`` is all-or-nothing: it either raises ``BadInput`` (nothing stored) or stores
    everything. To only ask, it runs with ``skip_bad=True`` inside an outer transaction that is
    always rolled back.
    """
    if not entries:
        return []
    found: list[RowProblem] = []
    try:
        with store.write():
            outcome = store.log_lots(entries, round_values=round_values, skip_bad=True)
            found = list(outcome.rejected)
            raise _ValidationDone
    except _ValidationDone:
        pass
    return found


def _sorted(problems: list[RowProblem]) -> list[RowProblem]:
    return sorted(problems, key=lambda p: (p.row if p.row is not None else -1, p.column or ""))


def import_file(
    store,
    path: str | Path,
    options: ImportOptions | None = None,
    *,
    progress: Callable[[int], None] | None = None,
) -> ImportSummary:
    """Read and store one file (see ``parse_import`` and ``store_import``)."""
    options = options or ImportOptions()
    parsed = parse_import(
        path,
        options,
        factors=[f.name for f in store.factors()],
        characteristics=[c.name for c in store.characteristics()],
    )
    summary = store_import(
        store, parsed, round_values=options.round_values, skip_bad=options.skip_bad,
        progress=progress,
    )
    if options.skip_bad and summary.rejected:
        summary.rejected_file = write_rejected(parsed, summary.rejected)
    return summary


# ---------------------------------------------------------------------------------------------
# the rejected-rows file


def rejected_path(path: Path) -> Path:
    """``<stem>.rejected.csv`` beside ``path``; ``<stem>.rejected-2.csv`` ... if that exists."""
    candidate = path.with_name(f"{path.stem}.rejected.csv")
    n = 2
    while candidate.exists():
        candidate = path.with_name(f"{path.stem}.rejected-{n}.csv")
        n += 1
    return candidate


def write_rejected(parsed: ParsedImport, problems: list[RowProblem]) -> Path:
    """Write the refused rows (cells as read plus ``row``, ``problem_column``, ``reason``) to a
    fresh file (never overwritten); formulas the reader unquoted are neutralised again."""
    by_row: dict[int | None, list[RowProblem]] = {}
    for p in problems:
        by_row.setdefault(p.row, []).append(p)
    columns = list(parsed.frame.columns)
    while True:
        target = rejected_path(parsed.path)
        try:
            fh = target.open("x", newline="", encoding="utf-8")
        except FileExistsError:  # appeared between the check and the open
            continue
        break
    with fh:
        w = NeutralWriter(fh)
        w.writerow(["row", *columns, "problem_column", "reason"])
        for row in sorted(by_row, key=lambda r: -1 if r is None else r):
            cells = list(parsed.frame.row(row - 1)) if row is not None else [None] * len(columns)
            cells = ["" if c is None else str(c) for c in cells]
            for p in by_row[row]:
                w.writerow([row if row is not None else "", *cells, p.column or "", p.reason])
    return target
