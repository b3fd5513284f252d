"""Noticing a store file copied over in place (``cp backup plant.sqlite``) while it is in use.

A copy over the file keeps its inode, so the (device, inode) identity of ``store.identity`` does
not change; but SQLite's write-ahead log and shared-memory index of the running sessions still
describe the old file, and their pages are read over (and later checkpointed into) the copy
(https://www.sqlite.org/howtocorrupt.html, section 1.3). lotwatch notices it with a counter:

- every top-level write transaction adds one to ``write_seq`` in ``store_info``, so the value in
  the file on disk is the counter of the last transaction checkpointed into it;
- in WAL mode the file on disk only moves forward (a checkpoint copies committed pages from the
  log into it) and never gets ahead of the log: its counter is at most the current one;
- each write also records, as ``file_seq_floor``, the counter it found on disk, and a ``Session``
  keeps the highest one it has seen. A file whose counter went below either floor was replaced
  by an older copy; one whose counter is above the current one was replaced by another copy.

The counter on disk is read while other processes may be checkpointing into the file (a page
half copied, the header already naming pages not yet written); a value counts only when two
reads agree, and a write that finds no steady value goes ahead uncounted against the floor (the
next write reads again; a copied-over file sits still and reads steadily).

The counter on disk is read through a second, ``immutable`` SQLite connection, which reads the
main file alone (no log). It is SQLite's own file handle, so closing it does not drop the POSIX
locks the process's other connections hold (SQLite keeps a descriptor open while a lock is held,
https://www.sqlite.org/howtocorrupt.html, section 2.2; a plain ``open()``/``close()`` of the file
would drop them).

What this cannot do: once any connection checkpoints the old log into the copy (SQLite does
so when the last connection closes), the file's counter comes from the log again and the copy is
mixed for good; ``PRAGMA integrity_check`` (``check``) then finds most such damage, and the repair
is always ``lotwatch restore`` of the backup (``store.restore``).

A copy of the same store that is not older than the file it replaces is a state the log has
already passed through, page for page (SQLite's backup API and ``sqlite3 .backup`` copy pages as
they are), so reading the log over it gives the current store: that case is harmless and is not
reported.
"""

from __future__ import annotations

import sqlite3
import time
from pathlib import Path

SEQ_KEY = "write_seq"
FLOOR_KEY = "file_seq_floor"

_READ_TRIES = 4


def _as_int(text: object) -> int:
    try:
        return max(0, int(str(text)))
    except ValueError:
        return 0


def counters(conn: sqlite3.Connection) -> tuple[int, int] | None:
    """(``write_seq``, ``file_seq_floor``) as ``conn`` sees them (0 when not yet written), or
    None when the store has no ``store_info`` table yet (a store being created)."""
    try:
        rows = dict(conn.execute("SELECT key, value FROM store_info WHERE key IN (?, ?)",
                                 (SEQ_KEY, FLOOR_KEY)).fetchall())
    except sqlite3.OperationalError as exc:
        if "no such table" in str(exc):
            return None
        raise
    return _as_int(rows.get(SEQ_KEY, 0)), _as_int(rows.get(FLOOR_KEY, 0))


def _read_once(path: Path) -> int | None:
    # SQLite's own handle on the main file alone (no log, no locks): see the module docstring
    uri = path.absolute().as_uri() + "?mode=ro&immutable=1"
    conn = sqlite3.connect(uri, uri=True, timeout=5.0, isolation_level=None)
    try:
        got = counters(conn)
    finally:
        conn.close()
    return None if got is None else got[0]


class Unsettled(Exception):
    """The file on disk could not be read the same way twice (a checkpoint of another process
    was copying pages into it at that moment, or it is not a database any more)."""


def seq_on_disk(path: Path) -> int | None:
    """The ``write_seq`` held by the main file at ``path`` itself, log ignored; None when the
    file holds no store yet.

    The file is read without SQLite's locks, so a checkpoint of another process may be copying
    pages into it meanwhile and a read can fail or, rarely, see a page half written: a value
    counts only when two reads in a row agree. Raises ``Unsettled`` when they never do."""
    for attempt in range(_READ_TRIES):
        try:
            first = _read_once(path)
            if _read_once(path) == first:
                return first
        except (sqlite3.DatabaseError, UnicodeDecodeError):
            pass
        time.sleep(0.02 * (attempt + 1))
    raise Unsettled(f"{path} could not be read steadily")


def overwritten_message(path: Path) -> str:
    return (f"{path} was copied over (replaced in place by another copy) while lotwatch had it "
            "open; nothing was stored. Its write-ahead log no longer matches the file, so the "
            "store may now mix old and new contents. Close every lotwatch window and command "
            f"using it, run: lotwatch check --db {path}, and put a backup back only with: "
            f"lotwatch restore BACKUP --db {path}")


def check(conn: sqlite3.Connection, path: Path, seen: int) -> tuple[int, int, int] | None:
    """Inside a write transaction (the write lock held): None when ``path`` was copied over in
    place, else (the new highest counter seen on disk, the store's counter, its new floor) for
    ``advance``. ``seen`` is the highest counter this session has seen on disk so far."""
    view = counters(conn)
    if view is None:
        return seen, -1, 0
    current, floor = view
    try:
        disk = seq_on_disk(path)
    except Unsettled:
        # not conclusive: this write goes ahead uncounted against the floor (the next one
        # reads again); a copied-over file is a still, whole database and reads steadily
        return seen, current, floor
    if disk is not None:
        if disk < max(floor, seen) or disk > current:
            return None
        seen = max(seen, disk)
    return seen, current, max(floor, seen)


def advance(conn: sqlite3.Connection, current: int, floor: int) -> None:
    """Count a write that changed the store (before its COMMIT), with ``check``'s figures."""
    if current < 0:
        return  # a store being created: no store_info yet when its transaction began
    conn.execute(
        "INSERT INTO store_info(key, value) VALUES (?, ?), (?, ?) "
        "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
        (SEQ_KEY, str(current + 1), FLOOR_KEY, str(floor)))


def disk_problem(conn: sqlite3.Connection, path: Path) -> str | None:
    """For ``check``: a sentence when the file on disk holds a counter below the store's floor
    (it was copied over by an older copy while in use), else None. Only the floor is compared:
    it never moves back, whereas a write committed meanwhile could put the file's counter above
    the one this read saw."""
    view = counters(conn)
    if view is None:
        return None
    try:
        disk = seq_on_disk(path)
    except Unsettled:
        return None  # busy with a checkpoint: PRAGMA integrity_check covers a damaged file
    if disk is not None and disk < view[1]:
        return ("the file on disk is older than its write-ahead log allows: it was copied over "
                "while in use, and the store may mix old and new contents. Put a backup back "
                "with lotwatch restore BACKUP")
    return None


def after_restore(conn: sqlite3.Connection, path: Path, before: tuple[int, int] | None) -> None:
    """After a backup was copied into the live store at ``path`` through ``conn`` (SQLite's
    backup API, ``store.restore``): give the restored contents a counter above every one the
    store had (``before``: its counters before the copy) and above the file on disk, so the
    file's counter keeps only moving forward."""
    view = counters(conn)
    if view is None:
        return
    try:
        disk = seq_on_disk(path) or 0
    except Unsettled:
        disk = 0
    old_seq = before[0] if before else 0
    conn.execute(
        "INSERT INTO store_info(key, value) VALUES (?, ?), (?, ?) "
        "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
        (SEQ_KEY, str(max(view[0], old_seq, disk) + 1), FLOOR_KEY, str(disk)))
