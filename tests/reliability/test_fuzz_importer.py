"""Property-based fuzzing of the importer (``store.importer.import_file`` and ``lotwatch
import``): arbitrary bytes, encodings and BOMs, delimiters, quoting, line endings, huge and tiny
numbers, NaN/inf spellings, empty and enormous fields.

Properties: no exception other than a ``StoreError`` (``FileRefused``, ``BadInput`` ...) with a
non-empty message; a refused import leaves the store exactly as it was (row counts and sums);
``store.check()`` stays ok. Through the command line: exit status 0 or 2 and no traceback.
Inputs tried are counted and printed (10,000+ each in the slow tests).
"""

from __future__ import annotations

import codecs
import itertools
import random
from collections import Counter
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lotwatch.store import Store, StoreError
from lotwatch.store.importer import ImportOptions, import_file

from tests.reliability.helpers import CHAR, make_store

COUNTS: Counter[str] = Counter()
FAST, SLOW = 150, 10_000
_UID = itertools.count()

NUMBERS = st.one_of(
    st.sampled_from([
        "nan", "NaN", "-nan", "inf", "-inf", "+inf", "Infinity", "-Infinity", "INF", "1e309",
        "-1e309", "1e308", "1e-320", "4.9e-324", "0", "-0", "+0.0", ".5", "5.", ".", "-", "+",
        "1e", "e5", "0x1p3", "1_000", "1,000.5", "500,1", "1 000", "٥٠٠", "５００", "500.12345678901234567890",
        "9" * 400, "0." + "0" * 300 + "1", "500.1 ", " 500.1", "500.1\u00a0", "1e+400", "--1",
        "500.1.2", "¹²", "NULL", "None", "null", "#N/A", "=1+1", "@SUM(A1)", "\t500",
    ]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(min_value=-(10**30), max_value=10**30).map(str),
    st.decimals(allow_nan=True, allow_infinity=True, places=None).map(str),
    st.builds(lambda u: f"{500 + u / 10:.1f}", st.integers(-2000, 2000)),
)
TEXT = st.one_of(
    st.text(max_size=16),
    st.sampled_from(["", " ", '"', '""', "a,b", "a;b", "a\tb", "a|b", "line\nbreak", "cr\rx",
                     "'quoted'", '"half', "\x00", "\x1b[31mred", "\u202eevil", "[b]x[/b]",
                     "=cmd|' /C calc'!A0", "x" * 70_000]),
)
TIMES = st.sampled_from([
    "2026-11-20T08:00:00Z", "2026-11-20 08:00", "2026-11-20", "2026/11/20", "20/11/2026",
    "2026-13-45", "2026-02-30T00:00:00Z", "9999-12-31T23:59:59Z", "0001-01-01", "", "now",
    "2026-11-20T08:00:00+14:00", "2026-11-20T08:00:00-12:00", "1e9", "2026-W48", "T08:00",
    "2026-11-20T25:61:61Z", "１９９９-01-01",
])
COLUMNS = ["lot", "characteristic", "value", "site", "line", "shift", "measured_at", "note",
           "logged_by", CHAR, "torque", "extra", "", "lot ", "Lot", "value"]


def _cell(column: str):
    if column in ("value", CHAR, "torque"):
        return NUMBERS
    if column == "measured_at":
        return TIMES
    if column == "characteristic":
        return st.one_of(st.just(CHAR), st.just("torque"), TEXT)
    if column in ("site", "line", "shift"):
        return st.one_of(st.sampled_from(["north", "1", "day"]), TEXT)
    if column == "lot":
        return st.one_of(st.builds(lambda i: f"F{i}", st.integers(0, 50)), TEXT)
    return TEXT


@st.composite
def csv_bytes(draw) -> bytes:
    """A CSV-like file: a header from plausible and odd column names, rows of cells drawn for
    their column, random delimiter, quoting, line ending, encoding and BOM."""
    header = draw(st.lists(st.sampled_from(COLUMNS), min_size=0, max_size=9))
    if draw(st.booleans()):
        header = ["lot", "characteristic", "value", "site", "line", "shift"] + header[:3]
    n_rows = draw(st.integers(0, 8))
    rows = []
    for _ in range(n_rows):
        width = len(header) + draw(st.sampled_from([0, 0, 0, -1, 1, 3]))
        cols = (header + ["extra"] * 5)[:max(0, width)]
        rows.append([draw(_cell(c)) for c in cols])
    delim = draw(st.sampled_from([",", ",", ";", "\t", "|", " ", ":"]))
    quote_all = draw(st.booleans())
    newline = draw(st.sampled_from(["\n", "\r\n", "\r", "\n\n"]))

    def fmt(cell: str) -> str:
        if quote_all or any(ch in cell for ch in (delim, '"', "\n", "\r")):
            if draw(st.integers(0, 9)) == 0:
                return '"' + cell  # unterminated quote
            return '"' + cell.replace('"', '""') + '"'
        return cell

    text = newline.join(delim.join(fmt(c) for c in r) for r in [header, *rows])
    if draw(st.booleans()):
        text += newline
    encoding = draw(st.sampled_from(["utf-8", "utf-8", "utf-8-sig", "utf-16", "utf-16-le",
                                     "utf-16-be", "utf-32", "latin-1", "cp1252", "shift_jis"]))
    data = text.encode(encoding, errors="replace")
    bom = draw(st.sampled_from([b"", b"", b"", codecs.BOM_UTF8, codecs.BOM_UTF16_LE,
                                codecs.BOM_UTF16_BE, b"\xff", b"\x00"]))
    return bom + data


_GOOD = {
    # mostly new lots; sometimes one of a few shared ones (duplicates and conflicts)
    "lot": lambda r: f"G{r.randint(0, 40)}" if r.random() < 0.05 else f"N{r.getrandbits(40)}",
    "characteristic": lambda r: r.choice([CHAR, "torque"]),
    "value": lambda r: "",  # set per row from the characteristic
    "site": lambda r: r.choice(["north", "south"]),
    "line": lambda r: r.choice(["1", "2"]),
    "shift": lambda r: "day",
    "measured_at": lambda r: r.choice(["2026-11-20T08:00:00Z", "2026-11-21 09:30"]),
    "note": lambda r: r.choice(["", "ok", "re-test", "=1+2", "caf\u00e9"]),
}
_HOSTILE_NUMBERS = ["nan", "inf", "-Infinity", "1e309", "1e-320", "", "500,1", "1,000.5",
                    "9" * 400, "0x10", ".", "\u0665\u0660", "=1+1", " 12.5 ", "+.5", "12.345"]
_HOSTILE_TEXT = ["", " ", '"', "a,b", "a\nb", "\x00", "\x1b[2J", "\u202e", "[b]x",
                 "x" * 5000, "\ufeff", "\r"]


def seeded_file(seed: int) -> bytes:
    """A long-layout file that is mostly right (so imports are also accepted and stored), with
    the occasional hostile cell, odd delimiter, encoding or BOM. Built from ``seed`` with
    ``random.Random`` (cheap to generate; the seed reproduces it)."""
    r = random.Random(seed)
    cols = list(_GOOD)
    r.shuffle(cols)
    delim = r.choice([",", ",", ";", "\t"])
    rows = [cols]
    for _ in range(r.randint(1, 8)):
        cells = {c: _GOOD[c](r) for c in cols}
        cells["value"] = (f"{500 + r.randint(-50, 50) / 10:.1f}" if cells["characteristic"] == CHAR
                          else f"{12 + r.randint(-500, 500) / 100:.2f}")
        for c in cols:
            if r.random() < 0.03:
                cells[c] = r.choice(_HOSTILE_NUMBERS if c == "value" else _HOSTILE_TEXT)
        rows.append([cells[c] for c in cols])

    def fmt(cell: str) -> str:
        if any(ch in cell for ch in (delim, '"', "\n", "\r")):
            return '"' + cell.replace('"', '""') + '"'
        return cell

    text = "\n".join(delim.join(fmt(c) for c in row) for row in rows) + "\n"
    enc = r.choice(["utf-8", "utf-8", "utf-8", "utf-8-sig", "utf-16", "latin-1"])
    return text.encode(enc, errors="replace")


SEEDED = st.integers(0, 2**32).map(seeded_file)
INPUTS = st.one_of(st.binary(max_size=3000), csv_bytes(), SEEDED, SEEDED)
OPTIONS = st.builds(
    ImportOptions,
    layout=st.sampled_from(["auto", "auto", "auto", "long", "wide"]),
    format=st.sampled_from(["auto", "auto", "auto", "csv", "parquet"]),
    decimal_comma=st.sampled_from([False, False, False, True]),
    delimiter=st.sampled_from([None, None, None, ",", ";", "\t"]),
    round_values=st.booleans(),
    skip_bad=st.booleans(),
)
# Seeded, mostly right files go with the default reading options (so many are stored).
PLAIN_OPTIONS = st.builds(ImportOptions, round_values=st.booleans(), skip_bad=st.booleans())
CASES = st.one_of(
    st.tuples(st.one_of(st.binary(max_size=3000), csv_bytes()), OPTIONS),
    st.tuples(SEEDED, st.one_of(PLAIN_OPTIONS, PLAIN_OPTIONS, PLAIN_OPTIONS, OPTIONS)),
)


@pytest.fixture(scope="module")
def fuzz_store(tmp_path_factory) -> Store:
    path = make_store(tmp_path_factory.mktemp("fuzz") / "fuzz.sqlite", extra_chars=True)
    store = Store.open(path)
    yield store
    store.close()


_STATE = ("SELECT (SELECT count(*) FROM lots), (SELECT count(*) FROM lot_tags), "
          "(SELECT count(*) FROM measurements), (SELECT coalesce(max(id), 0) FROM audit), "
          "(SELECT total(current_units) FROM measurements), (SELECT total(n) FROM buckets), "
          "(SELECT total(sum_d) FROM buckets)")


def _state(store: Store) -> tuple:
    """Counts and sums any stored import changes (one query on the store's own connection)."""
    return store.conn.execute(_STATE).fetchone()


def _one_import(store: Store, folder: Path, data: bytes, options: ImportOptions) -> None:
    COUNTS["importer inputs"] += 1
    f = folder / f"in{next(_UID)}.csv"
    f.write_bytes(data)
    before = _state(store)
    try:
        import_file(store, f, options)
    except StoreError as exc:
        COUNTS["refused (StoreError)"] += 1
        assert str(exc).strip(), f"{type(exc).__name__} without a message"
        if not options.skip_bad:
            assert _state(store) == before, "a refused import changed the store"
    else:
        COUNTS["accepted"] += 1
    finally:
        f.unlink()
        for extra in folder.glob("*.rejected*.csv"):
            extra.unlink()


def _importer_property(fuzz_store, tmp_path_factory, n: int) -> None:
    folder = tmp_path_factory.mktemp("inputs")

    @settings(max_examples=n, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                     HealthCheck.function_scoped_fixture,
                                     HealthCheck.large_base_example])
    @given(case=CASES)
    def prop(case: tuple[bytes, ImportOptions]) -> None:
        _one_import(fuzz_store, folder, *case)

    start = COUNTS["importer inputs"]
    prop()
    tried = COUNTS["importer inputs"] - start
    report = fuzz_store.check()
    assert report.ok, report.problems
    print(f"importer fuzz: {tried:,} inputs tried; {dict(COUNTS)}")
    assert tried >= n



