"""Hostile environments: a full disk, a read-only store, a store deleted or replaced while open,
a store written by a newer lotwatch. Each gets a clear message, never a traceback, and nothing
already stored is lost."""

from __future__ import annotations

import os
import random
import sqlite3
import subprocess
from pathlib import Path

import pytest
from lotwatch.store import LotEntry, Store, StoreError, StoreMissing, StoreTooNew

from tests.reliability.helpers import (
    CHAR,
    TAGS,
    Snapshot,
    assert_clean_refusal,
    check_ok,
    cli_cmd,
    make_store,
    run_cli,
    subprocess_env,
    write_long_csv,
)
from tests.reliability.helpers_env import (
    accounts,  # noqa: F401 - fixture
    fill_up,
    public_dir,
    small_filesystem,
    with_fsize_limit,
)

LOG = ("log", CHAR, "500.1", "--tag", "site=north", "--tag", "line=1", "--tag", "shift=day")


def _seed(path: Path, n: int = 40) -> None:
    with Store.open(path) as s:
        s.log_lots([LotEntry(CHAR, [f"{500 + i % 10 / 10:.1f}"], dict(TAGS), lot=f"OLD-{i:03d}",
                             measured_at="2026-11-20T08:00:00Z") for i in range(n)])


def _big_csv(path: Path, n: int) -> Path:
    rng = random.Random(7)
    rows = [(f"BIG-{i:06d}", CHAR, f"{500 + rng.randint(-30, 30) / 10:.1f}", "north", "1", "day")
            for i in range(n)]
    return write_long_csv(path, rows)


# --- disk full ---------------------------------------------------------------------------------


def test_import_larger_than_the_disk_is_refused_and_nothing_is_lost(tmp_path: Path) -> None:
    with small_filesystem("2m") as fs:
        path = make_store(fs / "store.sqlite")
        _seed(path)
        before = Snapshot.of(path)
        big = _big_csv(tmp_path / "big.csv", 30_000)
        out = assert_clean_refusal(run_cli("import", big, "--db", path), contains=("full",))
        assert "nothing was stored" in out
        assert Snapshot.of(path) == before
        check_ok(path)
        # the store still works afterwards
        res = run_cli(*LOG, "--db", path)
        assert res.returncode == 0, res.stderr


def test_every_command_on_a_full_disk_says_so_and_loses_nothing(tmp_path: Path) -> None:
    with small_filesystem("2m") as fs:
        path = make_store(fs / "store.sqlite")
        _seed(path)
        before = Snapshot.of(path)
        small = write_long_csv(tmp_path / "small.csv",
                               [(f"NEW-{i}", CHAR, "500.0", "north", "1", "day") for i in range(5)])
        # keep a connection open so the -wal/-shm files exist (as when the app is running)
        keep = Store.open(path, read_only=True)
        try:
            filler = fill_up(fs)
            for args in (LOG, ("correct", 1, "500.5", "--reason", "typo"),
                         ("void", 2, "--reason", "bad sample"), ("import", small),
                         ("characteristic", "add", "torque", "--unit", "Nm", "--resolution",
                          "0.01"), ("export", "--out", fs / "out.csv")):
                assert_clean_refusal(run_cli(*args, "--db", path))
            assert_clean_refusal(run_cli("init", fs / "new.sqlite"), contains=("full",))
            assert not (fs / "out.csv").exists()
            res = run_cli("check", "--db", path)
            assert res.returncode == 0, res.stdout + res.stderr
        finally:
            keep.close()
        filler.unlink()
        assert Snapshot.of(path) == before
        check_ok(path)
        assert run_cli(*LOG, "--db", path).returncode == 0


