"""``lotwatch review``, ``report``, ``trend`` and ``alerts``: the rolling review from the command line.

Exit status of ``review``: 0 when it ran (with ``--fail-on-alert``: 0 only when no alert is open
and unacknowledged), 1 with ``--fail-on-alert`` when one is, 2 on bad input or a store error.
"""

from __future__ import annotations

import json
from datetime import date
from pathlib import Path

import click
from lotwatch.tui.cli.common import UserError, db_option, store_errors
from lotwatch.tui.cli.common import open_store as _open_store


def open_store(db_path: Path, *, read_only: bool = False):  # -> store.Store
    """``common.open_store`` with its refusal (no store, unreadable store) as exit status 2."""
    try:
        return _open_store(db_path, read_only=read_only)
    except click.ClickException as exc:
        raise UserError(exc.message) from None


def _as_of(value: str | None) -> date | None:
    if value is None:
        return None
    from lotwatch.store.timeutil import BadTime, parse_day

    try:
        return parse_day(value, "--as-of")
    except BadTime as exc:
        raise UserError(str(exc)) from None


def _check_week(value: str | None) -> str | None:
    if value is None:
        return None
    from lotwatch.stats.weeks import parse_iso_week
    from lotwatch.store.timeutil import check_year

    shown = f"week {value.strip()!r}"
    try:
        check_year(parse_iso_week(value)[0], shown)
    except OverflowError:  # the week's Sunday is past year 9999
        raise UserError(f"--week: {shown} is at the end of the calendar") from None
    except ValueError as exc:  # BadTime is a ValueError
        raise UserError(f"--week: {exc}") from None
    return value.strip().upper()


_when_options = [
    click.option("--week", default=None, metavar="YYYY-Www",
                 help="Review the ISO week ending on its Sunday, e.g. 2026-W48."),
    click.option("--as-of", "as_of", default=None, metavar="DATE",
                 help="Review up to this day (default: the latest day with data)."),
]


def _when(f):
    for opt in reversed(_when_options):
        f = opt(f)
    return f


def _run(fn, *args, **kwargs):
    try:
        return fn(*args, **kwargs)
    except ValueError as exc:
        raise UserError(str(exc)) from None


@click.command("review")
@_when
@click.option("--format", "fmt", type=click.Choice(["text", "json", "md"]), default="text",
              show_default=True, help="80-column table, the JSON contract, or Markdown.")
@click.option("--fail-on-alert", is_flag=True,
              help="Exit with status 1 when an alert is open (not yet acknowledged).")
@click.option("--fdr", "fdr", type=click.Choice(["bh", "by"]), default=None,
              help="False-discovery control: bh (Benjamini-Hochberg, default) or by "
                   "(Benjamini-Yekutieli, valid under any dependence between the tests).")
@click.option("--dry-run", is_flag=True, help="Compute only; record no alert changes.")
@db_option
@store_errors
def review_command(week: str | None, as_of: str | None, fmt: str, fail_on_alert: bool,
                   fdr: str | None, dry_run: bool, db_path: Path) -> None:
    """Advance the drift detectors to the latest day with data, record their alerts, and explain
    every characteristic by every factor with the latest window's ANOVA family.

    Example: lotwatch review --week 2026-W48 --fail-on-alert
    """
    from lotwatch.tui.render.report import render_review_md, render_review_text
    from lotwatch.tui.services import review_engine as eng

    day = _as_of(as_of)
    wk = _check_week(week)
    if day is not None and wk is not None:
        raise UserError("give either --week or --as-of, not both")
    with open_store(db_path, read_only=dry_run) as store:
        result = _run(eng.run_review, store, as_of=day, week=wk, fdr_method=fdr,
                      persist=not dry_run)
    if fmt == "json":
        click.echo(json.dumps(result.to_dict(), indent=2, allow_nan=False))
    elif fmt == "md":
        click.echo(render_review_md(result), nl=False)
    else:
        click.echo(render_review_text(result), nl=False)
    if fail_on_alert and any(c.alert_state == "open" for c in result.comparisons):
        raise SystemExit(1)


@click.command("report")
@_when
@click.option("--out", "out", required=True, type=click.Path(dir_okay=False, path_type=Path),
              help="Report file: .md for Markdown, .html for a self-contained web page.")
@click.option("--fdr", "fdr", type=click.Choice(["bh", "by"]), default=None,
              help="False-discovery control (default: the store's setting, bh).")
@click.option("--dry-run", is_flag=True,
              help="Do not record the review's alert changes (the report shows them as they stand).")
