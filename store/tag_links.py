"""Which tag value implies another: a line seen only under one site, read from recent lots.

The entry form fills a blank tag from this (and says so); the store never infers tags itself.
"""

from __future__ import annotations

from datetime import timedelta
from typing import TYPE_CHECKING

from lotwatch.store.timeutil import format_stored, now_utc

if TYPE_CHECKING:
    from lotwatch.store.connection import Store

# Lots created within this many days count; older history may hold moved lines.
RECENT_DAYS = 120
# A value needs this many lots before its companions are trusted as a rule.
MIN_LOTS = 3

_SQL = """
WITH recent AS (SELECT id FROM lots WHERE created_at >= :since),
     levels AS (SELECT t.key, COUNT(DISTINCT t.value) AS n FROM lot_tags t
                JOIN recent r ON r.id = t.lot_id GROUP BY t.key)
SELECT a.key, a.value, b.key, MIN(b.value)
FROM lot_tags a
JOIN recent r ON r.id = a.lot_id
JOIN lot_tags b ON b.lot_id = a.lot_id AND b.key <> a.key
JOIN levels la ON la.key = a.key
JOIN levels lb ON lb.key = b.key
WHERE lb.n < la.n
GROUP BY a.key, a.value, b.key
HAVING COUNT(DISTINCT b.value) = 1 AND COUNT(*) >= :min_lots
"""


def single_companions(store: Store) -> dict[tuple[str, str], dict[str, str]]:
    """(key, value) -> {coarser key: the only value seen with it} over recent lots.

    "Coarser" means the other key has fewer distinct values (site over line), so a shift is
    never filled in from a line that happened to run one shift.
    """
    since = format_stored(now_utc() - timedelta(days=RECENT_DAYS))
    out: dict[tuple[str, str], dict[str, str]] = {}
    for key, value, other, only in store.conn.execute(_SQL, {"since": since,
                                                             "min_lots": MIN_LOTS}):
        out.setdefault((key, value), {})[other] = only
    return out
