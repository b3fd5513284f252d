"""``lotwatch settings``: review settings are stored per store, validated before storing."""

from __future__ import annotations

from lotwatch.store import Store


def test_settings_set_list_reset_round_trip(cli, db):
    result = cli("settings", "set", "review.window_days", "14", "--db", db)
    assert result.exit_code == 0, result.output
    with Store.open(db) as store:
        assert store.get_setting("review.window_days") == "14"
    listing = cli("settings", "list", "--db", db)
    assert "review.window_days          14  (changed from the default)" in listing.output
    assert cli("settings", "reset", "review.window_days", "--db", db).exit_code == 0
    with Store.open(db) as store:
        assert store.get_setting("review.window_days") is None


def test_settings_refuses_bad_values_and_stores_nothing(cli, db):
    with Store.open(db) as store:
        before = list(store.conn.iterdump())
    bad = cli("settings", "set", "detect.spread_ratio", "0.9", "--db", db)
    assert bad.exit_code == 2
    assert "detect.spread_ratio = 0.9: must exceed 1" in bad.output
    unknown = cli("settings", "set", "review.colour", "red", "--db", db)
    assert unknown.exit_code == 2 and "unknown setting 'review.colour'" in unknown.output
    not_a_number = cli("settings", "set", "review.window_days", "four", "--db", db)
    assert not_a_number.exit_code == 2 and "expected int" in not_a_number.output
    with Store.open(db) as store:
        assert list(store.conn.iterdump()) == before


def test_review_reads_the_changed_window(cli, db):
    cli("settings", "set", "review.window_days", "14", "--db", db)
    out = cli("review", "--dry-run", "--db", db)
    assert out.exit_code in (0, 1), out.output
    assert "14 days" in out.output
