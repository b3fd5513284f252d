"""log_lots: every refusal names what and where and changes nothing; duplicates are skipped;
values are exact integers of the resolution; timestamps are stored in UTC."""

from __future__ import annotations

import re
import time
from datetime import UTC, date, datetime
from decimal import Decimal

import polars as pl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lotwatch.store import BadInput, Conflict, LotEntry, NotFound, Store
from lotwatch.store.timeutil import BadTime, format_local, format_stored, to_utc
from lotwatch.store.values import (
    BadValue,
    choose_origin,
    format_units,
    parse_decimal,
    text_to_units,
    to_units,
)

TAGS = {"site": "north", "line": "1", "shift": "day"}


# ----------------------------------------------------------------------------- values


def test_units_are_exact() -> None:
    assert to_units(Decimal("500.1"), "0.1") == (5001, False)
    assert to_units(Decimal("-0.35"), "0.05") == (-7, False)
    assert to_units(Decimal("1200"), "100") == (12, False)
    assert format_units(10002, "0.05") == "500.10"
    assert format_units(-7, "0.05") == "-0.35"
    assert format_units(12, "100") == "1200"


def test_rounding_is_half_even() -> None:
    # Half-even ("banker's") rounding: Python decimal ROUND_HALF_EVEN / IEEE 754 roundTiesToEven.
    # 500.125 / 0.05 = 10002.5 -> 10002 (even); 500.175 / 0.05 = 10003.5 -> 10004 (even).
    assert to_units(Decimal("500.125"), "0.05", round_values=True) == (10002, True)
    assert to_units(Decimal("500.175"), "0.05", round_values=True) == (10004, True)
    assert to_units(Decimal("0.25"), "0.1", round_values=True) == (2, True)
    assert to_units(Decimal("0.35"), "0.1", round_values=True) == (4, True)


@settings(max_examples=300, deadline=None)
@given(st.integers(-10**7, 10**7), st.integers(0, 4), st.integers(0, 2),
       st.sampled_from(["0.1", "0.05", "1", "0.25", "100", "0.001"]), st.booleans())
def test_fast_path_equals_decimal_path(n: int, decimals: int, pad: int, res: str,
                                       rounding: bool) -> None:
    text = format(Decimal(n).scaleb(-decimals), "f") + ("0" * pad if decimals else "")
    try:
        expected = to_units(parse_decimal(text), res, round_values=rounding)
    except BadValue as exc:
        with pytest.raises(type(exc)):
            text_to_units(text, res, round_values=rounding)
    else:
        assert text_to_units(text, res, round_values=rounding) == expected


@pytest.mark.parametrize("text", ["nan", "NaN", "inf", "-Infinity", "abc", "", "1,5", "--1"])
def test_non_numbers_refused(text: str) -> None:
    with pytest.raises(BadValue):
        parse_decimal(text)


def test_origin_choice() -> None:
    assert choose_origin("0.1", target=500.0, lsl=495.0, usl=506.0, plausible=None) == 5000
    assert choose_origin("0.1", target=None, lsl=495.0, usl=506.0, plausible=None) == 5005
    assert choose_origin("1", target=None, lsl=None, usl=None, plausible=(0.0, 101.0)) == 50
    assert choose_origin("0.5", target=None, lsl=495.0, usl=None, plausible=None) == 0


# ----------------------------------------------------------------------------- time


