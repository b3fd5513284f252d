"""Property (issue 11): in random stores with replicates and a plant time zone, every count shown
as lots equals the number of distinct lots, and every day is the plant-local date of its
measurement. The oracle is plain Python with zoneinfo (the IANA tz database), independent of the
store's SQL and its day function."""

from __future__ import annotations

import tempfile
from collections import defaultdict
from datetime import UTC, datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lotwatch.store import BadInput, Conflict, LotEntry, Store

ZONES = ["America/Chicago", "Asia/Kolkata", "Pacific/Auckland", "Europe/London", "UTC"]
START = datetime(2026, 3, 7, 0, 0, tzinfo=UTC)  # spans US and NZ daylight-saving changes

lot_op = st.tuples(
    st.just("log"), st.integers(0, 12),  # lot
    st.lists(st.integers(-30, 30), min_size=1, max_size=4),  # replicate offsets
    st.sampled_from(["A", "B", "C"]),  # line
    st.integers(0, 60 * 24 * 40),  # minutes after START
)
void_op = st.tuples(st.just("void"), st.integers(0, 1000))
ops = st.lists(st.one_of(lot_op, lot_op, lot_op, void_op), min_size=1, max_size=30)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(ZONES), st.sampled_from(ZONES), ops)
def test_lot_counts_and_plant_days(zone: str, new_zone: str, operations: list[tuple]) -> None:
    with tempfile.TemporaryDirectory() as tmp, Store.create(Path(tmp) / "p.sqlite",
                                                            zone=zone) as store:
        store.add_characteristic("fill", unit="mL", resolution="0.1", target=500.0)
        ids: list[int] = []
        for op in operations:
            try:
                if op[0] == "log":
                    _, lot, offsets, line, minutes = op
                    at = START + timedelta(minutes=minutes)
                    values = [f"{500 + o / 10:.1f}" for o in offsets]
                    out = store.log_lots([LotEntry("fill", values, {
                        "site": "S", "line": line, "shift": "x"}, lot=f"L{lot}",
                        measured_at=at)])
                    ids.extend(out.measurement_ids)
                elif ids:
                    store.void(ids[op[1] % len(ids)], reason="property")
            except (BadInput, Conflict):
                pass  # a lot logged again with other values or tags; a second void
        for z in (zone, new_zone):
            if z != store.plant_zone:
                store.set_plant_zone(z)
            tz = ZoneInfo(z)
            rows = store.conn.execute(
                "SELECT m.lot_id, m.measured_at, m.day, m.voided, t.value FROM measurements m "
                "JOIN lot_tags t ON t.lot_id = m.lot_id AND t.key = 'line'").fetchall()
            lots: dict[tuple[str, str], set[int]] = defaultdict(set)
            values: dict[tuple[str, str], int] = defaultdict(int)
            for lot_id, stamp, day, voided, line in rows:
                local = datetime.strptime(stamp, "%Y-%m-%dT%H:%M:%SZ").replace(
                    tzinfo=UTC).astimezone(tz).date().isoformat()
                assert day == local, (stamp, z)
                if not voided:
                    lots[(line, local)].add(lot_id)
                    values[(line, local)] += 1
            frame = store.bucket_frame(factor="line")
            shown = {(lv, d.isoformat()): (n, k)
                     for lv, d, n, k in frame.select("level", "day", "n", "lots").rows()}
            assert shown == {key: (values[key], len(lots[key])) for key in lots}
            assert store.check().ok
