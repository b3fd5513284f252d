"""Import from CSV and Parquet (store.importer).

Checks are against the file contents written by each test (the exact decimal text must reach the
store unchanged) and against the store's own raw rows. Conventions checked:
- RFC 4180 CSV with a header row; a UTF-8 byte order mark is allowed (Unicode standard, sec. 23.8).
- ISO 8601 timestamps; an offset converts to UTC, no offset means local time (common practice).
- Decimal comma with ';' as column separator, as written by spreadsheets in many European
  locales (common practice).
"""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

import polars as pl
import pytest
from lotwatch.store import BadInput, LotEntry, Store
from lotwatch.store.importer import FileRefused, ImportOptions, import_file, rejected_path

HEADER = "lot,characteristic,value,measured_at,site,line,shift"


@pytest.fixture
def lab(tmp_path: Path):
    """A store with fill_volume (mL, 0.1, plausible 450..550) and cap_torque (N·m, 0.01)."""
    s = Store.create(tmp_path / "lab.sqlite")
    s.add_characteristic("fill_volume", unit="mL", resolution="0.1", lsl=497, target=500,
                         usl=503, plausible=(450, 550))
    s.add_characteristic("cap_torque", unit="N·m", resolution="0.01", plausible=(0, 5))
    try:
        yield s
    finally:
        s.close()


def dump(store: Store) -> list[str]:
    return list(store.conn.iterdump())


def write(path: Path, text: str, encoding: str = "utf-8") -> Path:
    path.write_bytes(text.encode(encoding))
    return path


def stored(store: Store) -> list[tuple]:
    """(lot, characteristic, exact value text, measured_at text, site, line, shift)."""
    f = store.measurements_frame().sort("id")
    return [
        (r["lot"], r["characteristic"], r["value_text"],
         r["measured_at"].strftime("%Y-%m-%dT%H:%M:%SZ"), r["site"], r["line"], r["shift"])
        for r in f.iter_rows(named=True)
    ]


def test_long_csv_stores_exact_text_and_groups_replicates(lab, tmp_path):
    f = write(tmp_path / "lab.csv", HEADER + "\n"
              "A1,fill_volume,500.1,2026-11-03T08:15:00Z,Hill,H1,early\n"
              "A1,fill_volume,499.9,2026-11-03T08:15:00Z,Hill,H1,early\n"
              "A1,cap_torque,2.05,2026-11-03T08:15:00Z,Hill,H1,early\n"
              "A2,fill_volume,500.0,2026-11-03T09:15:00+01:00,Hill,H2,late\n")
    summary = import_file(lab, f)
    assert (summary.rows_read, summary.values_read, summary.stored) == (4, 4, 4)
    assert (summary.duplicates, summary.rejected, summary.lots) == (0, [], 2)
    assert stored(lab) == [
        ("A1", "fill_volume", "500.1", "2026-11-03T08:15:00Z", "Hill", "H1", "early"),
        ("A1", "fill_volume", "499.9", "2026-11-03T08:15:00Z", "Hill", "H1", "early"),
        ("A1", "cap_torque", "2.05", "2026-11-03T08:15:00Z", "Hill", "H1", "early"),
        # +01:00 offset: 09:15 local is 08:15 UTC (ISO 8601)
        ("A2", "fill_volume", "500.0", "2026-11-03T08:15:00Z", "Hill", "H2", "late"),
    ]
    assert lab.check().ok


def test_naive_timestamp_is_local_time(lab, tmp_path):
    f = write(tmp_path / "lab.csv", HEADER + "\nA1,fill_volume,500.1,2026-07-03 08:15,S,L,x\n")
    import_file(lab, f)
    expected = datetime(2026, 7, 3, 8, 15).astimezone().astimezone(UTC)
    assert stored(lab)[0][3] == expected.strftime("%Y-%m-%dT%H:%M:%SZ")