def test_timestamps_to_utc(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TZ", "Europe/Berlin")
    time.tzset()
    try:
        assert format_stored("2026-11-30T15:05:00+01:00") == "2026-11-30T14:05:00Z"
        assert format_stored("2026-11-30T14:05:00Z") == "2026-11-30T14:05:00Z"
        assert format_stored("2026-11-30 15:05") == "2026-11-30T14:05:00Z"  # naive = local (CET)
        assert format_stored("2026-07-01 15:05") == "2026-07-01T13:05:00Z"  # CEST, UTC+2
        assert format_stored(datetime(2026, 11, 30, 14, 5, tzinfo=UTC)) == "2026-11-30T14:05:00Z"
        assert format_local("2026-11-30T14:05:00Z") == "2026-11-30 15:05"
        assert to_utc("2026-11-30").isoformat() == "2026-11-29T23:00:00+00:00"
    finally:
        monkeypatch.delenv("TZ")
        time.tzset()


@pytest.mark.parametrize("text", ["30/11/2026", "yesterday", "2026-13-01", ""])
def test_bad_timestamps(text: str) -> None:
    with pytest.raises(BadTime):
        format_stored(text)


# ----------------------------------------------------------------------------- log_lots


def test_log_stores_units_tags_and_buckets(fill: Store) -> None:
    row = fill.conn.execute(
        "SELECT original_units, current_units, voided, measured_at, day, logged_by, source "
        "FROM measurements WHERE seq = 0").fetchone()
    assert row == (5001, 5001, 0, "2026-11-30T14:05:00Z", "2026-11-30", fill.user, "command line")
    assert dict(fill.conn.execute("SELECT key, value FROM lot_tags").fetchall()) == TAGS
    b = fill.bucket_frame(factor="line")
    # d = units - origin: 5001 - 5000 = 1 and 4998 - 5000 = -2; sum 1-2 = -1, squares 1+4 = 5
    # two values of one lot: n = 2 values, lots = 1
    assert b.rows() == [("fill_volume", "line", "1", date(2026, 11, 30), 2, -1, 5, 1)]
    assert fill.check().ok


def test_outcome_counts_and_progress(fill: Store, entry) -> None:
    seen: list[int] = []
    out = fill.log_lots([entry(["500.0", "500.2"], "L2"), entry("499.9", "L3")],
                        progress=seen.append)
    assert (out.read, out.stored, out.duplicates, out.rounded) == (2, 2, 0, 0)
    assert len(out.measurement_ids) == 3 and out.lots == ["L2", "L3"]
    assert seen and seen[-1] == 3


def _refused(store: Store, dump, entries: list[LotEntry], pattern: str, **kw) -> BadInput:
    before = dump(store)
    with pytest.raises(BadInput, match=pattern) as info:
        store.log_lots(entries, **kw)
    assert dump(store) == before
    return info.value


def test_unknown_characteristic(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("1", "L9", characteristic="torque")],
             r"column 'characteristic', value 'torque': unknown characteristic 'torque' "
             r"\(known: fill_volume\)")


def test_finer_than_resolution(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("500.123", "L9")],
             re.escape("500.123 is finer than the resolution 0.1 mL of fill_volume; "
                       "use --round to round half-even"))


def test_round_values_counts(fill: Store, entry) -> None:
    out = fill.log_lots([entry(["500.125", "500.15"], "L9")], round_values=True)
    assert out.rounded == 2
    units = [r[0] for r in fill.conn.execute(
        "SELECT original_units FROM measurements WHERE id IN (?, ?) ORDER BY seq",
        out.measurement_ids)]
    assert units == [5001, 5002]  # 5001.25 -> 5001; 5001.5 -> 5002 (half-even)


@pytest.mark.parametrize("text,reason", [
    ("abc", "'abc' is not a number"),
    ("nan", "is not a finite number"),
    ("inf", "is not a finite number"),
    ("", "the value is empty"),
])
def test_not_a_number(fill: Store, dump, entry, text: str, reason: str) -> None:
    _refused(fill, dump, [entry(text, "L9", source="lab.csv", rows=[7], column="volume")],
             rf"lab\.csv, row 7, column 'volume'.*{re.escape(reason)}")


def test_outside_plausible_range(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("650.0", "L9")],
             re.escape("650.0 mL is outside the plausible range 400 to 600 mL of fill_volume"))
    _refused(fill, dump, [entry("399.9", "L9")], "outside the plausible range")
    _refused(fill, dump, [entry("600.1", "L9")], "outside the plausible range")
    assert fill.log_lots([entry("400.0", "L9"), entry("600", "L10")]).stored == 2  # inclusive


def test_missing_required_tag(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("500.0", "L9", tags={"site": "north", "line": "1"})],
             r"column 'shift': missing required tag 'shift' \(required: site, line, shift\)")


def test_empty_tag_value(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("500.0", "L9", tags={**TAGS, "line": "  "})],
             r"column 'line', value '  ': tag 'line' is empty")


def test_empty_lot_and_no_values(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("500.0", " ")], "the lot ID is empty")
    _refused(fill, dump, [entry([], "L9")], "no value given")


def test_bad_measured_at(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("500.0", "L9", measured_at="30/11/2026 14:05")],
             r"column 'measured_at', value '30/11/2026 14:05': '30/11/2026 14:05' is not a "
             r"date/time; use ISO 8601")


