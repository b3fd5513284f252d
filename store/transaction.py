"""Write transactions on one store connection, and sqlite3 errors mapped to ``StoreError``s.

``Session`` is the part of a ``Store`` that every write goes through: ``write()`` is
``BEGIN IMMEDIATE ... COMMIT`` (nested use is a SAVEPOINT), retried when SQLite answers BUSY at
once, refused once the file was deleted or replaced under us; ``mapped()`` turns environment
errors raised while reading into ``StoreError``s. Opening lives in ``store.opening``, the catalog
(characteristics, factors, tags, settings) in ``store.catalog``.
"""

from __future__ import annotations

import os
import sqlite3
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from lotwatch.store import file_generation
from lotwatch.store.errors import (
    StoreCorrupt,
    StoreError,
    StoreFull,
    StoreLocked,
    StoreMissing,
    StoreReadOnly,
)
from lotwatch.store.identity import file_identity, login_name

DEFAULT_TIMEOUT = 30.0
_POLL_S = 0.005  # how often a writer waiting for the write lock tries again

# sqlite3 primary result codes (https://www.sqlite.org/rescode.html)
_SQLITE_BUSY, _SQLITE_LOCKED, _SQLITE_READONLY, _SQLITE_IOERR = 5, 6, 8, 10
_SQLITE_CORRUPT, _SQLITE_FULL, _SQLITE_CANTOPEN, _SQLITE_NOTADB = 11, 13, 14, 26


def translate_error(exc: sqlite3.Error, path: Path | str) -> StoreError | None:
    """The user-facing ``StoreError`` for a sqlite3 error, or None if it is not an environment
    problem (then it is a bug and should surface as is)."""
    code = getattr(exc, "sqlite_errorcode", None)
    primary = code & 0xFF if isinstance(code, int) else None
    text = str(exc).lower()
    if primary in (_SQLITE_BUSY, _SQLITE_LOCKED) or "database is locked" in text:
        return StoreLocked(
            f"{path} is busy: another lotwatch (or other program) held its write lock for too "
            "long. Nothing was changed; try again in a moment."
        )
    if primary == _SQLITE_FULL or "database or disk is full" in text:
        return StoreFull(
            f"the disk holding {path} is full (or a quota was reached); the change was rolled "
            "back and nothing was stored. Free some space and try again."
        )
    if primary == _SQLITE_READONLY or "readonly database" in text:
        return StoreReadOnly(
            f"{path} cannot be written (opened read-only, or the file or its folder is not "
            "writable by you). Nothing was changed."
        )
    if primary in (_SQLITE_CORRUPT, _SQLITE_NOTADB) or "not a database" in text or "malformed" in text:
        return StoreCorrupt(
            f"{path} is not a readable lotwatch store (the file is damaged or is not an SQLite "
            f"database: {exc}). Restore it from a backup or export; lotwatch did not change it."
        )
    if primary == _SQLITE_IOERR or "disk i/o error" in text:
        # A full disk often shows up as an I/O error (e.g. SQLITE_IOERR_SHMSIZE: the -shm file
        # cannot grow), before any SQLITE_FULL.
        if _no_free_space(Path(path)):
            return StoreFull(
                f"the disk holding {path} is full (or a quota was reached), so lotwatch cannot "
                "use the store (it needs room for its -wal and -shm files). Nothing was changed. "
                "Free some space and try again."
            )
        return StoreError(
            f"reading or writing {path} (or its -wal/-shm files beside it) failed with a disk "
            f"I/O error ({exc}); nothing was changed. Check the disk or network share."
        )
    if primary == _SQLITE_CANTOPEN or "unable to open" in text:
        return StoreReadOnly(
            f"{path} cannot be opened ({exc}); check that the file and its folder are readable "
            "(and writable, unless opening read-only)."
        )
    return None


def _no_free_space(path: Path) -> bool:
    """True when the file system holding ``path`` has no block left for this user."""
    try:
        st = os.statvfs(path.expanduser().absolute().parent)
    except OSError:
        return False
    return st.f_bavail * st.f_frsize < 64 * 1024


# store_info key written by ``store.restore`` each time a backup is put in place
RESTORE_KEY = "restore_token"


def restore_token(conn: sqlite3.Connection) -> str | None:
    """The store's current restore token (None before any restore, or for a file being made)."""
    try:
        row = conn.execute("SELECT value FROM store_info WHERE key = ?", (RESTORE_KEY,)).fetchone()
    except (sqlite3.DatabaseError, UnicodeDecodeError):
        return None
    return row[0] if row else None


