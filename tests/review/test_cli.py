"""`lotwatch review`, `report`, `trend` and `alerts` through click's test runner: exit codes,
the JSON contract, 80-column text, and reports in both formats."""

from __future__ import annotations

import html
import json
import re
import shutil
from datetime import date, timedelta

import pytest
from click.testing import CliRunner
from lotwatch.store import LotEntry, Store
from lotwatch.tui.caution import CAUTION
from lotwatch.tui.cli import main


def run(db, *args):
    return CliRunner().invoke(main, ["--db", str(db), *args])


@pytest.fixture()
def quiet_store(demo_replay, tmp_path):
    """The demo store as built (no review recorded yet)."""
    p = tmp_path / "quiet.sqlite"
    shutil.copy(demo_replay.pristine, p)
    return p


def test_review_exit_codes(demo_copy, demo_replay, quiet_store):
    last = demo_replay.reviews[-1].as_of.isoformat()
    early = (demo_replay.start + timedelta(days=10)).isoformat()
    # before any group has the history the detectors need: nothing open, 0 with --fail-on-alert
    r = run(quiet_store, "review", "--as-of", early, "--fail-on-alert")
    assert r.exit_code == 0, r.output
    # the replayed store has the RB-2 alert open
    r = run(demo_copy, "review", "--as-of", last)
    assert r.exit_code == 0
    r = run(demo_copy, "review", "--as-of", last, "--fail-on-alert")
    assert r.exit_code == 1
    # errors: bad week, both week and date, no store
    assert run(demo_copy, "review", "--week", "2026-W60").exit_code == 2
    assert run(demo_copy, "review", "--week", "2026-W48", "--as-of", last).exit_code == 2
    r = run(demo_copy.parent / "missing.sqlite", "review")
    assert r.exit_code == 2 and "no store" in r.output


def test_review_text_fits_80_columns_and_states_family(demo_copy, demo_replay):
    r = run(demo_copy, "review", "--as-of", demo_replay.reviews[-1].as_of.isoformat())
    lines = r.output.splitlines()
    assert max(len(line) for line in lines) <= 80
    assert any(line.startswith("FDR family: 12 comparison(s)") for line in lines)
    rows = [line for line in lines if line.startswith("fill_volume line")]
    assert rows and rows[0].rstrip().endswith("OPEN")
    assert CAUTION in " ".join(lines[-3:])
    # the shift column follows the one decimals rule (resolution 0.01: three decimals), never
    # an exponent
    table = [line for line in lines if re.match(r"(cap_torque|turbidity) ", line)]
    assert table and all(re.search(r" [+-]\d+\.\d{3} ", line) for line in table)
    assert not any(re.search(r"\de-\d", line) for line in lines)


def test_review_json_contract(demo_copy, demo_replay):
    r = run(demo_copy, "review", "--as-of", demo_replay.reviews[-1].as_of.isoformat(),
            "--format", "json", "--fdr", "by")
    assert r.exit_code == 0
    d = json.loads(r.output)
    assert d["family"]["method"] == "by" and d["family"]["size"] == 12
    assert "Yekutieli" in d["family"]["statement"]
    qs = [c["q"] for c in d["comparisons"] if c["q"] is not None]
    assert qs == sorted(qs)
    first = d["comparisons"][0]
    assert (first["characteristic"], first["factor"], first["largest_shift_group"]) == (
        "fill_volume", "line", "RB-2")
    for key in ("k", "n_total", "f", "p", "welch_f", "welch_p", "q", "omega_squared",
                "largest_shift", "detectable_shift", "alert_state", "status", "excluded"):
        assert key in first
    # RB-2 (mean), Riverbend (mean and spread: one comparison) and the night shift (spread)
    assert d["open_alerts"] == 3 and d["caution"] == CAUTION
    assert first["detector_group"] == "RB-2" and first["detector_kind"] == "mean"
    assert first["detector_evidence"] > 1


