"""SIGKILL at random points (fixed seed) during imports, corrections, voids and alert updates.

Each kill point starts a subprocess (the real ``lotwatch`` command line, or a small driver
script calling the store API in a loop that prints a line after each committed operation) and
kills it with SIGKILL after a random delay. Afterwards the store must pass ``lotwatch check``
and ``PRAGMA integrity_check``, and every operation must be wholly there or wholly absent:

* an import file's lots are all stored or none (count by lot id);
* the operations a driver stored number what it reported committed, or one more (the one
  in flight when the kill came, if its COMMIT reached the disk);
* every measurement's current value and voided flag agree with its audit trail, and every
  alert's state with its event trail (so no half-written correction, void or alert update);
* alert updates are written in batches of known size: a batch's events are all there or none.
"""

from __future__ import annotations

import json
import random
import signal
import subprocess
import time
from collections import Counter
from pathlib import Path

import pytest
from lotwatch.store import LotEntry, Store

from tests.reliability.helpers import (
    CHAR,
    PYTHON,
    Snapshot,
    check_ok,
    cli_cmd,
    make_store,
    ro_connect,
    subprocess_env,
)

SEED = 20261201
PAIRS = [(CHAR, f) for f in ("site", "line", "shift")] + [("torque", f)
                                                         for f in ("site", "line", "shift")]
BATCH = len(PAIRS)

_DRIVER_CORRECT = """
import sys
from lotwatch.store import Store
path, tag, start = sys.argv[1], sys.argv[2], int(sys.argv[3])
with Store.open(path) as s:
    ids = [r[0] for r in s.conn.execute(
        "SELECT id FROM measurements WHERE voided = 0 AND characteristic_id = "
        "(SELECT id FROM characteristics WHERE name = 'fill_volume') ORDER BY id")]
    k = 0
    while True:
        mid = ids[(start + k) % len(ids)]
        cur = s.conn.execute("SELECT current_units FROM measurements WHERE id = ?", (mid,)).fetchone()[0]
        new = 4950 + (cur - 4950 + 1 + k % 7) % 100
        s.correct(mid, f"{new / 10:.1f}", reason=f"{tag} {k}", by=f"fixer{k % 3}")
        print(f"done {k}", flush=True)
        k += 1
"""

_DRIVER_VOID = """
import sys
from lotwatch.store import LotEntry, Store
path, tag = sys.argv[1], sys.argv[2]
with Store.open(path) as s:
    k = 0
    while True:  # log a lot, then void one of its values: runs until killed
        out = s.log_lots([LotEntry("torque", ["12.01", "11.99"],
                                   {"site": "north", "line": "3", "shift": "night"},
                                   lot=f"{tag}-V{k}")])
        s.void(out.measurement_ids[k % 2], reason=f"{tag} {k}", by="voider")
        print(f"done {k}", flush=True)
        k += 1
"""

_DRIVER_ALERTS = """
import sys
from lotwatch.store import Store
from lotwatch.store.alerts import Transition, acknowledge, latest_alert, record_transitions
path, tag = sys.argv[1], sys.argv[2]
pairs = [tuple(p.split(":")) for p in sys.argv[3].split(",")]
with Store.open(path) as s:
    k = 0
    while True:
        batch = []
        for char, factor in pairs:
            a = latest_alert(s, char, factor)
            if a is None:
                event = "opened"
            elif a.state == "cleared":
                event = "reopened"
            else:
                event = ("held", "cleared")[k % 2]
            batch.append(Transition(char, factor, event, f"W{k}", ["1", "2"], "higher", 0.5,
                                    0.1, 0.001, {"batch": f"{tag}-{k}"}))
        record_transitions(s, batch, by="review")
        print(f"done {k}", flush=True)
        open_ones = [latest_alert(s, c, f) for c, f in pairs]
        for a in open_ones:
            if a is not None and a.state == "open":
                acknowledge(s, a.id, by="engineer", note=f"{tag}-ack-{k}")
                print(f"ack {k}", flush=True)
                break
        k += 1
"""


def _populate(path: Path, n_lots: int = 300) -> None:
    rng = random.Random(SEED)
    with Store.open(path) as s:
        entries = []
        for i in range(n_lots):
            tags = {"site": ("north", "south")[i % 2], "line": str(1 + i % 3),
                    "shift": ("day", "night")[i % 2]}
            entries.append(LotEntry(CHAR, [f"{500 + rng.randint(-40, 40) / 10:.1f}"
                                           for _ in range(2)], tags, lot=f"P{i:04d}",
                                    measured_at=f"2026-11-{1 + i % 28:02d}T08:00:00Z"))
            entries.append(LotEntry("torque", [f"{12 + rng.randint(-50, 50) / 100:.2f}"], tags,
                                    lot=f"P{i:04d}", measured_at=f"2026-11-{1 + i % 28:02d}T08:00:00Z"))
        s.log_lots(entries)


