"""Export at its edges: many tag keys (more than SQLite's 64 tables in a join), tag keys that
collide with the export's own column names, formulas in the header row and in the rejected-rows
file, and targets that are not regular files or sit in a folder the user cannot write.

Formula neutralisation follows OWASP "CSV Injection": a cell starting with =, +, -, @, tab or CR
gets a leading single quote. The 64-table join limit is SQLite's documented limit
(https://www.sqlite.org/limits.html, "Maximum Number Of Tables In A Join").
"""

from __future__ import annotations

import csv
import io
import os
import stat
from pathlib import Path

import pytest
from lotwatch.store import LotEntry, Store

from tests.reliability.helpers import assert_clean_refusal, run_cli
from tests.reliability.helpers_env import accounts, public_dir  # noqa: F401 - fixture

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def _rows(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text, newline="")))


def _many_keys_store(path: Path) -> dict[str, str]:
    tags = {"site": "A", "line": "1", "shift": "d", "value": "as-value", "tag_value": "as-tag",
            "measurement_id": "as-id", "resolution": "as-res"}
    tags |= {f"k{i:02d}": f"v{i}" for i in range(70)}  # 77 keys: past the 64-table join limit
    with Store.create(path) as s:
        s.add_characteristic("fv", unit="mL", resolution="0.1")
        s.log_lots([LotEntry("fv", ["1.5", "2.5"], tags, lot="L1",
                             measured_at="2026-11-20T08:00:00Z")])
        s.log_lots([LotEntry("fv", ["3.5"], {"site": "B", "line": "2", "shift": "n"}, lot="L2",
                             measured_at="2026-11-21T08:00:00Z")])
    return tags