def test_importer_fuzz_fast(fuzz_store, tmp_path_factory) -> None:
    _importer_property(fuzz_store, tmp_path_factory, FAST)


@pytest.mark.slow
def test_importer_fuzz_10k(fuzz_store, tmp_path_factory) -> None:
    _importer_property(fuzz_store, tmp_path_factory, SLOW)


def _cli_property(tmp_path_factory, n: int) -> int:
    from lotwatch.tui.cli import main

    folder = tmp_path_factory.mktemp("cli-fuzz")
    db = make_store(folder / "cli.sqlite")
    runner = CliRunner()
    tried = [0]

    @settings(max_examples=n, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                     HealthCheck.large_base_example])
    @given(data=INPUTS, extra=st.sampled_from([[], ["--skip-bad"], ["--decimal-comma"],
                                               ["--layout", "wide"], ["--delimiter", ";"],
                                               ["--round"]]))
    def prop(data: bytes, extra: list[str]) -> None:
        tried[0] += 1
        f = folder / "in.csv"
        f.write_bytes(data)
        r = runner.invoke(main, ["import", str(f), "--db", str(db), *extra])
        assert r.exception is None or isinstance(r.exception, SystemExit), repr(r.exception)
        assert r.exit_code in (0, 2), r.output
        assert "Traceback" not in r.output
        for extra_file in folder.glob("*.rejected*.csv"):
            extra_file.unlink()

    prop()
    with Store.open(db, read_only=True) as s:
        assert s.check().ok
    return tried[0]


