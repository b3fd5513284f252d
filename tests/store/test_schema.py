"""Store files: creation, opening, refusal of foreign/newer/damaged files, transactions, errors."""

from __future__ import annotations

import os
import shutil
import sqlite3
import subprocess
import tempfile
from pathlib import Path

import lotwatch.store
import pytest
import sqlite_utils
from lotwatch.store import (
    BadInput,
    Store,
    StoreCorrupt,
    StoreError,
    StoreExists,
    StoreFull,
    StoreLocked,
    StoreMissing,
    StoreReadOnly,
    StoreTooNew,
    schema,
)

TABLES = {"store_info", "settings", "characteristics", "factors", "lots", "lot_tags",
          "measurements", "audit", "buckets", "alerts", "alert_events"}


def test_create_makes_strict_tables_wal_and_default_factors(store: Store, store_path: Path) -> None:
    rows = dict(store.conn.execute(
        "SELECT name, sql FROM sqlite_master WHERE type = 'table'").fetchall())
    assert TABLES <= set(rows)
    for name in TABLES:
        assert "STRICT" in rows[name], name  # no type inference anywhere
    assert store.conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert store.conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    assert store.conn.execute("PRAGMA busy_timeout").fetchone()[0] == 30_000
    assert schema.user_version(store.conn) == schema.SCHEMA_VERSION
    assert [(f.name, f.required) for f in store.factors()] == [
        ("site", True), ("line", True), ("shift", True)]
    assert store.info()["created_by"] == schema.LOTWATCH_VERSION
    # An independent reader (sqlite-utils, test extra) sees the same file: every table STRICT.
    other = sqlite_utils.Database(store.path)
    try:
        assert other.table("factors").count == 3
        assert all(other.table(t).strict for t in other.table_names()
                   if not t.startswith("sqlite_"))
    finally:
        other.close()


def test_strict_tables_refuse_wrong_types(store: Store) -> None:
    with pytest.raises(sqlite3.IntegrityError, match="cannot store TEXT value in INTEGER column factors.required"):
        with store.write():
            store.conn.execute("INSERT INTO factors(name, required, created_at) VALUES ('a', 'yes', 'b')")


def test_foreign_keys_enforced(store: Store) -> None:
    with pytest.raises(sqlite3.IntegrityError, match="FOREIGN KEY"):
        with store.write():
            store.conn.execute("INSERT INTO lot_tags(lot_id, key, value) VALUES (99, 'k', 'v')")


def test_migrations_are_contiguous() -> None:
    assert sorted(schema.MIGRATIONS) == list(range(1, schema.SCHEMA_VERSION + 1))


def test_reopen(store_path: Path) -> None:
    Store.create(store_path).close()
    with Store.open(store_path) as s:
        assert len(s.factors()) == 3
    with Store.open(store_path, read_only=True) as s:
        assert len(s.factors()) == 3


def test_create_refuses_existing_file(store_path: Path) -> None:
    store_path.write_text("keep me")
    with pytest.raises(StoreExists, match="already exists"):
        Store.create(store_path)
    assert store_path.read_text() == "keep me"


def test_create_makes_parent_folders(tmp_path: Path) -> None:
    with Store.create(tmp_path / "a" / "b" / "s.sqlite") as s:
        assert s.path.exists()


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(StoreMissing, match="no store at"):
        Store.open(tmp_path / "nope.sqlite")
    assert not (tmp_path / "nope.sqlite").exists()  # opening never creates a file


def test_random_bytes_are_corrupt(tmp_path: Path) -> None:
    p = tmp_path / "junk.sqlite"
    p.write_bytes(os.urandom(8192))
    before = p.read_bytes()
    with pytest.raises(StoreCorrupt, match="not a readable lotwatch store"):
        Store.open(p)
    with pytest.raises(StoreCorrupt):
        Store.open(p, read_only=True)
    assert p.read_bytes() == before


def test_empty_file_is_not_a_store(tmp_path: Path) -> None:
    p = tmp_path / "empty.sqlite"
    p.write_bytes(b"")
    with pytest.raises(StoreCorrupt, match="is an empty file, not a lotwatch store"):
        Store.open(p)


