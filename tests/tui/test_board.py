"""Pilot tests of the board, the comparison view, the lots behind a group and the faster entry."""

from __future__ import annotations

import re

import pytest
from lotwatch.tui.app.application import LotwatchApp
from lotwatch.tui.app.messages import ChooseView, OpenComparison
from lotwatch.tui.app.screens.board import BoardScreen
from lotwatch.tui.app.screens.confirm import ConfirmScreen
from lotwatch.tui.app.screens.entry import LotEntryScreen
from lotwatch.tui.app.screens.lots import LotsScreen
from lotwatch.tui.app.screens.reason import ReasonScreen
from lotwatch.tui.services.storefile import login_name
from lotwatch.tui.services.view_models import (
    MEAN_ALERT,
    NOT_ENOUGH,
    STATE_ORDER,
    WATCHING,
)
from textual.widgets import Input
from tui_helpers import notifications, screen_text, settle

SIZE = (80, 24)


async def _ready(pilot) -> LotwatchApp:
    app = pilot.app
    await settle(pilot, lambda: app.overview is not None and not app.overview.partial
                 and app.detail is not None and not app.computing, timeout=30)
    return app


async def test_the_board_on_the_demo_starts_on_the_most_urgent_comparison(demo_copy):
    from lotwatch.stats import monitor as mon
    from lotwatch.store import Store
    from lotwatch.tui.services.review_engine import resolve_as_of, review_settings

    app = LotwatchApp(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        assert isinstance(app.screen, BoardScreen)
        rows = app.overview.board
        # Sorted by urgency: state order first (mean alert ... not enough data).
        ranks = [STATE_ORDER.index(r.state) for r in rows]
        assert ranks == sorted(ranks)
        top = rows[0]
        # The demo plants a drift on line RB-2's fill_volume (store/demo.py, effect (a)).
        assert (top.characteristic, top.factor, top.state) == ("fill_volume", "line",
                                                               MEAN_ALERT)
        assert "RB-2" in top.group and top.direction == "higher" and top.size > 0.5
        # The cursor starts there and the preview shows that comparison.
        assert app.screen.query_one("#board").cursor_row == 0
        assert (app.detail.characteristic.name, app.detail.factor) == ("fill_volume", "line")
        shown = screen_text(app)
        assert "! mean alert" in shown and "RB-2 high by +" in shown and " mL" in shown
        for word in ("Source", "Between", "Within", "Decision:"):
            assert word in shown
        # Every comparison with data is listed once; none is padded.
        pairs = [(r.characteristic, r.factor) for r in rows]
        assert len(pairs) == len(set(pairs)) == 4 * 3

        # Oracle for the watching rows: size = mean of the group minus the mean of the other
        # lots' values in the latest window, computed here with numpy from the stored values;
        # % of tolerance = |size| / (USL - LSL) * 100 (common practice).
        with Store.open(demo_copy, read_only=True) as store:
            settings = review_settings(store)
            win = mon.window_plan(resolve_as_of(), settings, 1)[-1]
            checked = 0
            for r in rows:
                if r.state != WATCHING or r.group is None:
                    continue
                frame = store.values_frame(r.characteristic, r.factor, since=win.start,
                                           until=win.end)
                level = frame["level"].to_numpy()
                values = frame["value"].to_numpy()
                inside = level == r.group
                expected = values[inside].mean() - values[~inside].mean()
                assert r.size == pytest.approx(expected, abs=1e-9)
                ch = store.characteristic(r.characteristic)
                if ch.lsl is not None and ch.usl is not None:
                    assert r.percent_of_tolerance == pytest.approx(
                        abs(expected) / (ch.usl - ch.lsl) * 100, rel=1e-9)
                checked += 1
        assert checked >= 5
        assert all(r.state != NOT_ENOUGH for r in rows[:1])

        await pilot.press("enter")
        await settle(pilot, lambda: app.current_mode == "comparison")
        shown = screen_text(app)
        assert "RB-2" in shown and "Between" in shown and "1 Chart" in shown


async def test_the_chart_draws_the_flagged_group_apart_without_colour(demo_copy, monkeypatch):
    """NO_COLOR at 120x40: the flagged group has its own marker, named in the legend above the
    plot (never over it); LSL, target and USL are on the scale; side by side, the group table
    shows every column (Cpk and Ppk included) without scrolling."""
    monkeypatch.setenv("NO_COLOR", "1")
    app = LotwatchApp(demo_copy)
    async with app.run_test(size=(120, 40)) as pilot:
        await _ready(pilot)
        await pilot.press("enter")
        await settle(pilot, lambda: app.current_mode == "comparison" and not app.computing
                     and app.screen.query_one("#run-chart").drawn() is not None)
        chart = app.screen.query_one("#run-chart")
        lines = [line.plain for line in chart.drawn().lines]
        assert lines[0].startswith("# RB-2 (flagged)  · others")
        plot = [line for line in lines if "┤" in line or "≈" in line or "│" in line[:9]]
        assert not any("flagged" in line for line in plot)
        assert sum(line.count("#") for line in plot) > 20 and any("·" in x for x in plot)
        # fill_volume: LSL 497, target 500, USL 503 mL (store/demo.py)
        assert plot[0].lstrip().startswith("503.0") and plot[0].endswith("USL")
        assert any(x.lstrip().startswith("497.0") and x.endswith("LSL") for x in plot)
        assert any(x.rstrip().endswith("tgt") for x in plot)
        table = app.screen.query_one("#group-table")
        headers = [c.label.plain.strip() for c in table.columns.values()]
        assert headers[-2:] == ["Cpk", "Ppk"]
        # capability indices with two decimals, as everywhere (tui/render/numbers.index)
        caps = [str(table.get_row_at(i)[-k]).strip() for i in range(table.row_count) for k in (1, 2)]
        assert caps and all(re.fullmatch(r"-?\d+\.\d\d|–|no spread", x) for x in caps), caps
        assert table.virtual_size.width <= table.scrollable_content_region.width
        assert chart.region.x >= table.region.right  # side by side, not over it
        assert chart.region.width >= 45


async def test_site_is_filled_in_from_a_line_seen_under_one_site(demo_copy):
    app = LotwatchApp(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, LotEntryScreen)
        form._tag_inputs["line"].focus()
        await pilot.press(*"RB-2")
        await pilot.pause()
        assert form._tag_inputs["site"].value == "Riverbend"
        assert form._tag_inputs["shift"].value == ""  # shifts run on every line
        assert "site Riverbend filled in: line RB-2 has only been seen there" in \
            screen_text(app)


def _cell(table, row: int, col: int) -> str:
    return table.get_row_at(row)[col].plain.strip()


async def test_lots_behind_a_group_correct_void_and_history(small_store):
    from lotwatch.store import Store

    path, _ = small_store
    app = LotwatchApp(path, poll_seconds=0.1)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        app.post_message(OpenComparison(
            "bore", "site"))
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and app.detail.factor == "site" and not app.computing)
        table = app.screen.query_one("#group-table")
        east = next(i for i in range(table.row_count) if _cell(table, i, 0) == "East")
        table.move_cursor(row=east)
        await pilot.press("enter")
        await settle(pilot, lambda: isinstance(app.screen, LotsScreen)
                     and app.screen.lots is not None)
        lots = app.screen
        # The fixture's East lots: every third of 36 lots, one bore value each (conftest).
        with Store.open(path, read_only=True) as store:
            frame = store.values_frame("bore", "site")
        east_ids = set(frame.filter(frame["level"] == "East")["measurement_id"].to_list())
        assert {v.measurement_id for v in lots.lots.values} == east_ids
        assert all(v.by == "fixture" for v in lots.lots.values)
        first = lots.lots.values[0]

        await pilot.press("c")
        await pilot.pause()
        assert isinstance(app.screen, ReasonScreen)
        await pilot.press(*"10.31")
        await pilot.press("tab")
        await pilot.press(*"keyed wrong")
        await pilot.press("enter")
        await settle(pilot, lambda: isinstance(app.screen, LotsScreen)
                     and any(v.original is not None for v in app.screen.lots.values))
        assert any("corrected to 10.31" in m for m in notifications(app))
        corrected = next(v for v in app.screen.lots.values
                         if v.measurement_id == first.measurement_id)
        assert corrected.value == "10.31" and corrected.original == first.value

        table = app.screen.query_one("#lots-table")
        table.move_cursor(row=1)
        second = app.screen.lots.values[1]
        await pilot.press("v")
        await pilot.pause()
        await pilot.press("enter")  # no reason: refused in words
        await pilot.pause()
        assert "a reason is required" in screen_text(app)
        await pilot.press(*"double entry")
        await pilot.press("enter")
        await settle(pilot, lambda: isinstance(app.screen, LotsScreen)
                     and any(v.voided for v in app.screen.lots.values))

        table.move_cursor(row=0)
        await pilot.press("h")
        await settle(pilot, lambda: "History of value" in screen_text(app))
        shown = screen_text(app)
        assert "-> 10.31 (keyed wrong)" in shown

    # The audit trail, read back through the store (the CLI's history shows the same).
    who = login_name()
    with Store.open(path, read_only=True) as store:
        trail = store.history(first.measurement_id)
        assert [(e.action, e.by, e.old_value, e.new_value, e.reason) for e in trail][1:] == [
            ("correct", who, first.value, "10.31", "keyed wrong")]
        voided = store.history(second.measurement_id)
        assert [(e.action, e.by, e.reason) for e in voided][1:] == [
            ("void", who, "double entry")]
        assert store.check().ok


