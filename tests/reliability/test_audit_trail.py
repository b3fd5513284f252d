"""Records: every measurement, correction, void and acknowledgement says who and when, and the
original is kept. Walks the trail of a value corrected twice then voided, through the API, the
raw tables (a plain sqlite3 connection) and ``lotwatch history``."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path

import pytest
from lotwatch.store import Conflict, LotEntry, Store
from lotwatch.store.alerts import (
    Transition,
    acknowledge,
    alert_history,
    get_alert,
    record_transitions,
)

from tests.reliability.helpers import CHAR, TAGS, make_store, ro_connect, run_cli


def _utc(text: str) -> datetime:
    t = datetime.fromisoformat(text.replace("Z", "+00:00"))
    assert t.utcoffset() is not None and t.utcoffset().total_seconds() == 0, text
    return t


def test_value_corrected_twice_then_voided(tmp_path: Path) -> None:
    path = make_store(tmp_path / "s.sqlite")
    with Store.open(path) as s:
        out = s.log_lots([LotEntry(CHAR, ["500.1", "499.9"], dict(TAGS), lot="A-1",
                                   measured_at="2026-11-20T08:00:00Z", by="alice")])
        mid, other = out.measurement_ids
        s.correct(mid, "500.4", reason="copied wrongly: 500.4 on the sheet", by="bob")
        s.correct(mid, "500.3", reason="gauge re-read", by="carol")
        s.void(mid, reason="sample contaminated", by="dave")
        with pytest.raises(Conflict):
            s.correct(mid, "500.0", reason="too late", by="eve")  # a voided value stays void
        trail = s.history(mid)
        frame = s.measurements_frame()
        report = s.check()
        buckets = s.bucket_frame(factor="site")
    assert [(e.action, e.by, e.old_value, e.new_value, e.reason) for e in trail] == [
        ("log", "alice", None, "500.1", None),
        ("correct", "bob", "500.1", "500.4", "copied wrongly: 500.4 on the sheet"),
        ("correct", "carol", "500.4", "500.3", "gauge re-read"),
        ("void", "dave", "500.3", None, "sample contaminated"),
    ]
    times = [_utc(e.at) for e in trail]
    assert times == sorted(times)
    # the original is kept beside the current value; the voided value leaves every statistic
    row = frame.filter(frame["id"] == mid).row(0, named=True)
    assert row["original_value"] == 500.1 and row["value"] == 500.3 and row["voided"] is True
    assert report.ok
    assert buckets["n"].sum() == 1  # only the other value of the lot counts
    # the raw tables agree (read without the store's code)
    conn = ro_connect(path)
    try:
        assert conn.execute("SELECT original_units, current_units, voided, logged_by FROM "
                            "measurements WHERE id = ?", (mid,)).fetchone() == (5001, 5003, 1,
                                                                                 "alice")
        rows = conn.execute("SELECT action, by, old_units, new_units FROM audit WHERE "
                            "measurement_id = ? ORDER BY id", (mid,)).fetchall()
        assert rows == [("log", "alice", None, 5001), ("correct", "bob", 5001, 5004),
                        ("correct", "carol", 5004, 5003), ("void", "dave", 5003, None)]
        assert conn.execute("SELECT count(*) FROM audit WHERE measurement_id = ?",
                            (other,)).fetchone()[0] == 1
    finally:
        conn.close()
    # and the command line shows all of it
    res = run_cli("history", mid, "--db", path)
    assert res.returncode == 0, res.stderr
    for text in ("by alice", "500.1 -> 500.4", "by bob", "copied wrongly", "500.4 -> 500.3",
                 "by carol", "voided (was 500.3)", "by dave", "sample contaminated"):
        assert text in res.stdout, (text, res.stdout)


def test_every_command_line_write_names_who_and_when(tmp_path: Path) -> None:
    """Without --by the login name is recorded; with --by, that name."""
    path = make_store(tmp_path / "s.sqlite")
    log = run_cli("log", CHAR, "500.2", "--tag", "site=north", "--tag", "line=1", "--tag",
                  "shift=day", "--lot", "B-1", "--db", path)
    assert log.returncode == 0, log.stderr
    assert run_cli("correct", 1, "500.5", "--reason", "typo", "--by", "frank",
                   "--db", path).returncode == 0
    assert_refused = run_cli("correct", 1, "500.6", "--db", path)  # a reason is required
    assert assert_refused.returncode != 0 and "reason" in assert_refused.stderr.lower()
    with Store.open(path, read_only=True) as s:
        trail = s.history(1)
        login = s.user
    assert [(e.action, e.by) for e in trail] == [("log", login), ("correct", "frank")]
    assert all(_utc(e.at) for e in trail)


def test_acknowledgement_is_attributed_and_the_alert_kept(tmp_path: Path) -> None:
    path = make_store(tmp_path / "s.sqlite")
    with Store.open(path) as s:
        s.log_lots([LotEntry(CHAR, ["500.0"], dict(TAGS), lot="C-1")])
        [alert] = record_transitions(s, [Transition(CHAR, "line", "opened", "W48", ["2"],
                                                    "higher", 0.3, 0.03, 0.002)], by="review")
        acknowledge(s, alert.id, by="grace", note="line 2 nozzle cleaned")
    # a second acknowledgement is refused on the command line as in the app (issue 11)
    res = run_cli("alerts", "ack", alert.id, "--by", "heidi", "--note", "checked again",
                  "--db", path)
    assert res.returncode == 2 and "already acknowledged" in res.stdout + res.stderr
    with Store.open(path, read_only=True) as s:
        events = alert_history(s, alert.id)
        now = get_alert(s, alert.id)
    assert [(e.event, e.by, e.note) for e in events] == [
        ("opened", "review", None),
        ("acknowledged", "grace", "line 2 nozzle cleaned"),
    ]
    assert all(_utc(e.at) for e in events)
    # the alert as opened is still there: its window, groups, size
    assert (now.state, now.opened_window, now.groups, now.size) == ("acknowledged", "W48", ["2"],
                                                                      0.3)