def test_other_programs_database(tmp_path: Path) -> None:
    p = tmp_path / "other.sqlite"
    conn = sqlite3.connect(p)
    conn.execute("CREATE TABLE invoices (id INTEGER PRIMARY KEY, total REAL)")
    conn.commit()
    conn.close()
    with pytest.raises(StoreCorrupt, match="another program"):
        Store.open(p)


def test_damaged_store_is_corrupt(store_path: Path) -> None:
    Store.create(store_path).close()
    data = bytearray(store_path.read_bytes())
    data[100:4096] = os.urandom(4096 - 100)  # wreck the schema page after the header
    store_path.write_bytes(bytes(data))
    with pytest.raises(StoreCorrupt):
        Store.open(store_path)


def test_newer_schema_refused(store_path: Path) -> None:
    Store.create(store_path).close()
    conn = sqlite3.connect(store_path)
    conn.execute(f"PRAGMA user_version = {schema.SCHEMA_VERSION + 1}")
    conn.execute("UPDATE store_info SET value = '9.4.0' WHERE key = 'last_written_by'")
    conn.commit()
    conn.close()
    with pytest.raises(StoreTooNew, match=r"written by lotwatch 9\.4\.0 .*Upgrade lotwatch"):
        Store.open(store_path)
    with pytest.raises(StoreTooNew):
        Store.open(store_path, read_only=True)


def test_read_only_refuses_writes(store_path: Path) -> None:
    Store.create(store_path).close()
    with Store.open(store_path, read_only=True) as s:
        with pytest.raises(StoreReadOnly, match="opened read-only"):
            s.set_setting("window", "7d")
        with pytest.raises(StoreReadOnly):
            s.add_factor("oven")


def test_read_only_sees_other_writers(store_path: Path) -> None:
    writer = Store.create(store_path)
    reader = Store.open(store_path, read_only=True)
    try:
        v0 = reader.data_version()
        writer.set_setting("window", "14d")
        assert reader.get_setting("window") == "14d"
        assert reader.data_version() != v0  # another connection committed
    finally:
        reader.close()
        writer.close()


@pytest.mark.skipif(os.geteuid() == 0, reason="root ignores folder permissions")
def test_read_only_in_unwritable_folder(tmp_path: Path) -> None:
    folder = tmp_path / "ro"
    folder.mkdir()
    Store.create(folder / "s.sqlite").close()
    folder.chmod(0o555)
    try:
        with Store.open(folder / "s.sqlite", read_only=True) as s:
            assert len(s.factors()) == 3
    finally:
        folder.chmod(0o755)


def _nobody_python() -> str | None:
    """/usr/bin/python3 (3.11+) runnable as user nobody via runuser, when the tests run as root."""
    if os.geteuid() != 0 or not shutil.which("runuser") or not Path("/usr/bin/python3").exists():
        return None
    probe = subprocess.run(["runuser", "-u", "nobody", "--", "/usr/bin/python3", "-c",
                            "import sys; print(sys.version_info >= (3, 11))"],
                           capture_output=True, text=True)
    return "/usr/bin/python3" if probe.stdout.strip() == "True" else None


def test_read_only_in_unwritable_folder_as_other_user() -> None:
    """As root, run the open as user nobody: the WAL store's folder is not writable for it."""
    python = _nobody_python()
    if python is None:
        pytest.skip("needs root, runuser and a system python 3.11+ for user nobody")
    with tempfile.TemporaryDirectory() as tmp:  # under /tmp: reachable by nobody (pytest's is not)
        _run_as_nobody(python, Path(tmp))


