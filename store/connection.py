"""The ``Store``: one SQLite connection to a lotwatch store file, and its write transactions.

A ``Store`` wraps one ``sqlite3`` connection and is bound to the thread that opened it (sqlite3's
``check_same_thread``): open one ``Store`` per thread or worker. Writes go through
``store.write()``, which is ``BEGIN IMMEDIATE ... COMMIT``: the write lock is taken up front, so
in WAL mode a second writer waits (busy timeout, 30 s by default) instead of failing half way.
Several processes may read and write the same file at once.
"""

from __future__ import annotations

import getpass
import math
import os
import sqlite3
import time
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from datetime import date
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lotwatch.store import schema
from lotwatch.store.errors import (
    BadInput,
    Conflict,
    NotFound,
    RowProblem,
    StoreCorrupt,
    StoreError,
    StoreExists,
    StoreFull,
    StoreLocked,
    StoreMissing,
    StoreReadOnly,
    StoreTooNew,
)
from lotwatch.store.model import (
    AuditEntry,
    Characteristic,
    CheckReport,
    Factor,
    LogOutcome,
    LotEntry,
)
from lotwatch.store.text import unsafe_character
from lotwatch.store.timeutil import format_stored, now_utc
from lotwatch.store.values import BadValue, canonical_resolution, choose_origin, scale_of

if TYPE_CHECKING:
    import polars as pl
    import sqlite_utils

DEFAULT_TIMEOUT = 30.0
_BEGIN_RETRIES = 5

# sqlite3 primary result codes (https://www.sqlite.org/rescode.html)
_SQLITE_BUSY, _SQLITE_LOCKED, _SQLITE_READONLY, _SQLITE_IOERR = 5, 6, 8, 10
_SQLITE_CORRUPT, _SQLITE_FULL, _SQLITE_CANTOPEN, _SQLITE_NOTADB = 11, 13, 14, 26


def login_name() -> str:
    """The operator name used when none is given: the login name, else "unknown"."""
    try:
        name = getpass.getuser()
    except (OSError, KeyError, ImportError):
        return "unknown"
    return name or "unknown"


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


