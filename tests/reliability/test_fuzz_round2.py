"""A second fuzz round over the input classes that broke before (run with fresh seeds).

Classes: boundary numbers (1e999999, thousands of digits, 1e-999999, values at the 10^7-step
limit) and boundary dates (year 1, 999, 9999, daylight-saving gaps) through ``lotwatch log`` and
``review``; import files mixing encodings, with ambiguous separators under --decimal-comma and
hostile header names; stores with many tag keys (past SQLite's 64-table join limit) exported and
read back; factors with many groups through the battery.

Properties: every command ends with exit status 0, 1 or 2 and no exception; a refusal leaves the
store exactly as it was (row counts and sums); ``check`` stays consistent; an export has one row
per measurement and one column per tag key; the battery answers in bounded time for any group
count. Inputs tried are counted and printed.
"""

from __future__ import annotations

import csv
import io
import itertools
from collections import Counter

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lotwatch.store import LotEntry, Store, StoreError
from lotwatch.store.importer import ImportOptions, import_file
from lotwatch.tui.cli import main

from tests.reliability.helpers import CHAR, TAGS, Snapshot, make_store

COUNTS: Counter[str] = Counter()
_UID = itertools.count()
SETTINGS = dict(deadline=None, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                       HealthCheck.function_scoped_fixture])

NUMBERS = st.one_of(
    st.sampled_from(["1e999999", "-1e999999", "1e-999999", "9" * 5000, "0." + "0" * 4400 + "1",
                     "1E+31", "1e30", "-1e30", "1000000.0", "1000000.1", "-999999.9", "500.1",
                     "0", "-0", "1e-30", "1.5e1", "nan", "inf", "500,1", "1.250"]),
    st.integers(-(10**40), 10**40).map(str),
    st.decimals(allow_nan=False, allow_infinity=False).map(str),
)
TIMES = st.one_of(
    st.sampled_from(["0001-01-01", "0001-01-01T00:00:00+05:00", "9999-12-31T23:59:59-05:00",
                     "0999-06-01", "1000-01-01", "9000-12-31", "2026-03-29 02:30",
                     "2026-10-25 02:30", "2026-03-08 02:30", "1969-12-31T23:59:59Z",
                     "2026-02-29", "2024-02-29 12:00", "not a time", ""]),
    st.datetimes().map(lambda d: d.isoformat()),
)
GOOD_VALUES = st.sampled_from(["500.1", "499.9", "512.3", "450", "598.7"])
GOOD_TIMES = st.sampled_from(["2026-11-20 08:00", "2026-03-29 03:30", "2026-10-25 02:30",
                              "2026-11-20T08:00:00Z", "2025-12-31T23:59:59+14:00"])
WEEKS = st.one_of(st.sampled_from(["0001-W01", "9999-W52", "9999-W53", "2026-W53", "2026-W00",
                                   "1970-W01", "2026-W48"]),
                  st.builds(lambda y, w: f"{y:04d}-W{w:02d}", st.integers(0, 9999),
                            st.integers(0, 60)))


def _ok(res) -> None:
    assert isinstance(res.exception, (SystemExit, type(None))), repr(res.exception)
    assert res.exit_code in (0, 1, 2), res.output
    assert "Traceback" not in res.output


@pytest.mark.slow
def test_boundary_numbers_and_dates_on_the_command_line(tmp_path_factory) -> None:
    path = make_store(tmp_path_factory.mktemp("cli") / "s.sqlite")
    with Store.open(path) as s:
        s.set_plant_zone("Europe/Berlin")  # so the daylight-saving gaps are real gaps
    runner = CliRunner()
    tags = [f"--tag={k}={v}" for k, v in TAGS.items()]

    @settings(max_examples=600, **SETTINGS)
    @given(values=st.lists(st.one_of(GOOD_VALUES, NUMBERS), min_size=1, max_size=3),
           at=st.one_of(GOOD_TIMES, TIMES), week=WEEKS)
    def run(values: list[str], at: str, week: str) -> None:
        before = Snapshot.of(path)
        res = runner.invoke(main, ["log", CHAR, *values, *tags, "--at", at, "--db", str(path)])
        COUNTS["log"] += 1
        _ok(res)
        if res.exit_code != 0:
            COUNTS["log refused"] += 1
            assert Snapshot.of(path) == before
        else:
            COUNTS["log stored"] += 1
        for args in (["review", "--dry-run", "--week", week], ["review", "--dry-run", "--as-of",
                                                                  at[:10] or "x"]):
            COUNTS["review"] += 1
            _ok(runner.invoke(main, [*args, "--db", str(path)]))

    run()
    res = runner.invoke(main, ["check", "--db", str(path)])
    assert res.exit_code == 0, res.output
    print(f"command-line fuzz: {dict(COUNTS)}")


