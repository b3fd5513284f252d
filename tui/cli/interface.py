"""``lotwatch watch`` (the terminal interface) and ``lotwatch demo`` (the same on invented data)."""

from __future__ import annotations

from pathlib import Path

import click
from lotwatch.tui.cli.common import db_option, open_store, store_errors

REPLAY_WEEKS = 8


def _replay_reviews(path: Path) -> tuple[int, int]:
    """Record the weekly reviews of the demo's last ``REPLAY_WEEKS`` Sundays, oldest first, as a
    site would have done each week, so the new demo store has alerts with a history.

    Returns (reviews recorded, alerts opened). Runs the real review engine on the demo data.
    """
    from datetime import timedelta

    from lotwatch.store import Store
    from lotwatch.tui.services.review_engine import run_review
    from lotwatch.tui.services.review_inputs import plant_today

    opened = 0
    with Store.open(path) as store:
        today = plant_today(store.plant_zone)  # weeks are the plant's calendar weeks
        last_sunday = today - timedelta(days=today.isoweekday() % 7)
        days = [last_sunday - timedelta(weeks=i) for i in range(REPLAY_WEEKS - 1, -1, -1)]
        for day in days:
            opened += len(run_review(store, as_of=day, persist=True,
                                     by="weekly review (demo replay)").opened)
    return len(days), opened


def _run_app(db_path: Path, read_only: bool) -> None:
    from lotwatch.tui.app.application import LotwatchApp

    LotwatchApp(db_path, read_only=read_only).run()


@click.command("watch")
@db_option
@click.option("--read-only", "read_only", is_flag=True,
              help="Open the store read-only: look, but log nothing and acknowledge nothing.")
@store_errors
def watch(db_path: Path, read_only: bool) -> None:
    """Open the terminal interface on the store (80x24 and up, keyboard only; ? for help).

    Shows each characteristic's groups, ANOVA table and companions, trend and alerts, updating
    live as lots arrive. A statistical signal is a reason to investigate, not a disposition of
    product: follow your site's quality procedures and qualified people.
    """
    open_store(db_path, read_only=read_only).close()  # clear message now if it cannot be opened
    _run_app(db_path, read_only)


@click.command("demo")
@click.option("--fresh", is_flag=True, help="Rebuild the demo store from scratch.")
@click.option("--no-open", "no_open", is_flag=True,
              help="Only build (or reuse) the demo store; print its path and a summary.")
@click.option("--read-only", "read_only", is_flag=True, help="Open the demo read-only.")
@store_errors
def demo(fresh: bool, no_open: bool, read_only: bool) -> None:
    """Build (or reuse) a store of invented demo data and open the interface on it.

    The demo store lives in your data directory, apart from your own store. Every site, line,
    product and number in it is invented. A new demo store gets its last 8 weekly reviews
    recorded (oldest first), so its alerts have a history to look at.
    """
    from lotwatch.store.demo import build_demo_store, demo_summary
    from lotwatch.tui.services.paths import demo_store_path

    path = demo_store_path()
    existed = path.exists()
    if fresh or not existed:
        click.echo(f"Building the demo store at {path} (invented data)…", err=True)
    build_demo_store(path, fresh=fresh)
    if fresh or not existed:
        reviews, opened = _replay_reviews(path)
        click.echo(f"Recorded the last {reviews} weekly reviews: {opened} alert(s) opened.",
                   err=True)
    if no_open:
        store = open_store(path)
        try:
            click.echo(str(path))
            click.echo(demo_summary(store))
        finally:
            store.close()
        return
    _run_app(path, read_only)


def register(main: click.Group) -> None:
    """Add ``watch`` and ``demo`` to the ``lotwatch`` command group."""
    main.add_command(watch)
    main.add_command(demo)
