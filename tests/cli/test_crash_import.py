"""A large import killed with SIGKILL part-way through leaves a consistent store, and running it
again completes it.

The import runs as a real ``lotwatch import`` process and is killed once SQLite is writing to the
write-ahead log (the ``-wal`` file grows past a few MB). An import writes in bounded transactions
that never split a lot (store.bulk), so the kill may land after some of them committed. SQLite
guarantees that the transaction interrupted before COMMIT is not visible after recovery ("Atomic
Commit In SQLite", sqlite.org/atomiccommit.html; WAL: sqlite.org/wal.html). The test checks the
promise the README makes end to end: ``lotwatch check`` passes, every stored lot is whole, and
the same import run again stores exactly the rest.
"""

from __future__ import annotations

import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import polars as pl
import pytest

from tests.cli.helpers import count
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
def test_sigkill_mid_import_leaves_whole_lots_and_a_rerun_completes_it(tmp_path):
    db = tmp_path / "s.sqlite"
    assert lotwatch("init", db).returncode == 0
    assert lotwatch("characteristic", "add", "fill_volume", "--unit", "mL", "--resolution",
                    "0.1", "--plausible", "400", "600", "--db", db).returncode == 0
    assert lotwatch("log", "fill_volume", "500.1", "--tag", "site=S", "--tag", "line=L0",
                    "--tag", "shift=early", "--lot", "BEFORE", "--db", db).returncode == 0
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

    check = lotwatch("check", "--db", db)
    assert check.returncode == 0, check.stdout + check.stderr
    conn = sqlite3.connect(db)
    try:
        # committed transactions hold whole lots: both replicates or neither
        halves = conn.execute("SELECT count(*) FROM (SELECT lot_id FROM measurements "
                              "GROUP BY lot_id HAVING count(*) NOT IN (1, 2))").fetchone()[0]
        partial = conn.execute("SELECT count(*) FROM (SELECT m.lot_id FROM measurements m "
                               "JOIN lots l ON l.id = m.lot_id WHERE l.lot_code != 'BEFORE' "
                               "GROUP BY m.lot_id HAVING count(*) != 2)").fetchone()[0]
        stored_first = conn.execute("SELECT count(*) FROM measurements").fetchone()[0] - 1
    finally:
        conn.close()
    assert (halves, partial) == (0, 0)
    assert 0 <= stored_first < ROWS

    # the store is writable again straight away (no stale lock, WAL recovered), and the same
    # import run again stores the rest and skips what the first run committed
    done = lotwatch("import", csv_path, "--db", db)
    assert done.returncode == 0, done.stderr
    assert count(done.stdout, "values stored") == f"{ROWS - stored_first:,}"
    assert count(done.stdout, "skipped as exact duplicates") == f"{stored_first:,}"
    check = lotwatch("check", "--db", db)
    assert check.returncode == 0, check.stdout + check.stderr
    assert f"{ROWS + 1:,} measurements" in check.stdout or f"{ROWS + 1} measurements" in check.stdout
