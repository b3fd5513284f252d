"""`lotwatch restore`: a backup put back in place of a store, even while a session has it open.

SQLite's online backup API copies pages under the destination's locks, so other connections see
the old or the new database, never a mixture (https://www.sqlite.org/backup.html); copying a file
over an open WAL database instead corrupts it (https://www.sqlite.org/howtocorrupt.html, 1.3).
A session that had the store open when it was restored refuses to write until reopened.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from lotwatch.store import Store, StoreError

from tests.reliability.helpers import (
    CHAR,
    TAGS,
    Snapshot,
    assert_clean_refusal,
    backup_copy,
    check_ok,
    log_named_lots,
    lot_value_counts,
    make_store,
    run_cli,
)


def test_restore_while_a_session_is_open(tmp_path: Path) -> None:
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as s:
        log_named_lots(s, "A1", "A2")
    backup = backup_copy(path, tmp_path / "monday.sqlite")
    session = Store.open(path)  # an interface left open on the store
    try:
        log_named_lots(session, "B1", "B2", "B3")
        assert set(lot_value_counts(path)) == {"A1", "A2", "B1", "B2", "B3"}
        res = run_cli("restore", backup, "--db", path)
        assert res.returncode == 0, res.stdout + res.stderr
        assert "2 lots" in res.stdout and "before-restore" in res.stdout
        assert set(lot_value_counts(path)) == {"A1", "A2"}
        check_ok(path)
        before = Snapshot.of(path)
        with pytest.raises(StoreError, match="restored from a backup"):
            log_named_lots(session, "LATE")
        assert Snapshot.of(path) == before
    finally:
        session.close()
    (kept,) = tmp_path.glob("plant.before-restore-*.sqlite")
    assert set(lot_value_counts(kept)) == {"A1", "A2", "B1", "B2", "B3"}
    # a fresh process writes into the restored store as usual
    res = run_cli("log", CHAR, "500.2", *(f"--tag={k}={v}" for k, v in TAGS.items()),
                  "--lot", "C1", "--db", path)
    assert res.returncode == 0, res.stdout + res.stderr
    assert set(lot_value_counts(path)) == {"A1", "A2", "C1"}
    check_ok(path)


def test_restore_refuses_a_bad_backup_and_changes_nothing(tmp_path: Path) -> None:
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as s:
        log_named_lots(s, "A1")
    before = Snapshot.of(path)
    not_store = tmp_path / "notes.sqlite"
    conn = sqlite3.connect(not_store)
    conn.execute("CREATE TABLE t(x)")
    conn.commit()
    conn.close()
    damaged = backup_copy(path, tmp_path / "damaged.sqlite")
    data = bytearray(damaged.read_bytes())
    data[4096:4104] = b"\xff" * 8  # the b-tree header of page 2 (page size 4096)
    damaged.write_bytes(bytes(data))
    text = tmp_path / "text.sqlite"
    text.write_text("not a database at all\n" * 20)
    for bad in (not_store, damaged, text, tmp_path / "missing.sqlite", path):
        res = run_cli("restore", bad, "--db", path)
        assert_clean_refusal(res)
        assert res.returncode == 2
        assert Snapshot.of(path) == before
    assert not list(tmp_path.glob("*.before-restore-*"))


def test_restore_into_a_missing_store_creates_it(tmp_path: Path) -> None:
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as s:
        log_named_lots(s, "A1")
    backup = backup_copy(path, tmp_path / "b.sqlite")
    target = tmp_path / "new" / "plant.sqlite"
    target.parent.mkdir()
    res = run_cli("restore", backup, "--db", target)
    assert res.returncode == 0, res.stdout + res.stderr
    assert set(lot_value_counts(target)) == {"A1"}
    check_ok(target)


def test_restore_over_a_damaged_store_keeps_its_bytes(tmp_path: Path) -> None:
    path = make_store(tmp_path / "plant.sqlite")
    with Store.open(path) as s:
        log_named_lots(s, "A1")
    backup = backup_copy(path, tmp_path / "b.sqlite")
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.close()
    data = bytearray(path.read_bytes())
    data[4096:4104] = b"\xff" * 8  # the b-tree header of page 2: the store is damaged
    path.write_bytes(bytes(data))
    res = run_cli("restore", backup, "--db", path)
    assert res.returncode == 0, res.stdout + res.stderr
    (kept,) = tmp_path.glob("plant.before-restore-*.sqlite")
    assert kept.read_bytes()[4096:4104] == b"\xff" * 8  # the damaged page, kept as it was
    assert set(lot_value_counts(path)) == {"A1"}
    check_ok(path)