def test_wide_csv_one_column_per_characteristic(lab, tmp_path):
    f = write(tmp_path / "wide.csv",
              "lot,measured_at,site,line,shift,fill_volume,cap_torque,operator_comment\n"
              "W1,2026-11-03T08:00:00Z,S,L1,early,500.2,2.01,fine\n"
              "W2,2026-11-03T09:00:00Z,S,L2,early,,1.99,\n"  # fill not measured
              "W2,2026-11-03T09:00:00Z,S,L2,early,,2.00,\n")  # second torque replicate
    summary = import_file(lab, f)
    assert summary.layout == "wide"
    assert (summary.rows_read, summary.values_read, summary.stored) == (3, 4, 4)
    assert any("operator_comment" in n for n in summary.notes)  # unused column reported
    got = sorted((r[0], r[1], r[2]) for r in stored(lab))
    assert got == [("W1", "cap_torque", "2.01"), ("W1", "fill_volume", "500.2"),
                   ("W2", "cap_torque", "1.99"), ("W2", "cap_torque", "2.00")]


def test_wide_characteristic_map(lab, tmp_path):
    f = write(tmp_path / "wide.csv",
              "lot,measured_at,site,line,shift,Fuellmenge\n"
              "W1,2026-11-03T08:00:00Z,S,L1,early,500.2\n")
    opts = ImportOptions(characteristic_map={"Fuellmenge": "fill_volume"})
    assert import_file(lab, f, opts).stored == 1
    assert stored(lab)[0][1:3] == ("fill_volume", "500.2")


def test_parquet_long(lab, tmp_path):
    path = tmp_path / "lab.parquet"
    pl.DataFrame({
        "lot": ["P1", "P1"],
        "characteristic": ["fill_volume", "cap_torque"],
        "value": [500.3, 2.07],  # float column: shortest repr text reaches the store
        "measured_at": [datetime(2026, 11, 3, 8, 15, tzinfo=UTC)] * 2,
        "site": ["S"] * 2, "line": ["L"] * 2, "shift": ["early"] * 2,
    }).write_parquet(path)
    summary = import_file(lab, path)
    assert summary.stored == 2
    assert [r[:4] for r in stored(lab)] == [
        ("P1", "fill_volume", "500.3", "2026-11-03T08:15:00Z"),
        ("P1", "cap_torque", "2.07", "2026-11-03T08:15:00Z"),
    ]


def test_decimal_comma_and_semicolon(lab, tmp_path):
    f = write(tmp_path / "eu.csv", "lot;characteristic;value;measured_at;site;line;shift\n"
              "E1;fill_volume;500,3;2026-11-03 08:15;S;L;early\n"
              "E1;fill_volume;499,7;2026-11-03 08:15;S;L;early\n")
    summary = import_file(lab, f, ImportOptions(decimal_comma=True, delimiter=";"))
    assert summary.stored == 2
    assert [r[2] for r in stored(lab)] == ["500.3", "499.7"]


def test_decimal_comma_without_the_option_is_explained(lab, tmp_path):
    f = write(tmp_path / "eu.csv", "lot;characteristic;value;measured_at;site;line;shift\n"
              "E1;fill_volume;500,3;2026-11-03 08:15;S;L;early\n")
    with pytest.raises(BadInput) as err:
        import_file(lab, f)  # delimiter guessed from the header
    assert "--decimal-comma" in str(err.value)


def test_utf8_bom_header_is_recognised(lab, tmp_path):
    f = write(tmp_path / "bom.csv", HEADER + "\nB1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n",
              encoding="utf-8-sig")
    assert f.read_bytes()[:3] == b"\xef\xbb\xbf"
    assert import_file(lab, f).stored == 1
    assert stored(lab)[0][0] == "B1"


def test_utf16_with_bom(lab, tmp_path):
    # spreadsheets' "Unicode text" export is UTF-16 with a byte order mark
    f = write(tmp_path / "u16.csv", HEADER + "\nU1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n",
              encoding="utf-16")
    assert f.read_bytes()[:2] in (b"\xff\xfe", b"\xfe\xff")
    assert import_file(lab, f).stored == 1