def test_conflict_with_stored_values(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry(["500.1", "499.9"], "L1")],
             r"lot 'L1' already has fill_volume = 500\.1, 499\.8; this entry has 500\.1, 499\.9")


def test_conflict_with_stored_tags(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry(["500.1", "499.8"], "L1", tags={**TAGS, "line": "2"})],
             r"lot 'L1' is stored with line='1'; this entry says line='2'")


def test_conflict_within_batch(fill: Store, dump, entry) -> None:
    _refused(fill, dump, [entry("500.0", "L9", source="a.csv", rows=[1]),
                          entry("500.2", "L9", source="a.csv", rows=[5])],
             r"a\.csv, row 5.*lot 'L9' has fill_volume twice in this input with different "
             r"values \(row 1\)")


def test_every_problem_listed_and_nothing_stored(fill: Store, dump, entry) -> None:
    err = _refused(fill, dump, [
        entry("500.0", "L10", source="f.csv", rows=[1]),
        entry("x", "L11", source="f.csv", rows=[2]),
        entry("500.0", "L12", source="f.csv", rows=[3], tags={"site": "north"}),
        entry("500.05", "L13", source="f.csv", rows=[4]),
    ], r"^3 bad input row\(s\); nothing was stored")
    assert [p.row for p in err.problems] == [2, 3, 4]
    assert "missing required tags 'line', 'shift'" in err.problems[1].reason


def test_skip_bad_stores_the_good(fill: Store, entry) -> None:
    out = fill.log_lots([entry("500.0", "L10"), entry("x", "L11"), entry("500.3", "L12")],
                        skip_bad=True)
    assert (out.stored, len(out.rejected), out.lots) == (2, 1, ["L10", "L12"])
    assert "not a number" in out.rejected[0].reason
    assert fill.check().ok


def test_duplicates_are_skipped(fill: Store, dump, entry) -> None:
    before = dump(fill)
    out = fill.log_lots([entry(["500.1", "499.8"], "L1")])  # same as stored: re-import
    assert (out.stored, out.duplicates, out.measurement_ids) == (0, 1, [])
    assert dump(fill) == before
    out = fill.log_lots([entry("500.0", "L20"), entry("500.0", "L20"), entry("500.00", "L20")])
    assert (out.stored, out.duplicates) == (1, 2)  # "500.00" is the same value as "500.0"


def test_tags_belong_to_the_lot(store: Store, entry) -> None:
    store.add_characteristic("fill_volume", unit="mL", resolution="0.1")
    store.add_characteristic("cap_torque", unit="N m", resolution="0.01")
    store.log_lots([entry("500.0", "L1", measured_at="2026-11-30T10:00:00Z")])
    # same lot, another characteristic: required tags inherited from the stored lot
    store.log_lots([entry("2.15", "L1", characteristic="cap_torque", tags={"line": "1"},
                          measured_at="2026-11-30T10:00:00Z")])
    store.add_characteristic("seal_temp", unit="degC", resolution="0.5")
    store.add_factor("filler_head")
    # a new factor tag on an existing lot adds that lot's stored values to the factor's buckets
    store.log_lots([entry("181.5", "L1", characteristic="seal_temp",
                          tags={**TAGS, "filler_head": "H3"})])
    assert store.log_lots([entry("2.15", "L1", characteristic="cap_torque")]).duplicates == 1
    heads = store.bucket_frame(factor="filler_head")
    assert sorted(heads["characteristic"].to_list()) == ["cap_torque", "fill_volume", "seal_temp"]
    assert store.check().ok


def test_conflict_refusal_fails_under_skip_bad_too(fill: Store, entry) -> None:
    out = fill.log_lots([entry("500.9", "L1")], skip_bad=True)
    assert out.stored == 0 and "already has fill_volume" in out.rejected[0].reason


def test_generated_lot_ids(fill: Store, entry) -> None:
    out = fill.log_lots([entry("500.0"), entry("500.1"), entry("500.2")])
    assert len(set(out.lots)) == 3
    for code in out.lots:
        assert re.fullmatch(r"L\d{8}-\d{6}-[A-Z2-9]{6}", code)


def test_operator_and_note(fill: Store, entry) -> None:
    out = fill.log_lots([entry("500.0", "L5", by="avery", note="  after nozzle clean ")])
    row = fill.conn.execute("SELECT logged_by, note FROM measurements WHERE id = ?",
                            (out.measurement_ids[0],)).fetchone()
    assert row == ("avery", "after nozzle clean")


