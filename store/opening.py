"""Opening store files: new-file creation, the sqlite3 connection, and the checks that a file is
a lotwatch store this version can read.

Pure functions over paths and connections; ``Store.create`` / ``Store.open`` (in
``store.connection``) call them and own the resulting connection.
"""

from __future__ import annotations

import os
import sqlite3
import stat
from pathlib import Path

from lotwatch.store import schema
from lotwatch.store.errors import (
    StoreCorrupt,
    StoreExists,
    StoreMissing,
    StoreReadOnly,
    StoreTooNew,
)
from lotwatch.store.transaction import translate_error


def connect(p: Path, mode: str, timeout: float, *, immutable: bool = False) -> sqlite3.Connection:
    """A sqlite3 connection in autocommit mode (transactions are explicit) with the busy timeout
    set and foreign keys enforced; ``mode`` is the URI mode (``ro`` or ``rw``)."""
    uri = p.absolute().as_uri() + f"?mode={mode}" + ("&immutable=1" if immutable else "")
    conn = sqlite3.connect(uri, uri=True, timeout=timeout, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {int(timeout * 1000)}")
    conn.execute("PRAGMA foreign_keys = ON")
    return conn


def probe(conn: sqlite3.Connection) -> None:
    """Read the header and schema: fails here for non-SQLite files and unopenable WAL stores."""
    conn.execute("PRAGMA user_version").fetchone()
    conn.execute("SELECT count(*) FROM sqlite_master").fetchone()


def remove_quietly(p: Path) -> None:
    """Remove a store file and its -wal/-shm/-journal companions, ignoring what is not there."""
    for suffix in ("", "-wal", "-shm", "-journal"):
        try:
            Path(str(p) + suffix).unlink()
        except OSError:
            pass


_KINDS = ((stat.S_ISFIFO, "a FIFO (named pipe)"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))


def refuse_special(p: Path) -> None:
    """Before SQLite touches ``p``: StoreMissing when nothing is there, StoreCorrupt for a folder,
    FIFO, device or socket (opening a FIFO would wait forever for a writer; a device is not a
    file lotwatch should write or advise deleting). Symbolic links are followed."""
    try:
        st = os.stat(p)
    except FileNotFoundError:
        raise StoreMissing(f"no store at {p}") from None
    except OSError as exc:
        raise StoreReadOnly(f"cannot reach {p}: {exc.strerror or exc}") from None
    if stat.S_ISDIR(st.st_mode):
        raise StoreCorrupt(f"{p} is a folder, not a lotwatch store file")
    for test, kind in _KINDS:
        if test(st.st_mode):
            raise StoreCorrupt(f"{p} is {kind}, not a store file; lotwatch did not touch it. "
                               "Give the path of a store file (--db PATH or $LOTWATCH_DB), or "
                               "create one with: lotwatch init PATH")


def create_file(p: Path, timeout: float) -> sqlite3.Connection:
    """Make the empty file ``p`` (and its folders) and return a rollback-journal connection to
    it (``Store.create`` builds the store in a file of a temporary name, then links it into
    place). Refuses if anything exists at ``p`` (StoreExists)."""
    if p.exists() or p.is_symlink():
        raise StoreExists(f"{p} already exists; open it, or choose another file name")
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise StoreReadOnly(f"cannot create the folder {p.parent}: {exc.strerror}") from None
    # Create the file ourselves so its mode follows the umask (0666 & ~umask: group
    # writable under umask 002, for a store shared by a group); SQLite would make it 0644
    # whatever the umask, and its -wal and -shm files copy the store file's mode.
    try:
        os.close(os.open(p, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666))
    except FileExistsError:
        raise StoreExists(f"{p} already exists; open it, or choose another file name") from None
    except OSError as exc:
        raise StoreReadOnly(f"cannot create {p}: {exc.strerror}") from None
    try:
        conn = connect(p, "rw", timeout)
    except sqlite3.Error as exc:
        remove_quietly(p)
        raise translate_error(exc, p) or exc from None
    return conn


def temporary_name(p: Path) -> Path:
    """A hidden name beside ``p`` for building a new store before it appears under ``p``."""
    return p.with_name(f".{p.name}.{os.getpid()}-{os.urandom(3).hex()}.creating")


def link_into_place(tmp: Path, p: Path) -> None:
    """Give the finished store ``tmp`` its name ``p`` atomically, never replacing a file that
    appeared at ``p`` meanwhile (StoreExists); ``tmp`` is gone afterwards."""
    try:
        os.link(tmp, p)  # atomic "create only if absent"
    except FileExistsError:
        remove_quietly(tmp)
        raise StoreExists(f"{p} was created by someone else just now; open it instead") from None
    except OSError:  # a file system without hard links: rename (atomic, but replaces)
        if p.exists():
            remove_quietly(tmp)
            raise StoreExists(f"{p} was created by someone else just now; open it instead") \
                from None
        os.replace(tmp, p)
        return
    remove_quietly(tmp)


def open_file(p: Path, *, read_only: bool, timeout: float) -> tuple[sqlite3.Connection, bool]:
    """A connection to the existing store file ``p`` and whether it had to be opened
    ``immutable``: a read-only open of a WAL store whose folder is not writable (SQLite cannot
    create the ``-shm`` file) falls back to SQLite's immutable mode, which does not see changes
    other processes make while it is open."""
    refuse_special(p)
    immutable = False
    conn: sqlite3.Connection | None = None
    try:
        conn = connect(p, "ro" if read_only else "rw", timeout)
        try:
            probe(conn)
        except sqlite3.OperationalError as exc:
            mapped = translate_error(exc, p)
            if not read_only or mapped is None or isinstance(mapped, StoreCorrupt):
                raise
            conn.close()
            conn = connect(p, "ro", timeout, immutable=True)
            probe(conn)
            immutable = True
    except sqlite3.Error as exc:
        if conn is not None:
            conn.close()
        raise translate_error(exc, p) or StoreCorrupt(
            f"{p} could not be read as a lotwatch store: {exc}"
        ) from None
    except UnicodeDecodeError as exc:  # SQLite's error text quotes damaged, non-UTF-8 bytes
        if conn is not None:
            conn.close()
        detail = exc.object.decode("utf-8", "replace") if isinstance(exc.object, bytes) else ""
        raise StoreCorrupt(f"{p} is damaged and cannot be read ({detail}); restore it from a "
                           "backup (see lotwatch restore)") from None
    return conn, immutable


def check_identity(conn: sqlite3.Connection, p: Path) -> None:
    """Refuse a file that is not a lotwatch store (StoreCorrupt) or was written by a newer
    lotwatch than this one (StoreTooNew)."""
    app = schema.application_id(conn)
    version = schema.user_version(conn)
    if app != schema.APPLICATION_ID:
        n_tables = conn.execute(
            "SELECT count(*) FROM sqlite_master WHERE type = 'table'"
        ).fetchone()[0]
        if n_tables == 0:
            what = "an empty file" if p.stat().st_size == 0 else "an empty SQLite database"
            raise StoreCorrupt(
                f"{p} is {what}, not a lotwatch store; delete it or create a store elsewhere"
            )
        raise StoreCorrupt(
            f"{p} is an SQLite database of another program, not a lotwatch store; "
            "lotwatch did not change it"
        )
    if version > schema.SCHEMA_VERSION:
        writer = schema.written_by(conn) or "a newer version"
        raise StoreTooNew(
            f"{p} was written by lotwatch {writer} (store format {version}); this lotwatch "
            f"{schema.LOTWATCH_VERSION} reads formats up to {schema.SCHEMA_VERSION}. "
            "Upgrade lotwatch to open it; the file was not changed."
        )
