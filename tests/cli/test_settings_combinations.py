"""Review settings are checked against each other with the reason (issue 11, item 9).
The bounds are lotwatch decisions (stats/settings_rules.py), not a standard."""

from __future__ import annotations

import pytest


@pytest.mark.parametrize(("key", "value", "words"), [
    ("review.last_n", "4", "below review.min_lots = 5"),
    ("review.window_days", "1000000", "at most 731"),
    ("review.trend_windows", "100000", "at most 520"),
])
def test_a_setting_that_cannot_work_is_refused_with_the_reason(cli, db, key, value,
                                                               words) -> None:
    r = cli("settings", "set", key, value, "--db", db)
    assert r.exit_code == 2 and words in r.output and "not changed" in r.output
    listed = cli("settings", "list", "--db", db).output
    assert f"{key}" in listed and "(changed from the default)" not in listed


def test_raising_min_lots_above_last_n_is_refused_too(cli, db) -> None:
    assert cli("settings", "set", "review.last_n", "8", "--db", db).exit_code == 0
    r = cli("settings", "set", "review.min_lots", "9", "--db", db)
    assert r.exit_code == 2 and "review.last_n = 8 is below review.min_lots = 9" in r.output
    assert cli("settings", "set", "review.min_lots", "8", "--db", db).exit_code == 0
