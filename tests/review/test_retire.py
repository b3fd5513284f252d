"""Issue 11, item 7: ``characteristic retire`` and ``factor retire/rename``. A retired
characteristic or factor leaves the review, the detectors and the board, and its data stays; a
renamed factor is followed by every lot's tag, day sum, alert and detector state. Checked on the
replayed demo store (store.demo: RB-2's fill_volume drift raises a mean alert by line)."""

from __future__ import annotations

import sqlite3

from click.testing import CliRunner
from lotwatch.store import LotEntry, Store
from lotwatch.tui.cli import main
from lotwatch.tui.services import detection
from lotwatch.tui.services.review_engine import run_review
from lotwatch.tui.services.review_inputs import comparisons_of


def run(db, *args):
    return CliRunner().invoke(main, ["--db", str(db), *args])


def _rows(path, sql, *params):
    with sqlite3.connect(path) as conn:
        return conn.execute(sql, params).fetchall()


def test_retired_characteristic_leaves_the_review_and_keeps_its_data(demo_copy):
    values = _rows(demo_copy, "SELECT count(*) FROM measurements m JOIN characteristics c "
                              "ON c.id = m.characteristic_id WHERE c.name = 'cap_torque'")
    r = run(demo_copy, "characteristic", "retire", "cap_torque")
    assert r.exit_code == 0, r.output
    assert "data is kept" in r.output
    r = run(demo_copy, "characteristic", "retire", "cap_torque")
    assert r.exit_code == 2 and "already retired" in r.output
    listing = run(demo_copy, "characteristic", "list").output
    assert any(line.startswith("cap_torque") and line.rstrip().endswith("retired")
               for line in listing.splitlines())
    with Store.open(demo_copy) as store:
        comps, _ = comparisons_of(store)
        assert {c.characteristic for c in comps} == {"fill_volume", "label_offset", "turbidity"}
        review = run_review(store, persist=False)
        assert "cap_torque" not in {s.characteristic for s in review.comparisons}
        assert all(s.characteristic != "cap_torque" for s in detection.detector_status(store))
        assert store.check().ok
    assert _rows(demo_copy, "SELECT count(*) FROM measurements m JOIN characteristics c "
                            "ON c.id = m.characteristic_id WHERE c.name = 'cap_torque'") == values
    # the detail of a retired characteristic can still be asked for by name
    with Store.open(demo_copy) as store:
        comps, _ = comparisons_of(store, "cap_torque", "shift")
        assert len(comps) == 1
    assert run(demo_copy, "characteristic", "restore", "cap_torque").exit_code == 0
    with Store.open(demo_copy) as store:
        run_review(store)
        assert any(s.characteristic == "cap_torque" for s in detection.detector_status(store))
    assert run(demo_copy, "characteristic", "retire", "no_such").exit_code == 2


def test_retired_factor_is_neither_compared_nor_required(demo_copy):
    r = run(demo_copy, "factor", "retire", "shift")
    assert r.exit_code == 0, r.output
    assert "shift" in run(demo_copy, "factor", "list").output
    with Store.open(demo_copy) as store:
        comps, _ = comparisons_of(store)
        assert "shift" not in {c.factor for c in comps}
        # no longer required: a lot without a shift tag is stored
        out = store.log_lots([LotEntry("fill_volume", ["500.0"],
                                       {"site": "Hillside", "line": "HS-1"}, lot="NO-SHIFT-1")])
        assert out.stored == 1
        assert store.check().ok
    assert run(demo_copy, "factor", "restore", "shift").exit_code == 0
    with Store.open(demo_copy) as store:
        assert "shift" in {c.factor for c in comparisons_of(store)[0]}


def test_renamed_factor_is_followed_everywhere(demo_copy):
    before = _rows(demo_copy, "SELECT count(*), sum(n) FROM buckets WHERE factor = 'line'")
    alerts = _rows(demo_copy, "SELECT id FROM alerts WHERE factor = 'line' ORDER BY id")
    assert alerts, "the demo's RB-2 drift should have raised an alert by line"
    r = run(demo_copy, "factor", "rename", "line", "filler_line")
    assert r.exit_code == 0, r.output
    assert _rows(demo_copy, "SELECT count(*) FROM lot_tags WHERE key = 'line'") == [(0,)]
    assert _rows(demo_copy, "SELECT count(*), sum(n) FROM buckets "
                            "WHERE factor = 'filler_line'") == before
    assert _rows(demo_copy, "SELECT id FROM alerts WHERE factor = 'filler_line' "
                            "ORDER BY id") == alerts
    assert _rows(demo_copy, "SELECT count(*) FROM detector_days WHERE factor = 'line'") == [(0,)]
    with Store.open(demo_copy) as store:
        assert store.check().ok
        assert "filler_line" in {f.name for f in store.factors()}
        run_review(store)
        rows = [s for s in detection.detector_status(store) if s.factor == "filler_line"]
        assert any(s.group == "RB-2" and s.alarmed for s in rows)
    r = run(demo_copy, "log", "fill_volume", "500.1", "--tag", "site=Riverbend",
            "--tag", "filler_line=RB-1", "--tag", "shift=early", "--lot", "RENAMED-1")
    assert r.exit_code == 0, r.output
    # refused, store unchanged: the new name is taken
    dump = _rows(demo_copy, "SELECT count(*) FROM lot_tags WHERE key = 'site'")
    r = run(demo_copy, "factor", "rename", "site", "shift")
    assert r.exit_code == 2 and "already a grouping factor" in r.output
    assert _rows(demo_copy, "SELECT count(*) FROM lot_tags WHERE key = 'site'") == dump
