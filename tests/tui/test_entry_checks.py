"""The entry form's live checks agree with what the store refuses when saving."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from lotwatch.tui.app.entry_checks import split_values, time_problem, value_problems
from lotwatch.tui.services.view_models import CharacteristicInfo

BORE = CharacteristicInfo(name="bore", unit="mm", resolution="0.05", lsl=None, target=10.0,
                          usl=None, min_shift=None, plausible_low=9.0, plausible_high=11.0)


def test_values_split_on_spaces_and_semicolons_not_commas():
    assert split_values(" 10.05  10.1;10.15 ") == ["10.05", "10.1", "10.15"]
    assert split_values("10,05") == ["10,05"]


@pytest.mark.parametrize("text, expected", [
    ("10.05 10.10", []),
    ("10.07", ["10.07 is finer than the resolution 0.05 mm"]),
    ("abc", ["'abc' is not a number"]),
    ("10,05", ["'10,05' is not a number (use a decimal point, not a comma)"]),
    ("12", ["12 is outside the plausible range 9..11 mm"]),
    ("nan", ["'nan' is not a number"]),
    ("", ["type at least one value (several values of one lot: separate with spaces)"]),
])
def test_value_problems_in_words(text, expected):
    assert value_problems(text, BORE) == expected


def test_the_store_refuses_what_the_form_refuses(tmp_path):
    """Oracle: the store's own validation (log_lots is all-or-nothing, BadInput per row)."""
    from lotwatch.store import BadInput, LotEntry, Store

    with Store.create(tmp_path / "s.sqlite") as store:
        store.add_characteristic("bore", unit="mm", resolution="0.05", target=10.0,
                                 plausible=(9.0, 11.0))
        tags = {"site": "A", "line": "1", "shift": "day"}
        for text in ("10.07", "abc", "12", "nan"):
            assert value_problems(text, BORE)
            with pytest.raises(BadInput):
                store.log_lots([LotEntry("bore", [text], tags, lot=f"x-{text}")])
        assert value_problems("10.05", BORE) == []
        assert store.log_lots([LotEntry("bore", ["10.05"], tags, lot="ok")]).stored == 1


def test_time_problems():
    now = datetime(2026, 11, 30, 12, 0, tzinfo=UTC)
    assert time_problem("", now) is None
    assert time_problem("now", now) is None
    assert time_problem("2026-11-30T10:00:00Z", now) is None
    assert "is not a time" in time_problem("yesterday-ish", now)
    future = (now + timedelta(days=2)).strftime("%Y-%m-%dT%H:%M:%SZ")
    assert "is in the future" in time_problem(future, now)


@pytest.mark.parametrize("text", ["1e999999", "-1e999999", "9" * 5000, "1e31"])
def test_huge_values_are_refused_in_words(text):
    """These texts once closed the whole interface from the form's live check."""
    no_range = CharacteristicInfo(name="bore", unit="mm", resolution="0.05", lsl=None,
                                  target=None, usl=None, min_shift=None, plausible_low=None,
                                  plausible_high=None)
    for ch in (BORE, no_range):
        [problem] = value_problems(text, ch)
        assert "too large to be a measurement" in problem


@pytest.mark.parametrize("text", ["0001-01-01", "0001-01-01T00:00:00+05:00", "1899-05-01"])
def test_times_at_the_calendars_ends_are_refused_in_words(text):
    problem = time_problem(text, datetime(2026, 11, 30, 12, 0, tzinfo=UTC))
    assert problem is not None and text[:10] in problem


def test_a_typed_time_is_read_in_the_plant_zone():
    """The form reads a time without an offset in the plant's zone, as the store stores it: at
    12:00 UTC, "13:00" is 19:00 UTC in Chicago (CST, UTC-6: the future) and 04:00 UTC in Tokyo
    (UTC+9: the past) (IANA tz database offsets for 30 Nov 2026)."""
    now = datetime(2026, 11, 30, 12, 0, tzinfo=UTC)
    assert "is in the future" in time_problem("2026-11-30 13:00", now, zone="America/Chicago")
    assert time_problem("2026-11-30 13:00", now, zone="Asia/Tokyo") is None