def _import_file(path: Path, point: int, n_lots: int) -> Path:
    rng = random.Random(point)
    lines = ["lot,characteristic,value,site,line,shift,measured_at"]
    for j in range(n_lots):
        lines.append(f"K{point:02d}-{j:05d},{CHAR},{500 + rng.randint(-30, 30) / 10:.1f},"
                     f"{('north', 'south')[j % 2]},{1 + j % 3},day,2026-11-{1 + j % 28:02d}T09:00:00Z")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def audit_invariants(path: Path) -> None:
    """Every measurement's state agrees with its audit trail; every alert's with its events."""
    conn = ro_connect(path)
    try:
        rows = conn.execute(
            "SELECT id, original_units, current_units, voided FROM measurements").fetchall()
        trail: dict[int, list[tuple]] = {}
        for mid, action, old, new in conn.execute(
                "SELECT measurement_id, action, old_units, new_units FROM audit ORDER BY id"):
            trail.setdefault(mid, []).append((action, old, new))
        bad = []
        for mid, orig, cur, voided in rows:
            steps = trail.get(mid, [])
            if not steps or steps[0][0] != "log" or steps[0][2] != orig:
                bad.append((mid, "no log row with the original value", steps[:1]))
                continue
            value, is_void = orig, 0
            for action, old, new in steps[1:]:
                if action == "correct":
                    if is_void or old != value:
                        bad.append((mid, "correction does not start from the current value"))
                    value = new
                elif action == "void":
                    if is_void or old != value:
                        bad.append((mid, "void of a voided value or of another value"))
                    is_void = 1
                else:
                    bad.append((mid, f"second {action!r} row"))
            if value != cur or is_void != voided:
                bad.append((mid, "stored value/voided flag disagree with the audit trail",
                            (cur, voided), (value, is_void)))
        assert bad == [], bad[:5]
        orphans = conn.execute("SELECT count(*) FROM audit WHERE measurement_id NOT IN "
                               "(SELECT id FROM measurements)").fetchone()[0]
        assert orphans == 0

        replay: dict[int, str] = {}
        for alert_id, event in conn.execute("SELECT alert_id, event FROM alert_events ORDER BY id"):
            replay[alert_id] = {"opened": "open", "reopened": "open", "cleared": "cleared",
                                "acknowledged": "acknowledged"}.get(event, replay.get(alert_id))
        states = dict(conn.execute("SELECT id, state FROM alerts").fetchall())
        assert states == replay
        batches = Counter(json.loads(d).get("batch") for (d,) in conn.execute(
            "SELECT details FROM alert_events WHERE event != 'acknowledged'"))
        assert {b: n for b, n in batches.items() if n != BATCH} == {}
    finally:
        conn.close()


def _committed(stdout: str, word: str = "done") -> int:
    return sum(1 for line in stdout.splitlines() if line.startswith(word + " "))


def _count(path: Path, sql: str, *args: object) -> int:
    conn = ro_connect(path)
    try:
        return conn.execute(sql, args).fetchone()[0]
    finally:
        conn.close()


def _kill_after(cmd: list[str], delay: float) -> tuple[str, bool]:
    """Start ``cmd``, SIGKILL it after ``delay`` s; (its stdout, whether it was still running)."""
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            env=subprocess_env())
    try:
        proc.wait(timeout=delay)
        running = False
    except subprocess.TimeoutExpired:
        running = True
        proc.send_signal(signal.SIGKILL)
    out, err = proc.communicate(timeout=60)
    if not running:
        assert proc.returncode == 0, err
    return out, running


