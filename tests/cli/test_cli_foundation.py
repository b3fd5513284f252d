"""End-to-end tests of the foundation commands on temporary stores (click.testing.CliRunner).

Exit statuses follow the project's convention (tui/cli/common.py): 0 success, 2 a refusal
with a clear message (bad input or store error), 1 for `lotwatch check` finding a mismatch.
"""

from __future__ import annotations

import sqlite3
import subprocess
import sys
from datetime import datetime
from pathlib import Path

import polars as pl
import pytest

from tests.cli.helpers import count, dump, subprocess_env

TAGS = ["--tag", "site=Hill", "--tag", "line=H1", "--tag", "shift=early"]


def no_traceback(result) -> None:
    assert "Traceback" not in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception


# --- init --------------------------------------------------------------------------------------


def test_init_creates_store_and_refuses_to_overwrite(cli, tmp_path):
    path = tmp_path / "new.sqlite"
    r = cli("init", path)
    assert r.exit_code == 0 and "Created an empty store" in r.output
    assert "site (required)" in r.output
    before = path.read_bytes()
    r = cli("init", path)
    assert r.exit_code == 2 and "already exists" in r.output
    assert path.read_bytes() == before
    other = tmp_path / "plain.txt"
    other.write_text("not a store")
    r = cli("init", other)
    assert r.exit_code == 2 and other.read_text() == "not a store"


def test_init_uses_db_option_then_env(cli, env, tmp_path):
    r = cli("--db", tmp_path / "g.sqlite", "init")
    assert r.exit_code == 0 and (tmp_path / "g.sqlite").exists()
    r = cli("init", "--db", tmp_path / "c.sqlite")
    assert r.exit_code == 0 and (tmp_path / "c.sqlite").exists()
    r = cli("init")
    assert r.exit_code == 0 and Path(env["LOTWATCH_DB"]).exists()


def test_missing_store_says_how_to_create_it(cli, tmp_path):
    path = tmp_path / "absent.sqlite"
    r = cli("characteristic", "list", "--db", path)
    assert r.exit_code != 0
    assert f"lotwatch init {path}" in r.output
    no_traceback(r)
    assert not path.exists()


def test_not_a_store_is_a_clean_error(cli, tmp_path):
    path = tmp_path / "junk.sqlite"
    path.write_bytes(b"this is not sqlite at all" * 100)
    r = cli("factor", "list", "--db", path)
    assert r.exit_code != 0 and "Error:" in r.output
    no_traceback(r)


# --- characteristics and factors ---------------------------------------------------------------


def test_characteristic_add_list_show(cli, db):
    r = cli("characteristic", "add", "cap_torque", "--unit", "N·m", "--resolution", "0.01",
            "--min-shift", "0.05", "--db", db)
    assert r.exit_code == 0, r.output
    r = cli("characteristic", "list", "--db", db)
    assert r.exit_code == 0
    lines = r.output.splitlines()
    assert lines[0].split() == ["name", "unit", "resolution", "LSL", "target", "USL", "min",
                                "shift", "state"]
    assert lines[1].split()[:6] == ["cap_torque", "N·m", "0.01", "-", "-", "-"]
    assert lines[2].split()[:6] == ["fill_volume", "mL", "0.1", "497", "500", "503"]
    r = cli("characteristic", "show", "fill_volume", "--db", db)
    assert r.exit_code == 0
    assert "plausible range: 450 to 550" in r.output and "resolution:      0.1" in r.output


def test_characteristic_add_refusals(cli, db):
    before = dump(db)
    r = cli("characteristic", "add", "fill_volume", "--unit", "mL", "--resolution", "0.1",
            "--db", db)
    assert r.exit_code == 2 and "fill_volume" in r.output
    r = cli("characteristic", "add", "x", "--unit", "mL", "--resolution", "zero", "--db", db)
    assert r.exit_code == 2 and "zero" in r.output
    r = cli("characteristic", "add", "y", "--unit", "mL", "--resolution", "0.1",
            "--lsl", "5", "--usl", "1", "--db", db)
    assert r.exit_code == 2
    r = cli("characteristic", "show", "nope", "--db", db)
    assert r.exit_code == 2 and "nope" in r.output
    no_traceback(r)
    assert dump(db) == before