def test_dry_run_records_nothing(quiet_store, demo_replay):
    r = run(quiet_store, "review", "--as-of", demo_replay.reviews[-1].as_of.isoformat(),
            "--dry-run", "--format", "json")
    assert r.exit_code == 0
    with Store.open(quiet_store, read_only=True) as s:
        assert s.conn.execute("SELECT count(*) FROM alerts").fetchone()[0] == 0


def test_markdown_review(demo_copy, demo_replay):
    r = run(demo_copy, "review", "--as-of", demo_replay.reviews[-1].as_of.isoformat(),
            "--format", "md")
    assert r.exit_code == 0
    assert "| fill\\_volume | line |" in r.output and "FDR family" in r.output  # _ escaped


@pytest.mark.parametrize("suffix", ["md", "html"])
def test_report_contains_each_alert_table(demo_copy, demo_replay, tmp_path, suffix):
    out = tmp_path / f"week.{suffix}"
    r = run(demo_copy, "report", "--as-of", demo_replay.reviews[-1].as_of.isoformat(),
            "--out", str(out))
    assert r.exit_code == 0, r.output
    text = out.read_text(encoding="utf-8")
    assert "ANOVA table" in text and "Between groups" in text
    name = "fill_volume" if suffix == "html" else "fill\\_volume"  # Markdown escapes _
    assert re.search(rf"Alert \d+: {re.escape(name)} by line", text)
    assert "Games-Howell" in text and "Capability" in text
    assert "FDR family: 12 comparison(s)" in text
    assert (html.escape(CAUTION) if suffix == "html" else CAUTION) in text
    if suffix == "html":
        assert text.count("<svg") == 3  # a trend chart per open alert's comparison
        # opens offline: nothing fetched (no scripts, stylesheets or images from elsewhere)
        assert not re.search(r"<script|<link|<img|@import|src=|url\((?!#)", text, re.I)
        assert not re.search(r'href="https?:', text)
    else:
        assert "```text" in text and "RB-2" in text


def test_report_escapes_user_text(tmp_path):
    """A level named like markup is escaped in HTML (html.escape) and in Markdown."""
    db = tmp_path / "s.sqlite"
    s = Store.create(db)
    s.add_characteristic("x", unit="g", resolution="0.1", min_shift=0.5)
    entries = []
    for d in range(28):
        for i, line in enumerate(["<b>L1</b>", "L|2", "L3"]):
            for j in range(3):  # three lots a day: the detectors need within-day spread
                v = 10 + (2 if line == "L3" and d >= 20 else 0) + 0.1 * ((d * 7 + i + j) % 5)
                entries.append(LotEntry("x", [f"{v:.1f}"], {"site": "A", "line": line,
                                                            "shift": "n"},
                                        measured_at=f"2026-03-{1 + d:02d}T{8 + j:02d}:00:00Z"))
    s.log_lots(entries)
    s.close()
    html_out, md_out = tmp_path / "r.html", tmp_path / "r.md"
    assert run(db, "report", "--as-of", "2026-03-28", "--out", str(html_out)).exit_code == 0
    assert run(db, "report", "--as-of", "2026-03-28", "--out", str(md_out)).exit_code == 0
    h = html_out.read_text()
    assert "&lt;b&gt;L1&lt;/b&gt;" in h and "<b>L1</b>" not in h
    m = md_out.read_text()
    assert "L\\|2" in m


def test_report_refuses_bad_suffix(demo_copy, tmp_path):
    r = run(demo_copy, "report", "--out", str(tmp_path / "r.pdf"))
    assert r.exit_code == 2 and ".md or .html" in r.output


