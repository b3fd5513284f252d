"""Export measurements to CSV or Parquet.

One row per measurement: its id, lot, characteristic, current value, original value, unit,
voided flag, every tag as a column, ``measured_at`` (UTC, ISO 8601 with ``Z``), who logged it and
the note. The CSV can be imported again with ``lotwatch import`` (the column names are the
importer's defaults; re-importing stores nothing new).

CSV files are opened by spreadsheets, which run a cell starting with ``=``, ``+``, ``-`` or ``@``
as a formula (and some also after a leading tab or carriage return). Every *text* cell starting
with one of those gets a leading single quote, the usual neutralisation (OWASP, "CSV Injection");
number columns are written as numbers and left alone, so ``-0.5`` stays a number.

Nothing is ever overwritten unless asked: the file is written under a temporary name beside the
target and then linked into place, which fails if the target appeared meanwhile.
"""

from __future__ import annotations

import csv
import os
import stat
import sys
import tempfile
from dataclasses import dataclass
from datetime import date
from pathlib import Path
from typing import IO

from lotwatch.store.errors import StoreError

FORMATS = ("csv", "parquet")
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_FORMULA_PATTERN = r"^[=+\-@\t\r]"

_FIXED = ("id", "lot", "characteristic", "value", "value_text", "unit", "measured_at",
          "logged_at", "logged_by", "note", "source", "voided", "current_units", "original_units",
          "original_value", "original_text")
# Columns holding numbers written from their exact text in CSV; never neutralised.
_NUMBER_TEXT = {"value": "value_text", "original_value": "original_text"}


class ExportRefused(StoreError):
    """The export cannot be written (the file exists, bad format, unwritable place)."""


@dataclass(frozen=True)
class ExportSummary:
    """What was written: the number of rows and where (None for standard output)."""

    rows: int
    path: Path | None
    format: str


def export_frame(
    store,
    *,
    characteristics: list[str] | tuple[str, ...] | None = None,
    since: date | None = None,
    until: date | None = None,
):  # -> pl.DataFrame
    """The measurements to export, typed (value f64, voided bool, measured_at datetime UTC).

    Columns: measurement_id, lot, characteristic, value, original_value, unit, voided, one per
    tag key, measured_at, logged_at, logged_by, note, source; plus value_text and original_text
    (the exact decimal text) used for CSV.
    """
    import polars as pl

    names = list(dict.fromkeys(characteristics or []))
    for name in names:
        store.characteristic(name)  # NotFound with a clear message for a typo
    if len(names) == 1:
        frame = store.measurements_frame(characteristic=names[0], since=since, until=until)
    else:
        frame = store.measurements_frame(since=since, until=until)
        if names:
            frame = frame.filter(pl.col("characteristic").is_in(names))
    tags = [c for c in frame.columns if c not in _FIXED]
    return frame.select(
        pl.col("id").alias("measurement_id"), "lot", "characteristic", "value",
        "original_value", "unit", "voided", *tags, "measured_at", "logged_at", "logged_by",
        "note", "source", "value_text", "original_text",
    )


def neutralise_text(frame, *, keep: tuple[str, ...] = ()):  # pl.DataFrame -> pl.DataFrame
    """Prefix ``'`` to every text cell that a spreadsheet would run as a formula.

    Only ``pl.String`` columns are touched (minus ``keep``); numbers stay numbers.
    """
    import polars as pl

    exprs = []
    for name, dtype in frame.schema.items():
        if dtype == pl.String and name not in keep:
            col = pl.col(name)
            exprs.append(
                pl.when(col.str.contains(_FORMULA_PATTERN))
                .then(pl.lit("'") + col)
                .otherwise(col)
                .alias(name)
            )
    return frame.with_columns(exprs) if exprs else frame


def neutralise_cell(text: str) -> str:
    """One text cell or header name made inert for a spreadsheet (``'`` before a formula start)."""
    return "'" + text if text.startswith(FORMULA_START) else text


class NeutralWriter:
    """``csv.writer`` whose text cells are neutralised (``neutralise_cell``)."""

    def __init__(self, fh: IO[str]) -> None:
        self._writer = csv.writer(fh)

    def writerow(self, row: list[object]) -> None:
        self._writer.writerow([neutralise_cell(c) if isinstance(c, str) else c for c in row])