def test_characteristic_edit_and_resolution_refused_once_data_exists(cli, db):
    r = cli("characteristic", "edit", "fill_volume", "--usl", "504", "--clear", "lsl",
            "--db", db)
    assert r.exit_code == 0, r.output
    assert "USL:             504" in r.output and "LSL:             -" in r.output
    r = cli("characteristic", "edit", "fill_volume", "--resolution", "0.05", "--db", db)
    assert r.exit_code == 0, r.output  # no data yet: allowed
    r = cli("log", "fill_volume", "500.05", *TAGS, "--db", db)
    assert r.exit_code == 0, r.output
    before = dump(db)
    r = cli("characteristic", "edit", "fill_volume", "--resolution", "0.1", "--db", db)
    assert r.exit_code == 2
    assert "cannot change" in r.output and "0.05" in r.output  # the reason is given
    assert dump(db) == before
    r = cli("characteristic", "edit", "fill_volume", "--db", db)
    assert r.exit_code == 2 and "nothing to change" in r.output


def test_characteristic_rename_keeps_values_and_aggregates(cli, db):
    assert cli("log", "fill_volume", "500.1", *TAGS, "--lot", "R1", "--db", db).exit_code == 0
    r = cli("characteristic", "edit", "fill_volume", "--rename", "fill_vol", "--db", db)
    assert r.exit_code == 0, r.output
    assert "Updated characteristic fill_vol" in r.output
    shown = cli("characteristic", "show", "fill_vol", "--db", db)
    assert shown.exit_code == 0, shown.output
    assert cli("log", "fill_vol", "500.2", *TAGS, "--lot", "R2", "--db", db).exit_code == 0
    assert cli("check", "--db", db).exit_code == 0
    gone = cli("log", "fill_volume", "500.2", *TAGS, "--db", db)
    assert gone.exit_code == 2 and "fill_volume" in gone.output


def test_factor_add_and_list(cli, db):
    r = cli("factor", "add", "filler_head", "--required", "--db", db)
    assert r.exit_code == 0 and "(required)" in r.output
    r = cli("factor", "add", "batch", "--db", db)
    assert r.exit_code == 0
    r = cli("factor", "add", "batch", "--db", db)
    assert r.exit_code == 2 and "batch" in r.output
    r = cli("factor", "list", "--db", db)
    rows = [line.split() for line in r.output.splitlines()]
    assert rows[0] == ["factor", "required", "state", "levels", "values"]
    assert [x[:2] for x in rows[1:]] == [["site", "yes"], ["line", "yes"], ["shift", "yes"],
                                          ["filler_head", "yes"], ["batch", "no"]]


# --- log, correct, void, history, check -------------------------------------------------------


def test_log_prints_ids_lot_and_local_time(cli, db):
    r = cli("log", "fill_volume", "500.1", "499.9", *TAGS, "--lot", "A-17",
            "--at", "2026-11-03T08:15:00Z", "--note", "first lot", "--by", "lab-1", "--db", db)
    assert r.exit_code == 0, r.output
    local = datetime.fromisoformat("2026-11-03T08:15:00+00:00").astimezone()
    assert "in lot A-17" in r.output
    assert local.strftime("%Y-%m-%d %H:%M") in r.output and "plant time" in r.output
    assert "Measurement id(s): 1, 2" in r.output
    conn = sqlite3.connect(db)
    rows = conn.execute("SELECT current_units, measured_at, logged_by, note FROM measurements "
                        "ORDER BY id").fetchall()
    conn.close()
    assert rows == [(5001, "2026-11-03T08:15:00Z", "lab-1", "first lot"),
                    (4999, "2026-11-03T08:15:00Z", "lab-1", "first lot")]


def test_log_generates_lot_id_and_accepts_negative_values(cli, db):
    r = cli("characteristic", "add", "offset", "--unit", "mm", "--resolution", "0.5",
            "--plausible", "-10", "10", "--db", db)
    assert r.exit_code == 0, r.output
    r = cli("log", "offset", "-0.5", "1.0", *TAGS, "--db", db)
    assert r.exit_code == 0, r.output
    assert "Stored 2 value(s) of offset in lot L" in r.output


def test_log_same_lot_twice_is_a_duplicate(cli, db):
    args = ("log", "fill_volume", "500.1", *TAGS, "--lot", "D1", "--db", db)
    assert cli(*args).exit_code == 0
    before = dump(db)
    r = cli(*args)
    assert r.exit_code == 0 and "Nothing new" in r.output
    assert dump(db) == before