def test_import_command_fuzz_fast(tmp_path_factory) -> None:
    tried = _cli_property(tmp_path_factory, 60)
    print(f"import command fuzz: {tried:,} inputs tried")


@pytest.mark.slow
def test_import_command_fuzz_1k(tmp_path_factory) -> None:
    tried = _cli_property(tmp_path_factory, 1_000)
    print(f"import command fuzz: {tried:,} inputs tried")
    assert tried >= 1_000


# --- the inputs fuzzing found, kept as plain regression tests -----------------------------------


def test_header_with_a_lone_carriage_return_is_refused(fuzz_store, tmp_path: Path) -> None:
    f = tmp_path / "cr.csv"
    f.write_bytes(b"\r\x01")  # found by the fuzzer: _csv.Error from the header line
    with pytest.raises(StoreError):
        import_file(fuzz_store, f, ImportOptions())


def test_nul_tag_from_a_utf16_file_is_refused_with_its_row(fuzz_store, tmp_path: Path) -> None:
    f = tmp_path / "nul.csv"
    text = f"lot,characteristic,value,site,line,shift\nNUL-1,{CHAR},500.0,\x00,1,day\n"
    f.write_bytes(text.encode("utf-16"))  # found by the fuzzer: sqlite3.IntegrityError
    before = _state(fuzz_store)
    with pytest.raises(StoreError) as info:
        import_file(fuzz_store, f, ImportOptions())
    assert "row 1" in str(info.value) and "site" in str(info.value)
    assert _state(fuzz_store) == before


@pytest.mark.parametrize("data", [b"*,", b"lot,^a$\nx,1\n",
                                  b"lot,characteristic,value,*\nA,fill_volume,500.0,1\n"])
def test_header_names_polars_reads_as_patterns_are_refused(fuzz_store, tmp_path: Path,
                                                           data: bytes) -> None:
    f = tmp_path / "pattern.csv"
    f.write_bytes(data)  # found by the fuzzer: polars ComputeError (pl.col("*") is every column)
    before = _state(fuzz_store)
    with pytest.raises(StoreError):
        import_file(fuzz_store, f, ImportOptions())
    assert _state(fuzz_store) == before