def test_trend_table_and_chart(demo_copy, demo_replay):
    r = run(demo_copy, "trend", "fill_volume", "--by", "line", "--as-of",
            demo_replay.reviews[-1].as_of.isoformat(), "--windows", "10")
    assert r.exit_code == 0, r.output
    lines = r.output.splitlines()
    assert max(len(line) for line in lines) <= 80
    heads = [ln for ln in lines if ln.startswith("window end")]
    assert "HS-1" in heads[0] and "RB-2" in heads[1]  # 8 lines: two tables of at most 6
    assert len([ln for ln in lines if re.match(r"\d{4}-\d\d-\d\d ", ln)]) == 20
    assert "\x1b[" not in r.output  # no colour codes
    r = run(demo_copy, "trend", "fill_volume", "--by", "colour")
    assert r.exit_code == 2 and "colour" in r.output
    r = run(demo_copy, "trend", "nope", "--by", "line")
    assert r.exit_code == 2


def test_alerts_list_show_ack(demo_copy):
    r = run(demo_copy, "alerts", "list", "--format", "json")
    items = json.loads(r.output)
    # the contract (README): these keys on every item, ISO days, sizes in units
    for item in items:
        for key in ("id", "state", "characteristic", "factor", "groups", "kind", "direction",
                    "detected_on", "onset", "size", "size_low", "size_high",
                    "percent_of_tolerance"):
            assert key in item
        assert item["kind"] in ("mean", "spread") and isinstance(item["groups"], list)
        assert date.fromisoformat(item["onset"]) <= date.fromisoformat(item["detected_on"])
        assert item["size_low"] <= item["size"] <= item["size_high"]
    (a,) = [i for i in items if i["factor"] == "line"]
    assert a["state"] == "open" and a["groups"] == ["RB-2"] and a["kind"] == "mean"
    assert a["direction"] == "higher" and a["unit"] == "mL"
    r = run(demo_copy, "alerts", "ack", str(a["id"]), "--by", "qe-lee", "--note", "valve checked")
    assert r.exit_code == 0
    r = run(demo_copy, "alerts", "show", str(a["id"]))
    assert "acknowledged by qe-lee" in r.output and "valve checked" in r.output
    assert run(demo_copy, "alerts", "show", "999").exit_code == 2
    assert run(demo_copy, "alerts", "list", "--state", "acknowledged").output.count("RB-2") == 1
    # the same rules as the app's form: no second acknowledgement, and a note is required
    r = run(demo_copy, "alerts", "ack", str(a["id"]), "--by", "qe-kim", "--note", "again")
    assert r.exit_code == 2 and "already acknowledged" in r.output
    r = run(demo_copy, "alerts", "ack", str(a["id"]), "--by", "qe-kim", "--note", "  ")
    assert r.exit_code == 2 and "needs a note" in r.output


def test_report_for_an_earlier_week_shows_that_week(demo_copy, demo_replay, tmp_path):
    """Detectors are advanced to the end; a report on a week before the drift shows the
    detectors as they were then (from the stored history) and changes nothing."""
    before = run(demo_copy, "alerts", "list", "--format", "json").output
    out = tmp_path / "early.md"
    early = (demo_replay.onset - timedelta(days=21)).isoformat()
    r = run(demo_copy, "report", "--as-of", early, "--out", str(out))
    assert r.exit_code == 0, r.output
    text = out.read_text()
    assert f"state as of that week: detectors as they were after {early}" in text
    assert "acknowledgements made since included" in text
    assert run(demo_copy, "alerts", "list", "--format", "json").output == before


def test_a_review_of_the_future_is_refused_and_records_nothing(demo_copy):
    """Issue 11, item 8: a week that has not begun (or a later --as-of) is refused, exit 2."""
    import sqlite3

    def events() -> int:
        conn = sqlite3.connect(demo_copy)
        try:
            return conn.execute("SELECT count(*) FROM alert_events").fetchone()[0]
        finally:
            conn.close()

    before = events()
    r = run(demo_copy, "review", "--week", "2099-W10")
    assert r.exit_code == 2 and "has not begun" in r.output and "plant time" in r.output
    r = run(demo_copy, "review", "--as-of", "2099-03-01")
    assert r.exit_code == 2 and "in the future" in r.output
    assert events() == before
