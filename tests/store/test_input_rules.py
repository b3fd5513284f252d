"""One set of input rules for the command line, file import and the app (``store.rules``).

The name rules and the future-time slack are lotwatch decisions (common practice: a key typed
as KEY=VALUE cannot hold '=' or spaces; a lot is not measured in the future)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from lotwatch.store import BadInput, LotEntry, Store
from lotwatch.store.rules import FUTURE_SLACK

TAGS = {"site": "north", "line": "1", "shift": "early"}


def test_future_measurement_times_are_refused_by_the_store(fill: Store, dump) -> None:
    before = dump(fill)
    later = datetime.now(UTC) + FUTURE_SLACK + timedelta(hours=1)
    with pytest.raises(BadInput, match="in the future"):
        fill.log_lots([LotEntry("fill_volume", ["500.0"], TAGS, lot="F1", measured_at=later)])
    with pytest.raises(BadInput, match="in the future"):
        fill.log_lots([LotEntry("fill_volume", ["500.0"], TAGS, lot="F2",
                                measured_at="2030-01-01T00:00:00Z")])
    assert dump(fill) == before
    soon = datetime.now(UTC) + timedelta(minutes=1)  # clock skew inside the slack is accepted
    fill.log_lots([LotEntry("fill_volume", ["500.0"], TAGS, lot="F3", measured_at=soon)])


@pytest.mark.parametrize("key", ["bad key", "a=b", "x;y", "1st", "", "ov\u202een"])
def test_factor_keys_must_be_typeable_as_key_value(store: Store, key: str) -> None:
    with pytest.raises(BadInput):
        store.add_factor(key)
    assert key not in {f.name for f in store.factors()}


@pytest.mark.parametrize("key", ["oven", "filler_head", "Line-2", "zone.a", "Öfen"])
def test_good_factor_keys_are_kept(store: Store, key: str) -> None:
    assert store.add_factor(key).name == key


@pytest.mark.parametrize("name", ["seal strength;DROP", "a=b", 'fill "x"', "x,y", "9lives"])
def test_characteristic_names_with_breaking_characters_are_refused(store: Store,
                                                                   name: str) -> None:
    with pytest.raises(BadInput):
        store.add_characteristic(name, unit="N", resolution="0.1")
    assert store.characteristics() == []


def test_characteristic_names_may_hold_spaces_and_units(store: Store) -> None:
    assert store.add_characteristic("seal strength (peel) %", unit="N",
                                    resolution="0.1").name == "seal strength (peel) %"


def test_tag_keys_with_equals_or_semicolon_are_refused(fill: Store, dump) -> None:
    before = dump(fill)
    with pytest.raises(BadInput, match="KEY=VALUE"):
        fill.log_lots([LotEntry("fill_volume", ["500.0"], {**TAGS, "a=b": "x"}, lot="T1")])
    assert dump(fill) == before


def test_the_year_bounds_have_one_home() -> None:
    """Every year bound is defined in store.rules and only imported elsewhere."""
    import re
    from pathlib import Path

    from lotwatch.store import rules, timeutil

    assert (timeutil.FIRST_YEAR, timeutil.LAST_YEAR) == (rules.FIRST_YEAR, rules.LAST_YEAR)
    assert rules.FIRST_YEAR <= rules.MIN_YEAR <= rules.LAST_YEAR
    root = Path(__file__).resolve().parents[2]
    defines = re.compile(r"^\s*(?:[A-Z_]*YEARS?\b\s*,\s*)*[A-Z_]*YEARS?\s*(?::[^=]*)?=(?!=)",
                         re.MULTILINE)
    homes = sorted(str(p.relative_to(root)) for folder in ("store", "stats", "tui")
                   for p in (root / folder).rglob("*.py") if defines.search(p.read_text()))
    assert homes == ["store/rules.py"]


def test_measurement_years_outside_the_bounds_are_refused(fill: Store, dump) -> None:
    from lotwatch.store.rules import MIN_YEAR

    before = dump(fill)
    for when in (f"{MIN_YEAR - 1}-12-31T12:00:00Z", "0999-06-01T00:00:00Z"):
        with pytest.raises(BadInput):
            fill.log_lots([LotEntry("fill_volume", ["500.0"], TAGS, lot="Y1", measured_at=when)])
    assert dump(fill) == before
