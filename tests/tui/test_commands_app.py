"""``lotwatch demo`` and ``lotwatch watch`` from the command line (without opening the app)."""

from __future__ import annotations

from click.testing import CliRunner
from lotwatch.tui.cli import main


def test_demo_no_open_builds_records_reviews_and_prints_summary(tmp_path):
    from lotwatch.store import Store
    from lotwatch.store.alerts import alert_history, list_alerts

    env = {"XDG_DATA_HOME": str(tmp_path)}
    result = CliRunner().invoke(main, ["demo", "--no-open"], env=env)
    assert result.exit_code == 0, result.output
    path = tmp_path / "lotwatch" / "demo.sqlite"
    assert str(path) in result.output
    assert "invented data" in result.output
    with Store.open(path, read_only=True) as store:
        alerts = list_alerts(store)
        # The demo plants a drift on line RB-2's fill_volume (store/demo.py, effect (a)).
        planted = [a for a in alerts if (a.characteristic, a.factor) == ("fill_volume", "line")]
        assert planted and "RB-2" in planted[0].groups
        events = alert_history(store, planted[0].id)
    assert events[0].event == "opened" and events[0].by == "weekly review (demo replay)"

    again = CliRunner().invoke(main, ["demo", "--no-open"], env=env)
    assert again.exit_code == 0 and "Recorded" not in again.output  # reused, not replayed


def test_watch_refuses_a_missing_store_with_advice(tmp_path):
    result = CliRunner().invoke(main, ["watch", "--db", str(tmp_path / "none.sqlite")])
    assert result.exit_code != 0
    assert "no store at" in result.output and "lotwatch init" in result.output
