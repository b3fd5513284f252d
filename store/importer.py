"""Import lot measurements from a CSV or Parquet file into the store.

Three steps, each a module: ``import_read`` reads the file into text columns (so the exact
decimal text of each value, ``"500.30"``, reaches the resolution check), ``import_parse`` checks
every cell with polars expressions and lays the values out one per row, and ``bulk`` judges them
against the store without its write lock and writes them in bounded transactions. Rows are grouped
by (lot, characteristic): the replicate values of one lot, stamped with the time, tags and
logged_by of the group's first row; its notes are joined.

Two layouts:

* long: one value per row, with a characteristic column and a value column;
* wide: one column per characteristic (the column name is the characteristic name, or is mapped
  to one with ``characteristic_map``); an empty cell means "not measured".

Problems found while reading (text that is not a number, a timestamp that cannot be read, a
missing lot id, a lot whose tags disagree between rows) are collected for every bad row and merged
with the problems the store finds, so the person importing sees all bad rows at once. Unless
``skip_bad`` is set nothing is stored when any row is bad, and the write lock is never taken.

An import that passes every check is written in transactions of about ``bulk.CHUNK_VALUES``
values, never splitting a lot, so other writers wait at most a fraction of a second. If it is
interrupted (power cut, killed) the lots already committed stay; running the same import again
stores the rest and skips the stored lots as exact duplicates.

Timestamps are ISO 8601 (``2026-11-03T08:15:00Z``, ``2026-11-03 08:15``, ``2026-11-03``). A
timestamp without a UTC offset is read as local time of this computer (the usual convention of lab
exports), then converted to UTC; so is a Parquet timestamp column without a time zone.

A CSV text cell (or header name) starting with a single quote followed by ``=``, ``+``, ``-``,
``@``, tab or CR loses the quote: that is how ``lotwatch export`` neutralises formulas, so an export imports back
unchanged.

Encodings: UTF-8 with or without a byte order mark, UTF-16 with a byte order mark; a file that is
not UTF-8 anywhere is read as Latin-1 and the summary says so; a file mixing UTF-8 with another
encoding is refused naming its first bad line.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from lotwatch.store.errors import BadInput, RowProblem
from lotwatch.store.export import NeutralWriter
from lotwatch.store.import_cells import parse_timestamp
from lotwatch.store.import_parse import Layout, parse_values
from lotwatch.store.import_read import FORMATS, FileRefused, read_frame
from lotwatch.store.rules import import_years

LAYOUTS = ("auto", "long", "wide")

__all__ = ["FORMATS", "LAYOUTS", "FileRefused", "ImportOptions", "ImportSummary", "ParsedImport",
           "import_file", "parse_import", "parse_timestamp", "rejected_path", "store_import",
           "write_rejected"]


def default_years() -> tuple[int, int]:
    """The plausible measurement years unless the import says otherwise (--years FROM-TO):
    ``store.rules.import_years``, the one home of the year bounds."""
    return import_years()


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
    thousands: str | None = None  # a declared thousands separator ("." or "," or " " or "'")
    delimiter: str | None = None  # None: guess from the header line (, ; tab |)
    round_values: bool = False
    skip_bad: bool = False
    by: str | None = None
    years: tuple[int, int] | None = None  # plausible measurement years; None: default_years()


@dataclass
class ParsedImport:
    """A file read and checked, before anything is stored."""

    path: Path
    source: str
    layout: str
    frame: Any  # pl.DataFrame of the file as read (text columns), for the rejected-rows file
    values: Any  # pl.DataFrame, one row per good value (import_parse.parse_values)
    tag_keys: list[str]
    problems: list[RowProblem]
    rows_read: int
    values_read: int
    notes: list[str] = field(default_factory=list)

    @property
    def value_count(self) -> int:
        """Values that passed the file's own checks (what the store is asked to take)."""
        return 0 if self.values is None else int(self.values.height)


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


