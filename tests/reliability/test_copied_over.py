"""A backup copied over the store file in place (``cp backup plant.sqlite``) while a session has it
open keeps the inode, so only the file's contents tell: lotwatch refuses to write into it (exit 2,
nothing stored), and ``lotwatch restore`` then puts the backup back in a state ``check`` accepts.

Why a copy over an open WAL store is harmful: https://www.sqlite.org/howtocorrupt.html, 1.3.
"""

from __future__ import annotations

import os
import sqlite3
import subprocess
from pathlib import Path

import pytest
from lotwatch.store import Store, StoreError
from lotwatch.store.file_generation import SEQ_KEY, seq_on_disk

from tests.reliability.helpers import (
    CHAR,
    TAGS,
    assert_clean_refusal,
    backup_copy,
    check_ok,
    log_named_lots,
    lot_value_counts,
    make_store,
    run_cli,
)


def _checkpoint(path: Path) -> None:
    """What SQLite does on its own once the log grows (wal_autocheckpoint): copy the log's
    committed pages into the file on disk."""
    conn = sqlite3.connect(path)
    try:
        conn.execute("PRAGMA wal_checkpoint(PASSIVE)").fetchone()
    finally:
        conn.close()


def _cp(src: Path, dst: Path) -> None:
    # another process, as a person at a shell would (an open()/close() of the store file in this
    # process would itself drop the session's POSIX locks)
    subprocess.run(["cp", str(src), str(dst)], check=True)


def _cli_log(path: Path, lot: str) -> subprocess.CompletedProcess:
    return run_cli("log", CHAR, "500.2", *(f"--tag={k}={v}" for k, v in TAGS.items()),
                   "--lot", lot, "--db", path)


def test_a_backup_copied_over_an_open_store_is_refused_then_restore_repairs(
        tmp_path: Path) -> None:
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as s:
        log_named_lots(s, "A1", "A2")
    backup = backup_copy(path, tmp_path / "monday.sqlite")
    session = Store.open(path)  # an interface left open on the store
    try:
        log_named_lots(session, "B1", "B2")
        _checkpoint(path)  # the day's work reaches the file on disk
        log_named_lots(session, "B3")  # and more sits in the write-ahead log
        inode = path.stat().st_ino
        _cp(backup, path)
        assert path.stat().st_ino == inode  # same file: the inode check alone cannot tell
        with pytest.raises(StoreError, match="copied over"):
            log_named_lots(session, "LATE")
        res = _cli_log(path, "LATE2")
        out = assert_clean_refusal(res, contains=("copied over", "lotwatch restore"))
        assert res.returncode == 2, out
        counts = lot_value_counts(path)
        assert "LATE" not in counts and "LATE2" not in counts
        # the documented repair, done while the session is still open
        res = run_cli("restore", backup, "--db", path)
        assert res.returncode == 0, res.stdout + res.stderr
        with pytest.raises(StoreError):
            log_named_lots(session, "LATE3")  # the open session must be reopened first
    finally:
        session.close()
    assert set(lot_value_counts(path)) == {"A1", "A2"}
    check_ok(path)
    res = _cli_log(path, "C1")
    assert res.returncode == 0, res.stdout + res.stderr
    assert set(lot_value_counts(path)) == {"A1", "A2", "C1"}
    check_ok(path)


def test_the_refusal_holds_for_a_session_opened_after_the_copy(tmp_path: Path) -> None:
    """The floor recorded in the store itself (not only in the session that saw the file) lets a
    process that opens the store after the copy refuse too."""
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as s:
        log_named_lots(s, "A1")
    backup = backup_copy(path, tmp_path / "monday.sqlite")
    holder = Store.open(path)
    try:
        log_named_lots(holder, "B1")
        _checkpoint(path)
        log_named_lots(holder, "B2")  # records the counter it found on disk, above the backup's
        _cp(backup, path)
        res = _cli_log(path, "LATE")
        assert_clean_refusal(res, contains=("copied over",))
        assert res.returncode == 2
    finally:
        holder.close()


def test_ordinary_use_is_never_refused(tmp_path: Path) -> None:
    """Checkpoints, several sessions, a close and reopen, and a copy of the store that is not older
    than the file on disk (a state the log has passed through) all keep writing."""
    path = make_store(tmp_path / "plant.sqlite")
    a, b = Store.open(path), Store.open(path)
    try:
        for i in range(20):
            log_named_lots(a if i % 2 else b, f"L{i}")
            if i % 5 == 0:
                _checkpoint(path)
        disk = seq_on_disk(path)
        assert disk is not None and disk > 0
        with sqlite3.connect(path) as conn:
            (seq,) = conn.execute("SELECT value FROM store_info WHERE key = ?",
                                  (SEQ_KEY,)).fetchone()
        assert disk <= int(seq)
    finally:
        a.close()
        b.close()
    with Store.open(path) as s:
        log_named_lots(s, "AFTER")
    assert len(lot_value_counts(path)) == 21
    check_ok(path)


def test_counter_on_disk_is_read_without_dropping_the_sessions_locks(tmp_path: Path) -> None:
    """Reading the file on disk goes through SQLite's own handle: while a session is open here,
    another process closing the store must not see itself as the last one and delete the log
    (a plain open()/close() of the file in this process would drop our POSIX locks)."""
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as session:
        log_named_lots(session, "A1")  # a write reads the counter on disk
        assert Path(f"{path}-wal").exists()
        subprocess.run([os.environ.get("PYTHON", "python3"), "-c",
                        "import sqlite3,sys; c=sqlite3.connect(sys.argv[1]); "
                        "c.execute('SELECT count(*) FROM lots').fetchone(); c.close()",
                        str(path)], check=True)
        assert Path(f"{path}-wal").exists(), "our locks were dropped: the log was deleted"
        log_named_lots(session, "A2")
    assert set(lot_value_counts(path)) == {"A1", "A2"}


def test_check_reports_a_store_copied_over(tmp_path: Path) -> None:
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as s:
        log_named_lots(s, "A1")
    backup = backup_copy(path, tmp_path / "monday.sqlite")
    holder = Store.open(path)
    try:
        log_named_lots(holder, "B1")
        _checkpoint(path)
        log_named_lots(holder, "B2")
        check_ok(path)  # nothing wrong yet
        _cp(backup, path)
        res = run_cli("check", "--db", path)
        out = assert_clean_refusal(res, contains=("copied over", "lotwatch restore"))
        assert res.returncode != 0, out
    finally:
        holder.close()
