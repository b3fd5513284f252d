"""Plain records the store hands out and takes in (dataclasses; no SQL here)."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

from lotwatch.store.errors import RowProblem


@dataclass(frozen=True)
class Characteristic:
    """A measured property of a lot (e.g. fill volume), with its resolution and limits.

    ``resolution`` is the decimal step of the instrument as text ("0.1", "0.05", "1");
    a value is stored as an integer count of those steps (``units``), and
    ``d = units - origin_units`` feeds the sufficient statistics.
    """

    id: int
    name: str
    unit: str
    resolution: str
    resolution_value: float
    origin_units: int
    lsl: float | None
    target: float | None
    usl: float | None
    min_shift: float | None
    plausible_low: float | None
    plausible_high: float | None
    created_at: str
    created_by: str
    retired_at: str | None = None  # hidden from reviews and detectors since then; data kept

    @property
    def origin_value(self) -> float:
        """The origin as a value in the characteristic's unit (``origin_units * resolution``)."""
        from lotwatch.store.values import units_to_float

        return units_to_float(self.origin_units, self.resolution)


@dataclass(frozen=True)
class Factor:
    """A tag key that is a grouping factor (site, line, shift, ...)."""

    name: str
    required: bool
    retired_at: str | None = None  # hidden from reviews and detectors since then; data kept


@dataclass
class LotEntry:
    """One lot's values for one characteristic, as typed or read from a file.

    ``values`` are decimal texts (replicate measurements of the same lot); ``tags`` map tag keys
    (site, line, shift, ...) to levels. ``lot`` is generated when None. ``measured_at`` is an
    aware datetime, an ISO 8601 text (with offset, or naive = local time), or None (= now).
    ``rows`` are the 1-based file rows the values came from (one per value, or one for all),
    ``column`` the file column holding the values; both only steer error messages.
    """

    characteristic: str
    values: list[str]
    tags: dict[str, str]
    lot: str | None = None
    measured_at: datetime | str | None = None
    note: str | None = None
    by: str | None = None
    source: str = "command line"
    rows: list[int] | None = None
    column: str | None = None


@dataclass
class LogOutcome:
    """What ``log_lots`` did. Counts are in entries (one lot x characteristic each);
    ``measurement_ids`` has one id per stored value; ``lots`` the lot IDs of stored entries
    (generated ones included), in input order."""

    read: int
    stored: int
    duplicates: int
    rejected: list[RowProblem]
    rounded: int
    measurement_ids: list[int]
    lots: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class AuditEntry:
    """One step in a measurement's trail: logged, corrected or voided."""

    action: str  # "log", "correct" or "void"
    at: str  # UTC ISO 8601
    by: str
    old_value: str | None
    new_value: str | None
    reason: str | None


@dataclass
class CheckReport:
    """Result of ``Store.check()``: ``ok`` only if every problem list is empty."""

    ok: bool
    problems: list[str]
    buckets_checked: int
    measurements: int