# ----------------------------------------------------------------------------- characteristics


def test_characteristic_fields(store: Store) -> None:
    c = store.add_characteristic("fill_volume", unit="mL", resolution="0.050", lsl=495,
                                 usl=505, plausible=(400, 600), min_shift=1.5, by="robin")
    assert (c.resolution, c.resolution_value, c.origin_units, c.created_by) == (
        "0.05", 0.05, 10000, "robin")
    assert store.characteristic("fill_volume") == c
    with pytest.raises(Conflict, match="already exists"):
        store.add_characteristic("fill_volume", unit="mL", resolution="0.1")
    with pytest.raises(NotFound, match="no characteristic named 'torque'"):
        store.characteristic("torque")


def test_bad_characteristic_fields_listed(store: Store, dump) -> None:
    before = dump(store)
    with pytest.raises(BadInput) as info:
        store.add_characteristic("x", unit="g", resolution="0", lsl=10, usl=5, target="abc")
    reasons = " | ".join(p.reason for p in info.value.problems)
    assert "must be greater than 0" in reasons and "LSL must be below the USL" in reasons
    assert "not a number" in reasons
    assert dump(store) == before


def test_resolution_fixed_once_data_exists(fill: Store) -> None:
    with pytest.raises(Conflict, match="resolution of fill_volume cannot change"):
        fill.edit_characteristic("fill_volume", resolution="0.01")
    c = fill.edit_characteristic("fill_volume", usl=506, unit="ml")
    assert (c.usl, c.unit, c.origin_units) == (506.0, "ml", 5000)
    fill.add_characteristic("empty_one", unit="g", resolution="1", target=10)
    assert fill.edit_characteristic("empty_one", resolution="0.5").origin_units == 20


# ----------------------------------------------------------------------------- frames


def test_values_frame_and_last_n(store: Store, entry) -> None:
    store.add_characteristic("fill_volume", unit="mL", resolution="0.1", target=500)
    entries = []
    for k in range(6):
        for line in ("1", "2"):
            entries.append(entry(f"{500 + k / 10:.1f}", f"{line}-{k}",
                                 tags={**TAGS, "line": line},
                                 measured_at=f"2026-11-{20 + k}T08:00:00Z"))
    store.log_lots(entries)
    v = store.values_frame("fill_volume", "line")
    assert v.schema == pl.Schema({"measurement_id": pl.Int64, "lot": pl.String,
                                  "level": pl.String, "measured_at": pl.Datetime("us", "UTC"),
                                  "value": pl.Float64, "units": pl.Int64})
    assert v.height == 12 and v["value"].to_list()[-4:] == [500.4, 500.4, 500.5, 500.5]
    last = store.values_frame("fill_volume", "line", last_n=2)
    assert sorted(last["lot"].to_list()) == ["1-4", "1-5", "2-4", "2-5"]
    window = store.values_frame("fill_volume", "line", since=date(2026, 11, 22),
                                until=date(2026, 11, 23))
    assert window.height == 4 and window["value"].max() == 500.3
    with pytest.raises(NotFound):
        store.values_frame("fill_volume", "oven")


def test_bucket_frame_schema_and_filters(fill: Store) -> None:
    empty = fill.bucket_frame(since=date(2030, 1, 1))
    assert empty.height == 0
    assert dict(empty.schema) == {"characteristic": pl.String, "factor": pl.String,
                                  "level": pl.String, "day": pl.Date, "n": pl.Int64,
                                  "sum_d": pl.Int64, "sum_d2": pl.Int64, "lots": pl.Int64}
    assert fill.bucket_frame(characteristic="fill_volume").height == 3
    assert fill.bucket_frame(until=date(2026, 11, 30)).height == 3


def test_measurements_frame(fill: Store) -> None:
    fill.correct(1, "500.4", reason="typing error")
    m = fill.measurements_frame()
    assert m.columns[:9] == ["id", "lot", "characteristic", "value", "value_text", "unit",
                             "site", "line", "shift"]
    first = m.row(0, named=True)
    assert (first["value"], first["value_text"], first["original_text"]) == (
        500.4, "500.4", "500.1")
    assert first["voided"] is False and first["measured_at"].tzinfo is not None
    assert fill.tag_values("shift") == ["day"] and fill.tag_values("nothing") == []


