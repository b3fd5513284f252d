"""Start-up time of commands that compute no statistic, against a bare interpreter in the same run.

Run: python tests/bench/bench_startup.py [--quick]

Each command runs as a fresh process (``python -m lotwatch.tui ...``) on a small store; the figure
is the median wall time of several runs. Baselines: ``python -c pass`` (the interpreter's own
start) and ``python -c "import click"``. Goal: every listed command <= 0.3 s.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from lotwatch.store import Store  # noqa: E402

GOAL_S = 0.3
COMMANDS = [["alerts", "list"], ["settings", "list"], ["characteristic", "list"],
            ["factor", "list"], ["zone", "show"]]


def _median_run(argv: list[str], repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        subprocess.run(argv, check=True, capture_output=True)
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="3 runs each instead of 11")
    args = ap.parse_args()
    repeats = 3 if args.quick else 11
    py = sys.executable
    with tempfile.TemporaryDirectory() as tmp:
        db = Path(tmp) / "s.sqlite"
        with Store.create(db) as s:
            s.add_characteristic("fill_volume", unit="mL", resolution="0.1")
        bare = _median_run([py, "-c", "pass"], repeats)
        click_only = _median_run([py, "-c", "import click"], repeats)
        print(f"python -c pass:        {bare:.3f} s (baseline)")
        print(f"python -c 'import click': {click_only:.3f} s ({click_only / bare:.1f}x)")
        worst = 0.0
        for cmd in COMMANDS:
            t = _median_run([py, "-m", "lotwatch.tui", *cmd, "--db", str(db)], repeats)
            worst = max(worst, t)
            print(f"lotwatch {' '.join(cmd):<20} {t:.3f} s ({t / bare:.1f}x the bare "
                  f"interpreter; goal <= {GOAL_S} s: {'met' if t <= GOAL_S else 'NOT met'})")
        print(f"slowest: {worst:.3f} s; median of {repeats} runs each")


if __name__ == "__main__":
    main()
