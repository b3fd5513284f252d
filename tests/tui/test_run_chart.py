"""The comparison's run chart: daily means from the day sums, the drawing (limits always on the
scale, the shown group distinct without colour, onset, evidence) and the drill-down from a
chart point to the lots of that group and day."""

from __future__ import annotations

from datetime import date

import numpy as np
import pytest
from lotwatch.tui.app.application import LotwatchApp
from lotwatch.tui.app.messages import OpenComparison
from lotwatch.tui.app.screens.lots import LotsScreen
from lotwatch.tui.render.run_chart import column_days, draw, y_rows
from lotwatch.tui.services.run_chart import chart_span, day_mean
from lotwatch.tui.services.view_models import DayMean, RunChart
from tui_helpers import settle


def test_a_days_mean_and_sd_from_its_sums_match_numpy():
    # Oracle: numpy's mean and ddof=1 SD of the values themselves (resolution 0.1, origin
    # 5000 units = 500.0).
    units = np.array([5003, 5011, 4998, 5020, 5007])
    d = units - 5000
    got = day_mean(3, len(units), int(d.sum()), int((d * d).sum()), 5000, 0.1)
    assert got.offset == 3 and got.n == 5
    assert got.mean == pytest.approx(np.mean(units * 0.1), rel=1e-12)
    assert got.sd == pytest.approx(np.std(units * 0.1, ddof=1), rel=1e-12)
    assert day_mean(0, 1, 4, 16, 5000, 0.1).sd is None  # one value: no SD


def test_the_span_reaches_back_to_an_early_onset_but_not_before_the_data():
    until = date(2026, 12, 2)
    assert chart_span(until, [], None) == (date(2026, 9, 10), until)  # 84 days
    # an onset 100 days back: 14 days of lead before it
    assert chart_span(until, [date(2026, 8, 24)], None)[0] == date(2026, 8, 10)
    # never more than 182 days, never before the first day with data
    assert chart_span(until, [date(2025, 1, 1)], None)[0] == date(2026, 6, 4)
    assert chart_span(until, [], date(2026, 11, 20))[0] == date(2026, 11, 20)


def test_columns_end_on_the_last_day_and_keep_the_onset():
    cols = column_days(84, 66, keep=30)
    assert cols[-1] == (83, 83) and len(cols) == 66 and cols[0] == (18, 18)  # width filled
    cols = column_days(84, 40, keep=0)  # too many days: three a column
    assert cols[-1] == (81, 83) and cols[0] == (0, 2) and len(cols) == 28
    assert all(b - a == 2 for a, b in cols)


def test_the_axis_is_compressed_so_far_limits_stay_on_the_scale():
    rows = y_rows(500.0, 501.0, [("USL", 510.0), ("target", 500.5), ("LSL", 490.0)], 9)
    assert rows[0] == ("USL", 510.0) and rows[-1] == ("LSL", 490.0)
    data = [v for k, v in rows if k == "data"]
    assert len(data) == 7 and data[0] == 501.0 and data[-1] == 500.0
    # limits near the data: one plain linear scale over all of them
    rows = y_rows(499.0, 501.0, [("USL", 501.5), ("LSL", 498.5)], 6)
    assert [k for k, _ in rows] == ["data"] * 6
    assert rows[0][1] == 501.5 and rows[-1][1] == 498.5


def _chart() -> RunChart:
    # Group B steps up by 1.0 from day 10 of 20; A and C stay at 500.
    series = {g: tuple(DayMean(i, 4, 500.0 + (1.0 if g == "B" and i >= 10 else 0.0), 0.3)
                       for i in range(20)) for g in ("A", "B", "C")}
    evidence = {("B", "mean"): tuple((i, max(0.0, (i - 9) / 4)) for i in range(20))}
    return RunChart("2026-11-01", "2026-11-20", "0.1", "mL", 497.0, 500.0, 503.0,
                    series, evidence)