class Store:
    """An open lotwatch store. Use ``Store.create`` / ``Store.open``; close it (or use ``with``)."""

    def __init__(self, conn: sqlite3.Connection, path: Path, *, read_only: bool,
                 immutable: bool = False, timeout: float = DEFAULT_TIMEOUT) -> None:
        self.conn = conn
        self.path = path
        self.read_only = read_only
        self.immutable = immutable
        self.timeout = timeout
        self.user = login_name()
        self._depth = 0
        self._db: sqlite_utils.Database | None = None
        self._closed = False
        self._identity = _identity(path)

    # ----------------------------------------------------------------- opening and closing

    @classmethod
    def create(cls, path: str | Path, *, timeout: float = DEFAULT_TIMEOUT) -> Store:
        """Make a new, empty store at ``path`` (parent folders too), with the required grouping
        factors site, line and shift. Refuses if anything exists at ``path`` (StoreExists)."""
        p = Path(path).expanduser()
        if p.exists():
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
            conn = _connect(p, "rw", timeout)
            conn.execute("PRAGMA journal_mode = WAL")
        except sqlite3.Error as exc:
            _remove_quietly(p)
            raise translate_error(exc, p) or exc from None
        store = cls(conn, p, read_only=False, timeout=timeout)
        try:
            with store.write():
                if schema.user_version(conn) != 0 or schema.has_table(conn, "store_info"):
                    raise StoreExists(f"{p} was created by someone else just now; open it instead")
                now = format_stored(now_utc())
                schema.migrate(conn, now=now)
                conn.executemany(
                    "INSERT INTO factors(name, required, created_at) VALUES (?, 1, ?)",
                    [(name, now) for name in schema.DEFAULT_FACTORS],
                )
        except StoreExists:
            store.close()
            raise
        except BaseException:
            store.close()
            _remove_quietly(p)
            raise
        return store

    @classmethod
    def open(cls, path: str | Path, *, read_only: bool = False,
             timeout: float = DEFAULT_TIMEOUT) -> Store:
        """Open an existing store; upgrade its schema if it is older (not when read-only).

        Raises StoreMissing, StoreCorrupt (not SQLite, damaged, another program's file),
        StoreTooNew (written by a newer lotwatch), StoreLocked, StoreReadOnly.
        A read-only open of a WAL store whose folder is not writable (so SQLite cannot create
        the ``-shm`` file) falls back to SQLite's ``immutable`` mode: it then does not see
        changes other processes make while it is open (``store.immutable`` is True).
        """
        p = Path(path).expanduser()
        if not p.exists():
            raise StoreMissing(f"no store at {p}")
        if p.is_dir():
            raise StoreCorrupt(f"{p} is a folder, not a lotwatch store file")
        immutable = False
        conn: sqlite3.Connection | None = None
        try:
            conn = _connect(p, "ro" if read_only else "rw", timeout)
            try:
                _probe(conn)
            except sqlite3.OperationalError as exc:
                mapped = translate_error(exc, p)
                if not read_only or mapped is None or isinstance(mapped, StoreCorrupt):
                    raise
                # Read-only WAL store in a folder we cannot write: SQLite cannot make the -shm
                # file, so read the file as immutable (no locking; see the docstring).
                conn.close()
                conn = _connect(p, "ro", timeout, immutable=True)
                _probe(conn)
                immutable = True
        except sqlite3.Error as exc:
            if conn is not None:
                conn.close()
            raise translate_error(exc, p) or StoreCorrupt(
                f"{p} could not be read as a lotwatch store: {exc}"
            ) from None
        store = cls(conn, p, read_only=read_only, immutable=immutable, timeout=timeout)
        try:
            store._check_identity()
            if not read_only:
                mode = conn.execute("PRAGMA journal_mode").fetchone()[0]
                if str(mode).lower() != "wal":
                    conn.execute("PRAGMA journal_mode = WAL")
            if schema.user_version(conn) < schema.SCHEMA_VERSION:
                if read_only:
                    raise StoreReadOnly(
                        f"{p} uses an older store format (version {schema.user_version(conn)}) "
                        "that this lotwatch must upgrade; open it once without read-only first"
                    )
                with store.write():
                    schema.migrate(conn, now=format_stored(now_utc()))
        except sqlite3.Error as exc:
            store.close()
            raise translate_error(exc, p) or exc from None
        except BaseException:
            store.close()
            raise
        return store

    def _check_identity(self) -> None:
        conn, p = self.conn, self.path
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

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        mode = "read-only" if self.read_only else "read-write"
        return f"Store({str(self.path)!r}, {mode})"

    @property
    def db(self) -> sqlite_utils.Database:
        """A ``sqlite_utils.Database`` over the same connection (writes still need ``write()``)."""
        if self._db is None:
            import sqlite_utils

            self._db = sqlite_utils.Database(self.conn, recursive_triggers=False,
                                             execute_plugins=False)
        return self._db

    # ----------------------------------------------------------------- transactions

    @contextmanager
    def write(self) -> Iterator[Store]:
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
            self._check_same_file()
            yield self
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

    def _check_same_file(self) -> None:
        """Refuse to write once the file was deleted, moved or replaced since it was opened:
        SQLite would go on writing into the old file (lost with it), and the old ``-wal`` file
        could later be replayed over the new one (https://www.sqlite.org/howtocorrupt.html)."""
        if self._identity is None:
            return
        now = _identity(self.path)
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

    def _begin_immediate(self) -> None:
        # The busy handler normally waits up to the timeout; SQLite can still return BUSY at once
        # (e.g. while another connection recovers the WAL), so a quick BUSY is retried.
        for attempt in range(_BEGIN_RETRIES):
            started = time.monotonic()
            try:
                self.conn.execute("BEGIN IMMEDIATE")
                return
            except sqlite3.OperationalError as exc:
                mapped = translate_error(exc, self.path)
                waited = time.monotonic() - started
                if (isinstance(mapped, StoreLocked) and waited < self.timeout / 2
                        and attempt < _BEGIN_RETRIES - 1):
                    time.sleep(0.05 * (attempt + 1))
                    continue
                raise (mapped or exc) from exc

    @contextmanager
    def _mapped(self) -> Iterator[None]:
        """Turn environment sqlite3 errors raised while reading into StoreErrors."""
        try:
            yield
        except sqlite3.Error as exc:
            mapped = translate_error(exc, self.path)
            if mapped is None:
                raise
            raise mapped from exc

    # ----------------------------------------------------------------- settings, polling

    def get_setting(self, key: str, default: str | None = None) -> str | None:
        with self._mapped():
            row = self.conn.execute("SELECT value FROM settings WHERE key = ?", (key,)).fetchone()
        return row[0] if row else default

    def set_setting(self, key: str, value: str | None) -> None:
        """Store a setting (text); ``None`` removes it."""
        if not key:
            raise BadInput([RowProblem("command line", None, "setting", key, "empty setting name")])
        with self.write():
            if value is None:
                self.conn.execute("DELETE FROM settings WHERE key = ?", (key,))
            else:
                self.conn.execute(
                    "INSERT INTO settings(key, value) VALUES (?, ?) "
                    "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                    (key, str(value)),
                )

    def data_version(self) -> int:
        """``PRAGMA data_version``: changes when another connection commits (cheap to poll)."""
        with self._mapped():
            return int(self.conn.execute("PRAGMA data_version").fetchone()[0])

    def info(self) -> dict[str, str]:
        """The ``store_info`` rows (schema version, creating/upgrading lotwatch version, ...)."""
        with self._mapped():
            return dict(self.conn.execute("SELECT key, value FROM store_info").fetchall())

    # ----------------------------------------------------------------- characteristics

    def characteristics(self) -> list[Characteristic]:
        with self._mapped():
            rows = self.conn.execute(f"SELECT {_CHAR_COLS} FROM characteristics ORDER BY name")
            return [_char_from_row(r) for r in rows]

    def characteristic(self, name: str) -> Characteristic:
        with self._mapped():
            row = self.conn.execute(
                f"SELECT {_CHAR_COLS} FROM characteristics WHERE name = ?", (name,)
            ).fetchone()
        if row is None:
            known = ", ".join(c.name for c in self.characteristics()) or "none yet"
            raise NotFound(f"no characteristic named {name!r} (known: {known})")
        return _char_from_row(row)

    def characteristic_by_id(self, characteristic_id: int) -> Characteristic:
        row = self.conn.execute(
            f"SELECT {_CHAR_COLS} FROM characteristics WHERE id = ?", (characteristic_id,)
        ).fetchone()
        if row is None:
            raise NotFound(f"no characteristic with id {characteristic_id}")
        return _char_from_row(row)

    def add_characteristic(
        self, name: str, *, unit: str, resolution: str, lsl: float | None = None,
        target: float | None = None, usl: float | None = None, min_shift: float | None = None,
        plausible: tuple[float, float] | None = None, by: str | None = None,
    ) -> Characteristic:
        """Define a characteristic. The origin (in resolution units) is the target, else the
        LSL/USL midpoint, else the plausible-range midpoint, else 0; it never changes once data
        exists. Bad fields raise BadInput listing each; an existing name raises Conflict."""
        fields = _validate_char_fields(
            name=name, unit=unit, resolution=resolution, lsl=lsl, target=target, usl=usl,
            min_shift=min_shift, plausible=plausible,
        )
        with self.write():
            if self.conn.execute(
                "SELECT 1 FROM characteristics WHERE name = ?", (fields["name"],)
            ).fetchone():
                raise Conflict(f"a characteristic named {fields['name']!r} already exists")
            origin = choose_origin(
                fields["resolution"], target=fields["target"], lsl=fields["lsl"],
                usl=fields["usl"], plausible=fields["plausible"],
            )
            lo, hi = fields["plausible"] or (None, None)
            cur = self.conn.execute(
                "INSERT INTO characteristics(name, unit, resolution, origin_units, lsl, target, "
                "usl, min_shift, plausible_low, plausible_high, created_at, created_by) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (fields["name"], fields["unit"], fields["resolution"], origin, fields["lsl"],
                 fields["target"], fields["usl"], fields["min_shift"], lo, hi,
                 format_stored(now_utc()), by or self.user),
            )
            new_id = int(cur.lastrowid or 0)
        return self.characteristic_by_id(new_id)

    def edit_characteristic(self, name: str, /, **changes: Any) -> Characteristic:
        """Change fields of a characteristic: ``name`` (rename), ``unit``, ``resolution``,
        ``lsl``, ``target``, ``usl``, ``min_shift``, ``plausible`` (a (low, high) pair or None).
        The resolution cannot change once measurements exist (Conflict); nor does the origin."""
        allowed = {"name", "unit", "resolution", "lsl", "target", "usl", "min_shift", "plausible"}
        unknown = sorted(set(changes) - allowed)
        if unknown:
            raise BadInput([RowProblem("command line", None, k, None,
                                       f"unknown characteristic field {k!r} (can change: "
                                       f"{', '.join(sorted(allowed))})") for k in unknown])
        with self.write():
            old = self.characteristic(name)
            merged: dict[str, Any] = {
                "name": old.name, "unit": old.unit, "resolution": old.resolution,
                "lsl": old.lsl, "target": old.target, "usl": old.usl, "min_shift": old.min_shift,
                "plausible": (None if old.plausible_low is None or old.plausible_high is None
                              else (old.plausible_low, old.plausible_high)),
            }
            merged.update(changes)
            fields = _validate_char_fields(**merged)
            has_data = self.conn.execute(
                "SELECT 1 FROM measurements WHERE characteristic_id = ? LIMIT 1", (old.id,)
            ).fetchone() is not None
            if fields["resolution"] != old.resolution and has_data:
                raise Conflict(
                    f"the resolution of {old.name} cannot change from {old.resolution} to "
                    f"{fields['resolution']}: measurements are stored in steps of "
                    f"{old.resolution}. Create a new characteristic instead."
                )
            if fields["name"] != old.name and self.conn.execute(
                "SELECT 1 FROM characteristics WHERE name = ?", (fields["name"],)
            ).fetchone():
                raise Conflict(f"a characteristic named {fields['name']!r} already exists")
            origin = old.origin_units
            if not has_data:
                origin = choose_origin(fields["resolution"], target=fields["target"],
                                       lsl=fields["lsl"], usl=fields["usl"],
                                       plausible=fields["plausible"])
            lo, hi = fields["plausible"] or (None, None)
            self.conn.execute(
                "UPDATE characteristics SET name = ?, unit = ?, resolution = ?, origin_units = ?, "
                "lsl = ?, target = ?, usl = ?, min_shift = ?, plausible_low = ?, "
                "plausible_high = ? WHERE id = ?",
                (fields["name"], fields["unit"], fields["resolution"], origin, fields["lsl"],
                 fields["target"], fields["usl"], fields["min_shift"], lo, hi, old.id),
            )
        return self.characteristic_by_id(old.id)

    # ----------------------------------------------------------------- factors and tags

    def factors(self) -> list[Factor]:
        """Grouping factors, in the order they were added (site, line, shift first)."""
        with self._mapped():
            rows = self.conn.execute(
                "SELECT name, required FROM factors ORDER BY created_at, rowid"
            ).fetchall()
        return [Factor(name, bool(req)) for name, req in rows]

    def add_factor(self, name: str, required: bool = False) -> Factor:
        """Make a tag key a grouping factor; buckets for it are built from the tags of every
        stored lot in the same transaction."""
        from lotwatch.store.aggregates import backfill_factor

        key = _clean_name(name, "factor")
        with self.write():
            if self.conn.execute("SELECT 1 FROM factors WHERE name = ?", (key,)).fetchone():
                raise Conflict(f"{key!r} is already a grouping factor")
            self.conn.execute(
                "INSERT INTO factors(name, required, created_at) VALUES (?, ?, ?)",
                (key, int(bool(required)), format_stored(now_utc())),
            )
            backfill_factor(self.conn, key)
        return Factor(key, bool(required))

    def tag_keys(self) -> list[str]:
        """Every tag key used by a stored lot, plus every factor."""
        from lotwatch.store.queries import used_tag_keys

        with self._mapped():
            used = set(used_tag_keys(self))
        return sorted(used | {f.name for f in self.factors()})

    def tag_values(self, key: str) -> list[str]:
        from lotwatch.store.queries import tag_values

        with self._mapped():
            return tag_values(self, key)

    # ----------------------------------------------------------------- delegated API

    def log_lots(self, entries: Sequence[LotEntry], *, round_values: bool = False,
                 skip_bad: bool = False,
                 progress: Callable[[int], None] | None = None) -> LogOutcome:
        from lotwatch.store.lots import log_lots

        return log_lots(self, entries, round_values=round_values, skip_bad=skip_bad,
                        progress=progress)

    def log_lot(self, entry: LotEntry, *, round_values: bool = False) -> LogOutcome:
        """``log_lots([entry])``."""
        return self.log_lots([entry], round_values=round_values)

    def import_file(self, path: str | Path, options: Any = None, *,
                    progress: Callable[[int], None] | None = None) -> Any:
        """Read one lab file and log it (``store.importer.import_file``; returns its summary)."""
        from lotwatch.store.importer import import_file

        return import_file(self, path, options, progress=progress)

    def correct(self, measurement_id: int, new_value: str, *, reason: str,
                by: str | None = None, round_value: bool = False) -> AuditEntry:
        from lotwatch.store.corrections import correct

        return correct(self, measurement_id, new_value, reason=reason, by=by,
                       round_value=round_value)

    def void(self, measurement_id: int, *, reason: str, by: str | None = None) -> AuditEntry:
        from lotwatch.store.corrections import void

        return void(self, measurement_id, reason=reason, by=by)

    def history(self, measurement_id: int) -> list[AuditEntry]:
        from lotwatch.store.corrections import history

        with self._mapped():
            return history(self, measurement_id)

    def check(self) -> CheckReport:
        from lotwatch.store.aggregates import check

        with self._mapped():
            return check(self)

    def bucket_frame(self, *, characteristic: str | None = None, factor: str | None = None,
                     since: date | None = None, until: date | None = None) -> pl.DataFrame:
        from lotwatch.store.queries import bucket_frame

        with self._mapped():
            return bucket_frame(self, characteristic=characteristic, factor=factor,
                                since=since, until=until)

    def values_frame(self, characteristic: str, factor: str, *, since: date | None = None,
                     until: date | None = None, last_n: int | None = None) -> pl.DataFrame:
        from lotwatch.store.queries import values_frame

        with self._mapped():
            return values_frame(self, characteristic, factor, since=since, until=until,
                                last_n=last_n)

    def measurements_frame(self, *, characteristic: str | None = None,
                           since: date | None = None, until: date | None = None) -> pl.DataFrame:
        from lotwatch.store.queries import measurements_frame

        with self._mapped():
            return measurements_frame(self, characteristic=characteristic, since=since,
                                      until=until)


