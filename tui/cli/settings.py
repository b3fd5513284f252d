"""``lotwatch settings``: show and change the store's review settings (windows, FDR, detectors)."""

from __future__ import annotations

from pathlib import Path

import click
from lotwatch.tui.cli.common import UserError, db_option, open_store, store_errors

_HELP = {
    "review.window": "window kind read by the review: trailing, last_n or week",
    "review.window_days": "length of a trailing window, in days",
    "review.step_days": "days between successive trailing windows",
    "review.last_n": "lots per group in a last_n window (a lot with replicates counts once)",
    "review.min_lots": "groups with fewer lots (not values) in a window are left out of it",
    "review.fdr_level": "q-value at or below which a window shows a signal (explanation)",
    "review.fdr_method": "bh (Benjamini-Hochberg) or by (Benjamini-Yekutieli)",
    "review.tolerance_fraction": "default minimum shift = this fraction of USL-LSL (a lotwatch default, not a standard)",
    "review.no_limits_gate": "without limits or --min-shift: detectable (80% power shift) or skip",
    "review.trend_windows": "windows shown in trend charts",
    "detect.years_per_false_alert": "false-alert budget: one false alert per N comparison-years",
    "detect.spread_ratio": "smallest growth of a group's SD over the rest's that matters (1.5 = +50%)",
    "detect.trailing_days": "days of history that estimate each group's within-day spread",
    "detect.warmup_days": "days with data a group needs before its detectors watch it",
    "detect.dispersion_days": "days whose day-to-day changes estimate extra dispersion",
    "detect.clear_days": "an alert clears after the group is back within the gate this many days",
    "detect.no_limits_sigmas": "minimum shift in pooled SDs without limits or a min shift",
}


class _AllSettings:
    """The review's and the detectors' settings as one table of keys (each class validates its
    own)."""

    def __init__(self) -> None:
        from lotwatch.stats.detect import DetectorSettings
        from lotwatch.stats.review_settings import ReviewSettings

        self.classes = (ReviewSettings, DetectorSettings)
        self.KEYS = {k: v for c in self.classes for k, v in c.KEYS.items()}

    def owner(self, key: str):
        return next(c for c in self.classes if key in c.KEYS)

    def __call__(self):
        return _Merged([c() for c in self.classes])

    def from_lookup(self, get):
        return _Merged([c.from_lookup(get) for c in self.classes])


class _Merged:
    """One instance of each settings class."""

    def __init__(self, parts) -> None:
        self.parts = parts


def _settings_class() -> _AllSettings:
    return _AllSettings()


@click.group("settings")
def settings_group() -> None:
    """Show and change this store's review settings (windows, FDR, detectors)."""


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
            value = getattr(next(p for p in current.parts if key in type(p).KEYS), name)
            default = getattr(next(p for p in defaults.parts if key in type(p).KEYS), name)
            mark = "" if value == default else "  (changed from the default)"
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
    default = getattr(rs.owner(key)(), rs.KEYS[key])
    click.echo(f"{key} = {default} (default)")


def register(main: click.Group) -> None:
    main.add_command(settings_group)


__all__ = ["register"]
