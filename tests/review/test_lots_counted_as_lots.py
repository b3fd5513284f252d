"""Lots counted as lots in the review's windows (issue 11, item 2): with two replicates per lot,
"the last 4 lots" covers 4 lots (8 values), and review.min_lots counts lots. Oracle: the raw
rows, counted in plain Python."""

from __future__ import annotations

from datetime import UTC, date, datetime, timedelta
from pathlib import Path

from lotwatch.stats import monitor as mon
from lotwatch.store import LotEntry, Store


def _store(path: Path) -> Store:
    store = Store.create(path, zone="UTC")
    store.add_characteristic("fill", unit="mL", resolution="0.1", target=500.0)
    start = datetime(2026, 11, 1, 12, tzinfo=UTC)
    entries = []
    for d in range(10):
        for line, lots in (("A", 1), ("B", 1)):
            for k in range(lots):
                entries.append(LotEntry("fill", [f"{500 + d / 10:.1f}", f"{500 + d / 10 + .1:.1f}"],
                                        {"site": "S", "line": line, "shift": "x"},
                                        lot=f"{line}{d}-{k}", measured_at=start + timedelta(days=d)))
    store.log_lots(entries)
    return store


def test_last_n_lots_and_min_lots_count_lots_not_values(tmp_path: Path) -> None:
    with _store(tmp_path / "r.sqlite") as store:
        ch = store.characteristic("fill")
        comp = mon.Comparison("fill", "line", ch.origin_units, ch.resolution_value)
        settings = mon.ReviewSettings(window="last_n", last_n=4, min_n=3)
        end = date(2026, 11, 10)
        plan = mon.window_plan(end, settings, 1)
        cube = mon.bucket_cube(store.bucket_frame(factor="line"), [comp],
                               first_day=date(2026, 11, 1), last_day=end)
        sums = mon.window_sums(cube, plan, settings)
        # oracle: the last 4 lots of each line are days 6..9, two values each
        assert sums.lots[0, 0].tolist() == [4, 4]
        assert sums.n[0, 0].tolist() == [8, 8]
        stats = mon.window_statistics(sums, min_n=settings.min_n)
        assert stats.usable[0, 0].tolist() == [True, True]
        # min_lots 5 > 4 lots: both groups left out although each holds 8 values
        five = mon.window_statistics(sums, min_n=5)
        assert five.usable[0, 0].tolist() == [False, False]
        assert five.excluded(0, 0) == [("A", 4), ("B", 4)]


def test_the_review_row_shows_the_statistic_behind_its_q(tmp_path: Path) -> None:
    """Issue 11, item 6: where the review reads Welch (unequal spreads), the row's F and p are
    Welch's, the ones whose p feeds q; elsewhere the classical F and p."""
    from lotwatch.tui.services.loaders import _comparison_row
    from lotwatch.tui.services.review_engine import run_review

    with _store(tmp_path / "w.sqlite") as store:
        start = datetime(2026, 11, 1, 12, tzinfo=UTC)
        spread = [f"{v:.1f}" for v in (497.0, 503.0, 496.0, 504.0, 498.0, 502.0)]
        store.log_lots([LotEntry("fill", [spread[d % 6]], {"site": "S", "line": "C",
                                                          "shift": "x"},
                                 lot=f"C{d}", measured_at=start + timedelta(days=d))
                        for d in range(10)])
        result = run_review(store, as_of=date(2026, 11, 10))
        by_line = next(c for c in result.comparisons if c.factor == "line")
        row = _comparison_row(by_line)
        if by_line.test == "Welch":
            assert row.f == by_line.welch_f and row.p == by_line.welch_p
        else:
            assert row.f == by_line.f and row.p == by_line.p
        assert row.test == by_line.test and row.q == by_line.q
        assert by_line.test == "Welch"  # line C's spread is far wider (Bartlett p < alpha)


def test_the_detail_battery_counts_lots_for_the_minimum_group_size():
    """One rule on every screen: the comparison detail's battery, like the review's windows,
    leaves out a group with fewer than min_n lots however many replicate values it has."""
    import numpy as np
    from lotwatch.stats import run_battery

    a = np.array([1.0, 1.1, 1.2, 1.3, 1.0, 1.2])  # 6 values in 2 lots
    b = np.array([2.0, 2.2, 2.1, 1.9, 2.3, 2.0])  # 6 values in 6 lots
    c = np.array([1.5, 1.4, 1.6, 1.5, 1.7, 1.3])  # 6 values in 3 lots
    lots = [["A1"] * 3 + ["A2"] * 3, [f"B{i}" for i in range(6)],
            ["C1", "C1", "C2", "C2", "C3", "C3"]]
    by_lots = run_battery([a, b, c], ["A", "B", "C"], min_n=3, lots=lots)
    assert [(e.name, e.reason) for e in by_lots.excluded] == [("A", "fewer than 3 lots")]
    by_values = run_battery([a, b, c], ["A", "B", "C"], min_n=3)
    assert by_values.excluded == []
