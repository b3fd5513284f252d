"""What ``lotwatch import`` prints about the file: header names come from the file, so escape
sequences in them must not reach the terminal (ECMA-48 control functions start with ESC or a C1
control; the OSC sequence ESC ] 0 ; ... BEL sets the terminal's title)."""

from __future__ import annotations

import sqlite3
from datetime import UTC, datetime, timedelta
from pathlib import Path


def test_header_names_are_printed_cleaned(cli, db: Path, tmp_path: Path) -> None:
    hostile = "\x1b]0;owned\x07x\x1b[31m"
    f = tmp_path / "h.csv"
    f.write_text(f"lot,characteristic,value,measured_at,site,line,shift,{hostile}\n"
                 "A,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e,1\n", encoding="utf-8")
    result = cli("import", f, "--db", db)
    assert result.exit_code == 0, result.output
    assert "ignored columns" in result.output  # the note naming the column was printed ...
    assert "\x1b" not in result.output and "\x07" not in result.output  # ... without controls
    assert "values stored:" in result.output


def test_mixed_encoding_refusal_is_a_message_with_exit_status_2(cli, db: Path,
                                                                tmp_path: Path) -> None:
    f = tmp_path / "m.csv"
    f.write_bytes("lot,characteristic,value,measured_at,site,line,shift\n"
                  "A,fill_volume,500.1,2026-11-03T08:15:00Z,Köln,L,e\n".encode()
                  + "B,fill_volume,500.1,2026-11-03T08:15:00Z,Köln,L,e\n".encode("latin-1"))
    result = cli("import", f, "--db", db)
    assert result.exit_code == 2
    assert "mixes text encodings" in result.output and "line 3" in result.output
    assert "Traceback" not in result.output


def test_years_option(cli, db: Path, tmp_path: Path) -> None:
    f = tmp_path / "y.csv"
    f.write_text("lot,characteristic,value,measured_at,site,line,shift\n"
                 "A,fill_volume,500.1,1961-05-01T08:15:00Z,S,L,e\n", encoding="utf-8")
    refused = cli("import", f, "--db", db)
    assert refused.exit_code == 2 and "outside the plausible range" in refused.output
    bad = cli("import", f, "--years", "1961", "--db", db)
    assert bad.exit_code == 2 and "FROM-TO" in bad.output
    done = cli("import", f, "--years", "1950-2030", "--db", db)
    assert done.exit_code == 0, done.output


def test_a_future_measurement_time_is_refused_as_typing_it_would_be(cli, db: Path,
                                                                    tmp_path: Path) -> None:
    """store.rules: a lot is not measured later than the clock (plus ten minutes' slack), at
    every door; the import names the file, row, column and value, and stores nothing."""
    ahead = (datetime.now(UTC) + timedelta(days=2)).strftime("%Y-%m-%dT%H:%M:%SZ")
    f = tmp_path / "f.csv"
    f.write_text("lot,characteristic,value,measured_at,site,line,shift\n"
                 "A,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e\n"
                 f"B,fill_volume,500.2,{ahead},S,L,e\n", encoding="utf-8")
    refused = cli("import", f, "--db", db)
    assert refused.exit_code == 2
    assert (f"f.csv, row 2, column 'measured_at', value '{ahead}': the measurement time is in "
            "the future") in " ".join(refused.output.split())
    assert "Traceback" not in refused.output
    with sqlite3.connect(db) as conn:
        assert conn.execute("SELECT count(*) FROM measurements").fetchone()[0] == 0


def test_each_note_is_printed_once(cli, db: Path, tmp_path: Path) -> None:
    """A note about the file (here an ignored column) is said before storing, not again after."""
    f = tmp_path / "n.csv"
    f.write_text("lot,characteristic,value,measured_at,site,line,shift,extra\n"
                 "A,fill_volume,500.1,2026-11-03T08:15:00Z,S,L,e,1\n", encoding="utf-8")
    result = cli("import", f, "--db", db)
    assert result.exit_code == 0, result.output
    assert result.output.count("ignored columns") == 1, result.output