def test_generated_id_never_reuses_a_stored_one(fill: Store, entry,
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    import lotwatch.store.lots as lots
    import lotwatch.store.plantzone as plantzone

    fixed = datetime(2026, 11, 30, 14, 5, tzinfo=UTC)
    monkeypatch.setattr(lots, "now_utc", lambda: fixed)
    fill.log_lots([entry("500.0", "L20261130-140500-AAAAAA")])
    draws = iter("AAAAAA" + "AAAAAA" + "BBBBBB")  # first draw repeats the stored ID
    monkeypatch.setattr(plantzone.secrets, "choice", lambda alphabet: next(draws))
    out = fill.log_lots([entry("500.1")])
    assert out.lots == ["L20261130-140500-BBBBBB"]
    assert fill.check().ok


def test_single_value_text_accepted(fill: Store) -> None:
    out = fill.log_lots([LotEntry("fill_volume", "500.2", dict(TAGS), lot="L30")])  # type: ignore[arg-type]
    assert len(out.measurement_ids) == 1


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_last_n_matches_brute_force(store: Store, seed: int) -> None:
    import random

    rng = random.Random(seed)
    store.add_characteristic("fill_volume", unit="mL", resolution="0.1", target=500)
    entries = []
    for k in range(120):
        tags = {**TAGS, "line": rng.choice("123"), "crew": rng.choice(["red", "blue"])}
        reps = [f"{500 + rng.randint(-9, 9) / 10:.1f}" for _ in range(rng.randint(1, 3))]
        at = f"2026-11-{rng.randint(1, 9):02d}T{rng.randint(0, 2):02d}:00:00Z"
        entries.append(LotEntry("fill_volume", reps, tags, lot=f"K{k:03d}", measured_at=at))
    out = store.log_lots(entries)
    for mid in rng.sample(out.measurement_ids, 40):
        store.void(mid, reason="test")
    live = store.measurements_frame().filter(~pl.col("voided"))
    for key in ("line", "crew"):  # a grouping factor (bucket path) and a plain tag (walk path)
        for n in (1, 4, 15):
            expected = set()
            for _, grp in live.group_by(key):
                lots = grp.group_by("lot").agg(pl.col("measured_at").max(), pl.col("id").max())
                lots = lots.sort(["measured_at", "id"], descending=True).head(n)
                expected |= set(lots["lot"].to_list())
            got = store.values_frame("fill_volume", key, last_n=n)
            assert set(got["lot"].to_list()) == expected, (key, n)


def test_add_factor_backfills_from_stored_tags(fill: Store, entry) -> None:
    fill.log_lots([entry("500.3", "L2", tags={**TAGS, "oven": "A"},
                         measured_at="2026-11-30T15:00:00Z"),
                   entry(["499.5", "500.5"], "L3", tags={**TAGS, "oven": "B"},
                         measured_at="2026-12-01T09:00:00Z")])
    assert fill.bucket_frame(factor="oven").height == 0  # not a factor yet: no buckets
    fill.add_factor("oven")
    # d: L2 5003-5000 = 3; L3 4995-5000 = -5 and 5005-5000 = 5 (L1 has no oven tag)
    assert fill.bucket_frame(factor="oven").rows() == [
        ("fill_volume", "oven", "A", date(2026, 11, 30), 1, 3, 9, 1),
        ("fill_volume", "oven", "B", date(2026, 12, 1), 2, 0, 50, 1),
    ]
    with pytest.raises(Conflict, match="already a grouping factor"):
        fill.add_factor("oven")
    assert fill.check().ok


def test_disk_full_during_logging_stores_nothing(fill: Store, dump, entry) -> None:
    from lotwatch.store import StoreFull

    pages = fill.conn.execute("PRAGMA page_count").fetchone()[0]
    fill.conn.execute(f"PRAGMA max_page_count = {pages + 2}")  # SQLITE_FULL, as for a full disk
    before = dump(fill)
    with pytest.raises(StoreFull, match="nothing was stored"):
        fill.log_lots([entry("500.0", f"F{k}") for k in range(3000)])
    assert dump(fill) == before


@pytest.mark.parametrize("bad, what", [
    ("L\x1b[31m1", "U+001B"),       # ESC: start of a terminal escape sequence
    ("L\x9b1", "U+009B"),           # C1 control (CSI)
    ("L\u202e1", "U+202E"),         # right-to-left override: can make one ID look like another
])
def test_identifiers_with_display_controls_are_refused(store, bad: str, what: str) -> None:
    """Lot IDs and tag values may not carry characters that change how text is displayed
    (common practice for identifiers shown on terminals)."""
    store.add_characteristic("ctl", unit="mm", resolution="1")
    tags = {"site": "A", "line": "1", "shift": "x"}
    with pytest.raises(BadInput, match=re.escape(what)):
        store.log_lots([LotEntry("ctl", ["5"], tags, lot=bad)])
    with pytest.raises(BadInput, match=re.escape(what)):
        store.log_lots([LotEntry("ctl", ["5"], {**tags, "line": bad}, lot="ok-1")])
    with pytest.raises(BadInput, match=re.escape(what)):
        store.add_characteristic(bad, unit="mm", resolution="1")
    assert store.conn.execute("SELECT count(*) FROM measurements").fetchone()[0] == 0


def test_bucket_frame_is_sorted_by_name_whatever_the_creation_order(store) -> None:
    """The frame's order is characteristic name, factor, level, day (the documented contract),
    also when characteristics were created out of alphabetical order."""
    import polars as pl

    for name in ("zeta", "alpha"):
        store.add_characteristic(name, unit="mm", resolution="1")
    for i, name in enumerate(("zeta", "alpha", "zeta")):
        store.log_lots([LotEntry(name, [str(5 + i)], {"site": "B" if i else "A", "line": "1",
                                                      "shift": "x"}, lot=f"L{i}",
                                 measured_at=f"2026-11-2{i}T08:00:00Z")])
    frame = store.bucket_frame()
    assert frame.height > 0
    assert frame.equals(frame.sort("characteristic", "factor", "level", "day"))
    assert frame["characteristic"][0] == "alpha"
    assert frame.schema["day"] == pl.Date


def test_bucket_frame_equals_a_plain_read_of_the_table(store: Store) -> None:
    # bucket_frame reads keys and day numbers in two queries; the oracle is one plain SELECT of
    # the same rows with the day text parsed by Python's date.fromisoformat. Characteristics are
    # made out of alphabetical order and days span a year boundary, 1970-01-01 (day 0) and a
    # day before 1970 (an import with --years can store one; set here by hand).
    from datetime import date as Date

    from lotwatch.store import StoreCorrupt

    store.add_characteristic("z_torque", unit="N·m", resolution="0.01")
    store.add_characteristic("a_fill", unit="mL", resolution="0.1")
    entries = []
    for i, at in enumerate(["1970-01-01T08:00:00Z", "2025-12-31T23:00:00Z",
                            "2026-01-01T01:00:00Z", "2026-11-30T14:05:00Z"]):
        for j, line in enumerate(["L1", "L2", "L3"][: i + 1]):
            tags = {"site": "North", "line": line, "shift": "day"}
            entries.append(LotEntry("z_torque", [f"2.{i}{j}", "2.50"], tags, lot=f"T{i}{j}",
                                    measured_at=at))
            entries.append(LotEntry("a_fill", [f"50{i}.{j}"], tags, lot=f"T{i}{j}",
                                    measured_at=at))
    store.log_lots(entries)
    store.conn.execute("UPDATE buckets SET day = '1965-03-01' WHERE day = '1970-01-01' "
                       "AND factor = 'site'")
    got = store.bucket_frame()
    plain = store.conn.execute(
        "SELECT c.name, b.factor, b.level, b.day, b.n, b.sum_d, b.sum_d2, b.lots FROM buckets b "
        "JOIN characteristics c ON c.id = b.characteristic_id").fetchall()
    want = sorted((*r[:3], Date.fromisoformat(r[3]), *r[4:]) for r in plain)
    # per characteristic: 1 + 2 + 3 + 3 line buckets, 4 site and 4 shift buckets
    assert got.rows() == want and len(want) == 2 * (1 + 2 + 3 + 3 + 4 + 4)
    part = store.bucket_frame(characteristic="z_torque", factor="line",
                              since=Date(2025, 12, 31), until=Date(2026, 1, 1))
    assert part.rows() == [r for r in want if r[0] == "z_torque" and r[1] == "line"
                           and Date(2025, 12, 31) <= r[3] <= Date(2026, 1, 1)]
    assert part.height == 5
    store.conn.execute("UPDATE buckets SET day = '2026-13-01' WHERE day = '2026-11-30'")
    with pytest.raises(StoreCorrupt, match="malformed day"):
        store.bucket_frame()