def test_export_with_77_tag_keys_and_clashing_key_names(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    tags = _many_keys_store(path)
    res = run_cli("export", "--db", path)
    assert res.returncode == 0, res.stderr
    rows = _rows(res.stdout)
    assert len(rows) == 3
    header = list(rows[0])
    assert len(header) == len(set(header)), "every column name is distinct"
    first = [r for r in rows if r["lot"] == "L1"]
    assert sorted(r["value"] for r in first) == ["1.5", "2.5"]  # the measurement, not the tag
    for r in first:
        for i in range(70):
            assert r[f"k{i:02d}"] == f"v{i}"
        # each clashing key keeps its own value under a prefixed name
        cells = {r[c] for c in header if c.startswith("tag_")}
        assert {"as-value", "as-tag", "as-id", "as-res"} <= cells
        assert r["site"] == "A"
    (other,) = [r for r in rows if r["lot"] == "L2"]
    assert other["value"] == "3.5" and other["k00"] == "" and other["site"] == "B"
    assert set(tags) - {"value", "tag_value", "measurement_id", "resolution"} <= set(header)
    out = tmp_path / "x.parquet"  # the Parquet path reads the same frame
    assert run_cli("export", "--out", out, "--db", path).returncode == 0


def test_csv_header_row_is_neutralised(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    with Store.create(path) as s:
        s.add_characteristic("fv", unit="mL", resolution="0.1")
        # a key starting with "=" is refused at input now (store.rules); "+" still starts a formula
        s.log_lots([LotEntry("fv", ["1.0"], {"site": "A", "line": "1", "shift": "d",
                                             "+HYPERLINK(1)": "x", "@key": "y"}, lot="L1")])
    res = run_cli("export", "--db", path)
    assert res.returncode == 0, res.stderr
    header = next(csv.reader(io.StringIO(res.stdout)))
    assert not [h for h in header if h.startswith(FORMULA_STARTS)], header
    assert "'+HYPERLINK(1)" in header and "'@key" in header


def test_neutralised_header_names_import_back_exactly(tmp_path: Path) -> None:
    """Export then import gives the same tag names: the quote the export puts before a header
    name starting with a formula character is taken off again on import."""
    keys = {"+HYPERLINK(1)": "x", "@key": "y", "-minus": "z", "'plain": "w"}
    src, dst = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    for path in (src, dst):
        with Store.create(path) as s:
            s.add_characteristic("fv", unit="mL", resolution="0.1")
    with Store.open(src) as s:
        s.log_lots([LotEntry("fv", ["1.0"], {"site": "A", "line": "1", "shift": "d", **keys},
                             lot="L1", measured_at="2026-11-20T08:00:00Z")])
    out = tmp_path / "export.csv"
    assert run_cli("export", "--out", out, "--db", src).returncode == 0
    header = next(csv.reader(io.StringIO(out.read_text(encoding="utf-8"))))
    assert "'@key" in header and "'+HYPERLINK(1)" in header  # neutralised in the file
    # tag keys that are not factors are read when named (--tag-column KEY=COLUMN), by the names
    # they had in the store
    res = run_cli("import", out, *(f"--tag-column={k}={k}" for k in keys), "--db", dst)
    assert res.returncode == 0, res.stdout + res.stderr
    with Store.open(src, read_only=True) as a, Store.open(dst, read_only=True) as b:
        fa, fb = a.measurements_frame(), b.measurements_frame()
        assert set(keys) <= set(fa.columns)
        assert set(keys) <= set(fb.columns), sorted(fb.columns)
        assert not [c for c in fb.columns if c.startswith("'") and c != "'plain"]
        cols = ["lot", "value", "site", "line", "shift", *keys]
        assert fa.select(cols).equals(fb.select(cols))


def test_rejected_rows_file_keeps_neutralised_formulas_neutral(tmp_path: Path) -> None:
    path = tmp_path / "s.sqlite"
    with Store.create(path) as s:
        s.add_characteristic("fv", unit="mL", resolution="0.1")
    src = tmp_path / "in.csv"
    src.write_text("lot,characteristic,value,site,line,shift\n"
                   "L1,fv,1.0,'=cmd|' /C calc'!A0,1,d\n"
                   "L2,fv,not-a-number,'=HYPERLINK(2),1,'@x\n", encoding="utf-8")
    res = run_cli("import", src, "--skip-bad", "--db", path)
    assert res.returncode in (0, 2), res.stderr
    rejected = tmp_path / "in.rejected.csv"
    assert rejected.exists(), res.stdout + res.stderr
    rows = list(csv.reader(io.StringIO(rejected.read_text(encoding="utf-8"), newline="")))
    assert len(rows) == 2
    for row in rows:
        for cell in row:
            assert not cell.startswith(FORMULA_STARTS), (cell, row)
    assert "'=HYPERLINK(2)" in rows[1] and "'@x" in rows[1]


def _export_db(tmp_path: Path) -> Path:
    path = tmp_path / "s.sqlite"
    with Store.create(path) as s:
        s.add_characteristic("fv", unit="mL", resolution="0.1")
        s.log_lots([LotEntry("fv", ["1.0"], {"site": "A", "line": "1", "shift": "d"}, lot="L1")])
    return path


def test_overwrite_refuses_fifo_and_symlink(tmp_path: Path) -> None:
    path = _export_db(tmp_path)
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    target = tmp_path / "real.csv"
    target.write_text("keep me\n")
    link = tmp_path / "link.csv"
    link.symlink_to(target)
    for out, word in ((fifo, "not a regular file"), (link, "symbolic link")):
        res = run_cli("export", "--out", out, "--overwrite", "--db", path, timeout=60)
        assert res.returncode == 2
        assert_clean_refusal(res, contains=(word, str(out)))
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)
    assert os.path.islink(link) and target.read_text() == "keep me\n"
    # and an ordinary file is still replaced when asked
    res = run_cli("export", "--out", target, "--overwrite", "--db", path)
    assert res.returncode == 0, res.stderr
    assert _rows(target.read_text())[0]["lot"] == "L1"


def test_overwrite_refuses_a_device(tmp_path: Path) -> None:
    path = _export_db(tmp_path)
    dev = tmp_path / "null"
    try:
        os.mknod(dev, stat.S_IFCHR | 0o666, os.makedev(1, 3))  # the null device's numbers
    except (PermissionError, OSError) as exc:
        pytest.skip(f"cannot make a device node here ({exc})")
    res = run_cli("export", "--out", dev, "--overwrite", "--db", path)
    assert_clean_refusal(res, contains=("not a regular file",))
    assert res.returncode == 2
    assert stat.S_ISCHR(os.lstat(dev).st_mode)


def test_export_into_unwritable_folder_is_a_message(accounts) -> None:  # noqa: F811
    user = accounts.user()
    with public_dir() as d:
        path = _export_db(d)
        path.chmod(0o644)
        locked = d / "locked"
        locked.mkdir(mode=0o755)  # readable, not writable by the other account
        res = accounts.run(user, ["export", "--out", str(locked / "x.csv"), "--db", str(path)])
        out = assert_clean_refusal(res, contains=("cannot write", str(locked)))
        assert res.returncode == 2, out
        assert "PermissionError" not in out
        assert not list(locked.iterdir())