def test_full_disk_before_the_store_is_opened_says_disk_full(tmp_path: Path) -> None:
    with small_filesystem("2m") as fs:
        path = make_store(fs / "store.sqlite")
        _seed(path)
        before = Snapshot.of(path)
        with Store.open(path):  # the last writer to close removes -wal and -shm
            pass
        assert not Path(str(path) + "-shm").exists()
        filler = fill_up(fs)
        for args in (LOG, ("correct", 1, "500.5", "--reason", "typo")):
            out = assert_clean_refusal(run_cli(*args, "--db", path))
            assert "full" in out.lower() and "could not be read" not in out
        filler.unlink()
        assert Snapshot.of(path) == before


def test_file_size_limit_mid_import_is_refused_cleanly(tmp_path: Path) -> None:
    """RLIMIT_FSIZE (no root needed): the import process may not grow any file past a limit a
    little above the store's current size, so its WAL write fails part way."""
    path = make_store(tmp_path / "store.sqlite")
    _seed(path)
    before = Snapshot.of(path)
    big = _big_csv(tmp_path / "big.csv", 20_000)
    limit = path.stat().st_size + 256 * 1024
    res = subprocess.run(cli_cmd("import", big, "--db", path), capture_output=True, text=True,
                         env=subprocess_env(), timeout=120, preexec_fn=with_fsize_limit(limit))
    out = assert_clean_refusal(res)
    assert "nothing was stored" in out or "nothing was changed" in out.lower(), out
    assert Snapshot.of(path) == before
    check_ok(path)


# --- read-only store -----------------------------------------------------------------------------


def test_read_only_file_and_folder(accounts) -> None:  # noqa: F811 - fixture
    """A store file mode 444 in a folder mode 555 (owned by another account): every writing
    command says the store cannot be written; viewing commands and --read-only work."""
    viewer = accounts.user()
    with public_dir() as d:
        folder = d / "ro"
        folder.mkdir()
        path = make_store(folder / "store.sqlite")
        _seed(path)
        before = Snapshot.of(path)
        csv = write_long_csv(d / "new.csv", [("NEW-1", CHAR, "500.0", "north", "1", "day")])
        csv.chmod(0o644)
        path.chmod(0o444)
        folder.chmod(0o555)
        for args in (LOG, ("correct", 1, "500.5", "--reason", "typo"),
                     ("void", 2, "--reason", "bad"), ("import", csv),
                     ("characteristic", "add", "t2", "--unit", "N", "--resolution", "1"),
                     ("factor", "add", "oven")):
            out = assert_clean_refusal(accounts.run(viewer, [*args, "--db", path]))
            assert "cannot be written" in out or "read-only" in out or "not writable" in out, out
        assert_clean_refusal(accounts.run(viewer, ["init", folder / "second.sqlite"]))
        for args in (("history", 1), ("check",), ("characteristic", "list"), ("export",),
                     ("alerts", "list")):
            res = accounts.run(viewer, [*args, "--db", path])
            assert res.returncode == 0, res.stdout + res.stderr
        res = accounts.run(viewer, ["export", "--db", path])
        assert res.stdout.count("\n") == before.measurements + 1
        # the interface read-only: starts, shows the data, refuses to log
        res = accounts.run_python(viewer, _APP_READ_ONLY, str(path))
        assert res.returncode == 0, res.stdout + res.stderr
        assert "fill_volume" in res.stdout and "Traceback" not in res.stdout + res.stderr
        assert "REFUSED" in res.stdout
        folder.chmod(0o755)
        path.chmod(0o644)
        assert Snapshot.of(path) == before


_APP_READ_ONLY = """
import asyncio, sys, time
from tests.tui.tui_helpers import notifications, screen_text
from lotwatch.tui.app.application import LotwatchApp

async def wait(pilot, cond, timeout=30):
    end = time.monotonic() + timeout
    while time.monotonic() < end and not cond():
        await pilot.pause(0.1)

async def main(path):
    app = LotwatchApp(path, read_only=True)
    async with app.run_test(size=(80, 24)) as pilot:
        await wait(pilot, lambda: app.detail is not None)
        print(screen_text(app))
        await pilot.press("n")
        await wait(pilot, lambda: any("read-only" in m for m in notifications(app)), 10)
        msgs = notifications(app)
        print(msgs)
        if any("read-only" in m for m in msgs):
            print("REFUSED")
asyncio.run(main(sys.argv[1]))
"""