def _run_as_nobody(python: str, tmp_path: Path) -> None:
    code = tmp_path / "code"
    shutil.copytree(Path(lotwatch.store.__file__).resolve().parent, code / "lotwatch" / "store",
                    ignore=shutil.ignore_patterns("__pycache__"))
    folder = tmp_path / "ro"
    folder.mkdir()
    Store.create(folder / "s.sqlite").close()
    for p in (tmp_path, code, *code.rglob("*"), folder):
        p.chmod(0o755 if p.is_dir() else 0o644)
    (folder / "s.sqlite").chmod(0o644)
    script = (
        "import sys; sys.path.insert(0, sys.argv[1])\n"
        "from lotwatch.store import Store, StoreReadOnly\n"
        "with Store.open(sys.argv[2], read_only=True) as s:\n"
        "    print(len(s.factors()), s.immutable)\n"
        "try:\n"
        "    s = Store.open(sys.argv[2]); s.set_setting('a', 'b')\n"
        "except StoreReadOnly as exc:\n"
        "    print('refused:', exc)\n"
    )
    out = subprocess.run(["runuser", "-u", "nobody", "--", python, "-c", script, str(code),
                          str(folder / "s.sqlite")], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert lines[0] == "3 True"  # opened read-only via SQLite's immutable mode
    assert lines[1].startswith("refused:") and "cannot be" in lines[1]


def test_file_not_writable(store_path: Path) -> None:
    if os.geteuid() == 0:
        pytest.skip("root can write read-only files")
    Store.create(store_path).close()
    store_path.chmod(0o444)
    try:
        with pytest.raises(StoreReadOnly):
            with Store.open(store_path) as s:
                s.set_setting("a", "b")
    finally:
        store_path.chmod(0o644)


def test_locked_past_timeout(store_path: Path) -> None:
    Store.create(store_path).close()
    other = sqlite3.connect(store_path, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")
    try:
        with Store.open(store_path, timeout=0.2) as s:
            before = s.get_setting("x")
            with pytest.raises(StoreLocked, match="is busy.*Nothing was changed"):
                s.set_setting("x", "1")
            assert s.get_setting("x") == before
    finally:
        other.execute("ROLLBACK")
        other.close()


def test_disk_full_rolls_back(store: Store, dump) -> None:
    # SQLite reports SQLITE_FULL when max_page_count is reached, as for a full disk.
    pages = store.conn.execute("PRAGMA page_count").fetchone()[0]
    store.conn.execute(f"PRAGMA max_page_count = {pages}")
    before = dump(store)
    with pytest.raises(StoreFull, match="is full"):
        with store.write():
            store.conn.executemany("INSERT INTO settings(key, value) VALUES (?, ?)",
                                   [(f"k{i}", "x" * 500) for i in range(2000)])
    assert dump(store) == before


def test_write_rolls_back_on_error(store: Store, dump) -> None:
    before = dump(store)
    with pytest.raises(RuntimeError):
        with store.write():
            store.conn.execute("INSERT INTO settings(key, value) VALUES ('a', 'b')")
            raise RuntimeError("boom")
    assert dump(store) == before
    assert not store.conn.in_transaction


def test_nested_write_is_a_savepoint(store: Store) -> None:
    with store.write():
        store.conn.execute("INSERT INTO settings(key, value) VALUES ('outer', '1')")
        with pytest.raises(ValueError):
            with store.write():
                store.conn.execute("INSERT INTO settings(key, value) VALUES ('inner', '1')")
                raise ValueError("undo only the inner part")
        with store.write():
            store.conn.execute("INSERT INTO settings(key, value) VALUES ('inner2', '1')")
    assert store.get_setting("outer") == "1"
    assert store.get_setting("inner") is None
    assert store.get_setting("inner2") == "1"


def test_settings_round_trip(store: Store) -> None:
    assert store.get_setting("window", "28d") == "28d"
    store.set_setting("window", "7d")
    store.set_setting("window", "14d")
    assert store.get_setting("window") == "14d"
    store.set_setting("window", None)
    assert store.get_setting("window") is None
    with pytest.raises(BadInput, match="empty setting name"):
        store.set_setting("", "x")


def test_store_is_thread_bound(store: Store) -> None:
    import threading

    errors: list[BaseException] = []

    def use() -> None:
        try:
            store.factors()
        except BaseException as exc:  # noqa: BLE001 - we want whatever sqlite3 raises
            errors.append(exc)

    t = threading.Thread(target=use)
    t.start()
    t.join()
    assert errors and isinstance(errors[0], sqlite3.ProgrammingError)


def test_closed_store_refuses_writes(store_path: Path) -> None:
    s = Store.create(store_path)
    s.close()
    s.close()  # idempotent
    with pytest.raises(StoreError, match="closed"):
        s.set_setting("a", "b")


def test_older_store_is_upgraded_on_open(store_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    Store.create(store_path).close()

    def to_next(conn: sqlite3.Connection) -> None:
        conn.execute("CREATE TABLE extra (id INTEGER PRIMARY KEY) STRICT")

    nxt = schema.SCHEMA_VERSION + 1
    monkeypatch.setitem(schema.MIGRATIONS, nxt, to_next)
    monkeypatch.setattr(schema, "SCHEMA_VERSION", nxt)
    with pytest.raises(StoreReadOnly, match="older store format"):
        Store.open(store_path, read_only=True)  # a read-only open never upgrades
    with Store.open(store_path) as s:
        assert schema.user_version(s.conn) == nxt
        assert schema.has_table(s.conn, "extra")
        assert s.info()["schema_version"] == str(nxt)
        assert s.info()["created_by"] == schema.LOTWATCH_VERSION


def test_failed_upgrade_leaves_store_as_it_was(store_path: Path,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    Store.create(store_path).close()

    def broken(conn: sqlite3.Connection) -> None:
        conn.execute("CREATE TABLE half (id INTEGER PRIMARY KEY) STRICT")
        raise RuntimeError("migration bug")

    nxt = schema.SCHEMA_VERSION + 1
    monkeypatch.setitem(schema.MIGRATIONS, nxt, broken)
    monkeypatch.setattr(schema, "SCHEMA_VERSION", nxt)
    with pytest.raises(RuntimeError, match="migration bug"):
        Store.open(store_path)
    monkeypatch.undo()
    with Store.open(store_path) as s:
        assert schema.user_version(s.conn) == schema.SCHEMA_VERSION
        assert not schema.has_table(s.conn, "half")


def test_an_older_store_is_upgraded_on_open_and_keeps_its_data(store_path: Path) -> None:
    """A store at schema version 1 (before the bucket day index, the lot counts and the plant
    zone, the detectors and retiring) gains migrations 2 to 5 when opened for writing, with its measurements intact and
    its days unmoved (versioned migrations: common practice)."""
    import sqlite3

    from lotwatch.store import LotEntry

    with Store.create(store_path, zone="America/Chicago") as s:
        s.add_characteristic("fill", unit="mL", resolution="0.1")
        s.log_lots([LotEntry("fill", ["500.1", "500.3"], {"site": "A", "line": "1", "shift": "x"},
                             lot="L1", measured_at="2026-11-30T03:00:00Z")])
    conn = sqlite3.connect(store_path)
    # undo migrations 5 (retiring), 4 (detectors), 3 (lots, zone) and 2 (day index) by hand:
    # a version-1 file
    conn.execute("ALTER TABLE characteristics DROP COLUMN retired_at")
    conn.execute("ALTER TABLE factors DROP COLUMN retired_at")
    for trig in ("insert", "update", "delete"):
        conn.execute(f"DROP TRIGGER buckets_dirty_{trig}")
    conn.execute("DROP TABLE detector_days")
    conn.execute("DROP TABLE detector_progress")
    conn.execute("DROP INDEX alerts_char_factor")
    for col in ("kind", "onset", "detected_on", "size_low", "size_high",
                "percent_of_tolerance", "evidence"):
        conn.execute(f"ALTER TABLE alerts DROP COLUMN {col}")
    conn.execute("CREATE INDEX alerts_char_factor ON alerts(characteristic_id, factor, state)")
    conn.execute("DROP INDEX buckets_day")
    conn.execute("ALTER TABLE buckets DROP COLUMN lots")
    conn.execute("DELETE FROM settings WHERE key = 'plant.time_zone'")
    conn.execute("UPDATE measurements SET day = substr(measured_at, 1, 10)")  # old: UTC days
    conn.execute("UPDATE buckets SET day = '2026-11-30'")
    conn.execute("PRAGMA user_version = 1")
    conn.commit()
    conn.close()
    with Store.open(store_path) as s:
        assert schema.user_version(s.conn) == schema.SCHEMA_VERSION
        names = {r[0] for r in s.conn.execute("SELECT name FROM sqlite_master WHERE type='index'")}
        assert "buckets_day" in names
        assert s.plant_zone == "UTC"  # an old store keeps UTC days: nothing moves
        assert schema.has_table(s.conn, "detector_days")
        assert [c.retired_at for c in s.characteristics()] == [None]
        assert s.check().ok
        assert s.conn.execute("SELECT count(*) FROM measurements").fetchone()[0] == 1 + 1
        assert {r[-1] for r in s.bucket_frame().rows()} == {1}  # two replicates, one lot
