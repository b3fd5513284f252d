"""Every command, subcommand and option of ``lotwatch`` has help text (walks ``main``
recursively, so commands added later are covered too), and ``--help`` works for each."""

from __future__ import annotations

import click
import pytest
from lotwatch.tui.cli import main


def walk(group: click.Group, path: tuple[str, ...] = ()):
    for name, command in sorted(group.commands.items()):
        yield (*path, name), command
        if isinstance(command, click.Group):
            yield from walk(command, (*path, name))


COMMANDS = list(walk(main))


FOUNDATION = {"init", "characteristic add", "characteristic list", "characteristic show",
              "characteristic edit", "factor add", "factor list", "log", "correct", "void",
              "history", "check", "import", "export"}


def test_the_foundation_commands_are_registered():
    assert FOUNDATION <= {" ".join(p) for p, _ in COMMANDS}


def test_every_foundation_command_takes_db():
    for path, command in COMMANDS:
        if " ".join(path) in FOUNDATION:
            opts = {o for p in command.params if isinstance(p, click.Option) for o in p.opts}
            assert "--db" in opts, " ".join(path)


@pytest.mark.parametrize("path, command", COMMANDS, ids=[" ".join(p) for p, _ in COMMANDS])
def test_command_and_options_have_help(path, command):
    assert (command.help or "").strip(), f"lotwatch {' '.join(path)} has no help text"
    assert (command.get_short_help_str(limit=200) or "").strip()
    for param in command.params:
        if isinstance(param, click.Option) and not param.hidden:
            assert (param.help or "").strip(), (
                f"lotwatch {' '.join(path)}: option {param.opts[0]} has no help text")


@pytest.mark.parametrize("path, command", COMMANDS, ids=[" ".join(p) for p, _ in COMMANDS])
def test_help_runs(path, command, tmp_path, monkeypatch):
    from click.testing import CliRunner

    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path))
    result = CliRunner().invoke(main, [*path, "--help"])
    assert result.exit_code == 0, result.output
    assert "Usage:" in result.output and ("lotwatch" in result.output or "main" in result.output)
    assert not (tmp_path / "lotwatch").exists()  # --help never creates a store


def test_main_help_lists_commands():
    from click.testing import CliRunner

    result = CliRunner().invoke(main, ["--help"])
    assert result.exit_code == 0
    for name in ("init", "import", "export", "log", "check"):
        assert f"  {name} " in result.output
