"""Logging lots by hand and fixing them: ``log``, ``correct``, ``void``, ``history``, ``check``."""

from __future__ import annotations

from pathlib import Path

import click
from lotwatch.tui.cli.common import UserError, db_option, open_store, plain, store_errors


def _parse_tags(tags: tuple[str, ...]) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in tags:
        key, sep, value = item.partition("=")
        key, value = key.strip(), value.strip()
        if not sep or not key or not value:
            raise UserError(f"--tag {item!r}: write it as key=value, e.g. --tag line=L2")
        if key in out and out[key] != value:
            raise UserError(f"--tag {key} given twice ({out[key]!r} and {value!r})")
        out[key] = value
    return out


def _local(stored, zone: str) -> str:
    """A stored UTC stamp in plant-local time ("2026-11-30 23:30"); as stored if unreadable."""
    if not stored:
        return "-"
    from lotwatch.store.timeutil import format_local

    try:
        return format_local(stored, zone=zone)
    except ValueError:
        return stored


# Values may be negative ("-0.5"): let unknown "-..." tokens through as values.
_VALUES_SETTINGS = {"ignore_unknown_options": True}


@click.command("log", context_settings=_VALUES_SETTINGS)
@click.argument("characteristic")
@click.argument("values", nargs=-1, required=True)
@click.option("--tag", "tags", multiple=True, metavar="KEY=VALUE",
              help="A tag of the lot, e.g. --tag site=North --tag line=L2 (repeatable).")
@click.option("--lot", default=None, help="Lot ID (default: a new ID is generated).")
@click.option("--at", "at", default=None, metavar="TIMESTAMP",
              help="When the lot was measured, ISO 8601 (default: now). Without an offset it "
                   "is plant time (see lotwatch zone show).")
@click.option("--note", default=None, help="A note stored with the values.")
@click.option("--by", default=None, help="Who measured (default: your login name).")
@click.option("--round", "round_values", is_flag=True,
              help="Round values to the characteristic's resolution instead of refusing them.")
@db_option
@store_errors
def log_command(characteristic: str, values: tuple[str, ...], tags: tuple[str, ...],
                lot: str | None, at: str | None, note: str | None, by: str | None,
                round_values: bool, db_path: Path) -> None:
    """Store the values of one lot.

    VALUES are replicate measurements of CHARACTERISTIC on one lot.

    Example: lotwatch log fill_volume 500.2 499.8 --tag site=North --tag line=L2 --tag shift=early
    """
    from lotwatch.store import LotEntry
    from lotwatch.store.timeutil import BadTime, check_year, gap_note, now_utc, parse_typed, to_utc

    for v in values:
        if v.startswith("--"):
            raise UserError(f"unknown option {v!r} (see lotwatch log --help)")
    parsed_tags = _parse_tags(tags)
    with open_store(db_path) as store:
        zone = store.plant_zone
        try:
            measured_at = to_utc(at, zone) if at else now_utc()
            check_year(measured_at, repr(at))
            gap = gap_note(parse_typed(at), zone) if at else None
        except BadTime as exc:
            raise UserError(f"--at: {exc}") from None
        entry = LotEntry(characteristic=characteristic, values=list(values), tags=parsed_tags,
                         lot=lot, measured_at=measured_at, note=note, by=by)
        outcome = store.log_lots([entry], round_values=round_values)
        ids = list(outcome.measurement_ids)
        lot_id = outcome.lots[0] if outcome.lots else lot
    if outcome.duplicates and not ids:
        click.echo(plain(f"Nothing new: lot {lot_id} already has these {characteristic} "
                         "values (exact duplicate)."))
        return
    click.echo(plain(f"Stored {len(ids)} value(s) of {characteristic} in lot {lot_id}, "
                     f"measured {_local(measured_at, zone)} (plant time, {zone})"))
    click.echo("Measurement id(s): " + ", ".join(str(i) for i in ids))
    if outcome.rounded:
        click.echo(f"{outcome.rounded} value(s) rounded to the resolution")
    if gap:
        click.echo(f"Note: --at {gap}")


@click.command("correct", context_settings=_VALUES_SETTINGS)
@click.argument("measurement_id", type=int)
@click.argument("new_value")
@click.option("--reason", required=True, help="Why the value is corrected (kept in the audit trail).")
@click.option("--by", default=None, help="Who corrects it (default: your login name).")
@db_option
@store_errors
def correct_command(measurement_id: int, new_value: str, reason: str, by: str | None,
                    db_path: Path) -> None:
    """Correct a stored value (audit trail kept).

    Replaces the value of MEASUREMENT_ID by NEW_VALUE; the original stays in its history.
    """
    with open_store(db_path) as store:
        store.correct(measurement_id, new_value, reason=reason, by=by)
    click.echo(f"Corrected measurement {measurement_id} to {new_value}")


@click.command("void")
@click.argument("measurement_id", type=int)
@click.option("--reason", required=True, help="Why the value is voided (kept in the audit trail).")
@click.option("--by", default=None, help="Who voids it (default: your login name).")
@db_option
@store_errors
def void_command(measurement_id: int, reason: str, by: str | None, db_path: Path) -> None:
    """Void a measurement (kept in its history).

    MEASUREMENT_ID leaves every analysis but stays in the store and its audit trail.
    """
    with open_store(db_path) as store:
        store.void(measurement_id, reason=reason, by=by)
    click.echo(f"Voided measurement {measurement_id}")


@click.command("history")
@click.argument("measurement_id", type=int)
@db_option
@store_errors
def history_command(measurement_id: int, db_path: Path) -> None:
    """Show the audit trail of a measurement.

    Lists when MEASUREMENT_ID was logged, corrected and voided, by whom and why.
    """
    with open_store(db_path, read_only=True) as store:
        entries = store.history(measurement_id)
        zone = store.plant_zone
    click.echo(plain(f"Measurement {measurement_id} (times in plant time, {zone}):"))
    for e in entries:
        change = ""
        if e.action == "log":
            change = f"value {e.new_value}"
        elif e.action == "correct":
            change = f"{e.old_value} -> {e.new_value}"
        elif e.action == "void":
            change = f"voided (was {e.old_value})" if e.old_value is not None else "voided"
        line = f"  {_local(e.at, zone)}  {e.action:<8} {change}  by {e.by}"
        if e.reason:
            line += f"  reason: {e.reason}"
        click.echo(plain(line))


@click.command("check")
@db_option
@store_errors
def check_command(db_path: Path) -> None:
    """Verify the stored aggregates against the raw values.

    Recomputes every aggregate bucket from the measurements; exit status 1 on any mismatch.
    """
    with open_store(db_path, read_only=True) as store:
        report = store.check()
    if report.ok:
        click.echo(f"Store is consistent: {report.measurements:,} measurements, "
                   f"{report.buckets_checked:,} aggregate buckets checked.")
        return
    click.echo(f"Store check found {len(report.problems)} problem(s):")
    for p in report.problems:
        click.echo(plain(f"  {p}"))
    raise click.exceptions.Exit(1)


def register(main: click.Group) -> None:
    """Add the lot commands to the ``lotwatch`` group."""
    for command in (log_command, correct_command, void_command, history_command, check_command):
        main.add_command(command)
