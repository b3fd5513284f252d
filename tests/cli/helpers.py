"""Helpers shared by the command-line tests: a subprocess environment that finds the repo, the
counts of an import summary, and a byte-for-byte dump of a store."""

from __future__ import annotations

import os
import sqlite3
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def subprocess_env() -> dict[str, str]:
    """The environment for ``python -m lotwatch.tui`` in a subprocess, with the repo importable."""
    e = dict(os.environ)
    e["PYTHONPATH"] = str(ROOT) + (os.pathsep + e["PYTHONPATH"] if e.get("PYTHONPATH") else "")
    return e


def count(output: str, label: str) -> str:
    """The number after ``label:`` in an import summary."""
    for line in output.splitlines():
        if line.strip().startswith(label + ":"):
            return line.split(":", 1)[1].strip()
    raise AssertionError(f"no {label!r} in {output!r}")


def dump(path: Path) -> list[str]:
    """Every row and schema statement of the store, to compare before and after."""
    conn = sqlite3.connect(path)
    try:
        return list(conn.iterdump())
    finally:
        conn.close()
