"""Setting a store up: ``lotwatch init``, ``lotwatch characteristic ...``, ``lotwatch factor ...``."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import click
from lotwatch.tui.cli.common import UserError, db_option, open_store, plain, store_errors
from lotwatch.tui.render.safe_text import truncate

CELL_WIDTH = 32  # a table cell holding user text is cut to this many columns (ending in …)


def _fmt(x: float | None) -> str:
    return "-" if x is None else f"{x:g}"


def _describe(c) -> list[tuple[str, str]]:
    plausible = (
        "-" if c.plausible_low is None and c.plausible_high is None
        else f"{_fmt(c.plausible_low)} to {_fmt(c.plausible_high)}"
    )
    return [
        ("name", c.name),
        ("unit", c.unit),
        ("resolution", c.resolution),
        ("LSL", _fmt(c.lsl)),
        ("target", _fmt(c.target)),
        ("USL", _fmt(c.usl)),
        ("min shift", _fmt(c.min_shift)),
        ("plausible range", plausible),
        ("created", f"{c.created_at} by {c.created_by}"),
    ]


@click.command("init")
@click.argument("path", required=False, type=click.Path(dir_okay=False))
@click.option("--zone", default=None, metavar="AREA/CITY",
              help="Plant time zone (IANA name, e.g. Europe/Berlin); default: this computer's.")
@db_option
@store_errors
def init_command(path: str | None, zone: str | None, db_path: Path) -> None:
    """Create an empty store.

    The store is made at PATH (default: --db, $LOTWATCH_DB or the user data directory). The new
    store has the grouping factors site, line and shift (all required) and a plant time zone
    (days, weeks and windows are plant-local dates). An existing file is never overwritten.
    """
    from lotwatch.store import Store

    target = Path(path).expanduser() if path else db_path
    if target.exists() and not target.is_file():
        raise UserError(f"{target} is not a regular file (a folder, device or pipe); "
                        "choose another path for the store")
    if target.exists():
        raise UserError(f"{target} already exists; lotwatch init never overwrites a file. "
                        "Choose another path or remove the file yourself.")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UserError(f"cannot create the folder {target.parent}: {exc.strerror}") from None
    store = Store.create(target, zone=zone)
    try:
        factors = ", ".join(f.name + (" (required)" if f.required else "") for f in store.factors())
        plant_zone = store.plant_zone
    finally:
        store.close()
    click.echo(f"Created an empty store at {target}")
    click.echo(f"Grouping factors: {factors}")
    click.echo(f"Plant time zone: {plant_zone} (change it with `lotwatch zone set`)")
    click.echo("Next: lotwatch characteristic add NAME --unit UNIT --resolution STEP "
               f"--db {target}")


# --- characteristics ---------------------------------------------------------------------------


@click.group("characteristic")
def characteristic_group() -> None:
    """Define and inspect measured characteristics.

    Each has a unit, a gauge resolution and optional spec limits (LSL, target, USL).
    """


_limit_options = [
    click.option("--lsl", type=float, default=None, help="Lower specification limit (LSL)."),
    click.option("--target", type=float, default=None, help="Target (nominal) value."),
    click.option("--usl", type=float, default=None, help="Upper specification limit (USL)."),
    click.option("--min-shift", "min_shift", type=float, default=None,
                 help="Smallest shift between group means worth acting on, in the unit."),
    click.option("--plausible", type=(float, float), default=None, metavar="LO HI",
                 help="Values outside LO..HI are refused as typing errors."),
]


def _with_limits(f):
    for option in reversed(_limit_options):
        f = option(f)
    return f


@characteristic_group.command("add")
@click.argument("name")
@click.option("--unit", required=True, help="Unit of the values, e.g. mL or N·m.")
@click.option("--resolution", required=True,
              help="Gauge resolution as a decimal step, e.g. 0.1; values must be multiples of it.")
@_with_limits
@db_option
@store_errors
def characteristic_add(name: str, unit: str, resolution: str, lsl, target, usl, min_shift,
                       plausible, db_path: Path) -> None:
    """Add characteristic NAME with its unit, resolution and optional limits."""
    with open_store(db_path) as store:
        c = store.add_characteristic(
            name, unit=unit, resolution=resolution, lsl=lsl, target=target, usl=usl,
            min_shift=min_shift, plausible=tuple(plausible) if plausible else None,
        )
    click.echo(plain(f"Added characteristic {c.name} ({c.unit}, resolution {c.resolution})"))


@characteristic_group.command("list")
@db_option
@store_errors
def characteristic_list(db_path: Path) -> None:
    """List the characteristics with their limits."""
    with open_store(db_path, read_only=True) as store:
        chars = store.characteristics()
    if not chars:
        click.echo("No characteristics yet. Add one with: lotwatch characteristic add NAME "
                   "--unit UNIT --resolution STEP")
        return
    header = ("name", "unit", "resolution", "LSL", "target", "USL", "min shift", "state")
    rows = [(c.name, c.unit, c.resolution, _fmt(c.lsl), _fmt(c.target), _fmt(c.usl),
             _fmt(c.min_shift), "retired" if c.retired_at else "reviewed") for c in chars]
    _table(header, rows)


def _table(header: tuple[str, ...], rows: Sequence[tuple[Any, ...]]) -> None:
    rows = [tuple(truncate(plain(v), CELL_WIDTH) for v in r) for r in rows]
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(len(header))]
    for r in [header, *rows]:
        click.echo("  ".join(str(v).ljust(w) for v, w in zip(r, widths, strict=True)).rstrip())


@characteristic_group.command("show")
@click.argument("name")
@db_option
@store_errors
def characteristic_show(name: str, db_path: Path) -> None:
    """Show everything stored about characteristic NAME."""
    with open_store(db_path, read_only=True) as store:
        c = store.characteristic(name)
    for label, value in _describe(c):
        click.echo(plain(f"{label + ':':<17}{value}"))


@characteristic_group.command("edit")
@click.argument("name")
@click.option("--rename", "new_name", default=None, metavar="NEW_NAME",
              help="New name (stored values, aggregates and alerts follow it).")
@click.option("--unit", default=None, help="New unit.")
@click.option("--resolution", default=None,
              help="New resolution (refused once values are stored: they were read to the old one).")
@_with_limits
@click.option("--clear", "clear", multiple=True,
              type=click.Choice(["lsl", "target", "usl", "min-shift", "plausible"]),
              help="Remove a limit (repeatable).")
@db_option
@store_errors
def characteristic_edit(name: str, new_name, unit, resolution, lsl, target, usl, min_shift,
                        plausible, clear: tuple[str, ...], db_path: Path) -> None:
    """Change a characteristic's name, unit, resolution or limits.

    The resolution can change only while NAME has no stored values.
    """
    changes: dict[str, object] = {}
    for key, value in (("name", new_name), ("unit", unit), ("resolution", resolution), ("lsl", lsl),
                       ("target", target), ("usl", usl), ("min_shift", min_shift)):
        if value is not None:
            changes[key] = value
    if plausible is not None:
        changes["plausible"] = tuple(plausible)
    for key in clear:
        field = key.replace("-", "_")
        if field in changes:
            raise UserError(f"--clear {key} contradicts a new value for it; give one or the other")
        changes[field] = None
    if not changes:
        raise UserError("nothing to change; give at least one option (see --help)")
    with open_store(db_path) as store:
        c = store.edit_characteristic(name, **changes)
    click.echo(plain(f"Updated characteristic {c.name}:"))
    for label, value in _describe(c):
        click.echo(plain(f"  {label + ':':<17}{value}"))


# --- factors -----------------------------------------------------------------------------------


@click.group("factor")
def factor_group() -> None:
    """Define and list grouping factors.

    A factor is a tag key lots carry (site, line, shift, ...) that lotwatch compares groups by.
    """


@factor_group.command("add")
@click.argument("key")
@click.option("--required", is_flag=True, help="Every new lot must carry this tag.")
@db_option
@store_errors
def factor_add(key: str, required: bool, db_path: Path) -> None:
    """Add grouping factor KEY (a tag key lots can carry)."""
    with open_store(db_path) as store:
        store.add_factor(key, required=required)
    click.echo(plain(f"Added factor {key}" + (" (required)" if required else "")))


@factor_group.command("list")
@db_option
@store_errors
def factor_list(db_path: Path) -> None:
    """List the grouping factors and how many levels each has."""
    with open_store(db_path, read_only=True) as store:
        rows = []
        for f in store.factors():
            levels = store.tag_values(f.name)
            shown = ", ".join(levels[:6]) + (", ..." if len(levels) > 6 else "")
            rows.append((f.name, "yes" if f.required else "no",
                         "retired" if f.retired_at else "compared", str(len(levels)), shown))
    _table(("factor", "required", "state", "levels", "values"), rows)


def register(main: click.Group) -> None:
    """Add the setup commands to the ``lotwatch`` group."""
    main.add_command(init_command)
    main.add_command(characteristic_group)
    main.add_command(factor_group)