@db_option
@store_errors
def report_command(week: str | None, as_of: str | None, out: Path, fdr: str | None,
                   dry_run: bool, db_path: Path) -> None:
    """Write the weekly review report: alerts, the family table, each alert's battery and trend.

    The review is recorded as by `lotwatch review` (re-running it changes nothing).

    Example: lotwatch report --week 2026-W48 --out w48.html
    """
    from lotwatch.tui.render.weekly import report_html, report_markdown
    from lotwatch.tui.services.weekly_report import build_weekly_report

    suffix = out.suffix.lower()
    if suffix not in (".md", ".html", ".htm"):
        raise UserError(f"--out {out}: the file name must end in .md or .html")
    if out.parent and not out.parent.exists():
        raise UserError(f"--out {out}: the folder {out.parent} does not exist")
    day = _as_of(as_of)
    wk = _check_week(week)
    if day is not None and wk is not None:
        raise UserError("give either --week or --as-of, not both")
    def write(rep) -> None:
        import os
        import tempfile

        text = report_markdown(rep) if suffix == ".md" else report_html(rep)
        tmp = None
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{out.name}.", suffix=".part",
                                       dir=out.parent if str(out.parent) else ".")
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(text)
            os.chmod(tmp, 0o644)  # mkstemp makes 0600; a report is meant to be shared
            os.replace(tmp, out)
        except OSError as exc:
            if tmp is not None and os.path.isfile(tmp):
                os.unlink(tmp)
            raise UserError(f"--out {out}: cannot write ({exc.strerror or exc})") from None

    with open_store(db_path, read_only=dry_run) as store:
        if dry_run:
            rep = _run(build_weekly_report, store, week=wk, as_of=day, fdr_method=fdr,
                       persist=False)
            write(rep)
        else:
            # one transaction: the review's alert changes are committed only once the report
            # is written, so a report that fails (or is interrupted) records nothing
            with store.write():
                rep = _run(build_weekly_report, store, week=wk, as_of=day, fdr_method=fdr)
                write(rep)
    click.echo(f"wrote {out} ({len(rep.sections)} alert(s), "
               f"{rep.result.family_size} comparison(s) in the family)")


@click.command("trend")
@click.argument("characteristic")
@click.option("--by", "factor", required=True, metavar="FACTOR",
              help="Grouping factor (site, line, shift ...).")
@click.option("--window", "window", type=click.Choice(["trailing", "last_n", "week"]),
              default=None, help="Window kind (default: the store's review.window setting).")
@click.option("--windows", "count", type=click.IntRange(1, 520), default=None,
              help="How many windows back (default: review.trend_windows, 12).")
@_when
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text",
              show_default=True, help="Table and chart, or JSON of the means per window.")
@click.option("--no-chart", is_flag=True, help="Only the table.")
@db_option
@store_errors
def trend_command(characteristic: str, factor: str, window: str | None, count: int | None,
                  week: str | None, as_of: str | None, fmt: str, no_chart: bool,
                  db_path: Path) -> None:
    """Each group's mean per window for one characteristic, as a table and a terminal chart.

    Example: lotwatch trend fill_volume --by line --windows 20
    """
    from lotwatch.tui.render.safe_text import clean
    from lotwatch.tui.render.trend import trend_chart_text, trend_frame_for_json, trend_table_text
    from lotwatch.tui.services import review_engine as eng

    day = _as_of(as_of)
    wk = _check_week(week)
    with open_store(db_path, read_only=True) as store:
        tr = _run(eng.trend, store, characteristic, factor, as_of=day, week=wk, windows=count,
                  window=window)
    if fmt == "json":
        click.echo(json.dumps({"characteristic": tr.characteristic.name, "factor": factor,
                               "lsl": tr.lsl, "target": tr.target, "usl": tr.usl,
                               "rows": trend_frame_for_json(tr)}, indent=2, default=str))
        return
    click.echo(clean(f"{tr.characteristic.name} by {factor}: mean per window "
                          f"({tr.windows[-1].label})", 80))
    click.echo(trend_table_text(tr), nl=False)
    if not no_chart and tr.frame.height:
        click.echo(trend_chart_text(tr))


@click.group("alerts")
def alerts_group() -> None:
    """List, show and acknowledge alerts (nothing is ever deleted)."""


ALERT_JSON_KEYS = ("id", "state", "characteristic", "factor", "groups", "kind", "direction",
                   "detected_on", "onset", "size", "size_low", "size_high",
                   "percent_of_tolerance", "evidence", "unit", "opened_at", "updated_at",
                   "last_window", "text")


def _alert_item(a, unit: str, budget: float, resolution: str | None = None) -> dict:
    """One alert as the JSON contract (README: "alerts list --format json")."""
    from lotwatch.tui.services.alert_text import stored_alert_sentence

    d = {k: getattr(a, k) for k in ALERT_JSON_KEYS if hasattr(a, k)}
    d["unit"] = unit
    d["text"] = stored_alert_sentence(a, unit, budget, resolution)
    return {k: d.get(k) for k in ALERT_JSON_KEYS}


@alerts_group.command("list")
@click.option("--state", type=click.Choice(["open", "acknowledged", "cleared", "active"]),
              default=None, help="Only alerts in this state (active = open or acknowledged).")
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text",
              show_default=True, help="A line per alert, or a JSON list (keys in the README).")
