"""Exceptions raised by the store. Each ``str()`` is a message for the person at the terminal:
what was wrong, where (file, row, field, value), and what to do."""

from __future__ import annotations

from dataclasses import dataclass


class StoreError(Exception):
    """Base class of every error the store reports to a user."""


class StoreMissing(StoreError):
    """The store file does not exist."""


class StoreTooNew(StoreError):
    """The store was written by a newer lotwatch (its schema version is above ours)."""


class StoreCorrupt(StoreError):
    """The file is not a readable lotwatch store (not SQLite, damaged, or another program's)."""


class StoreLocked(StoreError):
    """Another process held the store's write lock past the busy timeout."""


class StoreReadOnly(StoreError):
    """A write was attempted on a store opened read-only, or the file/directory is not writable."""


class StoreFull(StoreError):
    """The disk (or file-system quota) is full; the transaction was rolled back."""


class StoreExists(StoreError):
    """``Store.create`` was asked to make a store where a file already exists."""


class NotFound(StoreError):
    """A named characteristic, factor, measurement or alert does not exist."""


class Conflict(StoreError):
    """The request contradicts what is stored (e.g. editing the resolution once data exists)."""


@dataclass(frozen=True)
class RowProblem:
    """One refused input row: where it was and why."""

    source: str  # file name, or "command line"
    row: int | None  # 1-based data row number in the file (header excluded); None for CLI input
    column: str | None
    value: str | None
    reason: str

    def __str__(self) -> str:
        where = self.source
        if self.row is not None:
            where += f", row {self.row}"
        if self.column is not None:
            where += f", column {self.column!r}"
        if self.value is not None:
            where += f", value {self.value!r}"
        return f"{where}: {self.reason}"


class BadInput(StoreError):
    """One or more input rows were refused; nothing was stored."""

    def __init__(self, problems: list[RowProblem], *, stored_nothing: bool = True) -> None:
        self.problems = list(problems)
        self.stored_nothing = stored_nothing
        lines = [str(p) for p in self.problems[:50]]
        more = len(self.problems) - len(lines)
        if more > 0:
            lines.append(f"... and {more} more")
        head = f"{len(self.problems)} bad input row(s)"
        if stored_nothing:
            head += "; nothing was stored"
        super().__init__(head + ":\n  " + "\n  ".join(lines))