def test_latin1_falls_back_with_a_note(lab, tmp_path):
    f = write(tmp_path / "l1.csv", HEADER + ",note\n"
              "C1,fill_volume,500.1,2026-11-03T08:15:00Z,Müllerau,L,e,café\n", encoding="latin-1")
    summary = import_file(lab, f)
    assert any("Latin-1" in n for n in summary.notes)
    row = lab.measurements_frame().row(0, named=True)
    assert (row["site"], row["note"]) == ("Müllerau", "café")


def test_column_mapping_options(lab, tmp_path):
    f = write(tmp_path / "mapped.csv", "Charge,Merkmal,Wert,Zeit,Werk,Linie,Schicht\n"
              "M1,FV,500.4,2026-11-03T08:15:00Z,S,L,e\n")
    opts = ImportOptions(lot_column="Charge", characteristic_column="Merkmal",
                         value_column="Wert", time_column="Zeit",
                         tag_columns={"site": "Werk", "line": "Linie", "shift": "Schicht"},
                         characteristic_map={"FV": "fill_volume"})
    assert import_file(lab, f, opts).stored == 1
    assert stored(lab) == [("M1", "fill_volume", "500.4", "2026-11-03T08:15:00Z", "S", "L", "e")]


def test_every_bad_row_is_listed_and_nothing_is_stored(lab, tmp_path):
    lab.log_lots([LotEntry("fill_volume", ["500.0"], {"site": "S", "line": "L", "shift": "e"},
                           lot="OLD", measured_at="2026-11-01T08:00:00Z")])
    before = dump(lab)
    f = write(tmp_path / "bad.csv", HEADER + "\n"
              "G1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"       # 1 good
              "X2,fill_volume,abc,2026-11-03T08:15:00Z,S,L,e\n"         # 2 not a number
              "X3,fill_volume,1e,2026-11-03T08:15:00Z,S,L,e\n"          # 3 not a number
              "X4,fill_volume,500.1,yesterday,S,L,e\n"                  # 4 bad timestamp
              "X5,fill_volume,500.1,2026-13-40 08:15,S,L,e\n"           # 5 bad timestamp
              ",fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"         # 6 empty lot
              "X7,fill_volume,500.15,2026-11-03T08:15:00Z,S,L,e\n"      # 7 finer than resolution
              "X8,density,1.0,2026-11-03T08:15:00Z,S,L,e\n"             # 8 unknown characteristic
              "X9,fill_volume,5001,2026-11-03T08:15:00Z,S,L,e\n"        # 9 outside plausible
              "X10,fill_volume,500.1,2026-11-03T08:15:00Z,S,,e\n"       # 10 missing required tag
              "X11,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"      # 11 lot X11 tags ...
              "X11,cap_torque,2.00,2026-11-03T08:15:00Z,S,L9,e\n"       # 12 ... disagree
              "OLD,fill_volume,500.9,2026-11-03T08:15:00Z,S,L,e\n"      # 13 conflicts with stored
              "X14,fill_volume,,2026-11-03T08:15:00Z,S,L,e\n")          # 14 empty value
    with pytest.raises(BadInput) as err:
        import_file(lab, f)
    problems = err.value.problems
    rows = sorted({p.row for p in problems})
    assert rows == [*range(2, 11), 12, 13, 14]  # row 11 is good; row 12 disagrees with it
    assert all(p.source == "bad.csv" for p in problems)
    by_row = {p.row: p for p in problems}
    assert (by_row[2].column, by_row[2].value) == ("value", "abc")
    assert (by_row[4].column, by_row[4].value) == ("measured_at", "yesterday")
    assert (by_row[5].column, by_row[5].value) == ("measured_at", "2026-13-40 08:15")
    assert by_row[6].column == "lot"
    assert (by_row[7].value, by_row[9].value) == ("500.15", "5001")
    assert "finer than the resolution" in by_row[7].reason
    assert "density" in by_row[8].reason
    assert "plausible" in by_row[9].reason
    assert by_row[10].column == "line"
    assert by_row[12].column == "line" and "row 11" in by_row[12].reason
    assert "OLD" in by_row[13].reason
    assert by_row[14].column == "value"
    message = str(err.value)
    assert "nothing was stored" in message and "bad.csv, row 14" in message
    assert dump(lab) == before