@db_option
@store_errors
def alerts_list(state: str | None, fmt: str, db_path: Path) -> None:
    """Alerts, most recently changed first."""
    from lotwatch.stats.detect.settings import DetectorSettings
    from lotwatch.store import alerts as store_alerts
    from lotwatch.tui.caution import CAUTION
    from lotwatch.tui.render.numbers import num
    from lotwatch.tui.render.numbers import size as size_text
    from lotwatch.tui.render.safe_text import clean

    with open_store(db_path, read_only=True) as store:
        rows = store_alerts.list_alerts(store, state=state)
        chars = {c.name: c for c in store.characteristics()}
        budget = _run(DetectorSettings.from_lookup, store.get_setting).years_per_false_alert

    def unit_of(a) -> str:
        return chars[a.characteristic].unit if a.characteristic in chars else ""

    def resolution_of(a) -> str | None:
        return chars[a.characteristic].resolution if a.characteristic in chars else None

    if fmt == "json":
        click.echo(json.dumps([_alert_item(a, unit_of(a), budget, resolution_of(a))
                               for a in rows], indent=2, allow_nan=False))
        return
    if not rows:
        click.echo("No alerts" + (f" in state {state}." if state else "."))
        return
    click.echo(f"{'id':>4} {'state':<12} {'characteristic':<14} {'factor':<7} {'kind':<6} "
               f"{'group':<9} {'size':>12} {'%tol':>5} {'onset':<10} detected")
    for a in rows:
        size = clean(size_text(a.size, resolution_of(a), unit_of(a)), 12)
        click.echo(f"{a.id:>4} {a.state:<12} {clean(a.characteristic, 14):<14} "
                   f"{clean(a.factor, 7):<7} {a.kind:<6} "
                   f"{clean(','.join(a.groups), 9):<9} {size:>12} "
                   f"{num(a.percent_of_tolerance, 3):>5} {(a.onset or '-'):<10} "
                   f"{a.detected_on or '-'}")
    click.echo(CAUTION)


@alerts_group.command("show")
@click.argument("alert_id", type=int)
@db_option
@store_errors
def alerts_show(alert_id: int, db_path: Path) -> None:
    """One alert and its whole event trail."""
    from lotwatch.stats.detect.settings import DetectorSettings
    from lotwatch.store import alerts as store_alerts
    from lotwatch.tui.caution import CAUTION
    from lotwatch.tui.render.safe_text import clean
    from lotwatch.tui.services.alert_text import stored_alert_sentence

    with open_store(db_path, read_only=True) as store:
        a = store_alerts.get_alert(store, alert_id)
        events = store_alerts.alert_history(store, alert_id)
        ch = store.characteristic(a.characteristic)
        unit, resolution = ch.unit, ch.resolution
        budget = _run(DetectorSettings.from_lookup, store.get_setting).years_per_false_alert
        zone = store.plant_zone

    def local(stamp: str | None) -> str:  # stored UTC -> plant time, as history shows it
        from lotwatch.store.timeutil import format_local

        try:
            return format_local(stamp, zone=zone) if stamp else "-"
        except ValueError:
            return str(stamp)

    click.echo(clean(f"Alert {a.id}: {a.characteristic} by {a.factor}, {a.kind}, "
                          f"{a.state}"))
    for line in _wrap_plain(stored_alert_sentence(a, unit, budget, resolution)):
        click.echo(clean("  " + line))
    click.echo(clean(f"  opened {local(a.opened_at)} ({a.opened_window}); last {a.last_window}"))
    click.echo(clean(f"Events (times in plant time, {zone}):"))
    for e in events:
        line = f"  {local(e.at)} {e.event}"
        if e.by:
            line += f" by {e.by}"
        if e.window:
            line += f" ({e.window})"
        if e.note:
            line += f": {e.note}"
        click.echo(clean(line))
    click.echo(CAUTION)


def _wrap_plain(text: str) -> list[str]:
    import textwrap

    return textwrap.wrap(text, 76) or [""]


@alerts_group.command("ack")
@click.argument("alert_id", type=int)
@click.option("--by", "by", default=None, help="Who acknowledges (default: your login name).")
@click.option("--note", required=True, help="What was checked or done (required).")
@db_option
@store_errors
def alerts_ack(alert_id: int, by: str | None, note: str, db_path: Path) -> None:
    """Acknowledge an open alert (who, when, note); it stays until the signal clears."""
    from lotwatch.store import alerts as store_alerts

    with open_store(db_path) as store:
        a = store_alerts.acknowledge(store, alert_id, by=by or store.user, note=note)
    click.echo(f"alert {a.id} acknowledged ({a.characteristic} by {a.factor})")


def register(main: click.Group) -> None:
    for cmd in (review_command, report_command, trend_command, alerts_group):
        main.add_command(cmd)