async def test_entry_remembers_tags_logs_several_characteristics_and_flags_out_of_spec(
        small_store):
    from lotwatch.store import Store

    path, _ = small_store
    app = LotwatchApp(path, poll_seconds=0.1)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        app.post_message(ChooseView(
            app.view.but(characteristic="bore", factor="site")))
        await settle(pilot, lambda: app.detail.characteristic.name == "bore"
                     and not app.computing)
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        for factor, value in (("site", "East"), ("line", "L1"), ("shift", "day")):
            form._tag_inputs[factor].value = value
        values = form.query_one("#values", Input)
        assert values.characteristic.name == "bore"  # the one on screen comes first
        values.focus()
        await pilot.press(*"10.62")  # bore USL is 10.5 (conftest): stored, flagged
        other = next(v for v in form._values if v.characteristic.name == "weight")
        other.focus()
        await pilot.press(*"50.4")
        form.query_one("#lot", Input).value = "MULTI-1"
        await pilot.pause()
        assert "bore 10.62 is outside specification (above USL 10.5)" in screen_text(app)
        await pilot.press("enter")
        await settle(pilot, lambda: not isinstance(app.screen, LotEntryScreen))
        assert any("Stored lot MULTI-1 of bore, weight" in m and "1 value(s) outside "
                   "specification" in m for m in notifications(app))

        await pilot.press("n")  # the next lot starts from the last lot's tags
        await pilot.pause()
        form = app.screen
        assert {f: i.value for f, i in form._tag_inputs.items()} == {
            "site": "East", "line": "L1", "shift": "day"}
        assert app.screen.focused is form.query_one("#values", Input)
    with Store.open(path, read_only=True) as store:
        rows = store.measurements_frame().filter(lambda_lot("MULTI-1"))
    assert sorted(zip(rows["characteristic"].to_list(), rows["value"].to_list(), strict=True)) == [
        ("bore", 10.62), ("weight", 50.4)]


