"""``lotwatch settings``: show and change the store's review settings (windows, alert rule, FDR)."""

from __future__ import annotations

from pathlib import Path

import click
from lotwatch.tui.cli.common import UserError, db_option, open_store, store_errors

_HELP = {
    "review.window": "window kind read by the review: trailing, last_n or week",
    "review.window_days": "length of a trailing window, in days",
    "review.step_days": "days between successive trailing windows",
    "review.last_n": "lots per group in a last_n window",
    "review.min_lots": "groups with fewer lots in a window are left out of it",
    "review.alert_k": "an alert needs the signal in K ...",
    "review.alert_m": "... of the last M windows (and clears after M without)",
    "review.fdr_level": "q-value at or below which a comparison counts as a signal",
    "review.fdr_method": "bh (Benjamini-Hochberg) or by (Benjamini-Yekutieli)",
    "review.tolerance_fraction": "default minimum shift = this fraction of USL-LSL (a lotwatch default, not a standard)",
    "review.no_limits_gate": "without limits or --min-shift: detectable (80% power shift) or skip",
    "review.trend_windows": "windows shown in trend charts",
}


def _settings_class():
    from lotwatch.stats.monitor import ReviewSettings

    return ReviewSettings


@click.group("settings")
def settings_group() -> None:
    """Show and change this store's review settings (windows, alert rule, FDR)."""


@settings_group.command("list")
@db_option
@store_errors
def list_settings(db_path: Path) -> None:
    """Every review setting with its current value and whether it is the default."""
    rs = _settings_class()
    defaults = rs()
    with open_store(db_path, read_only=True) as store:
        current = rs.from_lookup(store.get_setting)
        for key, name in rs.KEYS.items():
            value = getattr(current, name)
            mark = "" if value == getattr(defaults, name) else "  (changed from the default)"
            click.echo(f"{key:<27} {value!s}{mark}\n    {_HELP.get(key, '')}")


@settings_group.command("set")
@click.argument("key")
@click.argument("value")
@db_option
@store_errors
def set_setting(key: str, value: str, db_path: Path) -> None:
    """Set KEY to VALUE (checked before it is stored), e.g. review.window_days 14."""
    rs = _settings_class()
    if key not in rs.KEYS:
        raise UserError(f"unknown setting {key!r}; known: {', '.join(rs.KEYS)}")
    with open_store(db_path) as store:
        def lookup(k: str) -> str | None:
            return value if k == key else store.get_setting(k)

        try:
            rs.from_lookup(lookup)
        except ValueError as exc:
            raise UserError(f"setting not changed: {exc}") from None
        store.set_setting(key, value)
    click.echo(f"{key} = {value}")


@settings_group.command("reset")
@click.argument("key")
@db_option
@store_errors
def reset_setting(key: str, db_path: Path) -> None:
    """Return KEY to lotwatch's default."""
    rs = _settings_class()
    if key not in rs.KEYS:
        raise UserError(f"unknown setting {key!r}; known: {', '.join(rs.KEYS)}")
    with open_store(db_path) as store:
        store.set_setting(key, None)
    default = getattr(rs(), rs.KEYS[key])
    click.echo(f"{key} = {default} (default)")


def register(main: click.Group) -> None:
    main.add_command(settings_group)


__all__ = ["register"]