HEADERS = st.sampled_from(["lot", "characteristic", "value", "site", "line", "shift",
                           "measured_at", "=cmd|' /C calc'!A0", "\x1b]0;owned\x07", "*",
                           "^.*$", "", "lot", "\u202esite", "x" * 300, "value;1", "tag_value"])


@st.composite
def import_bytes(draw) -> tuple[bytes, bool]:
    comma = draw(st.booleans())
    sep = ";" if comma else ","
    header = ["lot", "characteristic", "value", "site", "line", "shift",
              *draw(st.lists(HEADERS, max_size=3))]
    lines = [sep.join(header)]
    for i in range(draw(st.integers(1, 8))):
        value = draw(st.sampled_from(["500,1", "1.250", "1.250,5", "500.1", "499,9", "1,250",
                                      "500", "1e999999"]))
        site = draw(st.sampled_from(["north", "Zürich", "São Paulo", "plain"]))
        extra = [draw(st.sampled_from(["x", "=1+1", "ü"])) for _ in header[6:]]
        lines.append(sep.join([f"L{i}", CHAR, value, site, "1", "day", *extra]))
    text = "\n".join(lines) + "\n"
    parts = []
    for line in text.splitlines(keepends=True):  # each line in its own encoding
        enc = draw(st.sampled_from(["utf-8", "utf-8", "latin-1", "cp1252"]))
        parts.append(line.encode(enc, errors="replace"))
    return b"".join(parts), comma


@pytest.mark.slow
def test_imports_with_mixed_encodings_separators_and_hostile_headers(tmp_path_factory) -> None:
    path = make_store(tmp_path_factory.mktemp("imp") / "s.sqlite")
    folder = tmp_path_factory.mktemp("files")

    @settings(max_examples=500, **SETTINGS)
    @given(case=import_bytes())
    def run(case: tuple[bytes, bool]) -> None:
        data, comma = case
        f = folder / f"in{next(_UID)}.csv"
        f.write_bytes(data)
        before = Snapshot.of(path)
        COUNTS["imports"] += 1
        with Store.open(path) as s:
            try:
                import_file(s, f, ImportOptions(decimal_comma=comma))
                COUNTS["imports accepted"] += 1
            except StoreError as exc:
                assert str(exc).strip()
                COUNTS["imports refused"] += 1
                assert Snapshot.of(path) == before

    run()
    with Store.open(path) as s:
        assert s.check().ok
    print(f"import fuzz: {dict(COUNTS)}")


@pytest.mark.slow
def test_many_tag_keys_export_and_read_back(tmp_path_factory) -> None:
    base = tmp_path_factory.mktemp("keys")

    @settings(max_examples=40, **SETTINGS)
    @given(n_keys=st.integers(0, 120), names=st.lists(st.sampled_from(
        ["value", "tag_value", "measurement_id", "resolution", "lot", "+x", "@y", "-2+3", "k"]),
        max_size=5), lots=st.integers(1, 20))
    def run(n_keys: int, names: list[str], lots: int) -> None:
        path = base / f"s{next(_UID)}.sqlite"
        keys = [f"k{i}" for i in range(n_keys)] + names
        with Store.create(path, zone="UTC") as s:
            s.add_characteristic(CHAR, unit="mL", resolution="0.1")
            s.log_lots([LotEntry(CHAR, ["500.1", "499.9"],
                                 {**TAGS, **{k: f"v{j}-{i}" for j, k in enumerate(keys)}},
                                 lot=f"L{i}", measured_at="2026-11-20T08:00:00Z")
                        for i in range(lots)])
        res = CliRunner().invoke(main, ["export", "--db", str(path)])
        COUNTS["exports"] += 1
        _ok(res)
        assert res.exit_code == 0, res.output
        rows = list(csv.DictReader(io.StringIO(res.output)))
        assert len(rows) == 2 * lots
        header = list(rows[0])
        assert len(header) == len(set(header))
        assert len(header) == 12 + len(set(keys) | set(TAGS))
        COUNTS["tag keys exported"] += len(set(keys))

    run()
    print(f"export fuzz: {dict(COUNTS)}")


@pytest.mark.slow
def test_many_groups_through_the_battery() -> None:
    from lotwatch.stats.battery import run_battery

    @settings(max_examples=30, **SETTINGS)
    @given(k=st.integers(2, 1500), per=st.integers(1, 6), seed=st.integers(0, 2**32 - 1))
    def run(k: int, per: int, seed: int) -> None:
        rng = np.random.default_rng(seed)
        arrays = [np.round(rng.normal(10, 1, per), 1) for _ in range(k)]
        res = run_battery(arrays, [f"g{i}" for i in range(k)], reference="g0")
        COUNTS["batteries"] += 1
        COUNTS["groups"] += k
        assert len(res.tukey) <= 100 * 99 // 2

    run()
    print(f"group fuzz: {dict(COUNTS)}")
