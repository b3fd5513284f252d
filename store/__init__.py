"""lotwatch's store: tagged lot measurements in one SQLite file.

Knows SQLite and nothing of the UI or statistics. See DEVELOPERS.md for the contract; the entry
points are ``Store.create(path)`` and ``Store.open(path, read_only=False)``.
"""

from store.connection import Store
from store.errors import (
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
from store.model import AuditEntry, Characteristic, CheckReport, Factor, LogOutcome, LotEntry

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