def test_the_drawing_without_colour_tells_the_shown_group_limits_onset_and_evidence():
    pic = draw(_chart(), group="B", role="flagged", onset="2026-11-11", cursor=15, width=60,
               height=14)
    text = [line.plain for line in pic.lines]
    assert text[0].startswith("# B (flagged)  · others")
    plot = text[1:-3]
    assert plot[0].endswith("USL") and plot[-1].endswith("LSL")
    assert any(line.rstrip().endswith("tgt") for line in plot)
    assert "503.0" in plot[0] and "497.0" in plot[-1]  # labels at the resolution (0.1)
    # After the onset B's "#" sit on the top data row (501.0), the others' "·" on the
    # target's row (500.0); before it B is drawn there over them.
    top = next(line for line in plot if line.lstrip().startswith("501.0"))
    level = next(line for line in plot if line.rstrip().endswith("tgt"))
    onset_at = plot[0].index("┆")
    assert top.count("#") == 10 and min(top.index("#"), onset_at) == onset_at
    assert level[:onset_at].count("#") == 10 and "#" not in level[onset_at:]
    assert level[onset_at:].count("·") == 10
    # the onset's column, under the points drawn on it
    assert all(line[onset_at] in "┆#·" for line in plot) and level[onset_at] == "·"
    assert "11-11" in text[-3] and "▲" in text[-3]
    evid = text[-2]
    assert "█" in evid and evid.rstrip().endswith("2.5")  # (19 - 9) / 4
    assert text[-1].startswith("▲ 11-16 B mean 501.00 mL (n 4), others 500.00")
    assert pic.columns[15] == (15, 15)


async def test_a_chart_point_opens_the_lots_of_that_group_and_day(demo_copy):
    """The demo's RB-2 fill_volume drift (store/demo.py, effect (a)) is the flagged group:
    the chart draws it, its group-table row is highlighted, and d, ←, Enter open the lots of
    RB-2 on the day under the cursor: the same values the store holds for that plant day."""
    from lotwatch.store import Store

    app = LotwatchApp(demo_copy)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, lambda: app.overview is not None and not app.overview.partial
                     and app.detail is not None and not app.computing, timeout=60)
        app.post_message(OpenComparison("fill_volume", "line"))
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and app.detail.factor == "line" and not app.computing, timeout=60)
        chart = app.screen.query_one("#run-chart")
        table = app.screen.query_one("#group-table")
        assert chart.group == "RB-2" and chart.role == "flagged"
        assert table.coordinate_to_cell_key(table.cursor_coordinate).row_key.value == "RB-2"
        assert chart.region.height >= 12  # usable height at 80x24
        await pilot.press("d", "left", "left")
        await pilot.pause()
        assert chart.has_focus
        first, last = chart.drawn().columns[chart.cursor]
        day = chart.chart.day(first)
        assert first == last and chart.chart.day(last) == day  # one day a column here
        await pilot.press("enter")
        await settle(pilot, lambda: isinstance(app.screen, LotsScreen)
                     and app.screen.lots is not None)
        lots = app.screen.lots
        assert (lots.request.level, lots.request.since, lots.request.until) == ("RB-2", day,
                                                                                 day)
        with Store.open(demo_copy, read_only=True) as store:
            frame = store.values_frame("fill_volume", "line", since=date.fromisoformat(day),
                                       until=date.fromisoformat(day))
        want = sorted(frame.filter(frame["level"] == "RB-2")["measurement_id"].to_list())
        assert sorted(v.measurement_id for v in lots.values) == want and want
        # the chart's point is those values' mean
        mean = np.mean(frame.filter(frame["level"] == "RB-2")["value"].to_numpy())
        point = next(p for p in chart.chart.series["RB-2"] if p.offset == first)
        assert point.mean == pytest.approx(mean, rel=1e-12)
        await pilot.press("escape")
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and not isinstance(app.screen, LotsScreen))
        # ↑ on the chart shows the previous group, highlighted (not flagged)
        chart.focus()
        await pilot.press("up")
        await pilot.pause()
        assert chart.group == "RB-1" and chart.role == "highlighted"


def test_several_days_a_column_are_named_in_the_legend():
    # 20 days in 8 columns: three days a column, the oldest column shorter
    pic = draw(_chart(), group="B", role="flagged", width=8 + 1 + 4 + 8, height=10)
    assert pic.columns[-1] == (17, 19) and pic.columns[0] == (0, 1)
    assert "mean per 3 days (mL)" in pic.lines[0].plain


async def test_without_an_alert_the_chart_names_the_most_shifted_group_not_flagged(small_store):
    """The small store has no alert (tests/tui/conftest.py: weight runs 1 g heavy on line L2):
    the chart draws the board's most shifted group and says so, never "flagged"."""
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, lambda: app.overview is not None and not app.overview.partial
                     and app.detail is not None and not app.computing, timeout=30)
        row = next(r for r in app.overview.board if (r.characteristic, r.factor)
                   == ("weight", "line"))
        assert row.state not in ("mean alert", "spread alert", "acknowledged")
        app.post_message(OpenComparison("weight", "line"))
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and app.detail.factor == "line" and not app.computing)
        chart = app.screen.query_one("#run-chart")
        assert chart.group == row.group and chart.role == "largest shift"
        assert "(largest shift)" in chart.drawn().lines[0].plain