# --------------------------------------------------------------------------- helpers

_CHAR_COLS = ("id, name, unit, resolution, origin_units, lsl, target, usl, min_shift, "
              "plausible_low, plausible_high, created_at, created_by")


def _char_from_row(r: Sequence[Any]) -> Characteristic:
    m, k = scale_of(r[3])
    return Characteristic(
        id=r[0], name=r[1], unit=r[2], resolution=r[3], resolution_value=m / 10**k,
        origin_units=r[4], lsl=r[5], target=r[6], usl=r[7], min_shift=r[8],
        plausible_low=r[9], plausible_high=r[10], created_at=r[11], created_by=r[12],
    )


def _connect(p: Path, mode: str, timeout: float, *, immutable: bool = False) -> sqlite3.Connection:
    uri = p.absolute().as_uri() + f"?mode={mode}" + ("&immutable=1" if immutable else "")
    conn = sqlite3.connect(uri, uri=True, timeout=timeout, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {int(timeout * 1000)}")
    conn.execute("PRAGMA foreign_keys = ON")
    return conn


def _identity(p: Path) -> tuple[int, int] | None:
    """(device, inode) of the file at ``p``, None when there is none."""
    try:
        st = os.stat(p)
    except OSError:
        return None
    return st.st_dev, st.st_ino


def _probe(conn: sqlite3.Connection) -> None:
    """Read the header and schema: fails here for non-SQLite files and unopenable WAL stores."""
    conn.execute("PRAGMA user_version").fetchone()
    conn.execute("SELECT count(*) FROM sqlite_master").fetchone()


def _remove_quietly(p: Path) -> None:
    for suffix in ("", "-wal", "-shm", "-journal"):
        try:
            Path(str(p) + suffix).unlink()
        except OSError:
            pass


def _clean_name(name: object, what: str) -> str:
    text = str(name).strip() if name is not None else ""
    problem = None
    if not text:
        problem = f"the {what} name is empty"
    elif len(text) > 80:
        problem = f"the {what} name is longer than 80 characters"
    elif (bad := unsafe_character(text)) is not None:
        problem = f"the {what} name contains {bad}"
    if problem:
        raise BadInput([RowProblem("command line", None, what, str(name), problem)])
    return text


def _number(field: str, value: object, problems: list[RowProblem]) -> float | None:
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    try:
        x = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        problems.append(RowProblem("command line", None, field, str(value), "not a number"))
        return None
    if not math.isfinite(x):
        problems.append(RowProblem("command line", None, field, str(value),
                                   "must be a finite number"))
        return None
    return x


def _validate_char_fields(*, name: object, unit: object, resolution: object, lsl: object,
                          target: object, usl: object, min_shift: object,
                          plausible: object) -> dict[str, Any]:
    problems: list[RowProblem] = []
    clean_name = _clean_name(name, "characteristic")
    unit_text = "" if unit is None else str(unit).strip()
    res: str | None = None
    try:
        res = canonical_resolution(str(resolution))
    except BadValue as exc:
        problems.append(RowProblem("command line", None, "resolution", str(resolution), str(exc)))
    lo_v = _number("lsl", lsl, problems)
    tg_v = _number("target", target, problems)
    hi_v = _number("usl", usl, problems)
    ms_v = _number("min_shift", min_shift, problems)
    pl_v: tuple[float, float] | None = None
    if plausible is not None:
        try:
            a, b = plausible  # type: ignore[misc]
        except (TypeError, ValueError):
            problems.append(RowProblem("command line", None, "plausible", str(plausible),
                                       "give the plausible range as a (low, high) pair"))
        else:
            pa, pb = _number("plausible low", a, problems), _number("plausible high", b, problems)
            if pa is not None and pb is not None:
                if pa >= pb:
                    problems.append(RowProblem("command line", None, "plausible",
                                               f"{a}..{b}", "the low end must be below the high end"))
                else:
                    pl_v = (pa, pb)
    if lo_v is not None and hi_v is not None and lo_v >= hi_v:
        problems.append(RowProblem("command line", None, "lsl", str(lsl),
                                   f"the LSL must be below the USL ({usl})"))
    if tg_v is not None:
        if (lo_v is not None and tg_v < lo_v) or (hi_v is not None and tg_v > hi_v):
            problems.append(RowProblem("command line", None, "target", str(target),
                                       "the target must lie between the LSL and the USL"))
        if pl_v is not None and not pl_v[0] <= tg_v <= pl_v[1]:
            problems.append(RowProblem("command line", None, "target", str(target),
                                       "the target must lie inside the plausible range"))
    if ms_v is not None and ms_v <= 0:
        problems.append(RowProblem("command line", None, "min_shift", str(min_shift),
                                   "the smallest shift worth detecting must be above 0"))
    if problems:
        raise BadInput(problems)
    return {"name": clean_name, "unit": unit_text, "resolution": res, "lsl": lo_v,
            "target": tg_v, "usl": hi_v, "min_shift": ms_v, "plausible": pl_v}
