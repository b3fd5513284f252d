"""Restoring a store from a backup copy, safely even while other lotwatch processes have it open.

Copying a backup over the store file (``cp backup store``) while an interface has the store open
corrupts it: SQLite's write-ahead log and shared-memory index of the open session still describe
the old file and are replayed over the copy (https://www.sqlite.org/howtocorrupt.html, section
1.3). ``restore`` instead copies the backup's pages into the live store through SQLite's online
backup API (https://www.sqlite.org/backup.html), under SQLite's own locks, so every connection
sees either the old store or the restored one, never a mixture.

Before anything is copied: the backup must be an intact lotwatch store (``PRAGMA
integrity_check``) this version can read, and the store as it was is saved beside it
(``NAME.before-restore-YYYYmmddTHHMMSS.sqlite``), so a restore can itself be undone. Afterwards
a fresh restore token in ``store_info`` tells every ``Store`` that had the file open that its
view is stale: it refuses to write until it is opened again (``store.transaction``).
"""

from __future__ import annotations

import os
import secrets
import shutil
import sqlite3
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from lotwatch.store import file_generation, opening, schema
from lotwatch.store.errors import StoreCorrupt, StoreError
from lotwatch.store.transaction import DEFAULT_TIMEOUT, RESTORE_KEY, translate_error


class RestoreRefused(StoreError):
    """The restore was not done; the store is unchanged."""


@dataclass(frozen=True)
class RestoreSummary:
    """The restored store, where the store as it was is kept, and what the store now holds."""

    target: Path
    backup: Path
    kept: Path | None
    measurements: int
    lots: int


def _check_backup(backup: Path, timeout: float) -> sqlite3.Connection:
    """A read-only connection to an intact lotwatch store at ``backup``, else RestoreRefused."""
    try:
        conn, _ = opening.open_file(backup, read_only=True, timeout=timeout)
    except StoreError as exc:
        raise RestoreRefused(f"the backup cannot be used: {exc}; nothing was restored") from None
    try:
        opening.check_identity(conn, backup)
        problems = [r[0] for r in conn.execute("PRAGMA integrity_check").fetchall()]
    except StoreError as exc:
        conn.close()
        raise RestoreRefused(f"the backup cannot be used: {exc}; nothing was restored") from None
    except (sqlite3.DatabaseError, UnicodeDecodeError) as exc:
        conn.close()
        raise RestoreRefused(f"the backup {backup} is damaged ({exc}); nothing was restored") \
            from None
    if problems != ["ok"]:
        conn.close()
        raise RestoreRefused(f"the backup {backup} is damaged ({problems[0]}); nothing was "
                             "restored. Try an older backup.")
    return conn


def _kept_path(target: Path) -> Path:
    stamp = datetime.now(UTC).strftime("%Y%m%dT%H%M%S")
    candidate = target.with_name(f"{target.stem}.before-restore-{stamp}{target.suffix}")
    n = 2
    while candidate.exists():
        candidate = target.with_name(f"{target.stem}.before-restore-{stamp}-{n}{target.suffix}")
        n += 1
    return candidate


def _keep_copy(target: Path, timeout: float) -> Path:
    """Save the store as it is now beside it (through SQLite; a damaged store byte for byte)."""
    kept = _kept_path(target)
    current = opening.connect(target, "ro", timeout)
    keep = opening.connect(kept, "rwc", timeout)
    try:
        current.backup(keep)
        copied = True
    except sqlite3.DatabaseError:
        copied = False
    finally:
        keep.close()
        current.close()
    if not copied:
        # Only once no connection of ours is open on the store: closing another descriptor of
        # a file drops this process's POSIX locks on it (sqlite.org/howtocorrupt.html, 2.2).
        kept.unlink(missing_ok=True)
        shutil.copyfile(target, kept)
    return kept


def _counters_before(conn: sqlite3.Connection) -> tuple[int, int] | None:
    """The live store's write counters (``store.file_generation``), None if unreadable."""
    try:
        return file_generation.counters(conn)
    except (sqlite3.DatabaseError, UnicodeDecodeError):
        return None


def _copy_pages(src: sqlite3.Connection, dst: sqlite3.Connection) -> None:
    src.backup(dst)  # the whole database in one step, under the destination's write lock


def restore(backup: str | os.PathLike[str], target: str | os.PathLike[str], *,
            timeout: float = DEFAULT_TIMEOUT) -> RestoreSummary:
    """Replace the contents of the store ``target`` by those of ``backup`` (see the module
    docstring). A missing ``target`` is created. Raises RestoreRefused (nothing changed)."""
    from lotwatch.store.connection import Store

    backup, target = Path(backup).expanduser(), Path(target).expanduser()
    if target.exists() and backup.exists() and os.path.samefile(backup, target):
        raise RestoreRefused(f"{backup} is the store itself; give a backup copy")
    src = _check_backup(backup, timeout)
    kept: Path | None = None
    try:
        if not target.exists() and not target.is_symlink():
            tmp = opening.temporary_name(target)
            dst = opening.create_file(tmp, timeout)
            try:
                _copy_pages(src, dst)
            finally:
                dst.close()
            opening.link_into_place(tmp, target)
        else:
            opening.refuse_special(target)
            kept = _keep_copy(target, timeout)
            dst = opening.connect(target, "rw", timeout)
            try:
                before = _counters_before(dst)
                _copy_pages(src, dst)
                file_generation.after_restore(dst, target, before)
            except sqlite3.Error as exc:
                raise translate_error(exc, target) or RestoreRefused(
                    f"cannot restore {target}: {exc}") from None
            finally:
                dst.close()
    finally:
        src.close()
    with Store.open(target, timeout=timeout) as store:  # upgrades an older backup's format
        with store.write():
            store.conn.execute(
                "INSERT INTO store_info(key, value) VALUES (?, ?) "
                "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                (RESTORE_KEY, f"{datetime.now(UTC):%Y-%m-%dT%H:%M:%SZ} {secrets.token_hex(8)}"))
        measurements = store.conn.execute("SELECT count(*) FROM measurements").fetchone()[0]
        lots = store.conn.execute("SELECT count(*) FROM lots").fetchone()[0]
        if schema.user_version(store.conn) != schema.SCHEMA_VERSION:
            raise StoreCorrupt(f"{target} was restored but could not be upgraded")
    return RestoreSummary(target, backup, kept, measurements, lots)
