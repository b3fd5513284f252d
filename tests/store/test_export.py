"""Export to CSV and Parquet (store.export).

Formula neutralisation follows the OWASP "CSV Injection" guidance: a cell starting with ``=``,
``+``, ``-``, ``@``, tab or carriage return is prefixed with a single quote so spreadsheets show it
as text. Numbers are not cells of that kind: a negative value must stay a number.
"""

from __future__ import annotations

import csv
import io
from datetime import UTC, date, datetime
from pathlib import Path

import polars as pl
import pytest
from lotwatch.store import LotEntry, Store
from lotwatch.store.export import ExportRefused, neutralise_text, write_export
from lotwatch.store.importer import import_file


@pytest.fixture
def lab(tmp_path: Path):
    s = Store.create(tmp_path / "lab.sqlite")
    s.add_characteristic("offset", unit="mm", resolution="0.5", plausible=(-10, 10))
    s.add_characteristic("fill_volume", unit="mL", resolution="0.1", plausible=(400, 600))
    s.log_lots([
        LotEntry("offset", ["-0.5", "1.0"], {"site": "=cmd|' /C calc'!A0", "line": "+L1",
                                             "shift": "@night"},
                 lot="-LOT1", measured_at="2026-11-02T08:00:00Z", note="-see log"),
        LotEntry("fill_volume", ["500.1"], {"site": "North", "line": "L2", "shift": "day"},
                 lot="LOT2", measured_at="2026-11-05T09:30:00Z", note="plain note"),
    ])
    try:
        yield s
    finally:
        s.close()


def read_csv(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


def test_csv_neutralises_text_cells_only(lab):
    out = io.StringIO()
    summary = write_export(lab, stream=out)
    assert summary.rows == 3 and summary.path is None
    rows = read_csv(out.getvalue())
    first = rows[0]
    assert first["lot"] == "'-LOT1"
    assert first["site"] == "'=cmd|' /C calc'!A0"
    assert first["line"] == "'+L1"
    assert first["shift"] == "'@night"
    assert first["note"] == "'-see log"
    # numbers stay numbers, including a negative value (not quoted, not prefixed)
    assert [r["value"] for r in rows] == ["-0.5", "1.0", "500.1"]
    assert "'-0.5" not in out.getvalue()
    assert rows[2]["lot"] == "LOT2" and rows[2]["note"] == "plain note"
    assert rows[0]["measured_at"] == "2026-11-02T08:00:00Z"
    assert rows[0]["voided"] == "false" and rows[0]["unit"] == "mm"


def test_neutralise_text_leaves_numeric_columns():
    frame = pl.DataFrame({"t": ["=1", "-2", "ok", "\rx", "\tx", "a=b", None],
                          "n": [-1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0]})
    got = neutralise_text(frame)
    assert got["t"].to_list() == ["'=1", "'-2", "ok", "'\rx", "'\tx", "a=b", None]
    assert got["n"].to_list() == frame["n"].to_list()


def test_csv_shows_current_and_original_value_and_voided(lab):
    ids = lab.measurements_frame().sort("id")["id"].to_list()
    lab.correct(ids[0], "0.0", reason="misread")
    lab.void(ids[1], reason="dropped")
    out = io.StringIO()
    write_export(lab, stream=out)
    rows = {int(r["measurement_id"]): r for r in read_csv(out.getvalue())}
    assert (rows[ids[0]]["value"], rows[ids[0]]["original_value"]) == ("0.0", "-0.5")
    assert rows[ids[1]]["voided"] == "true"


def test_refuses_to_overwrite(lab, tmp_path):
    target = tmp_path / "out.csv"
    target.write_text("precious")
    with pytest.raises(ExportRefused, match="already exists"):
        write_export(lab, out=target)
    assert target.read_text() == "precious"
    with pytest.raises(ExportRefused, match="already exists"):
        write_export(lab, format="parquet", out=target)
    assert target.read_text() == "precious"
    write_export(lab, out=target, overwrite=True)
    assert len(read_csv(target.read_text())) == 3
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".part")] == []


def test_parquet_types_and_round_trip(lab, tmp_path):
    target = tmp_path / "out.parquet"
    write_export(lab, format="parquet", out=target)
    frame = pl.read_parquet(target)
    assert frame.schema["value"] == pl.Float64
    assert frame.schema["voided"] == pl.Boolean
    assert frame.schema["measured_at"] == pl.Datetime("us", "UTC")
    assert frame["measured_at"][0] == datetime(2026, 11, 2, 8, 0, tzinfo=UTC)
    assert frame["lot"].to_list() == ["-LOT1", "-LOT1", "LOT2"]  # Parquet is not neutralised
    # into a fresh store with the same characteristics: the same values come back
    fresh = Store.create(tmp_path / "fresh.sqlite")
    try:
        fresh.add_characteristic("offset", unit="mm", resolution="0.5", plausible=(-10, 10))
        fresh.add_characteristic("fill_volume", unit="mL", resolution="0.1",
                                 plausible=(400, 600))
        assert import_file(fresh, target).stored == 3
        assert (fresh.measurements_frame()["value_text"].to_list()
                == lab.measurements_frame()["value_text"].to_list())
    finally:
        fresh.close()


def test_csv_reimport_into_same_store_stores_nothing(tmp_path):
    s = Store.create(tmp_path / "s.sqlite")
    try:
        s.add_characteristic("fill_volume", unit="mL", resolution="0.1", plausible=(400, 600))
        s.log_lots([LotEntry("fill_volume", ["500.1", "499.9"], {"site": "N", "line": "1",
                                                                 "shift": "d"}, lot="A"),
                    LotEntry("fill_volume", ["500.0"], {"site": "@N", "line": "-1",
                                                        "shift": "d"}, lot="=B")])
        target = tmp_path / "e.csv"
        write_export(s, out=target)
        assert "'=B" in target.read_text()  # neutralised in the file ...
        before = list(s.conn.iterdump())
        summary = import_file(s, target)
        # ... and read back as the same lot with the same tags: nothing new
        assert (summary.stored, summary.duplicates, summary.rejected) == (0, 3, [])
        assert list(s.conn.iterdump()) == before
    finally:
        s.close()


def test_filters(lab):
    out = io.StringIO()
    write_export(lab, stream=out, characteristics=["fill_volume"])
    assert [r["lot"] for r in read_csv(out.getvalue())] == ["LOT2"]
    out = io.StringIO()
    write_export(lab, stream=out, since=date(2026, 11, 3))
    assert [r["lot"] for r in read_csv(out.getvalue())] == ["LOT2"]
    out = io.StringIO()
    write_export(lab, stream=out, until=date(2026, 11, 2))
    assert [r["lot"] for r in read_csv(out.getvalue())] == ["'-LOT1", "'-LOT1"]


def test_parquet_needs_a_file(lab):
    with pytest.raises(ExportRefused, match="--out"):
        write_export(lab, format="parquet")