def test_missing_column_names_file_column_and_present_columns(lab, tmp_path):
    f = write(tmp_path / "nolot.csv", "batch,characteristic,value\nB,fill_volume,500.0\n")
    before = dump(lab)
    with pytest.raises(FileRefused) as err:
        import_file(lab, f)
    msg = str(err.value)
    assert "nolot.csv" in msg and "'lot'" in msg
    assert "'batch'" in msg and "'characteristic'" in msg and "'value'" in msg
    assert "--lot-column" in msg
    assert dump(lab) == before


@pytest.mark.parametrize("content, words", [
    (b"", "empty"),
    (b"   \n\n", "empty"),
    (HEADER.encode() + b"\n", "no data rows"),
    (b"PK\x03\x04\x14\x00\x06\x00", "spreadsheet"),
    (b"lot,value\x00\x01\x02", "NUL"),
])
def test_unusable_files_are_refused_clearly(lab, tmp_path, content, words):
    f = tmp_path / "x.csv"
    f.write_bytes(content)
    before = dump(lab)
    with pytest.raises(FileRefused) as err:
        import_file(lab, f)
    assert "x.csv" in str(err.value) and words in str(err.value)
    assert dump(lab) == before


def test_header_case_and_spaces_are_forgiven(lab, tmp_path):
    f = write(tmp_path / "caps.csv", " Lot ,Characteristic,VALUE,Measured_At,Site,Line,Shift\n"
              "A1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n")
    assert import_file(lab, f).stored == 1
    assert stored(lab)[0][:3] == ("A1", "fill_volume", "500.1")


def test_rows_with_too_many_fields_are_all_listed(lab, tmp_path):
    f = write(tmp_path / "ragged.csv", HEADER + "\n"
              "A1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
              "A2,fill_volume,500,1,2026-11-03T08:15:00Z,S,L,e\n"
              "A3,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
              "A4,fill_volume,499,9,2026-11-03T08:15:00Z,S,L,e\n")
    before = dump(lab)
    with pytest.raises(BadInput) as err:
        import_file(lab, f)
    assert [(p.source, p.row) for p in err.value.problems] == [("ragged.csv", 2), ("ragged.csv", 4)]
    assert "8 fields but the header has 7" in err.value.problems[0].reason
    assert dump(lab) == before


def test_repeated_header_is_refused(lab, tmp_path):
    f = write(tmp_path / "rep.csv", "lot,value,value\nA,1,2\n")
    with pytest.raises(FileRefused, match="'value' more than once"):
        import_file(lab, f)


def test_missing_file(lab, tmp_path):
    with pytest.raises(FileRefused, match="no such file"):
        import_file(lab, tmp_path / "absent.csv")


def test_reimport_stores_nothing_new(lab, tmp_path):
    f = write(tmp_path / "lab.csv", HEADER + "\n"
              "A1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
              "A1,fill_volume,500.2,2026-11-03T08:15:00Z,S,L,e\n"
              "A2,cap_torque,2.00,2026-11-03T08:15:00Z,S,L,e\n")
    first = import_file(lab, f)
    assert first.stored == 3
    before = dump(lab)
    again = import_file(lab, f)
    assert (again.stored, again.duplicates, again.rejected) == (0, 3, [])
    assert dump(lab) == before


