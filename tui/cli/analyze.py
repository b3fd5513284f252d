"""``lotwatch analyze FILE --value COL --by COL``: the full battery on a CSV or Parquet file.

Works on a file alone (no store). Values are read as text and parsed here, so that a bad cell is
reported with its row and column, and so that the exact decimal route sees the digits as written.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import click
from lotwatch.tui.cli.common import UserError

MAX_LISTED = 5


def _read_frame(path: Path) -> tuple[Any, int]:
    """The file as a polars frame, and the number of the first data row in messages."""
    import polars as pl

    if not path.exists():
        raise UserError(f"{path}: no such file")
    if path.is_dir():
        raise UserError(f"{path}: is a directory, not a data file")
    try:
        if path.suffix.lower() in (".parquet", ".pq"):
            return pl.read_parquet(path), 1  # row numbers count data rows from 1
        # every column as text; header is line 1, so data row i is on line i + 2
        return pl.read_csv(path, infer_schema=False), 2
    except (pl.exceptions.PolarsError, OSError, UnicodeDecodeError) as exc:
        raise UserError(f"{path}: cannot be read as "
                        f"{'Parquet' if path.suffix.lower() in ('.parquet', '.pq') else 'CSV'}"
                        f" ({exc})") from None


def load_groups(path: Path, value: str, by: str) -> tuple[list[str], list[list[float]], str]:
    """Group names (sorted), their values, and the row label used in messages."""
    frame, first = _read_frame(path)
    row_word = "line" if first == 2 else "row"
    for col, opt in ((value, "--value"), (by, "--by")):
        if col not in frame.columns:
            raise UserError(f"{path}: no column {col!r} (given by {opt}); columns are: "
                            + ", ".join(repr(c) for c in frame.columns))
    if frame.height == 0:
        raise UserError(f"{path}: has a header but no data rows")
    values = frame.get_column(value).to_list()
    levels = frame.get_column(by).to_list()
    problems: list[str] = []
    groups: dict[str, list[float]] = {}
    for i, (v, g) in enumerate(zip(values, levels, strict=True)):
        where = f"{row_word} {i + first}"
        if g is None or str(g).strip() == "":
            problems.append(f"{where}: column {by!r} is empty")
            continue
        if v is None or (isinstance(v, str) and v.strip() == ""):
            problems.append(f"{where}: column {value!r} is empty")
            continue
        try:
            x = float(v.strip()) if isinstance(v, str) else float(v)
        except (TypeError, ValueError):
            problems.append(f"{where}: column {value!r} has {v!r}, which is not a number")
            continue
        if not math.isfinite(x):
            problems.append(f"{where}: column {value!r} has {v!r}, which is not a finite number")
            continue
        groups.setdefault(str(g).strip(), []).append(x)
    if problems:
        more = len(problems) - MAX_LISTED
        listed = "\n  ".join(problems[:MAX_LISTED])
        tail = f"\n  ... and {more} more" if more > 0 else ""
        raise UserError(f"{path}: {len(problems)} bad row(s), nothing analysed:\n  {listed}{tail}")
    names = sorted(groups)
    return names, [groups[n] for n in names], row_word


@click.command("analyze")
@click.argument("file", type=click.Path(dir_okay=True, path_type=Path))
@click.option("--value", "value_col", required=True, metavar="COL",
              help="Column holding the measured values.")
@click.option("--by", "by_col", required=True, metavar="COL",
              help="Column whose values name the groups (line, site, shift ...).")
@click.option("--resolution", default=None, metavar="R",
              help="Measurement resolution, e.g. 0.01: sums are then computed exactly.")
@click.option("--alpha", default=0.05, show_default=True, type=float,
              help="Significance level of every test.")
@click.option("--reference", default=None, metavar="LEVEL",
              help="Compare every group with this one (Dunnett's test).")
@click.option("--lsl", default=None, type=float, help="Lower specification limit (capability).")
@click.option("--usl", default=None, type=float, help="Upper specification limit (capability).")
@click.option("--shift", default=None, type=float,
              help="Shift of one group worth detecting, in the data's units (power).")
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text",
              show_default=True, help="Plain text report or the JSON contract.")
def analyze_command(file: Path, value_col: str, by_col: str, resolution: str | None,
                    alpha: float, reference: str | None, lsl: float | None, usl: float | None,
                    shift: float | None, fmt: str) -> None:
    """Compare the groups of FILE (CSV or Parquet): one-way ANOVA and its companions.

    Example: lotwatch analyze fills.csv --value volume --by line --resolution 0.1
    """
    if not 0 < alpha < 1:
        raise UserError(f"--alpha {alpha}: must be between 0 and 1, e.g. 0.05")
    if lsl is not None and usl is not None and not usl > lsl:
        raise UserError(f"--usl {usl} must be greater than --lsl {lsl}")
    if resolution is not None:
        from lotwatch.stats._numeric import parse_resolution

        try:
            parse_resolution(resolution)
        except ValueError:
            raise UserError(f"--resolution {resolution!r}: must be a positive number such as "
                            "0.01") from None
    if shift is not None and not (math.isfinite(shift) and shift != 0):
        raise UserError(f"--shift {shift}: must be a non-zero number")
    names, samples, _ = load_groups(file, value_col, by_col)
    if reference is not None and reference not in names:
        raise UserError(f"--reference {reference!r}: no such group in column {by_col!r}; "
                        "groups are: " + ", ".join(repr(n) for n in names))

    from lotwatch.stats.battery import run_battery

    try:
        result = run_battery(samples, names, alpha=alpha, resolution=resolution,
                             reference=reference, lsl=lsl, usl=usl, shift=shift)
    except ValueError as exc:  # the battery's refusal (e.g. values too large for floats)
        raise UserError(f"{file}: {exc}") from None
    if fmt == "json":
        click.echo(json.dumps(result.to_dict(), indent=2, allow_nan=False))
        return
    from lotwatch.tui.render.battery_text import render_battery

    click.echo(render_battery(result, resolution=resolution), nl=False)


def register(main: click.Group) -> None:
    main.add_command(analyze_command)
