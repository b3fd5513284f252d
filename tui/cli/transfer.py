"""Moving data in and out: ``lotwatch import`` and ``lotwatch export``."""

from __future__ import annotations

import io
import sys
from datetime import date
from pathlib import Path

import click
from lotwatch.tui.cli.common import UserError, db_option, open_store, plain, store_errors

# Show a progress bar for at least this many values (always when stderr is a terminal and the
# import is not tiny): below it, storing takes well under a second.
PROGRESS_MIN_VALUES = 20_000
PROGRESS_MIN_VALUES_TTY = 2_000
# A refusal lists this many problems in the message (store.errors.BadInput); beyond it the full
# list goes to <file>.rejected.csv beside the input.
LISTED_PROBLEMS = 50


def _pairs(items: tuple[str, ...], option: str, left: str, right: str) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in items:
        a, sep, b = item.partition("=")
        a, b = a.strip(), b.strip()
        if not sep or not a or not b:
            raise UserError(f"{option} {item!r}: write it as {left}={right}")
        out[a] = b
    return out


def _years(text: str | None) -> tuple[int, int] | None:
    if text is None:
        return None
    a, sep, b = text.partition("-")
    try:
        lo, hi = int(a), int(b)
    except ValueError:
        lo = hi = 0
    if not sep or not 1 <= lo <= hi <= 9999:
        raise UserError(f"--years {text!r}: write it as FROM-TO, e.g. 2000-2030")
    return lo, hi


def _show_progress(values: int) -> bool:
    if values >= PROGRESS_MIN_VALUES:
        return True
    return values >= PROGRESS_MIN_VALUES_TTY and sys.stderr.isatty()


@click.command("import")
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--format", "fmt", type=click.Choice(["auto", "csv", "parquet"]), default="auto",
              show_default=True, help="File format (auto: Parquet by its signature, else CSV).")
@click.option("--layout", type=click.Choice(["auto", "long", "wide"]), default="auto",
              show_default=True,
              help="long: one value per row with characteristic and value columns; wide: one "
                   "column per characteristic (auto: long if the value column exists).")
@click.option("--lot-column", default="lot", show_default=True, help="Column with the lot ID.")
@click.option("--time-column", default="measured_at", show_default=True,
              help="Column with the measurement time, ISO 8601 (no offset = local time).")
@click.option("--value-column", default="value", show_default=True,
              help="Long layout: column with the values.")
@click.option("--characteristic-column", default="characteristic", show_default=True,
              help="Long layout: column with the characteristic name.")
@click.option("--note-column", default="note", show_default=True,
              help="Column with a note per row (used when present).")
@click.option("--tag-column", "tag_columns", multiple=True, metavar="KEY=COLUMN",
              help="Read tag KEY from COLUMN (repeatable). Columns named like a known factor "
                   "are read as tags anyway.")
@click.option("--characteristic-map", "char_map", multiple=True, metavar="COLUMN=NAME",
              help="Wide layout: COLUMN holds the values of characteristic NAME; long layout: "
                   "the file calls characteristic NAME by COLUMN (repeatable).")
@click.option("--decimal-comma", is_flag=True,
              help="Values use a decimal comma (500,3); the delimiter is then guessed as ';'.")
@click.option("--thousands", default=None, type=click.Choice([".", ",", " ", "'"]),
              help="Thousands separator used in the values (e.g. '.' with --decimal-comma for "
                   "1.250,5); without it a value like 1.250 under --decimal-comma is refused "
                   "as ambiguous.")
@click.option("--years", default=None, metavar="FROM-TO",
              help="Plausible measurement years (default: 1970 to next year); rows dated "
                   "outside are refused.")
@click.option("--delimiter", default=None,
              help="Column delimiter (default: guessed from the header: , ; tab or |).")
@click.option("--round", "round_values", is_flag=True,
              help="Round values to the characteristic's resolution instead of refusing them.")
@click.option("--skip-bad", is_flag=True,
              help="Store the good rows and write the refused ones, with reasons, to "
                   "<file>.rejected.csv beside the input (default: store nothing if any row "
                   "is bad).")