def test_log_refusals_are_clean_and_store_nothing(cli, db):
    before = dump(db)
    cases = [
        (("log", "fill_volume", "500.15", *TAGS), "finer than the resolution"),
        (("log", "fill_volume", "abc", *TAGS), "abc"),
        (("log", "fill_volume", "5000", *TAGS), "plausible"),
        (("log", "density", "1.0", *TAGS), "unknown characteristic"),
        (("log", "fill_volume", "500.1", "--tag", "site=Hill"), "missing required tag"),
        (("log", "fill_volume", "500.1", "--tag", "site"), "key=value"),
        (("log", "fill_volume", "500.1", *TAGS, "--at", "yesterday"), "--at"),
    ]
    for args, words in cases:
        r = cli(*args, "--db", db)
        assert r.exit_code == 2, (args, r.output)
        assert words in r.output, (args, r.output)
        no_traceback(r)
    assert dump(db) == before


def test_log_round(cli, db):
    r = cli("log", "fill_volume", "500.15", *TAGS, "--round", "--db", db)
    assert r.exit_code == 0 and "1 value(s) rounded" in r.output


def test_correct_void_history(cli, db):
    assert cli("log", "fill_volume", "500.1", "500.3", *TAGS, "--lot", "C1", "--db", db
               ).exit_code == 0
    r = cli("correct", "1", "500.2", "--reason", "misread the display", "--by", "qa", "--db", db)
    assert r.exit_code == 0 and "Corrected measurement 1 to 500.2" in r.output
    r = cli("void", "2", "--reason", "bottle dropped", "--db", db)
    assert r.exit_code == 0 and "Voided measurement 2" in r.output
    r = cli("history", "1", "--db", db)
    assert r.exit_code == 0
    lines = r.output.splitlines()
    assert "log" in lines[1] and "value 500.1" in lines[1]
    assert "correct" in lines[2] and "500.1 -> 500.2" in lines[2]
    assert "by qa" in lines[2] and "reason: misread the display" in lines[2]
    r = cli("history", "2", "--db", db)
    assert "void" in r.output and "bottle dropped" in r.output
    assert cli("check", "--db", db).exit_code == 0
    r = cli("correct", "99", "500.0", "--reason", "x", "--db", db)
    assert r.exit_code == 2 and "99" in r.output
    r = cli("correct", "1", "500.0", "--db", db)
    assert r.exit_code == 2 and "--reason" in r.output  # click usage error for a missing option


def test_check_reports_mismatch_with_exit_1(cli, db):
    assert cli("log", "fill_volume", "500.1", *TAGS, "--db", db).exit_code == 0
    r = cli("check", "--db", db)
    assert r.exit_code == 0 and "consistent" in r.output
    conn = sqlite3.connect(db)
    conn.execute("UPDATE buckets SET sum_d = sum_d + 1")
    conn.commit()
    conn.close()
    r = cli("check", "--db", db)
    assert r.exit_code == 1
    assert "problem" in r.output
    no_traceback(r)


# --- import and export ----------------------------------------------------------------------


HEADER = "lot,characteristic,value,measured_at,site,line,shift\n"


def test_import_summary_and_reimport(cli, db, tmp_path):
    f = tmp_path / "lab.csv"
    f.write_text(HEADER + "A1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
                 "A1,fill_volume,500.2,2026-11-03T08:15:00Z,S,L,e\n"
                 "A2,fill_volume,499.8,2026-11-03T09:15:00Z,S,L,e\n")
    r = cli("import", f, "--db", db)
    assert r.exit_code == 0, r.output
    assert count(r.stdout, "rows read") == "3"
    assert count(r.stdout, "values stored") == "3"
    assert "Storing" not in r.output  # small file: no progress bar
    r = cli("import", f, "--db", db)
    assert count(r.stdout, "values stored") == "0"
    assert count(r.stdout, "skipped as exact duplicates") == "3"


def test_import_bad_rows_listed_nothing_stored(cli, db, tmp_path):
    f = tmp_path / "bad.csv"
    f.write_text(HEADER + "A1,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
                 "A2,fill_volume,50O.1,2026-11-03T08:15:00Z,S,L,e\n"
                 "A3,fill_volume,500.1,03/11/2026,S,L,e\n")
    before = dump(db)
    r = cli("import", f, "--db", db)
    assert r.exit_code == 2
    assert "bad.csv, row 2, column 'value', value '50O.1'" in r.output
    assert "bad.csv, row 3, column 'measured_at', value '03/11/2026'" in r.output
    assert "nothing was stored" in r.output
    no_traceback(r)
    assert dump(db) == before
    r = cli("import", f, "--db", db, "--skip-bad")
    assert r.exit_code == 0
    assert count(r.stdout, "values stored") == "1"
    assert (tmp_path / "bad.rejected.csv").exists()
    assert "bad.rejected.csv" in r.stdout


