"""``characteristic retire/restore`` and ``factor retire/restore/rename``: stop watching
something without losing its data, or give a factor a new name (``store.retire``)."""

from __future__ import annotations

from pathlib import Path

import click
from lotwatch.tui.cli.common import db_option, open_store, plain, store_errors
from lotwatch.tui.cli.setup import characteristic_group, factor_group


@click.command("retire")
@click.argument("name")
@db_option
@store_errors
def characteristic_retire(name: str, db_path: Path) -> None:
    """Stop reviewing characteristic NAME: it leaves reviews, detectors, the board and the entry
    form. Its values, history and alerts are kept (alerts still active are cleared, with the
    reason in their history); `characteristic restore` brings it back."""
    with open_store(db_path) as store:
        closed = store.retire_characteristic(name)
    click.echo(plain(f"Retired characteristic {name}: no longer reviewed; its data is kept."))
    _say_closed(closed)


def _say_closed(closed: int) -> None:
    if closed:
        click.echo(f"Cleared {closed} active alert(s) on it, with the reason in their history "
                   "(the signal was not resolved; see `alerts list --state cleared`).")


@click.command("restore")
@click.argument("name")
@db_option
@store_errors
def characteristic_restore(name: str, db_path: Path) -> None:
    """Review a retired characteristic NAME again (its detectors catch up from its first day)."""
    with open_store(db_path) as store:
        store.retire_characteristic(name, retire=False)
    click.echo(plain(f"Restored characteristic {name}: reviewed again from the next review."))


@click.command("retire")
@click.argument("key")
@db_option
@store_errors
def factor_retire(key: str, db_path: Path) -> None:
    """Stop comparing groups by factor KEY and stop requiring it. Lots keep their KEY tags;
    `factor restore` brings it back."""
    with open_store(db_path) as store:
        closed = store.retire_factor(key)
    click.echo(plain(f"Retired factor {key}: no longer compared or required; tags are kept."))
    _say_closed(closed)


@click.command("restore")
@click.argument("key")
@db_option
@store_errors
def factor_restore(key: str, db_path: Path) -> None:
    """Compare groups by a retired factor KEY again (not required; `factor list` shows it)."""
    with open_store(db_path) as store:
        store.retire_factor(key, retire=False)
    click.echo(plain(f"Restored factor {key}: compared again from the next review."))


@click.command("rename")
@click.argument("key")
@click.argument("new_key")
@db_option
@store_errors
def factor_rename(key: str, new_key: str, db_path: Path) -> None:
    """Rename grouping factor KEY to NEW_KEY: every lot's tag, day sum, alert and detector state
    follows, in one transaction."""
    with open_store(db_path) as store:
        store.rename_factor(key, new_key)
    click.echo(plain(f"Renamed factor {key} to {new_key.strip()}."))


def register(main: click.Group) -> None:
    """Add the commands to the ``characteristic`` and ``factor`` groups."""
    characteristic_group.add_command(characteristic_retire)
    characteristic_group.add_command(characteristic_restore)
    factor_group.add_command(factor_retire)
    factor_group.add_command(factor_restore)
    factor_group.add_command(factor_rename)