@click.option("--by", default=None,
              help="Who measured (default: the file's logged_by column, else your login name).")
@db_option
@store_errors
def import_command(file: str, fmt: str, layout: str, lot_column: str, time_column: str,
                   value_column: str, characteristic_column: str, note_column: str,
                   tag_columns: tuple[str, ...], char_map: tuple[str, ...], decimal_comma: bool,
                   thousands: str | None, years: str | None, delimiter: str | None,
                   round_values: bool, skip_bad: bool, by: str | None,
                   db_path: Path) -> None:
    """Import lot measurements from FILE (CSV or Parquet).

    All or nothing: if any row is bad, every bad row is listed (row, column, value, reason) and
    nothing is stored, unless --skip-bad. When there are more than 50 problems the full list is
    also written to <file>.rejected.csv beside the input. Rows already in the store are skipped
    as exact duplicates, so importing the same file twice stores nothing new.
    """
    from lotwatch.store import BadInput
    from lotwatch.store.importer import ImportOptions, parse_import, store_import, write_rejected

    if delimiter is not None:
        delimiter = {"\\t": "\t", "tab": "\t"}.get(delimiter, delimiter)
        if len(delimiter) != 1:
            raise UserError(f"--delimiter {delimiter!r}: give a single character")
    elif decimal_comma:
        delimiter = ";"
    options = ImportOptions(
        format=fmt, layout=layout, lot_column=lot_column, time_column=time_column,
        value_column=value_column, characteristic_column=characteristic_column,
        note_column=note_column,
        tag_columns=_pairs(tag_columns, "--tag-column", "KEY", "COLUMN"),
        characteristic_map=_pairs(char_map, "--characteristic-map", "COLUMN", "NAME"),
        decimal_comma=decimal_comma, thousands=thousands, delimiter=delimiter,
        round_values=round_values, skip_bad=skip_bad, by=by, years=_years(years),
    )
    with open_store(db_path) as store:
        parsed = parse_import(
            Path(file), options,
            factors=[f.name for f in store.factors()],
            characteristics=[c.name for c in store.characteristics()],
            zone=store.plant_zone,
        )
        for note in parsed.notes:
            click.echo(plain(f"Note: {note}"))  # notes quote header names: cleaned
        total = parsed.value_count
        try:
            if _show_progress(total) and not (parsed.problems and not skip_bad):
                with click.progressbar(length=total, label=f"Storing {total:,} values",
                                       file=sys.stderr) as bar:
                    done = [0]

                    def progress(n: int) -> None:
                        bar.update(max(0, n - done[0]))
                        done[0] = max(done[0], n)

                    summary = store_import(store, parsed, round_values=round_values,
                                           skip_bad=skip_bad, progress=progress)
            else:
                summary = store_import(store, parsed, round_values=round_values,
                                       skip_bad=skip_bad)
        except BadInput as exc:
            if len(exc.problems) > LISTED_PROBLEMS:
                listing = write_rejected(parsed, exc.problems)
                raise UserError(plain(f"{exc}\nAll {len(exc.problems):,} problems are listed in "
                                      f"{listing}")) from None
            raise
    if skip_bad and summary.rejected:
        summary.rejected_file = write_rejected(parsed, summary.rejected)

    for note in summary.notes:
        if note not in parsed.notes:  # those were said before storing
            click.echo(plain(f"Note: {note}"))
    click.echo(plain(f"Imported {summary.path.name} ({summary.layout} layout)"))
    counts = [("rows read", summary.rows_read), ("values read", summary.values_read),
              ("values stored", summary.stored),
              ("skipped as exact duplicates", summary.duplicates),
              ("rejected rows", summary.rejected_rows)]
    if summary.rounded:
        counts.append(("values rounded", summary.rounded))
    for label, n in counts:
        click.echo(f"  {label + ':':<29}{n:,}")
    if summary.rejected:
        for p in summary.rejected[:20]:
            click.echo(plain(f"    {p}"))
        if len(summary.rejected) > 20:
            click.echo(f"    ... and {len(summary.rejected) - 20} more")
    if summary.rejected_file is not None:
        click.echo(plain(f"Rejected rows and reasons written to {summary.rejected_file}"))


