"""Stores that are damaged, not files at all, or never finished.

- ``check`` on copies of a store with one bit flipped: every run ends with a report (exit 0 or 1)
  or a message (exit 2), never an exception. SQLite's own checks (``PRAGMA integrity_check``)
  do not see every flip: a flipped bit inside text leaves the page valid but the text no longer
  UTF-8 (sqlite.org, "PRAGMA integrity_check" does not verify text encodings).
- ``--db`` naming a FIFO, a device or a folder is refused before SQLite opens it: opening a FIFO
  for reading waits for a writer forever (POSIX open(2)), and /dev/null is not a store that
  anyone should be told to delete.
- ``init`` killed half-way leaves nothing under the store's name, so the next ``init`` works.
"""

from __future__ import annotations

import os
import random
import signal
import sqlite3
import subprocess
from pathlib import Path

from click.testing import CliRunner
from lotwatch.store import LotEntry, Store
from lotwatch.tui.cli import main

from tests.reliability.helpers import PYTHON, assert_clean_refusal, run_cli, subprocess_env

DAMAGED_COPIES = 300


def _small_store(path: Path) -> bytes:
    with Store.create(path, zone="UTC") as s:
        s.add_characteristic("fv", unit="mL", resolution="0.1", target=500)
        s.log_lots([LotEntry("fv", [f"{500 + (i % 7) / 10:.1f}"],
                             {"site": "A", "line": str(i % 3), "shift": "d"}, lot=f"L{i}",
                             measured_at=f"2026-11-{1 + i % 28:02d}T08:00:00Z")
                    for i in range(200)])
    conn = sqlite3.connect(path)  # everything into the main file, no -wal beside it
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.execute("PRAGMA journal_mode = DELETE")
    conn.close()
    return path.read_bytes()


def test_check_never_crashes_on_single_bit_damage(tmp_path: Path) -> None:
    data = _small_store(tmp_path / "base.sqlite")
    seed = random.SystemRandom().randrange(2**32)  # fresh flips every run; printed on failure
    rng = random.Random(seed)
    outcomes: dict[int, int] = {}
    copy = tmp_path / "damaged.sqlite"
    for _ in range(DAMAGED_COPIES):
        damaged = bytearray(data)
        pos, bit = rng.randrange(len(damaged)), rng.randrange(8)
        damaged[pos] ^= 1 << bit
        for suffix in ("-wal", "-shm"):
            Path(f"{copy}{suffix}").unlink(missing_ok=True)
        copy.write_bytes(bytes(damaged))
        res = CliRunner().invoke(main, ["check", "--db", str(copy)])
        assert isinstance(res.exception, (SystemExit, type(None))), (
            f"seed {seed}: byte {pos} bit {bit}: {res.exception!r}\n{res.output}")
        assert res.exit_code in (0, 1, 2), (seed, pos, bit, res.output)
        assert res.output.strip(), (seed, pos, bit)
        outcomes[res.exit_code] = outcomes.get(res.exit_code, 0) + 1
    assert sum(outcomes.values()) == DAMAGED_COPIES
    assert outcomes.get(1, 0) + outcomes.get(2, 0) > 0, outcomes  # damage is found


def test_fifo_as_store_is_refused_without_hanging(tmp_path: Path) -> None:
    fifo = tmp_path / "pipe.sqlite"
    os.mkfifo(fifo)
    for args in (("check",), ("export",), ("review", "--dry-run"), ("log", "fv", "1.0")):
        res = run_cli(*args, "--db", fifo, timeout=60)
        out = assert_clean_refusal(res, contains=("FIFO", str(fifo)))
        assert res.returncode == 2, out
        assert "disk I/O error" not in out
    assert os.path.exists(fifo) and not os.path.isfile(fifo)


def test_device_as_store_gets_advice_not_delete(tmp_path: Path) -> None:
    for args in (("check",), ("export",)):
        res = run_cli(*args, "--db", "/dev/null", timeout=60)
        out = assert_clean_refusal(res, contains=("/dev/null", "device"))
        assert res.returncode == 2
        assert "delete" not in out.lower()
    res = run_cli("init", "/dev/null", timeout=60)
    out = assert_clean_refusal(res, contains=("/dev/null", "not a regular file"))
    assert "remove" not in out.lower() and "delete" not in out.lower()


_KILLED_INIT = """
import os, signal, sys
from lotwatch.store import Store, schema

def die(*a, **k):
    os.kill(os.getpid(), signal.SIGKILL)  # power cut in the middle of building the schema

schema.migrate = die
Store.create(sys.argv[1])
"""


def test_init_killed_half_way_leaves_nothing_in_the_way(tmp_path: Path) -> None:
    target = tmp_path / "plant.sqlite"
    res = subprocess.run([PYTHON, "-c", _KILLED_INIT, str(target)], env=subprocess_env(),
                         capture_output=True, text=True, timeout=60)
    assert res.returncode == -signal.SIGKILL, res.stderr
    assert not target.exists(), "a half-made store is left under the store's name"
    res = run_cli("init", target)
    assert res.returncode == 0, res.stdout + res.stderr
    ok = run_cli("check", "--db", target)
    assert ok.returncode == 0 and "consistent" in ok.stdout, ok.stdout + ok.stderr
