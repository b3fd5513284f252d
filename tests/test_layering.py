"""The one direction of imports, checked in a fresh interpreter so that nothing imported by other
tests can hide a violation:

    lotwatch.tui.app ──► lotwatch.tui.services ──► lotwatch.store
    lotwatch.tui.cli ──► lotwatch.tui.render         lotwatch.stats

``store`` and ``stats`` never import each other or the interface; the headless services and the
renderers never import Textual or click.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

UI = ("textual", "textual_plotext", "plotext", "click")


def _modules_after_import(package: str) -> set[str]:
    code = (
        "import json, sys, pkgutil, importlib\n"
        f"pkg = importlib.import_module({package!r})\n"
        "for m in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + '.'):\n"
        "    importlib.import_module(m.name)\n"
        "print(json.dumps(sorted(sys.modules)))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return set(json.loads(out.stdout.strip().splitlines()[-1]))


def _hits(loaded: set[str], forbidden: tuple[str, ...]) -> list[str]:
    return sorted(f for f in forbidden if any(m == f or m.startswith(f + ".") for m in loaded))


@pytest.mark.parametrize(
    "package, forbidden",
    [
        ("lotwatch.store", UI + ("lotwatch.tui", "lotwatch.stats", "platformdirs")),
        ("lotwatch.stats", UI + ("lotwatch.tui", "lotwatch.store", "sqlite3", "sqlite_utils")),
        ("lotwatch.tui.services", UI + ("lotwatch.tui.app", "lotwatch.tui.cli")),
        ("lotwatch.tui.render", UI + ("lotwatch.tui.app", "lotwatch.tui.cli")),
    ],
)
def test_layers_import_only_downwards(package: str, forbidden: tuple[str, ...]) -> None:
    loaded = _modules_after_import(package)
    assert _hits(loaded, forbidden) == [], f"{package} (and its submodules) imported these"