# --- deleted, replaced, too new ------------------------------------------------------------------


def test_store_deleted_while_open_refuses_to_write(tmp_path: Path) -> None:
    path = make_store(tmp_path / "store.sqlite")
    with Store.open(path) as s:
        s.log_lots([LotEntry(CHAR, ["500.0"], dict(TAGS), lot="A")])
        for suffix in ("", "-wal", "-shm"):
            Path(str(path) + suffix).unlink(missing_ok=True)
        with pytest.raises(StoreMissing) as info:
            s.log_lots([LotEntry(CHAR, ["500.0"], dict(TAGS), lot="B")])
        assert "deleted or moved" in str(info.value)
        with pytest.raises(StoreMissing):
            s.correct(1, "500.2", reason="typo")


def test_store_replaced_while_open_refuses_to_write(tmp_path: Path) -> None:
    path = make_store(tmp_path / "store.sqlite")
    other = make_store(tmp_path / "backup.sqlite")
    with Store.open(other) as o:
        o.log_lots([LotEntry(CHAR, ["500.0"], dict(TAGS), lot="FROM-BACKUP")])
    with Store.open(path) as s:
        s.log_lots([LotEntry(CHAR, ["500.0"], dict(TAGS), lot="A")])
        os.replace(other, path)
        with pytest.raises(StoreError) as info:
            s.log_lots([LotEntry(CHAR, ["500.0"], dict(TAGS), lot="B")])
        assert "replaced" in str(info.value)


def test_store_deleted_under_the_command_line_says_so(tmp_path: Path) -> None:
    path = make_store(tmp_path / "store.sqlite")
    path.unlink()
    for args in (LOG, ("history", 1), ("check",), ("review",)):
        assert_clean_refusal(run_cli(*args, "--db", path), contains=("no store",))


def _bump_version(path: Path) -> None:
    conn = sqlite3.connect(path)
    v = conn.execute("PRAGMA user_version").fetchone()[0]
    conn.execute(f"PRAGMA user_version = {v + 1}")
    conn.close()


def test_store_from_a_newer_version(tmp_path: Path) -> None:
    path = make_store(tmp_path / "store.sqlite")
    _seed(path, 5)
    _bump_version(path)
    data = path.read_bytes()
    with pytest.raises(StoreTooNew):
        Store.open(path)
    for args in (LOG, ("history", 1), ("check",), ("export",), ("review",), ("import", path),
                 ("characteristic", "list"), ("alerts", "list"), ("watch", "--read-only")):
        assert_clean_refusal(run_cli(*args, "--db", path), contains=("newer", "upgrade"))
    assert path.read_bytes() == data  # not changed


async def test_app_on_a_store_replaced_then_made_too_new(tmp_path: Path) -> None:
    """The interface keeps running and says what happened when its store is replaced by a
    file from a newer lotwatch, and when it is deleted; saving then fails with a message."""
    from lotwatch.tui.app.application import LotwatchApp

    from tests.tui.tui_helpers import notifications, settle

    path = make_store(tmp_path / "store.sqlite")
    _seed(path, 20)
    newer = make_store(tmp_path / "newer.sqlite")
    _bump_version(newer)
    app = LotwatchApp(path, poll_seconds=0.1)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, lambda: app.overview is not None, timeout=20)
        os.replace(newer, path)
        await settle(pilot, lambda: any("newer" in m or "cannot be opened" in m
                                        for m in notifications(app)), timeout=20)
        for p in (path, Path(str(path) + "-wal"), Path(str(path) + "-shm")):
            p.unlink(missing_ok=True)
        await settle(pilot, lambda: any("deleted or moved" in m for m in notifications(app)),
                     timeout=20)
        assert app.is_running
        assert not any("Traceback" in m for m in notifications(app))
