"""The ``lotwatch`` command line: a thin click layer over ``store``, ``stats`` and the app.

Each group of commands lives in its own module under ``tui/cli`` and registers itself here.
Heavy modules (polars, scipy, textual) are imported inside the commands, so ``--help`` is quick.
"""

from __future__ import annotations

import importlib

import click
from lotwatch.tui import __version__

COMMAND_MODULES = [
    "lotwatch.tui.cli.setup",
    "lotwatch.tui.cli.retire",
    "lotwatch.tui.cli.lots",
    "lotwatch.tui.cli.transfer",
    "lotwatch.tui.cli.analyze",
    "lotwatch.tui.cli.review",
    "lotwatch.tui.cli.settings",
    "lotwatch.tui.cli.zone",
    "lotwatch.tui.cli.interface",
]


@click.group(invoke_without_command=True, context_settings={"help_option_names": ["-h", "--help"]})
@click.option("--db", "db", type=click.Path(dir_okay=False), default=None,
              help="Store file for every command (same as each command's --db).")
@click.version_option(__version__, prog_name="lotwatch")
@click.pass_context
def main(ctx: click.Context, db: str | None) -> None:
    """lotwatch: watch lines, sites and shifts for drift between groups.

    Keeps tagged lot measurements in a SQLite store, reruns one-way ANOVA and its companions over
    rolling windows with false-discovery control, and shows it all in a terminal interface.
    Without a command, opens the interface on the store (same as `lotwatch watch`).

    A statistical signal is a reason to investigate, not a disposition of product: follow your
    site's quality procedures and qualified people.
    """
    ctx.ensure_object(dict)
    ctx.obj["db"] = db
    if ctx.invoked_subcommand is None:
        watch = main.get_command(ctx, "watch")
        assert watch is not None  # registered above
        ctx.invoke(watch)


def _register_all() -> None:
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(main)


_register_all()