def _day(value: str | None, option: str) -> date | None:
    if value is None:
        return None
    try:
        return date.fromisoformat(value.strip())
    except ValueError:
        raise UserError(f"{option} {value!r}: not a date; use YYYY-MM-DD") from None


@click.command("export")
@click.option("--format", "fmt", type=click.Choice(["csv", "parquet"]), default=None,
              help="Output format (default: parquet if --out ends in .parquet, else csv).")
@click.option("--characteristic", "characteristics", multiple=True, metavar="NAME",
              help="Only this characteristic (repeatable; default: all).")
@click.option("--since", default=None, metavar="DATE",
              help="Only measurements on or after this UTC day (YYYY-MM-DD).")
@click.option("--until", default=None, metavar="DATE",
              help="Only measurements on or before this UTC day (YYYY-MM-DD).")
@click.option("--out", type=click.Path(dir_okay=False), default=None,
              help="Output file (default for csv: standard output).")
@click.option("--overwrite", is_flag=True, help="Replace --out if it already exists.")
@db_option
@store_errors
def export_command(fmt: str | None, characteristics: tuple[str, ...], since: str | None,
                   until: str | None, out: str | None, overwrite: bool, db_path: Path) -> None:
    """Export measurements to CSV or Parquet.

    One row per measurement: current and original value, voided flag, tags, times (UTC).

    Text cells that a spreadsheet would run as a formula (starting with = + - @) get a leading
    single quote in CSV. An existing file is never replaced unless --overwrite.
    """
    from lotwatch.store.export import write_export

    if fmt is None:
        fmt = "parquet" if out and out.lower().endswith((".parquet", ".pq")) else "csv"
    since_d, until_d = _day(since, "--since"), _day(until, "--until")
    if since_d and until_d and since_d > until_d:
        raise UserError(f"--since {since} is after --until {until}")
    # To a terminal, CSV text is shown with escape sequences and control/bidi characters
    # removed (they could retitle the window or hide text); to a pipe or file it stays exact.
    to_terminal = out is None and fmt == "csv" and sys.stdout.isatty()
    buffer = io.StringIO() if to_terminal else None
    with open_store(db_path, read_only=True) as store:
        summary = write_export(
            store, format=fmt, out=out, characteristics=list(characteristics),
            since=since_d, until=until_d, overwrite=overwrite, stream=buffer,
        )
    if buffer is not None:
        click.echo(plain(buffer.getvalue()), nl=False)
    if summary.path is not None:
        click.echo(f"Wrote {summary.rows:,} measurement(s) to {summary.path}", err=True)


@click.command("restore")
@click.argument("backup", type=click.Path(dir_okay=False, path_type=Path))
@db_option
@store_errors
def restore_command(backup: Path, db_path: Path) -> None:
    """Put the backup copy BACKUP back in place of the store, safely even while it is open.

    Checks that BACKUP is an intact lotwatch store, keeps the store as it is now beside it
    (NAME.before-restore-TIME.sqlite), then copies BACKUP in with SQLite's online backup. Never
    copy a backup over the store file (cp) while lotwatch may have it open.

    Example: lotwatch restore plant-2026-11-29.sqlite --db plant.sqlite
    """
    from lotwatch.store.restore import restore

    done = restore(backup, db_path)
    click.echo(plain(f"Restored {done.target} from {done.backup}: {done.lots:,} lots, "
                     f"{done.measurements:,} measurements."))
    if done.kept is not None:
        click.echo(plain(f"The store as it was is kept in {done.kept}."))
    click.echo("Any lotwatch window that had the store open refuses to write until it is opened "
               "again.")


def register(main: click.Group) -> None:
    """Add ``import`` and ``export`` to the ``lotwatch`` group."""
    main.add_command(import_command)
    main.add_command(export_command)
    main.add_command(restore_command)