def _kill_point(path: Path, tmp: Path, point: int, kind: str, delay: float,
                import_lots: int) -> dict[str, object]:
    before = Snapshot.of(path)
    tag = f"kill{point:02d}"
    outcome: dict[str, object] = {"point": point, "kind": kind, "delay": round(delay, 2)}
    if kind == "import-cli":
        csv_path = _import_file(tmp / f"{tag}.csv", point, import_lots)
        out, running = _kill_after(cli_cmd("import", csv_path, "--db", path), delay)
        stored = _count(path, "SELECT count(*) FROM lots WHERE lot_code LIKE ?", f"K{point:02d}-%")
        assert stored in (0, import_lots), f"{stored} of {import_lots} lots of the file stored"
        after = Snapshot.of(path)
        assert after.measurements - before.measurements == stored
        assert after.audit - before.audit == stored
        outcome["result"] = "all stored" if stored else "none stored"
    elif kind in ("correct-api", "void-api", "alert-api"):
        script = {"correct-api": _DRIVER_CORRECT, "void-api": _DRIVER_VOID,
                  "alert-api": _DRIVER_ALERTS}[kind]
        extra = {"correct-api": [str(point * 37)], "void-api": [],
                 "alert-api": [",".join(f"{c}:{f}" for c, f in PAIRS)]}[kind]
        out, running = _kill_after([PYTHON, "-c", script, str(path), tag, *extra], delay)
        reported = _committed(out)
        if kind == "alert-api":
            found = _count(path, "SELECT count(DISTINCT json_extract(details, '$.batch')) FROM "
                           "alert_events WHERE json_extract(details, '$.batch') LIKE ?", f"{tag}-%")
            acks = _count(path, "SELECT count(*) FROM alert_events WHERE note LIKE ?",
                          f"{tag}-ack-%")
            assert _committed(out, "ack") <= acks <= _committed(out, "ack") + 1
        else:
            found = _count(path, "SELECT count(*) FROM audit WHERE reason LIKE ?", f"{tag} %")
        assert reported <= found <= reported + 1, (reported, found)
        outcome["result"] = f"{found} committed ({reported} reported before the kill)"
    elif kind == "correct-cli":
        mid = _count(path, "SELECT id FROM measurements WHERE voided = 0 AND characteristic_id = "
                     "(SELECT id FROM characteristics WHERE name = ?) ORDER BY id LIMIT 1 "
                     "OFFSET ?", CHAR, point)
        cur = _count(path, "SELECT current_units FROM measurements WHERE id = ?", mid)
        new = f"{(cur + 1) / 10:.1f}" if cur < 5050 else f"{(cur - 1) / 10:.1f}"
        out, running = _kill_after(cli_cmd("correct", mid, new, "--reason", tag, "--db", path),
                                   delay)
        found = _count(path, "SELECT count(*) FROM audit WHERE reason = ?", tag)
        assert found in (0, 1)
        if not running:
            assert found == 1
        outcome["result"] = "correction stored" if found else "no correction"
    else:
        raise ValueError(kind)
    outcome["killed"] = running
    check_ok(path)
    audit_invariants(path)
    return outcome


KINDS = ("import-cli", "correct-api", "void-api", "alert-api", "correct-cli")
# API drivers loop until killed: any delay past their start (~0.2 s) interrupts them.
DRIVER_DELAY = (0.25, 1.2)


def _calibrate(path: Path, tmp: Path, import_lots: int) -> dict[str, float]:
    """How long an uninterrupted CLI import and correction take here (on a scratch copy), so
    the kill delays can be drawn across the whole run of each command."""
    scratch = tmp / "calibrate.sqlite"
    with Store.open(path) as s:
        s.conn.execute("VACUUM INTO ?", (str(scratch),))
    csv_path = _import_file(tmp / "calibrate.csv", 99, import_lots)
    times = {}
    for kind, cmd in (("import-cli", cli_cmd("import", csv_path, "--db", scratch)),
                      ("correct-cli", cli_cmd("correct", 1, "500.0", "--reason", "calibrate",
                                              "--db", scratch))):
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, capture_output=True, env=subprocess_env())
        times[kind] = time.perf_counter() - t0
    csv_path.unlink()
    return times


def _run_points(tmp_path: Path, n_points: int, import_lots: int) -> list[dict[str, object]]:
    path = make_store(tmp_path / "killed.sqlite", extra_chars=True)
    _populate(path)
    full = _calibrate(path, tmp_path, import_lots)
    print(f"uninterrupted run times: {full}")
    rng = random.Random(SEED)
    outcomes = []
    for point in range(n_points):
        kind = KINDS[point % len(KINDS)]
        if kind in full:
            delay = rng.uniform(0.3, 0.98) * full[kind]
        else:
            delay = rng.uniform(*DRIVER_DELAY)
        outcomes.append(_kill_point(path, tmp_path, point, kind, delay, import_lots))
    return outcomes


def test_three_kill_points(tmp_path: Path) -> None:
    """Fast version: one import, one correction loop, one void loop killed."""
    outcomes = _run_points(tmp_path, 3, 1000)
    for o in outcomes:
        print(o)


@pytest.mark.slow
def test_twenty_kill_points(tmp_path: Path) -> None:
    outcomes = _run_points(tmp_path, 20, 20_000)
    for o in outcomes:
        print(o)
    killed = sum(1 for o in outcomes if o["killed"])
    print(f"{len(outcomes)} kill points, {killed} processes killed while running")
    # the seed and delays must actually interrupt most operations, or the test proves little
    assert killed >= 12
