"""Export safety: a CSV export neutralises spreadsheet formulas in text cells (=, +, -, @, tab,
CR at the start; OWASP "CSV Injection") while numbers stay numbers, and an export never
overwrites an existing file unless asked (--overwrite)."""

from __future__ import annotations

import csv
import io
from pathlib import Path

import polars as pl
from lotwatch.store import LotEntry, Store

from tests.reliability.helpers import assert_clean_refusal, run_cli

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
PAYLOADS = ["=HYPERLINK(\"http://x.invalid\",\"click\")", "+1+1", "-2+3", "@SUM(A1:A9)",
            "\t=1+1", "\r=1+1", "=cmd|' /C calc'!A0"]
TEXT_COLUMNS = ("lot", "characteristic", "unit", "site", "line", "shift", "logged_by", "note",
                "source")


def _store(path: Path) -> Store:
    s = Store.create(path)
    s.add_characteristic("offset", unit="mm", resolution="0.1", target=0)  # negative values
    for i, payload in enumerate(PAYLOADS):
        s.log_lots([LotEntry("offset", [f"{-0.5 + i / 10:.1f}", "-12.3"],
                             {"site": payload, "line": "-1", "shift": "@night"},
                             lot=payload.strip() + f"#{i}", measured_at="2026-11-20T08:00:00Z",
                             note=payload, by=payload)])
    return s


def test_csv_export_neutralises_formulas_and_keeps_numbers(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    _store(path).close()
    out = tmp_path / "export.csv"
    res = run_cli("export", "--out", out, "--db", path)
    assert res.returncode == 0, res.stderr
    rows = list(csv.DictReader(io.StringIO(out.read_text(encoding="utf-8"), newline="")))
    assert len(rows) == 2 * len(PAYLOADS)
    for row in rows:
        for col in TEXT_COLUMNS:
            cell = row[col]
            assert not cell.startswith(FORMULA_STARTS), (col, cell)
        # numbers stay numbers: written from their exact text, never quoted
        for col in ("value", "original_value"):
            assert float(row[col]) == float(row[col].strip())
            assert not row[col].startswith("'")
    # the store strips surrounding white space from tags, so "\t=1+1" is stored as "=1+1"
    assert {r["site"] for r in rows} == {"'" + p.strip() for p in PAYLOADS}
    assert {r["note"] for r in rows} == {"'" + p.strip() for p in PAYLOADS}
    assert {r["line"] for r in rows} == {"'-1"}
    assert "-12.3" in {r["value"] for r in rows} and "-0.5" in {r["value"] for r in rows}
    # Parquet keeps types: the values are floats, not text
    pq = tmp_path / "export.parquet"
    assert run_cli("export", "--out", pq, "--db", path).returncode == 0
    frame = pl.read_parquet(pq)
    assert frame.schema["value"] == pl.Float64
    assert sorted(frame["value"].to_list())[0] == -12.3


def test_exported_csv_imports_back_unchanged(tmp_path: Path) -> None:
    """The neutralising quote is undone on import, so an export round-trips exactly."""
    src = tmp_path / "a.sqlite"
    _store(src).close()
    out = tmp_path / "export.csv"
    assert run_cli("export", "--out", out, "--db", src).returncode == 0
    dst = tmp_path / "b.sqlite"
    with Store.create(dst) as s:
        s.add_characteristic("offset", unit="mm", resolution="0.1", target=0)
    res = run_cli("import", out, "--db", dst)
    assert res.returncode == 0, res.stdout + res.stderr
    with Store.open(src, read_only=True) as a, Store.open(dst, read_only=True) as b:
        cols = ["lot", "value", "site", "line", "shift", "note", "logged_by"]
        fa = a.measurements_frame().select(cols).sort(cols)
        fb = b.measurements_frame().select(cols).sort(cols)
        assert fa.equals(fb)


def test_export_never_overwrites_unless_asked(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    _store(path).close()
    out = tmp_path / "keep.csv"
    out.write_text("precious\n", encoding="utf-8")
    for fmt in ((), ("--format", "parquet")):
        assert_clean_refusal(run_cli("export", "--out", out, *fmt, "--db", path),
                             contains=("already exists", "--overwrite"))
        assert out.read_text(encoding="utf-8") == "precious\n"
    # a directory, a missing folder: refused, nothing written
    assert_clean_refusal(run_cli("export", "--out", tmp_path, "--db", path))
    assert_clean_refusal(run_cli("export", "--out", tmp_path / "no" / "x.csv", "--db", path))
    # no temporary files left behind
    assert [p.name for p in tmp_path.iterdir() if not p.name.startswith("s.sqlite")] == [
        "keep.csv"]
    res = run_cli("export", "--out", out, "--overwrite", "--db", path)
    assert res.returncode == 0, res.stderr
    assert out.read_text(encoding="utf-8").startswith("measurement_id,")


def test_tab_and_carriage_return_at_cell_start_are_neutralised() -> None:
    """The store strips them from tags and notes; the export guards them anyway (OWASP lists
    both as formula starters)."""
    from lotwatch.store.export import neutralise_text

    frame = pl.DataFrame({"t": ["\t=1+1", "\r=1+1", "=x", "ok", "-", None],
                          "n": [-1.5, 2.0, -0.0, 1e300, -3.0, 0.0]})
    out = neutralise_text(frame)
    assert out["t"].to_list() == ["'\t=1+1", "'\r=1+1", "'=x", "ok", "'-", None]
    assert out["n"].to_list() == frame["n"].to_list()
