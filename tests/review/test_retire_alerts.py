"""An alert still active on a characteristic or factor that is retired is cleared in the same
transaction, with an event naming who retired what and saying the signal was not resolved; if it
is restored and the signal is still there, the detectors reopen the alert. (A lotwatch decision,
common practice: a record is closed with its reason, never left dangling nor deleted.) Checked on
the replayed demo store (store.demo: RB-2's fill_volume drift raises a mean alert by line)."""

from __future__ import annotations

import sqlite3

from click.testing import CliRunner
from lotwatch.store import Store
from lotwatch.store.identity import login_name
from lotwatch.tui.cli import main
from lotwatch.tui.services import detection


def run(db, *args):
    return CliRunner().invoke(main, ["--db", str(db), *args])


def _active(path, where: str, *params) -> list[tuple[int, str]]:
    with sqlite3.connect(path) as conn:
        return conn.execute(
            "SELECT a.id, c.name || ' by ' || a.factor FROM alerts a JOIN characteristics c "
            f"ON c.id = a.characteristic_id WHERE a.state != 'cleared' AND {where} "
            "ORDER BY a.id", params).fetchall()


def _last_event(path, alert_id: int) -> tuple[str, str, str]:
    with sqlite3.connect(path) as conn:
        return conn.execute("SELECT event, by, note FROM alert_events WHERE alert_id = ? "
                            "ORDER BY id DESC LIMIT 1", (alert_id,)).fetchone()


def test_retiring_a_characteristic_clears_its_alerts_with_the_reason(demo_copy):
    mine = _active(demo_copy, "c.name = 'fill_volume'")
    others = _active(demo_copy, "c.name != 'fill_volume'")
    assert mine, "the demo's planted drift keeps a fill_volume alert active"
    r = run(demo_copy, "characteristic", "retire", "fill_volume")
    assert r.exit_code == 0, r.output
    assert f"Cleared {len(mine)} active alert(s)" in r.output
    assert _active(demo_copy, "c.name = 'fill_volume'") == []
    assert _active(demo_copy, "c.name != 'fill_volume'") == others  # nothing else touched
    for alert_id, _ in mine:
        event, by, note = _last_event(demo_copy, alert_id)
        assert (event, by) == ("cleared", login_name())
        assert "'fill_volume' was retired" in note and "not resolved" in note
        shown = " ".join(run(demo_copy, "alerts", "show", str(alert_id)).output.split())
        # the alert's own sentence says why it was cleared, not "back within the gate"
        assert "cleared: the characteristic 'fill_volume' was retired" in shown
        assert "back within the gate" not in shown
    listed = run(demo_copy, "alerts", "list", "--state", "active").output
    assert "fill_volume" not in listed
    with Store.open(demo_copy) as store:
        assert store.check().ok
    # restored: the detectors catch up from its first day and reopen the alert (drift persists)
    assert run(demo_copy, "characteristic", "restore", "fill_volume").exit_code == 0
    with Store.open(demo_copy) as store:
        detection.advance_detectors(store)
    again = _active(demo_copy, "c.name = 'fill_volume'")
    assert {a for a, _ in again} & {a for a, _ in mine}
    assert _last_event(demo_copy, again[0][0])[0] == "reopened"


def test_retiring_a_factor_clears_the_alerts_by_it(demo_copy):
    by_line = _active(demo_copy, "a.factor = 'line'")
    assert by_line
    r = run(demo_copy, "factor", "retire", "line")
    assert r.exit_code == 0, r.output
    assert f"Cleared {len(by_line)} active alert(s)" in r.output
    assert _active(demo_copy, "a.factor = 'line'") == []
    for alert_id, _ in by_line:
        assert "factor 'line' was retired" in _last_event(demo_copy, alert_id)[2]
    # retiring again is refused and clears nothing more
    assert run(demo_copy, "factor", "retire", "line").exit_code == 2
