"""The plant time zone: days, day sums and lot IDs follow the plant's calendar, not UTC's.

Zone offsets are from the IANA time zone database (via Python's zoneinfo): America/Chicago is
UTC-6 in November (CST) and UTC-5 in July (CDT); Asia/Tokyo is UTC+9 all year.
"""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

import pytest
from lotwatch.store import BadInput, LotEntry, Store
from lotwatch.store.plantzone import machine_zone, new_lot_code, plant_day

TAGS = {"site": "north", "line": "1", "shift": "night"}


def _chicago(tmp_path: Path) -> Store:
    store = Store.create(tmp_path / "z.sqlite", zone="America/Chicago")
    store.add_characteristic("fill", unit="mL", resolution="0.1", target=500.0)
    return store


def test_plant_day_is_the_local_calendar_date() -> None:
    # 05:30 UTC on 1 Dec is 23:30 CST on 30 Nov (UTC-6, IANA tz database)
    assert plant_day("2026-12-01T05:30:00Z", "America/Chicago") == "2026-11-30"
    # 15:30 UTC on 30 Nov is 00:30 JST on 1 Dec (UTC+9)
    assert plant_day("2026-11-30T15:30:00Z", "Asia/Tokyo") == "2026-12-01"
    # July: CDT is UTC-5, so 04:30 UTC is still the previous local day, 05:30 UTC is not
    assert plant_day("2026-07-02T04:30:00Z", "America/Chicago") == "2026-07-01"
    assert plant_day("2026-07-02T05:30:00Z", "America/Chicago") == "2026-07-02"


def test_a_night_lot_stays_on_its_plant_day_and_week(tmp_path: Path) -> None:
    with _chicago(tmp_path) as store:
        # Sunday 29 Nov 2026, 23:30 local = Monday 30 Nov 05:30 UTC (next ISO week in UTC)
        store.log_lots([LotEntry("fill", ["500.1", "500.3"], TAGS, lot="N1",
                                 measured_at="2026-11-30T05:30:00Z")])
        day = store.conn.execute("SELECT DISTINCT day FROM measurements").fetchone()[0]
        assert day == "2026-11-29"
        frame = store.bucket_frame(factor="shift")
        assert frame["day"].to_list()[0].isocalendar()[:2] == (2026, 48)  # not week 49
        assert frame.select("n", "lots").rows() == [(2, 1)]  # 2 values of 1 lot
        assert store.check().ok


def test_naive_times_and_lot_ids_are_plant_local(tmp_path: Path) -> None:
    with _chicago(tmp_path) as store:
        out = store.log_lots([LotEntry("fill", ["500.0"], TAGS,
                                       measured_at="2026-11-29 23:30")])
        stamp, day = store.conn.execute(
            "SELECT measured_at, day FROM measurements").fetchone()
        assert stamp == "2026-11-30T05:30:00Z" and day == "2026-11-29"
        assert out.lots[0].startswith("L")
    # a generated lot ID carries the plant-local time it was made: 05:30 UTC = 23:30 CST
    when = datetime(2026, 11, 30, 5, 30, tzinfo=UTC)
    assert new_lot_code(set(), when, "America/Chicago").startswith("L20261129-233000-")
    assert new_lot_code(set(), when, "UTC").startswith("L20261130-053000-")


def test_changing_the_zone_moves_days_in_one_transaction(tmp_path: Path) -> None:
    with _chicago(tmp_path) as store:
        store.log_lots([LotEntry("fill", ["500.1"], TAGS, lot="A",
                                 measured_at="2026-11-30T05:30:00Z"),
                        LotEntry("fill", ["500.2"], TAGS, lot="B",
                                 measured_at="2026-11-30T18:00:00Z")])
        assert sorted(store.bucket_frame(factor="line")["day"].cast(str).to_list()) == [
            "2026-11-29", "2026-11-30"]
        old, moved, rebuilt = store.set_plant_zone("UTC")
        assert (old, moved) == ("America/Chicago", 1)
        assert store.plant_zone == "UTC"
        frame = store.bucket_frame(factor="line")
        assert frame.select("n", "lots").rows() == [(2, 2)]
        assert frame["day"].cast(str).to_list() == ["2026-11-30"]
        assert rebuilt == 3  # one day, three factors
        assert store.check().ok


def test_a_bad_zone_is_refused_and_nothing_moves(tmp_path: Path) -> None:
    with _chicago(tmp_path) as store:
        store.log_lots([LotEntry("fill", ["500.1"], TAGS, lot="A",
                                 measured_at="2026-11-30T05:30:00Z")])
        with pytest.raises(BadInput, match="not a time zone name"):
            store.set_plant_zone("Chicago")
        with pytest.raises(BadInput, match="lotwatch zone set"):
            store.set_setting("plant.time_zone", "UTC")  # the days would not move with it
        assert store.plant_zone == "America/Chicago"
        assert store.check().ok
    with pytest.raises(BadInput, match="not a time zone name"):
        Store.create(tmp_path / "bad.sqlite", zone="Mars/Base")
    assert not (tmp_path / "bad.sqlite").exists()


def test_check_finds_a_day_that_is_not_the_plant_date(tmp_path: Path) -> None:
    with _chicago(tmp_path) as store:
        store.log_lots([LotEntry("fill", ["500.1"], TAGS, lot="A",
                                 measured_at="2026-11-30T05:30:00Z")])
        with store.write():
            store.conn.execute("UPDATE measurements SET day = '2026-11-30'")
            store.conn.execute("UPDATE buckets SET day = '2026-11-30'")
        report = store.check()
        assert not report.ok
        assert any("America/Chicago that is 2026-11-29" in p for p in report.problems)


def test_a_new_store_takes_the_machine_zone(tmp_path: Path,
                                            monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TZ", "Asia/Tokyo")
    assert machine_zone() == "Asia/Tokyo"
    with Store.create(tmp_path / "m.sqlite") as store:
        assert store.plant_zone == "Asia/Tokyo"
    monkeypatch.setenv("TZ", "Not/AZone")  # not a zone: the next source decides
    assert machine_zone() != "Not/AZone"


def test_void_of_the_last_value_of_a_lot_drops_it_from_the_lot_count(tmp_path: Path) -> None:
    with _chicago(tmp_path) as store:
        out = store.log_lots([LotEntry("fill", ["500.1", "500.3"], TAGS, lot="A",
                                       measured_at="2026-11-30T18:00:00Z"),
                              LotEntry("fill", ["500.2"], TAGS, lot="B",
                                       measured_at="2026-11-30T19:00:00Z")])
        a1, a2, _b = out.measurement_ids
        frame = store.bucket_frame(factor="site")
        assert frame.select("n", "lots").rows() == [(3, 2)]
        store.void(a1, reason="spilled")
        assert store.bucket_frame(factor="site").select("n", "lots").rows() == [(2, 2)]
        store.void(a2, reason="spilled")
        assert store.bucket_frame(factor="site").select("n", "lots").rows() == [(1, 1)]
        assert store.check().ok