def test_skip_bad_stores_good_rows_and_writes_rejected_file(lab, tmp_path):
    f = write(tmp_path / "mixed.csv", HEADER + "\n"
              "A1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
              "A2,fill_volume,=HYPERLINK(1),2026-11-03T08:15:00Z,S,L,e\n"
              "A3,fill_volume,500.15,2026-11-03T08:15:00Z,S,L,e\n"
              "A4,cap_torque,2.01,2026-11-03T08:15:00Z,S,L,e\n")
    summary = import_file(lab, f, ImportOptions(skip_bad=True))
    assert summary.stored == 2 and summary.rejected_rows == 2
    assert summary.rejected_file == tmp_path / "mixed.rejected.csv"
    rejected = pl.read_csv(summary.rejected_file, infer_schema=False)
    assert rejected["row"].to_list() == ["2", "3"]
    assert rejected["lot"].to_list() == ["A2", "A3"]
    # the formula stays inert in the rejected file (OWASP "CSV Injection"); importing the
    # corrected file takes the quote off again
    assert rejected["value"].to_list() == ["'=HYPERLINK(1)", "500.15"]
    assert "not a number" in rejected["reason"][0] and "resolution" in rejected["reason"][1]
    # a second run never overwrites the first rejected file
    first_bytes = summary.rejected_file.read_bytes()
    again = import_file(lab, f, ImportOptions(skip_bad=True))
    assert again.rejected_file == tmp_path / "mixed.rejected-2.csv"
    assert summary.rejected_file.read_bytes() == first_bytes
    assert again.stored == 0 and again.duplicates == 2
    assert rejected_path(f) == tmp_path / "mixed.rejected-3.csv"


def test_skip_bad_wide_counts_per_value(lab, tmp_path):
    f = write(tmp_path / "w.csv", "lot,measured_at,site,line,shift,fill_volume,cap_torque\n"
              "W1,2026-11-03T08:00:00Z,S,L,e,500.25,2.01\n"   # fill finer than 0.1: refused
              "W2,2026-11-03T08:00:00Z,S,L,e,500.2,2.02\n")
    first = import_file(lab, f, ImportOptions(skip_bad=True))
    assert (first.stored, first.duplicates, first.rejected_rows) == (3, 0, 1)
    assert [(p.row, p.column) for p in first.rejected] == [(1, "fill_volume")]
    again = import_file(lab, f, ImportOptions(skip_bad=True))
    assert (again.stored, again.duplicates, again.rejected_rows) == (0, 3, 1)


def test_skip_bad_parquet_writes_rejected_csv(lab, tmp_path):
    path = tmp_path / "p.parquet"
    pl.DataFrame({"lot": ["P1", "P2"], "characteristic": ["fill_volume", "fill_volume"],
                  "value": ["500.1", "oops"], "measured_at": ["2026-11-03T08:15:00Z"] * 2,
                  "site": ["S", "S"], "line": ["L", "L"], "shift": ["e", "e"]}).write_parquet(path)
    summary = import_file(lab, path, ImportOptions(skip_bad=True))
    assert summary.stored == 1
    assert summary.rejected_file == tmp_path / "p.rejected.csv"
    assert "oops" in summary.rejected_file.read_text()


def test_round_option(lab, tmp_path):
    f = write(tmp_path / "r.csv", HEADER + "\nA1,fill_volume,500.15,2026-11-03T08:15:00Z,S,L,e\n"
              "A2,fill_volume,500.25,2026-11-03T08:15:00Z,S,L,e\n")
    summary = import_file(lab, f, ImportOptions(round_values=True))
    assert summary.rounded == 2
    # round half to even (IEEE 754 roundTiesToEven): 500.15 -> 500.2, 500.25 -> 500.2
    assert [r[2] for r in stored(lab)] == ["500.2", "500.2"]


def test_known_factor_columns_become_tags(lab, tmp_path):
    lab.add_factor("filler_head")
    f = write(tmp_path / "t.csv", HEADER + ",filler_head\n"
              "A1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e,7\n")
    import_file(lab, f)
    assert lab.measurements_frame()["filler_head"].to_list() == ["7"]
