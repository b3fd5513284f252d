"""The ``Store``: one SQLite connection to a lotwatch store file, and its public API.

A ``Store`` wraps one ``sqlite3`` connection and is bound to the thread that opened it (sqlite3's
``check_same_thread``): open one ``Store`` per thread or worker. Writes go through
``store.write()``, which is ``BEGIN IMMEDIATE ... COMMIT``: the write lock is taken up front, so
in WAL mode a second writer waits (busy timeout, 30 s by default) instead of failing half way.
Several processes may read and write the same file at once.

This module only assembles the API: opening is ``store.opening``, transactions and error mapping
``store.transaction``, characteristics/factors/tags/settings ``store.catalog``; logging,
corrections, checks and frames are in ``store.lots``, ``store.corrections``,
``store.aggregates`` and ``store.queries`` (imported when first used, so opening a store stays
quick). Those modules name ``Store`` only for type checking, so nothing imports this one back.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from datetime import date
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lotwatch.store import catalog, opening, schema
from lotwatch.store.errors import StoreExists, StoreReadOnly
from lotwatch.store.identity import login_name
from lotwatch.store.model import (
    AuditEntry,
    Characteristic,
    CheckReport,
    Factor,
    LogOutcome,
    LotEntry,
)
from lotwatch.store.timeutil import format_stored, now_utc
from lotwatch.store.transaction import DEFAULT_TIMEOUT, Session, translate_error

if TYPE_CHECKING:
    import polars as pl
    from lotwatch.store.day_sums import DaySums

__all__ = ["DEFAULT_TIMEOUT", "Store", "login_name", "translate_error"]


class Store(Session):
    """An open lotwatch store. Use ``Store.create`` / ``Store.open``; close it (or use ``with``)."""

    # ----------------------------------------------------------------- opening and closing

    @classmethod
    def create(cls, path: str | Path, *, timeout: float = DEFAULT_TIMEOUT,
               zone: str | None = None) -> Store:
        """Make a new, empty store at ``path`` (parent folders too), with the required grouping
        factors site, line and shift and the plant time zone ``zone`` (default: the computer's
        zone). Refuses if anything exists at ``path`` (StoreExists)."""
        if zone is not None:
            from lotwatch.store.plantzone import check_zone

            zone = check_zone(zone)
        p = Path(path).expanduser()
        if p.exists() or p.is_symlink():
            raise StoreExists(f"{p} already exists; open it, or choose another file name")
        # Built complete under a temporary name and linked into place, so an interrupted init
        # leaves no half-made (or empty) file at ``p`` for the next init to trip over.
        tmp = opening.temporary_name(p)
        conn = opening.create_file(tmp, timeout)
        store = cls(conn, tmp, read_only=False, timeout=timeout)
        try:
            with store.write():
                now = format_stored(now_utc())
                schema.migrate(conn, now=now)
                from lotwatch.store.plantzone import machine_zone, write_zone

                write_zone(conn, zone or machine_zone())
                conn.executemany(
                    "INSERT INTO factors(name, required, created_at) VALUES (?, 1, ?)",
                    [(name, now) for name in schema.DEFAULT_FACTORS],
                )
        except BaseException:
            store.close()
            opening.remove_quietly(tmp)
            raise
        store.close()
        opening.link_into_place(tmp, p)
        return cls.open(p, timeout=timeout)

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
        conn, immutable = opening.open_file(p, read_only=read_only, timeout=timeout)
        store = cls(conn, p, read_only=read_only, immutable=immutable, timeout=timeout)
        try:
            opening.check_identity(conn, p)
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

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        mode = "read-only" if self.read_only else "read-write"
        return f"Store({str(self.path)!r}, {mode})"

    @contextmanager
    def write(self) -> Iterator[Store]:
        """See ``Session.write``: ``BEGIN IMMEDIATE`` ... ``COMMIT`` (nested: a SAVEPOINT)."""
        with super().write():
            yield self

    # ----------------------------------------------------------------- catalog (store.catalog)

    def settings(self) -> dict[str, str]:
        """Every stored setting in one query."""
        return catalog.settings(self)

    def get_setting(self, key: str, default: str | None = None) -> str | None:
        return catalog.get_setting(self, key, default)

    def set_setting(self, key: str, value: str | None) -> None:
        """Store a setting (text); ``None`` removes it."""
        catalog.set_setting(self, key, value)

    @property
    def plant_zone(self) -> str:
        """The plant's IANA time zone name: days, weeks and windows are its calendar dates."""
        from lotwatch.store.plantzone import read_zone

        with self.mapped():
            return read_zone(self.conn)

    def set_plant_zone(self, name: str) -> tuple[str, int, int]:
        """Change the plant zone, recomputing every day and day sum in one transaction
        (``store.rezone.set_plant_zone``): returns (old zone, days moved, buckets rebuilt)."""
        from lotwatch.store.rezone import set_plant_zone

        return set_plant_zone(self, name)

    def info(self) -> dict[str, str]:
        """The ``store_info`` rows (schema version, creating/upgrading lotwatch version, ...)."""
        return catalog.info(self)

    def characteristics(self) -> list[Characteristic]:
        return catalog.characteristics(self)

    def characteristic(self, name: str) -> Characteristic:
        return catalog.characteristic(self, name)

    def characteristic_by_id(self, characteristic_id: int) -> Characteristic:
        return catalog.characteristic_by_id(self, characteristic_id)

    def add_characteristic(
        self, name: str, *, unit: str, resolution: str, lsl: float | None = None,
        target: float | None = None, usl: float | None = None, min_shift: float | None = None,
        plausible: tuple[float, float] | None = None, by: str | None = None,
    ) -> Characteristic:
        """``store.catalog.add_characteristic``."""
        return catalog.add_characteristic(
            self, name, unit=unit, resolution=resolution, lsl=lsl, target=target, usl=usl,
            min_shift=min_shift, plausible=plausible, by=by,
        )

    def edit_characteristic(self, name: str, /, **changes: Any) -> Characteristic:
        """``store.catalog.edit_characteristic``."""
        return catalog.edit_characteristic(self, name, **changes)

    def factors(self) -> list[Factor]:
        return catalog.factors(self)

    def add_factor(self, name: str, required: bool = False) -> Factor:
        return catalog.add_factor(self, name, required)

    def retire_characteristic(self, name: str, *, retire: bool = True) -> int:
        """Hide a characteristic from reviews, detectors and the board (data kept; its active
        alerts cleared with the reason); ``retire=False`` restores it (``store.retire``).
        Returns the number of alerts cleared."""
        from lotwatch.store.retire import retire_characteristic

        return retire_characteristic(self, name, retire=retire)

    def retire_factor(self, name: str, *, retire: bool = True) -> int:
        """Hide a grouping factor from reviews and stop requiring it (data kept; active alerts
        by it cleared with the reason). Returns the number of alerts cleared."""
        from lotwatch.store.retire import retire_factor

        return retire_factor(self, name, retire=retire)

    def rename_factor(self, old: str, new: str) -> None:
        """Rename a grouping factor everywhere it is named, in one transaction."""
        from lotwatch.store.retire import rename_factor

        rename_factor(self, old, new)

    def tag_keys(self) -> list[str]:
        return catalog.tag_keys(self)

    def tag_values(self, key: str) -> list[str]:
        return catalog.tag_values(self, key)

    # ----------------------------------------------------------------- logging, corrections, reads

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

        with self.mapped():
            return history(self, measurement_id)

    def check(self) -> CheckReport:
        from lotwatch.store.aggregates import check

        with self.mapped():
            try:
                return check(self)
            except sqlite3.DatabaseError as exc:
                # damage SQLite's page checks pass, e.g. a flipped bit in text (no longer UTF-8)
                return CheckReport(False, [f"the store file is damaged ({exc}); restore it from "
                                           "a backup (see lotwatch restore)"], 0, 0)

    def bucket_frame(self, *, characteristic: str | None = None, factor: str | None = None,
                     since: date | None = None, until: date | None = None) -> pl.DataFrame:
        from lotwatch.store.queries import bucket_frame

        with self.mapped():
            return bucket_frame(self, characteristic=characteristic, factor=factor,
                                since=since, until=until)

    def day_sums(self, *, characteristic: str | None = None, factor: str | None = None,
                 since: date | None = None, until: date | None = None) -> DaySums:
        from lotwatch.store.queries import day_sums

        with self.mapped():
            return day_sums(self, characteristic=characteristic, factor=factor, since=since,
                            until=until)

    def values_frame(self, characteristic: str, factor: str, *, since: date | None = None,
                     until: date | None = None, last_n: int | None = None) -> pl.DataFrame:
        from lotwatch.store.queries import values_frame

        with self.mapped():
            return values_frame(self, characteristic, factor, since=since, until=until,
                                last_n=last_n)

    def measurements_frame(self, *, characteristic: str | None = None,
                           since: date | None = None, until: date | None = None) -> pl.DataFrame:
        from lotwatch.store.queries import measurements_frame

        with self.mapped():
            return measurements_frame(self, characteristic=characteristic, since=since,
                                      until=until)