def test_import_many_problems_are_all_written_to_a_file(cli, db, tmp_path):
    f = tmp_path / "many.csv"
    f.write_text(HEADER + "".join(f"A{i},fill_volume,x{i},2026-11-03T08:15:00Z,S,L,e\n"
                                  for i in range(1, 121)))
    before = dump(db)
    r = cli("import", f, "--db", db)
    assert r.exit_code == 2
    assert "120 bad input row(s)" in r.output and "... and 70 more" in r.output
    listing = tmp_path / "many.rejected.csv"
    assert f"All 120 problems are listed in {listing}" in r.output
    rows = pl.read_csv(listing, infer_schema=False)
    assert rows["row"].to_list() == [str(i) for i in range(1, 121)]
    assert rows["value"].to_list() == [f"x{i}" for i in range(1, 121)]
    assert dump(db) == before


def test_import_mapping_options_and_decimal_comma(cli, db, tmp_path):
    f = tmp_path / "eu.csv"
    f.write_text("Charge;Zeit;Werk;Linie;Schicht;Fuellmenge\n"
                 "E1;2026-11-03 08:15;S;L;e;500,3\n", encoding="utf-8")
    r = cli("import", f, "--db", db, "--decimal-comma", "--layout", "wide",
            "--lot-column", "Charge", "--time-column", "Zeit", "--tag-column", "site=Werk",
            "--tag-column", "line=Linie", "--tag-column", "shift=Schicht",
            "--characteristic-map", "Fuellmenge=fill_volume")
    assert r.exit_code == 0, r.output
    conn = sqlite3.connect(db)
    assert conn.execute("SELECT current_units FROM measurements").fetchall() == [(5003,)]
    conn.close()
    r = cli("import", f, "--db", db, "--tag-column", "site")
    assert r.exit_code == 2 and "KEY=COLUMN" in r.output


def test_import_missing_column_message(cli, db, tmp_path):
    f = tmp_path / "x.csv"
    f.write_text("charge,characteristic,value\nA,fill_volume,1\n")
    r = cli("import", f, "--db", db)
    assert r.exit_code == 2
    assert "x.csv: no column 'lot'" in r.output and "'charge'" in r.output
    no_traceback(r)


def test_export_stdout_file_overwrite_and_parquet(cli, db, tmp_path):
    assert cli("log", "fill_volume", "500.1", *TAGS, "--lot", "=L1", "--db", db).exit_code == 0
    r = cli("export", "--db", db)
    assert r.exit_code == 0
    lines = r.stdout.splitlines()
    assert lines[0].startswith("measurement_id,lot,characteristic,value,original_value,unit")
    assert lines[1].startswith("1,'=L1,fill_volume,500.1,500.1,mL")
    out = tmp_path / "e.csv"
    assert cli("export", "--out", out, "--db", db).exit_code == 0
    first = out.read_bytes()
    assert cli("log", "fill_volume", "500.3", *TAGS, "--db", db).exit_code == 0
    r = cli("export", "--out", out, "--db", db)
    assert r.exit_code == 2 and "already exists" in r.output
    assert out.read_bytes() == first
    assert cli("export", "--out", out, "--overwrite", "--db", db).exit_code == 0
    assert out.read_bytes() != first
    pq = tmp_path / "e.parquet"
    r = cli("export", "--out", pq, "--characteristic", "fill_volume", "--since", "2000-01-01",
            "--db", db)
    assert r.exit_code == 0, r.output
    assert pl.read_parquet(pq).height == 2
    r = cli("export", "--since", "last week", "--db", db)
    assert r.exit_code == 2 and "YYYY-MM-DD" in r.output
    r = cli("export", "--characteristic", "nope", "--db", db)
    assert r.exit_code == 2 and "nope" in r.output


@pytest.mark.parametrize("args", [("--help",), ("init", "--help"), ("import", "--help")])
def test_runs_as_a_program(args, tmp_path):
    # the real entry point, in a fresh interpreter (no CliRunner)
    p = subprocess.run([sys.executable, "-m", "lotwatch.tui", *args], cwd=tmp_path, env=subprocess_env(),
                       capture_output=True, text=True, timeout=60)
    assert p.returncode == 0, p.stderr
    assert "Usage:" in p.stdout


def test_program_error_exit_status_and_no_traceback(tmp_path, db):
    p = subprocess.run([sys.executable, "-m", "lotwatch.tui", "log", "fill_volume", "5000", "--tag", "site=S",
                        "--tag", "line=L", "--tag", "shift=e", "--db", str(db)],
                       cwd=tmp_path, env=subprocess_env(), capture_output=True, text=True,
                       timeout=60)
    assert p.returncode == 2
    assert "plausible" in p.stderr and "Traceback" not in p.stderr
