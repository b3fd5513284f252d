"""``lotwatch zone``: show or change the plant time zone (the calendar of days and weeks)."""

from __future__ import annotations

from pathlib import Path

import click
from lotwatch.tui.cli.common import db_option, open_store, plain, store_errors


@click.group("zone")
def zone_group() -> None:
    """Show or change the plant time zone.

    Days, ISO weeks, windows and automatic lot IDs are plant-local dates, and times are shown
    in plant-local time. Timestamps stay stored in UTC.
    """


@zone_group.command("show")
@db_option
@store_errors
def zone_show(db_path: Path) -> None:
    """The store's plant time zone."""
    with open_store(db_path, read_only=True) as store:
        click.echo(f"Plant time zone: {plain(store.plant_zone)}")


@zone_group.command("set")
@click.argument("name")
@db_option
@store_errors
def zone_set(name: str, db_path: Path) -> None:
    """Make NAME (an IANA zone such as Europe/Berlin or America/Chicago) the plant time zone.

    Every stored measurement's day and every day sum is recomputed in one transaction; reviews
    recorded earlier keep the windows they were recorded with.
    """
    with open_store(db_path) as store:
        old, moved, rebuilt = store.set_plant_zone(name)
        new = store.plant_zone
    click.echo(f"Plant time zone: {plain(new)} (was {plain(old)})")
    click.echo(f"{moved:,} measurement{'s' if moved != 1 else ''} moved to another plant day; "
               f"{rebuilt:,} day sums rebuilt.")


def register(main: click.Group) -> None:
    main.add_command(zone_group)


__all__ = ["register"]
