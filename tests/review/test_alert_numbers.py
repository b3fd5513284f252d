"""Alert sizes are written the same way in the alerts list, the alert's sentence and its JSON:
in the characteristic's unit, with its resolution's decimals plus one (issue 11, item 4: units
beside every size; one rule for decimals). Oracle: the stored sizes read with plain SQL."""

from __future__ import annotations

import json
import sqlite3

from click.testing import CliRunner
from lotwatch.tui.cli import main


def run(db, *args):
    return CliRunner().invoke(main, ["--db", str(db), *args])


def _stored(path) -> dict[int, tuple[str, str, str, float, float, float]]:
    with sqlite3.connect(path) as conn:
        rows = conn.execute(
            "SELECT a.id, c.name, c.unit, c.resolution, a.size, a.size_low, a.size_high "
            "FROM alerts a JOIN characteristics c ON c.id = a.characteristic_id").fetchall()
    return {r[0]: r[1:] for r in rows}


def _decimals(resolution: str) -> int:
    return len(resolution.split(".")[1]) + 1 if "." in resolution else 1  # plus one for means


def test_alert_sizes_carry_unit_and_resolution_decimals(demo_copy):
    stored = _stored(demo_copy)
    assert stored
    listing = run(demo_copy, "alerts", "list").output.splitlines()
    items = {a["id"]: a for a in json.loads(run(demo_copy, "alerts", "list", "--format",
                                                "json").output)}
    for alert_id, (_name, unit, res, size, low, high) in stored.items():
        d = _decimals(res)
        want = f"{size:.{d}f} {unit}"
        row = next(line for line in listing if line.split()[:1] == [str(alert_id)])
        assert want in row, (row, want)
        sentence = f"by {size:+.{d}f} {unit} (95% interval {low:.{d}f} to {high:.{d}f})"
        shown = " ".join(run(demo_copy, "alerts", "show", str(alert_id)).output.split())
        assert sentence in shown, (sentence, shown)
        assert sentence in items[alert_id]["text"]
