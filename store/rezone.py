"""Changing a store's plant time zone: every measurement's day and every day sum recomputed in
one transaction. Apart from ``plantzone`` (which the day sums read) so the two never import each
other."""

from __future__ import annotations

from typing import TYPE_CHECKING

from lotwatch.store.aggregates import rebuild_all
from lotwatch.store.plantzone import check_zone, day_function, read_zone, write_zone

if TYPE_CHECKING:
    from lotwatch.store.connection import Store


def set_plant_zone(store: Store, name: str) -> tuple[str, int, int]:
    """Change the plant zone and recompute every measurement's day and every day sum in one
    transaction. Returns (old zone, measurements whose day moved, bucket rows rebuilt)."""
    new = check_zone(name)
    with store.write():
        conn = store.conn
        old = read_zone(conn)
        day_of = day_function(new)
        stamps = [r[0] for r in conn.execute("SELECT DISTINCT measured_at FROM measurements")]
        conn.execute("CREATE TEMP TABLE IF NOT EXISTS plant_days "
                     "(measured_at TEXT PRIMARY KEY, day TEXT NOT NULL) WITHOUT ROWID")
        conn.execute("DELETE FROM temp.plant_days")
        conn.executemany("INSERT INTO temp.plant_days(measured_at, day) VALUES (?, ?)",
                         [(s, day_of(s)) for s in stamps])
        moved = conn.execute(
            "UPDATE measurements SET day = (SELECT p.day FROM temp.plant_days p "
            "WHERE p.measured_at = measurements.measured_at) WHERE day <> (SELECT p.day FROM "
            "temp.plant_days p WHERE p.measured_at = measurements.measured_at)").rowcount
        conn.execute("DROP TABLE temp.plant_days")
        rebuilt = rebuild_all(conn)
        write_zone(conn, new)
    return old, int(moved), rebuilt
