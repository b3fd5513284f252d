"""lotwatch's store: tagged lot measurements in one SQLite file.

Knows SQLite and nothing of the UI or statistics (see DEVELOPERS.md for the contract).

- ``Store.create(path, zone=None)`` / ``Store.open(path, read_only=False, timeout=30.0)``; ``close()`` or
  ``with``. One ``Store`` = one sqlite3 connection, bound to the thread that opened it.
- ``store.write()``: ``BEGIN IMMEDIATE ... COMMIT`` (nested: SAVEPOINT). Every API write uses it.
- Values are integers of the characteristic's decimal ``resolution`` (``store.values``);
  timestamps are stored as UTC ``YYYY-MM-DDTHH:MM:SSZ`` and a bucket's day is the plant-local
  date in the store's plant zone (``store.plant_zone``, ``set_plant_zone``; ``store.plantzone``).
  Buckets count values (``n``) and distinct lots (``lots``).
- ``log_lots`` (``store.lots``), ``correct``/``void``/``history`` (``store.corrections``),
  ``check`` and bucket upkeep (``store.aggregates``), polars frames (``store.queries``).
- Errors are ``StoreError`` subclasses whose ``str()`` is a message for the user.
"""

from lotwatch.store.connection import Store
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

__all__ = [
    "AuditEntry",
    "BadInput",
    "Characteristic",
    "CheckReport",
    "Conflict",
    "Factor",
    "LogOutcome",
    "LotEntry",
    "NotFound",
    "RowProblem",
    "Store",
    "StoreCorrupt",
    "StoreError",
    "StoreExists",
    "StoreFull",
    "StoreLocked",
    "StoreMissing",
    "StoreReadOnly",
    "StoreTooNew",
]