class Session:
    """One open sqlite3 connection to a store file and the transactions on it."""

    def __init__(self, conn: sqlite3.Connection, path: Path, *, read_only: bool,
                 immutable: bool = False, timeout: float = DEFAULT_TIMEOUT) -> None:
        self.conn = conn
        self.path = path
        self.read_only = read_only
        self.immutable = immutable
        self.timeout = timeout
        self.user = login_name()
        self._depth = 0
        self._closed = False
        self._identity = file_identity(path)
        self._restored = restore_token(conn)
        self._disk_seq = 0  # highest write counter seen in the file on disk (store.file_generation)

    def close(self) -> None:
        """Close the connection (idempotent). An open transaction is rolled back."""
        if self._closed:
            return
        self._closed = True
        try:
            if self.conn.in_transaction:
                self.conn.rollback()
        finally:
            self.conn.close()

    @contextmanager
    def write(self) -> Iterator[Session]:
        """``BEGIN IMMEDIATE`` ... ``COMMIT``; rolled back if the body raises. Nested use is a
        SAVEPOINT (rolled back alone if the inner body raises). sqlite3 errors caused by the
        environment (locked, disk full, read-only, corrupt) come out as ``StoreError``s."""
        if self._closed:
            raise StoreError(f"the store {self.path} is closed")
        if self.read_only:
            raise StoreReadOnly(f"{self.path} was opened read-only; nothing was changed")
        if self._depth:
            name = f"lotwatch_sp{self._depth}"
            self.conn.execute(f"SAVEPOINT {name}")
            self._depth += 1
            try:
                yield self
            except BaseException:
                self.conn.execute(f"ROLLBACK TO {name}")
                self.conn.execute(f"RELEASE {name}")
                raise
            else:
                self.conn.execute(f"RELEASE {name}")
            finally:
                self._depth -= 1
            return
        self._begin_immediate()
        self._depth = 1
        try:
            counter = self._check_same_file()
            changes = self.conn.total_changes
            yield self
            if counter is not None and self.conn.total_changes != changes:
                file_generation.advance(self.conn, *counter)
            self.conn.execute("COMMIT")
        except BaseException as exc:
            if self.conn.in_transaction:
                try:
                    self.conn.execute("ROLLBACK")
                except sqlite3.Error:
                    pass
            if isinstance(exc, sqlite3.Error):
                mapped = translate_error(exc, self.path)
                if mapped is not None:
                    raise mapped from exc
            raise
        finally:
            self._depth = 0

    @contextmanager
    def mapped(self) -> Iterator[None]:
        """Turn environment sqlite3 errors raised while reading into StoreErrors."""
        try:
            yield
        except sqlite3.Error as exc:
            mapped = translate_error(exc, self.path)
            if mapped is None:
                raise
            raise mapped from exc

    def data_version(self) -> int:
        """``PRAGMA data_version``: changes when another connection commits (cheap to poll)."""
        with self.mapped():
            return int(self.conn.execute("PRAGMA data_version").fetchone()[0])

    def _check_same_file(self) -> tuple[int, int] | None:
        """Refuse to write once the file was deleted, moved or replaced since it was opened
        (another inode, or copied over in place: ``store.file_generation``): SQLite would go on
        writing into the old file (lost with it), or the old ``-wal`` file could be replayed over
        the new one (https://www.sqlite.org/howtocorrupt.html). Returns the write counter and floor
        for ``file_generation.advance``."""
        if self._identity is None:
            return None
        now = file_identity(self.path)
        if now is None:
            raise StoreMissing(
                f"{self.path} was deleted or moved while lotwatch had it open; nothing was "
                "stored. Put the file back (or open it where it is now) and try again."
            )
        if now != self._identity:
            raise StoreError(
                f"{self.path} was replaced by another file while lotwatch had it open; nothing "
                "was stored. Open the store again to work on the new file."
            )
        if restore_token(self.conn) != self._restored:
            raise StoreError(
                f"{self.path} was restored from a backup (lotwatch restore) while lotwatch had "
                "it open; nothing was stored. Open the store again to work on what it now holds."
            )
        found = file_generation.check(self.conn, self.path, self._disk_seq)
        if found is None:
            raise StoreCorrupt(file_generation.overwritten_message(self.path))
        self._disk_seq = found[0]
        return found[1], found[2]

    def _begin_immediate(self) -> None:
        # SQLite's busy handler sleeps up to 100 ms between tries, so a writer waiting behind a
        # run of transactions with short pauses between them (an import's chunks) could miss
        # every pause and wait for the whole run. Polling every few milliseconds up to the
        # timeout gets it in at the first pause; it also retries the quick BUSY SQLite can
        # return while another connection recovers the WAL.
        deadline = time.monotonic() + self.timeout
        self.conn.execute("PRAGMA busy_timeout = 0")
        try:
            while True:
                try:
                    self.conn.execute("BEGIN IMMEDIATE")
                    return
                except sqlite3.OperationalError as exc:
                    mapped = translate_error(exc, self.path)
                    if isinstance(mapped, StoreLocked) and time.monotonic() < deadline:
                        time.sleep(_POLL_S)
                        continue
                    raise (mapped or exc) from exc
        finally:
            self.conn.execute(f"PRAGMA busy_timeout = {int(self.timeout * 1000)}")