def lambda_lot(lot: str):
    import polars as pl

    return pl.col("lot") == lot


async def test_a_new_tag_value_needs_an_explicit_y_and_an_old_lot_is_explained(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        app.post_message(ChooseView(
            app.view.but(characteristic="bore", factor="site")))
        await settle(pilot, lambda: app.detail.characteristic.name == "bore"
                     and not app.computing)
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        for factor, value in (("site", "Westfield"), ("line", "L1"), ("shift", "day")):
            form._tag_inputs[factor].value = value
        form.query_one("#values", Input).value = "10.01"
        form.query_one("#values", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        await pilot.press("enter")  # Enter alone never confirms a new tag value
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        await pilot.press("n")
        await pilot.pause()
        assert app.screen is form

        # An existing lot with another value: said in plain words, nothing stored.
        form._tag_inputs["site"].value = "East"  # conftest: lot 2 is East, L1, night
        form._tag_inputs["shift"].value = "night"
        form.query_one("#lot", Input).value = "B002"
        await pilot.press("enter")
        await settle(pilot, lambda: "already stored with other values" in screen_text(app))
        shown = screen_text(app)
        assert "correct it (c)" in shown and "type another lot ID" in shown
        assert app.screen is form


async def test_enter_on_the_alerts_screen_opens_the_comparison(alert_store):
    path, _ = alert_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        await pilot.press("a")
        await settle(pilot, lambda: app.current_mode == "alerts" and bool(app.alerts))
        await pilot.press("enter")
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and (app.detail.characteristic.name, app.detail.factor)
                     == ("bore", "site") and not app.computing)


async def test_below_80x24_a_notice_replaces_the_tables(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=(60, 20)) as pilot:
        await _ready(pilot)
        notice = app.screen.query_one("#too-small")
        assert notice.display and notice.region.width > 0
        assert "Terminal too small: 60×20" in screen_text(app)
        assert app.screen.query_one("#board").region.width == 0
        await pilot.resize_terminal(80, 24)
        await pilot.pause()
        assert app.screen.query_one("#board").region.width > 0


async def test_the_palette_lists_only_commands_that_work_here(small_store):
    """Every command the palette offers on the board runs without a problem (no screenshot:
    it failed here before); the screen's own keys are not repeated as broken entries."""
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        commands = list(app.get_system_commands(app.screen))
        titles = [c.title for c in commands]
        assert "Screenshot" not in " ".join(titles) and "Keys" not in titles
        assert {"Weekly review", "Alerts", "Theme", "Quit"} <= set(titles)
        for command in commands:
            if command.title in ("Quit", "Theme"):
                continue
            command.callback()
            await settle(pilot)
            assert app.is_running
            app.switch_mode("board")
            await pilot.pause()
        assert not [m for m in notifications(app) if "failed" in m or "Problem" in m]


async def test_the_board_shows_the_detectors_evidence_onset_and_the_spread_alert(demo_copy):
    """The demo's planted effects (store/demo.py): (a) RB-2's fill_volume drifts up from week
    18, (b) the night shift's cap_torque spreads 2.5 times wider. The board shows the first as a
    mean alert with its onset and the second as a spread alert; each row's evidence is the
    largest stored detector statistic over its threshold for that comparison."""
    from lotwatch.store import Store
    from lotwatch.tui.services.detection import detector_status
    from lotwatch.tui.services.view_models import SPREAD_ALERT

    app = LotwatchApp(demo_copy)
    async with app.run_test(size=(120, 40)) as pilot:
        await _ready(pilot)
        rows = {(r.characteristic, r.factor): r for r in app.overview.board}
        shown = screen_text(app)
        board = app.screen.query_one("#board")
        headers = [c.label.plain.strip() for c in board.columns.values()]
    with Store.open(demo_copy, read_only=True) as store:
        status = detector_status(store)
    top = rows[("fill_volume", "line")]
    assert top.state == MEAN_ALERT and top.evidence >= 1 and top.onset
    # The drift starts on day 119 of 182 (store/demo.py): the onset lies in the last 9 weeks.
    spread = rows[("cap_torque", "shift")]
    assert spread.state == SPREAD_ALERT and "night" in spread.group
    assert spread.direction == "wider"
    for (ch, fa), r in rows.items():
        mine = [s.evidence for s in status if (s.characteristic, s.factor) == (ch, fa)
                and s.evidence is not None]
        if mine:
            assert r.evidence == pytest.approx(max(mine), rel=1e-12)
    assert headers == ["state", "characteristic", "factor", "group", "size", "%tol", "min",
                       "evid", "onset", "q"]
    assert "! spread alert" in shown


async def test_the_status_line_says_computing_while_the_numbers_are_stale(small_store):
    from textual.containers import VerticalScroll

    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _ready(pilot)
        app.post_message(OpenComparison("bore", "site"))
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and app.detail.factor == "site" and not app.computing)
        status = app.screen.query_one("#status")
        assert "computing…" not in str(status.content)
        await pilot.press("5")  # the Tests tab, scrolled to its end
        scroll = app.screen.query_one("#tests-scroll", VerticalScroll)
        await pilot.pause()
        scroll.scroll_end(animate=False)
        await pilot.pause()
        # What the status line says each time ``computing`` changes (read once its own
        # watcher has run): on a small store the new result can arrive within one pause.
        said: list[tuple[bool, bool]] = []
        app.watch(app, "computing", lambda v: app.call_later(
            lambda: said.append((v, "computing…" in str(status.content)))), init=False)
        await pilot.press("f")  # another factor: stale until recomputed
        await settle(pilot, lambda: app.detail.factor == "line" and not app.computing)
        await pilot.pause()
        assert (True, True) in said
        await pilot.pause()
        assert "computing…" not in str(status.content)
        assert scroll.scroll_y == 0  # the new comparison's tests start at their top


async def test_the_spread_tab_writes_the_pooled_sd_by_the_resolution_with_its_unit(demo_copy):
    """fill_volume is read to 0.1 mL: the pooled within-group SD under the Spread tab carries
    two decimals and the unit, as each group's SD in the table above it."""
    app = LotwatchApp(demo_copy)
    async with app.run_test(size=(120, 40)) as pilot:
        await _ready(pilot)
        await pilot.press("enter")
        await settle(pilot, lambda: app.current_mode == "comparison" and not app.computing)
        await pilot.press("4")
        await pilot.pause()
        title = str(app.screen.query_one("#spread-title").render())
        assert re.search(r"Pooled within-group SD \d+\.\d\d mL\.", title), title
        table = app.screen.query_one("#spread-table")
        sds = [str(table.get_row_at(i)[2]).strip() for i in range(table.row_count)]
        assert sds and all(re.fullmatch(r"\d+\.\d\d", x) for x in sds), sds
