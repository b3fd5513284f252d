"""values_frame(last_n=...) in a store whose plant day is not the UTC day."""

from __future__ import annotations

from datetime import date
from pathlib import Path

from lotwatch.store import LotEntry, Store

TAGS = {"site": "a", "line": "1", "shift": "day"}


def test_last_lot_of_a_local_evening_is_found(tmp_path: Path) -> None:
    # 22:00 on 25 Nov in New York is 03:00 UTC on 26 Nov (UTC-5 in November, IANA tz database):
    # both lots belong to the plant day 2026-11-25, and the later one is the last lot.
    with Store.create(tmp_path / "s.sqlite", zone="America/New_York") as s:
        s.add_characteristic("x", unit="mm", resolution="0.1")
        s.log_lots([LotEntry("x", ["1.0"], dict(TAGS), lot="EARLY",
                             measured_at="2026-11-25T15:00:00Z"),
                    LotEntry("x", ["2.0"], dict(TAGS), lot="LATE",
                             measured_at="2026-11-26T03:00:00Z")])
        days = {r[0] for r in s.conn.execute("SELECT day FROM measurements")}
        assert days == {"2026-11-25"}
        assert s.values_frame("x", "line", last_n=1)["lot"].to_list() == ["LATE"]
        assert sorted(s.values_frame("x", "line", last_n=2)["lot"].to_list()) == ["EARLY", "LATE"]
        # a plant-day bound applies too: nothing after 24 Nov
        assert s.values_frame("x", "line", last_n=1, until=date(2026, 11, 24)).height == 0
