"""``lotwatch analyze``: text and JSON output, and clear refusals of bad files and options."""

from __future__ import annotations

import json
from pathlib import Path

import polars as pl
import pytest
from click.testing import CliRunner
from lotwatch.tui.cli import main
from scipy import stats as sps

# NIST/SEMATECH e-Handbook §7.4.3.3 one-way example (from memory; cross-checked with scipy)
HANDBOOK = {"L1": [6.9, 5.4, 5.8, 4.6, 4.0], "L2": [8.3, 6.8, 7.8, 9.2, 6.5],
            "L3": [8.0, 10.5, 8.1, 6.9, 9.3]}


def write_csv(path: Path, rows: list[tuple[str, str]], header: str = "line,volume") -> Path:
    path.write_text(header + "\n" + "\n".join(f"{a},{b}" for a, b in rows) + "\n")
    return path


@pytest.fixture
def handbook_csv(tmp_path: Path) -> Path:
    rows = [(g, str(v)) for g, vals in HANDBOOK.items() for v in vals]
    return write_csv(tmp_path / "fills.csv", rows)


def run(*args: str):
    return CliRunner().invoke(main, ["analyze", *args])


def test_text_report(handbook_csv: Path) -> None:
    r = run(str(handbook_csv), "--value", "volume", "--by", "line", "--resolution", "0.1",
            "--reference", "L1", "--lsl", "3", "--usl", "11", "--shift", "2")
    assert r.exit_code == 0, r.output
    assert "Between groups" in r.output and "exact integer arithmetic" in r.output
    assert "9.59" in r.output  # F of the e-Handbook example
    assert "disposition of product" in r.output
    assert all(len(line) <= 80 for line in r.output.splitlines())


def test_json_contract(handbook_csv: Path) -> None:
    r = run(str(handbook_csv), "--value", "volume", "--by", "line", "--format", "json",
            "--resolution", "0.1")
    assert r.exit_code == 0, r.output
    d = json.loads(r.output)
    ref = sps.f_oneway(*HANDBOOK.values())  # oracle: scipy.stats.f_oneway
    assert d["anova"]["f"] == pytest.approx(ref.statistic, rel=1e-12)
    assert d["anova"]["exact"] is True
    assert [g["name"] for g in d["groups"]] == ["L1", "L2", "L3"]
    assert "dunnett" not in d and "capability" not in d


def test_parquet(tmp_path: Path) -> None:
    p = tmp_path / "fills.parquet"
    pl.DataFrame({"line": [g for g, v in HANDBOOK.items() for _ in v],
                  "volume": [x for v in HANDBOOK.values() for x in v]}).write_parquet(p)
    r = run(str(p), "--value", "volume", "--by", "line", "--format", "json")
    assert r.exit_code == 0, r.output
    assert json.loads(r.output)["anova"]["df_within"] == 12


def test_missing_column_named(handbook_csv: Path) -> None:
    r = run(str(handbook_csv), "--value", "weight", "--by", "line")
    assert r.exit_code == 2
    assert "no column 'weight'" in r.output and "'volume'" in r.output


def test_non_numeric_value_names_row_and_column(tmp_path: Path) -> None:
    f = write_csv(tmp_path / "bad.csv", [("L1", "1.0"), ("L1", "1.2"), ("L2", "abc"),
                                          ("L2", ""), ("L2", "2.0")])
    r = run(str(f), "--value", "volume", "--by", "line")
    assert r.exit_code == 2
    assert "line 4: column 'volume' has 'abc', which is not a number" in r.output
    assert "line 5: column 'volume' is empty" in r.output
    assert "bad.csv" in r.output


def test_missing_file_and_bad_options(handbook_csv: Path, tmp_path: Path) -> None:
    r = run(str(tmp_path / "nope.csv"), "--value", "v", "--by", "g")
    assert r.exit_code == 2 and "no such file" in r.output
    r = run(str(handbook_csv), "--value", "volume", "--by", "line", "--alpha", "1.5")
    assert r.exit_code == 2 and "--alpha" in r.output
    r = run(str(handbook_csv), "--value", "volume", "--by", "line", "--reference", "L9")
    assert r.exit_code == 2 and "'L9'" in r.output
    r = run(str(handbook_csv), "--value", "volume", "--by", "line", "--lsl", "5", "--usl", "1")
    assert r.exit_code == 2 and "--usl" in r.output
    r = run(str(handbook_csv), "--value", "volume", "--by", "line", "--resolution", "-1")
    assert r.exit_code == 2 and "--resolution" in r.output


def test_degenerate_file_reports_status(tmp_path: Path) -> None:
    f = write_csv(tmp_path / "one.csv", [("L1", "1.0"), ("L1", "1.5")])
    r = run(str(f), "--value", "volume", "--by", "line")
    assert r.exit_code == 0
    assert "fewer than two groups" in r.output
