"""The one direction of imports: ``store`` and ``stats`` never pull in the interface.

Checked in a fresh interpreter so that nothing imported by other tests can hide a violation.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

FORBIDDEN_FOR_ALL = ("textual", "plotext", "textual_plotext", "tui")


def _modules_after_import(package: str) -> set[str]:
    code = (
        "import json, sys, pkgutil, importlib\n"
        f"pkg = importlib.import_module({package!r})\n"
        "for m in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + '.'):\n"
        "    importlib.import_module(m.name)\n"
        "print(json.dumps(sorted({n.split('.')[0] for n in sys.modules})))\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True
    )
    return set(json.loads(out.stdout.strip().splitlines()[-1]))


@pytest.mark.parametrize("package, also_forbidden", [("store", ("stats",)), ("stats", ("store", "sqlite3", "sqlite_utils"))])
def test_headless_packages_do_not_import_the_interface(package: str, also_forbidden: tuple[str, ...]) -> None:
    loaded = _modules_after_import(package)
    bad = sorted(loaded & set(FORBIDDEN_FOR_ALL + also_forbidden))
    assert bad == [], f"{package} (and its submodules) imported {bad}"