def _layout(path: Path, columns: list[str], options: ImportOptions, factors: list[str],
            known_chars: set[str], notes: list[str], zone: str) -> tuple[str, Layout]:
    """Resolve the options against the header (names match exactly, else ignoring case)."""
    def match(name: str) -> str:
        return _match(columns, name)

    lot_col, time_col, value_col = (match(options.lot_column), match(options.time_column),
                                    match(options.value_column))
    char_col, note_col, by_col = (match(options.characteristic_column),
                                  match(options.note_column), match(options.by_column))
    layout = options.layout
    if layout not in LAYOUTS:
        raise FileRefused(f"unknown layout {layout!r}; choose one of {', '.join(LAYOUTS)}")
    if layout == "auto":
        layout = "long" if value_col in columns else "wide"
    _require(path, columns, lot_col, "--lot-column")
    tag_cols: dict[str, str] = {f: match(f) for f in factors if match(f) in columns}
    for key, col in options.tag_columns.items():
        _require(path, columns, col, f"--tag-column {key}=COLUMN")
        tag_cols[key] = col
    has_time = time_col in columns
    if not has_time:
        notes.append(f"no {time_col!r} column: values are stamped with the time of import")
    if layout == "long":
        _require(path, columns, value_col, "--value-column")
        _require(path, columns, char_col, "--characteristic-column")
        value_cols: list[tuple[str, str]] = [(value_col, "")]
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
        value_cols = list(mapped.items())
    resolved = Layout(
        lot=lot_col, time=time_col if has_time else None, tags=tag_cols,
        note=note_col if note_col in columns else None,
        by=by_col if by_col in columns else None, values=value_cols,
        char_column=char_col if layout == "long" else None,
        names_map=dict(options.characteristic_map) if layout == "long" else {},
        by_default=options.by, decimal_comma=options.decimal_comma,
        thousands=options.thousands, years=options.years or default_years(), zone=zone)
    used = {lot_col, *tag_cols.values(), *(c for c, _ in value_cols)}
    used |= {c for c in (resolved.note, resolved.by, resolved.time, resolved.char_column) if c}
    ignored = [c for c in columns if c not in used]
    if ignored:
        notes.append("ignored columns: " + ", ".join(ignored))
    return layout, resolved


def parse_import(
    path: str | Path,
    options: ImportOptions,
    *,
    factors: Iterable[str],
    characteristics: Iterable[str],
    zone: str | None = None,
) -> ParsedImport:
    """Read ``path`` and check every cell, collecting every problem; nothing touches the store.

    ``factors`` and ``characteristics`` are the names known to the store (used for the default
    tag columns and, in the wide layout, the default characteristic columns); ``zone`` the
    store's plant zone, in which a timestamp without an offset is read (default: this
    computer's zone).
    """
    from lotwatch.store.plantzone import machine_zone

    path = Path(path)
    notes: list[str] = []
    frame = read_frame(path, options.format, options.delimiter, notes)
    layout, resolved = _layout(path, list(frame.columns), options, list(factors),
                               set(characteristics), notes, zone or machine_zone())
    parsed = parse_values(frame, resolved, path.name)
    if parsed.rows_read == 0:
        raise FileRefused(f"{path.name}: the file has a header but no data rows")
    notes += parsed.notes
    return ParsedImport(
        path=path, source=path.name, layout=layout, frame=frame, values=parsed.values,
        tag_keys=parsed.tag_keys, problems=parsed.problems, rows_read=parsed.rows_read,
        values_read=parsed.values_read, notes=notes)


def store_import(
    store,
    parsed: ParsedImport,
    *,
    round_values: bool = False,
    skip_bad: bool = False,
    progress: Callable[[int], None] | None = None,
) -> ImportSummary:
    """Judge the parsed values against the store, then store them (``store.bulk``).

    Without ``skip_bad``: raises ``BadInput`` listing every bad row (the file's problems and the
    store's own) before taking the write lock, and stores nothing. With ``skip_bad``: stores the
    good rows, returns the rest in ``ImportSummary.rejected``.
    """
    from lotwatch.store.bulk import plan_values, write_plan
    from lotwatch.store.timeutil import format_stored, now_utc

    refusing = bool(parsed.problems) and not skip_bad  # only the store's problems are wanted
    plan = plan_values(store, parsed.values, parsed.tag_keys, source=parsed.source,
                       round_values=round_values, now_s=format_stored(now_utc()),
                       problems_only=refusing)
    problems = list(parsed.problems) + plan.problems
    if problems and not skip_bad:
        raise BadInput(_sorted(problems))
    try:
        ids, lots = write_plan(store, plan, source=parsed.source, skip_bad=skip_bad,
                               progress=progress)
    except BadInput as exc:
        raise BadInput(_sorted(list(parsed.problems) + list(exc.problems)),
                       stored_nothing=exc.stored_nothing) from None
    return ImportSummary(
        path=parsed.path,
        layout=parsed.layout,
        rows_read=parsed.rows_read,
        values_read=parsed.values_read,
        stored=len(ids),
        duplicates=plan.duplicates,
        rejected=_sorted(list(parsed.problems) + plan.problems),
        rounded=plan.rounded,
        lots=lots,
        measurement_ids=ids,
        notes=list(parsed.notes) + plan.notes,
    )


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
        zone=store.plant_zone,
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
