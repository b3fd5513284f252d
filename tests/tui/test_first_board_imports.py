"""The app's first screen and its first numbers load no numpy, scipy or polars: the board's
early rows come from the detectors' stored state (``detection.detector_status``), which only
reads. scipy alone costs about a second to import on a loaded machine; the speed itself is
measured by tests/bench/bench_tui.py."""

from __future__ import annotations

import subprocess
import sys

HEAVY = ("numpy", "scipy", "polars")

CODE = r"""
import sys
from lotwatch.tui.app.application import LotwatchApp  # the first screen's code
from lotwatch.store import Store
from lotwatch.tui.services.board import early_rows
from lotwatch.tui.services.detection import detector_status
from lotwatch.tui.services.loaders import char_info, read_alerts

with Store.open(sys.argv[1], read_only=True) as store:
    chars = [char_info(c) for c in store.characteristics()]
    rows = early_rows(detector_status(store), chars,
                      [a for a in read_alerts(store) if a.state in ("open", "acknowledged")])
print(len(rows), *sorted(m for m in HEAVY if m in sys.modules))
"""


def test_the_first_board_reads_the_stored_detectors_without_numpy_or_scipy(demo_copy):
    done = subprocess.run([sys.executable, "-c", f"HEAVY = {HEAVY!r}\n" + CODE,
                           str(demo_copy)], capture_output=True, text=True, check=True)
    count, *loaded = done.stdout.split()
    assert int(count) > 0  # the demo's board has rows from its detectors
    assert loaded == []
