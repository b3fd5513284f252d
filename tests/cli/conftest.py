"""Fixtures for command-line tests: an isolated environment and a ready store.

Every test gets its own data directory (XDG_DATA_HOME) and LOTWATCH_DB pointing into tmp_path, so
nothing touches the real user's files.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner, Result


@pytest.fixture
def env(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> dict[str, str]:
    data = tmp_path / "xdg-data"
    monkeypatch.setenv("XDG_DATA_HOME", str(data))
    monkeypatch.setenv("LOTWATCH_DB", str(tmp_path / "default.sqlite"))
    return {"XDG_DATA_HOME": str(data), "LOTWATCH_DB": str(tmp_path / "default.sqlite")}


@pytest.fixture
def cli(env):
    """``cli(*args)`` runs ``lotwatch args`` in-process and returns the click Result."""
    from lotwatch.tui.cli import main

    runner = CliRunner()

    def run(*args: str, input: str | None = None) -> Result:
        return runner.invoke(main, [str(a) for a in args], input=input, catch_exceptions=True)

    return run


@pytest.fixture
def db(tmp_path: Path, cli) -> Path:
    """A store with fill_volume (mL, 0.1, LSL 497 target 500 USL 503, plausible 450..550)."""
    path = tmp_path / "lab.sqlite"
    for args in (
        ("init", path),
        ("characteristic", "add", "fill_volume", "--unit", "mL", "--resolution", "0.1",
         "--lsl", "497", "--target", "500", "--usl", "503", "--plausible", "450", "550",
         "--db", path),
    ):
        result = cli(*args)
        assert result.exit_code == 0, result.output
    return path