def csv_text(frame) -> str:
    """The export frame as CSV text: exact value text, UTC times with ``Z``, text neutralised
    (data cells and the header row: a tag key can start like a formula too)."""
    import polars as pl

    stamp = "%Y-%m-%dT%H:%M:%SZ"
    times = [pl.col(c).dt.convert_time_zone("UTC").dt.strftime(stamp)
             for c in ("measured_at", "logged_at")]
    frame = neutralise_text(frame.with_columns(times), keep=tuple(_NUMBER_TEXT.values()))
    # numbers come from the exact text after neutralising, so "-0.5" is never quoted
    frame = frame.with_columns(pl.col(text).alias(col) for col, text in _NUMBER_TEXT.items())
    frame = frame.drop(list(_NUMBER_TEXT.values()))
    return frame.rename({c: neutralise_cell(c) for c in frame.columns}).write_csv()


def _umask() -> int:
    current = os.umask(0o022)
    os.umask(current)
    return current


def _place(tmp: Path, out: Path, overwrite: bool) -> None:
    if overwrite:
        os.replace(tmp, out)
        return
    try:
        os.link(tmp, out)  # atomic "create only if absent"
    except FileExistsError:
        raise ExportRefused(f"{out} already exists; not overwritten (use --overwrite)") from None
    except OSError:  # file system without hard links
        if out.exists():
            raise ExportRefused(f"{out} already exists; not overwritten (use --overwrite)") from None
        os.replace(tmp, out)
        return
    tmp.unlink()


def _check_target(path: Path, overwrite: bool) -> None:
    """Refuse a target that is not a new file or (with ``overwrite``) a regular file: a device,
    FIFO, socket or symbolic link is never replaced (as root, ``--out /dev/null --overwrite``
    would otherwise swap the device for a plain file)."""
    try:
        st = os.lstat(path)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise ExportRefused(f"cannot use {path}: {exc.strerror or exc}") from None
    if st is not None:
        if stat.S_ISDIR(st.st_mode):
            raise ExportRefused(f"{path} is a directory; give a file name")
        if stat.S_ISLNK(st.st_mode):
            raise ExportRefused(f"{path} is a symbolic link; not replaced. Give the path of a "
                                "regular file or a new file name")
        if not stat.S_ISREG(st.st_mode):
            raise ExportRefused(f"{path} is not a regular file (a device, FIFO or socket); not "
                                "replaced. Give a new file name")
        if not overwrite:
            raise ExportRefused(f"{path} already exists; not overwritten (use --overwrite)")
    if not path.parent.is_dir():
        raise ExportRefused(f"{path.parent} does not exist or is not a folder")


def write_export(
    store,
    *,
    format: str = "csv",
    out: str | os.PathLike[str] | None = None,
    characteristics: list[str] | tuple[str, ...] | None = None,
    since: date | None = None,
    until: date | None = None,
    overwrite: bool = False,
    stream: IO[str] | None = None,
) -> ExportSummary:
    """Export measurements to ``out`` (or ``stream``/stdout for CSV). Refuses to overwrite."""
    if format not in FORMATS:
        raise ExportRefused(f"unknown export format {format!r}; choose csv or parquet")
    path = Path(out) if out is not None else None
    if path is None and format == "parquet":
        raise ExportRefused("Parquet is a binary format: give a file with --out")
    if path is not None:
        _check_target(path, overwrite)
    frame = export_frame(store, characteristics=characteristics, since=since, until=until)

    if path is None:
        (stream or sys.stdout).write(csv_text(frame))
        return ExportSummary(frame.height, None, format)

    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    except OSError as exc:
        raise ExportRefused(f"cannot write {path}: cannot create a file in {path.parent} "
                            f"({exc.strerror or exc}); choose a folder you can write") from None
    tmp = Path(tmp_name)
    try:
        if format == "csv":
            with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
                fh.write(csv_text(frame))
        else:
            os.close(fd)
            frame.drop(list(_NUMBER_TEXT.values())).write_parquet(tmp)
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual file mode
        _place(tmp, path, overwrite)
    except OSError as exc:
        raise ExportRefused(f"cannot write {path}: {exc.strerror or exc}") from None
    finally:
        if tmp.exists():
            tmp.unlink()
    return ExportSummary(frame.height, path, format)
