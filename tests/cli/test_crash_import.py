"""A large import killed with SIGKILL part-way through leaves the store exactly as it was.

The import runs as a real ``lotwatch import`` process. It is killed once SQLite has started
writing the transaction's pages to the write-ahead log (the ``-wal`` file grows past a few MB),
i.e. in the middle of the one BEGIN IMMEDIATE ... COMMIT transaction. SQLite guarantees that a
transaction interrupted before COMMIT is not visible after recovery ("Atomic Commit In SQLite",
sqlite.org/atomiccommit.html; WAL: sqlite.org/wal.html). The test checks that promise end to end:
same ``iterdump`` as before, and ``lotwatch check`` passes.
"""

from __future__ import annotations

import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import polars as pl
import pytest

from tests.cli.helpers import count, dump
from tests.cli.helpers import subprocess_env as env

ROWS = 200_000
WAL_BYTES_BEFORE_KILL = 4_000_000


def lotwatch(*args: object, **kw) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "lotwatch.tui", *map(str, args)], env=env(),
                          capture_output=True, text=True, timeout=120, **kw)


def big_csv(path: Path, rows: int) -> Path:
    rng = np.random.default_rng(7)
    units = np.rint(rng.normal(5000, 6, rows)).astype(np.int64)
    pl.DataFrame({
        "lot": [f"K{i // 2:06d}" for i in range(rows)],  # two replicates per lot
        "characteristic": "fill_volume",
        "value": [f"{u // 10}.{u % 10}" for u in units],
        "measured_at": "2026-11-03T08:15:00Z",
        "site": "S",
        "line": [f"L{(i // 2) % 4}" for i in range(rows)],
        "shift": "early",
    }).write_csv(path)
    return path


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs POSIX SIGKILL")
def test_sigkill_mid_import_leaves_store_unchanged(tmp_path):
    db = tmp_path / "s.sqlite"
    assert lotwatch("init", db).returncode == 0
    assert lotwatch("characteristic", "add", "fill_volume", "--unit", "mL", "--resolution",
                    "0.1", "--plausible", "400", "600", "--db", db).returncode == 0
    assert lotwatch("log", "fill_volume", "500.1", "--tag", "site=S", "--tag", "line=L0",
                    "--tag", "shift=early", "--lot", "BEFORE", "--db", db).returncode == 0
    before = dump(db)
    csv_path = big_csv(tmp_path / "big.csv", ROWS)
    wal = Path(f"{db}-wal")

    proc = subprocess.Popen([sys.executable, "-m", "lotwatch.tui", "import", str(csv_path), "--db",
                             str(db)], env=env(), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    killed = False
    deadline = time.monotonic() + 120
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            if wal.exists() and wal.stat().st_size > WAL_BYTES_BEFORE_KILL:
                proc.send_signal(signal.SIGKILL)
                killed = True
                break
            time.sleep(0.02)
    finally:
        if proc.poll() is None and not killed:
            proc.kill()
        _, err = proc.communicate(timeout=60)
    assert killed, f"the import finished before it could be killed: {err!r}"
    assert proc.returncode == -signal.SIGKILL
    assert b"Storing 200,000 values" in err  # the progress bar had started

    assert dump(db) == before
    check = lotwatch("check", "--db", db)
    assert check.returncode == 0, check.stdout + check.stderr
    assert "1 measurements" in check.stdout

    # the store is writable again straight away (no stale lock, WAL recovered)
    small = tmp_path / "small.csv"
    small.write_text(csv_path.read_text().split("\n", 3)[0] + "\n"
                     + "\n".join(csv_path.read_text().split("\n", 3)[1:3]) + "\n")
    done = lotwatch("import", small, "--db", db)
    assert done.returncode == 0, done.stderr
    assert count(done.stdout, "values stored") == "2"
    assert lotwatch("check", "--db", db).returncode == 0
