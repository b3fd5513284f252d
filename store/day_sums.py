"""Read the stored day sums (the ``buckets`` table) into numpy arrays in one query.

Python's ``sqlite3`` makes one Python object per cell, and at a few hundred thousand day sums
that conversion, not SQLite, is the cost of a review (about 150 ns a value). So SQLite renders
each column of each characteristic x factor x level as one comma-separated text
(``group_concat``, grouped in the table's primary-key order, so without a sort), and numpy
parses the texts in C. The integers stay exact: SQLite writes every 64-bit integer in full
decimal and ``numpy.fromstring`` reads it back as int64 (checked for -2^63 and 2^63 - 1 in the
tests). Every aggregate of a group steps over the same rows in the same order, so the i-th
number of each column belongs to the same day sum.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from lotwatch.store.errors import StoreCorrupt

if TYPE_CHECKING:
    from lotwatch.store.connection import Store

COLUMNS = ("day", "n", "sum_d", "sum_d2", "lots")


@dataclass(frozen=True)
class DaySums:
    """Day sums in runs of one (characteristic name, factor, level): ``keys[r]`` owns
    ``lengths[r]`` consecutive rows of the arrays. Runs come in (characteristic id, factor,
    level) order; ``day`` is the plant day as days since 1970-01-01 (int64), the other arrays
    are the stored integers."""

    keys: list[tuple[str, str, str]]
    lengths: np.ndarray
    day: np.ndarray
    n: np.ndarray
    sum_d: np.ndarray
    sum_d2: np.ndarray
    lots: np.ndarray

    @property
    def rows(self) -> int:
        return int(self.day.shape[0])


def read_day_sums(store: Store, where: str, params: list[object]) -> DaySums:
    """The buckets matching ``where`` (a SQL condition on alias ``b``, or "") in one query.

    A stored day that is not a date (``unixepoch`` gives NULL, which ``group_concat`` skips)
    leaves the day column short: ``StoreCorrupt`` then, naming ``lotwatch check``."""
    key_order = "b.characteristic_id, b.factor, b.level"
    # unixepoch of a midnight is a multiple of 86400, so the division is exact
    sql = ("SELECT c.name, b.factor, b.level, count(*), group_concat(unixepoch(b.day) / 86400), "
           "group_concat(b.n), group_concat(b.sum_d), group_concat(b.sum_d2), "
           "group_concat(b.lots) FROM buckets b JOIN characteristics c "
           "ON c.id = b.characteristic_id" + (f" WHERE {where}" if where else "")
           + f" GROUP BY {key_order} ORDER BY {key_order}")
    groups = store.conn.execute(sql, params).fetchall()
    lengths = np.array([g[3] for g in groups], dtype=np.int64)
    total = int(lengths.sum())
    parsed = [_parse([g[4 + i] for g in groups], total) for i in range(len(COLUMNS))]
    cols = [c for c in parsed if c is not None]
    if len(cols) != len(parsed):
        raise StoreCorrupt(f"{store.path}: a day sum has a malformed day; run lotwatch check "
                           "for details")
    day, n, s1, s2, lots = cols
    return DaySums([(g[0], g[1], g[2]) for g in groups], lengths, day, n, s1, s2, lots)


def _parse(texts: list[str | None], total: int) -> np.ndarray | None:
    """One int64 array from the groups' comma-separated texts; None unless it holds ``total``
    numbers (a NULL was skipped)."""
    if total == 0:
        return np.zeros(0, dtype=np.int64)
    if any(t is None for t in texts):
        return None
    out = np.fromstring(",".join(texts), dtype=np.int64, sep=",")  # type: ignore[arg-type]
    return out if out.shape[0] == total else None
