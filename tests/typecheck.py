"""Type-check lotwatch with mypy against a baseline that may only shrink.

Run ``python tests/typecheck.py`` (the slow test ``tests/test_types.py`` runs the same check).

The repository folders store/, stats/ and tui/ install as lotwatch.store, lotwatch.stats and
lotwatch.tui (setuptools package-dir), which mypy cannot map from the source tree, and an editable
install's import hook is invisible to it. So the check builds a folder ``lotwatch/`` of symbolic
links to the three folders and runs ``mypy -p lotwatch.store -p lotwatch.stats -p lotwatch.tui``
there, with pyproject.toml's [tool.mypy] settings.

Each known error is one line ``path [code]`` in tests/mypy_baseline.txt (no line number or
message text, so edits elsewhere in the file and new numpy stubs do not churn it; mypy's full
output is printed for the details). The check fails on any error not in the
baseline, and on a baseline line no longer reported (delete it: the baseline only shrinks).
"""

from __future__ import annotations

import hashlib
import os
import re
import subprocess
import sys
import tempfile
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
BASELINE = Path(__file__).resolve().parent / "mypy_baseline.txt"
PACKAGES = ("store", "stats", "tui")
_ERROR = re.compile(r"^(?P<path>[^:]+):\d+(?::\d+)?: error: (?P<msg>.*?)\s*"
                    r"\[(?P<code>[a-z-]+)\]$")


def _source_tree() -> Path:
    # one folder per checkout (several worktrees may check at once on one machine)
    tag = hashlib.sha256(str(ROOT).encode()).hexdigest()[:12]
    base = Path(tempfile.gettempdir()) / f"lotwatch-typecheck-{os.getuid()}-{tag}"
    pkg = base / "lotwatch"
    pkg.mkdir(parents=True, exist_ok=True)
    for name in PACKAGES:
        link = pkg / name
        if link.is_symlink() and link.resolve() != (ROOT / name).resolve():
            link.unlink()
        if not link.is_symlink():
            link.symlink_to(ROOT / name, target_is_directory=True)
    return base


def run_mypy() -> tuple[list[str], str]:
    """The normalised error lines and mypy's whole output."""
    base = _source_tree()
    cmd = [sys.executable, "-m", "mypy", "--config-file", str(ROOT / "pyproject.toml"),
           "--cache-dir", str(base / ".mypy_cache"), "--no-error-summary",
           "--hide-error-context", "--no-pretty", "--show-error-codes"]
    for name in PACKAGES:
        cmd += ["-p", f"lotwatch.{name}"]
    out = subprocess.run(cmd, cwd=base, capture_output=True, text=True)
    text = out.stdout + out.stderr
    if out.returncode not in (0, 1):
        raise RuntimeError(f"mypy did not run (exit {out.returncode}):\n{text}")
    errors = [f"{m['path']} [{m['code']}]" for line in text.splitlines()
              if (m := _ERROR.match(line))]
    if out.returncode == 1 and not errors:
        raise RuntimeError(f"mypy failed without a recognisable error line:\n{text}")
    return sorted(errors), text


def read_baseline() -> list[str]:
    lines = BASELINE.read_text(encoding="utf-8").splitlines()
    return sorted(ln for ln in lines if ln.strip() and not ln.startswith("#"))


def compare(found: list[str], baseline: list[str]) -> tuple[list[str], list[str]]:
    """(new errors, baseline lines no longer reported), counting repeats."""
    f, b = Counter(found), Counter(baseline)
    return sorted((f - b).elements()), sorted((b - f).elements())


def main() -> int:
    found, text = run_mypy()
    new, gone = compare(found, read_baseline())
    if new:
        print(text)
    for line in new:
        print(f"new type error: {line}")
    for line in gone:
        print(f"fixed (delete it from {BASELINE.name}): {line}")
    print(f"mypy: {len(found)} error(s), {len(read_baseline())} in the baseline; "
          f"{len(new)} new, {len(gone)} fixed")
    return 1 if new or gone else 0


if __name__ == "__main__":
    sys.exit(main())
