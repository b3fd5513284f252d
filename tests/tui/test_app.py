"""Pilot tests of the lotwatch app at 80×24 on small stores built through the store API."""

from __future__ import annotations

import pytest
from lotwatch.tui.app.application import LotwatchApp
from lotwatch.tui.app.messages import ChooseView
from lotwatch.tui.app.screens.acknowledge import AcknowledgeScreen
from lotwatch.tui.app.screens.alerts import AlertsScreen
from lotwatch.tui.app.screens.base import LotwatchScreen
from lotwatch.tui.app.screens.board import BoardScreen
from lotwatch.tui.app.screens.entry import LotEntryScreen
from lotwatch.tui.services.storefile import login_name
from scipy import stats as sps
from textual.widgets import Input
from tui_helpers import notifications, screen_text, settle, wait_until

SIZE = (80, 24)


def _store_lot(path, lot: str):
    from lotwatch.store import Store

    with Store.open(path, read_only=True) as store:
        frame = store.values_frame("bore", "site")
    return frame.filter(frame["lot"] == lot)


async def _started(pilot) -> LotwatchApp:
    app = pilot.app
    await settle(pilot, lambda: app.detail is not None and not app.computing)
    return app


async def _show(pilot, characteristic: str, factor: str) -> None:
    """Open the comparison view of one characteristic x factor, as Enter on the board does."""
    app = pilot.app
    app.switch_mode("board")
    await pilot.pause()
    board = app.screen.query_one("#board")
    key = f"{characteristic}\x1f{factor}"
    row = next(i for i in range(board.row_count)
               if board.coordinate_to_cell_key((i, 0)).row_key.value == key)
    board.move_cursor(row=row)
    await pilot.press("enter")
    await settle(pilot, lambda: app.current_mode == "comparison" and app.detail is not None
                 and (app.detail.characteristic.name, app.detail.factor)
                 == (characteristic, factor) and not app.computing)


async def _type(pilot, widget_id: str, text: str) -> None:
    pilot.app.screen.query_one(f"#{widget_id}", Input).focus()
    await pilot.press(*text)


async def test_log_a_lot_through_the_form(small_store):
    path, _ = small_store
    app = LotwatchApp(path, poll_seconds=0.1)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await _show(pilot, "bore", "site")
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, LotEntryScreen)
        tag_inputs = form._tag_inputs
        for factor, value in (("site", "East"), ("line", "L1"), ("shift", "day")):
            tag_inputs[factor].focus()
            await pilot.press(*value)
        await _type(pilot, "values", "10.12 10.14")
        await _type(pilot, "lot", "NEW-7")
        await pilot.press("enter")
        await settle(pilot, lambda: isinstance(app.screen, LotwatchScreen)
                     and app.detail is not None
                     and any(r.lot == "NEW-7" for r in app.detail.recent))
        stored = _store_lot(path, "NEW-7")
        assert sorted(stored["value"].to_list()) == [10.12, 10.14]
        assert set(stored["level"].to_list()) == {"East"}
        assert any("Stored lot NEW-7" in m for m in notifications(app))


async def test_invalid_entry_says_why_and_stores_nothing(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await _show(pilot, "bore", "site")
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        for factor, value in (("site", "East"), ("line", "L1"), ("shift", "day")):
            form._tag_inputs[factor].focus()
            await pilot.press(*value)
        await _type(pilot, "values", "10.123 abc 12.5")
        await _type(pilot, "lot", "BAD-1")
        await pilot.press("enter")
        await settle(pilot)
        shown = screen_text(app)
        # bore has resolution 0.01 and plausible range 9..11 (set in the fixture).
        assert "10.123 is finer than the resolution 0.01 mm" in shown
        assert "'abc' is not a number" in shown
        assert "12.5 is outside the plausible range 9..11 mm" in shown
        assert isinstance(app.screen, LotEntryScreen)
        assert app.screen.query_one("#values", Input).value == "10.123 abc 12.5"
        assert _store_lot(path, "BAD-1").height == 0


async def test_missing_required_tag_is_named(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await _show(pilot, "bore", "site")
        await pilot.press("n")
        await pilot.pause()
        await _type(pilot, "values", "10.10")
        await _type(pilot, "lot", "BAD-2")
        await pilot.press("enter")
        await settle(pilot)
        shown = screen_text(app)
        for factor in ("site", "line", "shift"):
            assert f"{factor} is required" in shown
        assert _store_lot(path, "BAD-2").height == 0


def _oracle_f(values: dict[str, list[float]], factor: str) -> float:
    """scipy.stats.f_oneway on the fixture's values grouped by ``factor`` (the oracle)."""
    groups = [v for k, v in sorted(values.items()) if k.startswith(factor + "=")]
    return float(sps.f_oneway(*groups).statistic)


async def test_switching_characteristic_and_factor_changes_the_anova(small_store):
    path, values = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await _show(pilot, "bore", "site")
        await pilot.press("5")  # Tests tab
        first = app.detail
        assert (first.characteristic.name, first.factor) == ("bore", "site")
        assert first.battery.anova.f == pytest.approx(_oracle_f(values["bore"], "site"),
                                                      rel=1e-9)
        assert "Between" in screen_text(app)
        text_site = screen_text(app)

        await pilot.press("f")  # next factor: line
        await settle(pilot, lambda: app.detail.factor == "line")
        assert app.detail.battery.anova.f == pytest.approx(
            _oracle_f(values["bore"], "line"), rel=1e-9)
        assert screen_text(app) != text_site

        app.post_message(ChooseView(app.view.but(characteristic="weight")))
        await settle(pilot, lambda: app.detail.characteristic.name == "weight"
                     and not app.computing)
        assert app.detail.factor == "line"
        assert app.detail.battery.anova.f == pytest.approx(
            _oracle_f(values["weight"], "line"), rel=1e-9)
        shown = screen_text(app)
        assert "weight by line" in shown
        f_text = f"{app.detail.battery.anova.f:.4g}"
        assert f_text in shown


async def test_acknowledging_an_alert_records_who_and_the_note(alert_store):
    from lotwatch.store import Store
    from lotwatch.store.alerts import alert_history, get_alert

    path, alert_id = alert_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await pilot.press("a")
        await settle(pilot, lambda: isinstance(app.screen, AlertsScreen) and app.alerts)
        assert "A statistical signal is a reason to investigate" in screen_text(app)
        await pilot.press("k")
        await pilot.pause()
        assert isinstance(app.screen, AcknowledgeScreen)
        assert "A statistical signal is a reason to investigate" in screen_text(app)
        await pilot.press(*"checked gauge")
        await pilot.press("enter")
        await settle(pilot, lambda: isinstance(app.screen, AlertsScreen)
                     and app.alerts.alerts[0].state == "acknowledged")
        assert "checked gauge" in screen_text(app)
    with Store.open(path, read_only=True) as store:
        assert get_alert(store, alert_id).state == "acknowledged"
        ack = [e for e in alert_history(store, alert_id) if e.event == "acknowledged"]
    assert [(e.by, e.note) for e in ack] == [(login_name(), "checked gauge")]


async def test_read_only_refuses_entry_and_acknowledgement(alert_store):
    from lotwatch.store import Store
    from lotwatch.store.alerts import get_alert

    path, alert_id = alert_store
    app = LotwatchApp(path, read_only=True)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        assert "READ-ONLY" in screen_text(app)
        await pilot.press("n")
        await pilot.pause()
        assert isinstance(app.screen, BoardScreen)
        assert any("read-only" in m and "logging lots is disabled" in m
                   for m in notifications(app))
        await pilot.press("a")
        await settle(pilot, lambda: bool(app.alerts))
        await pilot.press("k")
        await pilot.pause()
        assert isinstance(app.screen, AlertsScreen)
        assert any("acknowledging alerts is disabled" in m for m in notifications(app))
    with Store.open(path, read_only=True) as store:
        assert get_alert(store, alert_id).state == "open"


MARKUP_NOTE = "[bold red]boom[/] [@click=app.quit]x[/] \x1b]0;title\x07\u202eevil"


async def test_markup_and_control_characters_are_shown_literally(alert_store):
    path, alert_id = alert_store
    from lotwatch.store import Store
    from lotwatch.store.alerts import acknowledge

    with Store.open(path) as store:
        acknowledge(store, alert_id, by="[i]someone[/i]", note=MARKUP_NOTE)
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await pilot.press("a")
        await settle(pilot, lambda: bool(app.alerts))
        shown = screen_text(app)
        # Markup stays text; the OSC title sequence and the bidi override are removed.
        assert "[bold red]boom[/] [@click=app.quit]x[/] evil" in shown
        assert "[i]someone[/i]" in shown
        assert "\x1b" not in shown and "\u202e" not in shown


async def test_markup_in_a_lot_id_and_tag_is_literal(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await _show(pilot, "bore", "site")
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        form._tag_inputs["site"].value = "[b]West[/b]"
        form._tag_inputs["line"].value = "L1"
        form._tag_inputs["shift"].value = "day"
        form.query_one("#values", Input).value = "10.05"
        form.query_one("#lot", Input).value = "[red]L-1[/red]"
        form.query_one("#values", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        await pilot.press("y")  # confirm the new site value
        await settle(pilot, lambda: app.detail is not None
                     and any(r.lot == "[red]L-1[/red]" for r in app.detail.recent))
        assert any("Stored lot [red]L-1[/red]" in m for m in notifications(app))
        # One lot is below the minimum for the group table: open its lots directly.
        from lotwatch.tui.app.screens.lots import LotsScreen
        from lotwatch.tui.services.view_models import LotsRequest

        app.push_screen(LotsScreen(LotsRequest("bore", "site", "[b]West[/b]")))
        await settle(pilot, lambda: "[red]L-1[/red]" in screen_text(app))
        shown = screen_text(app)
        assert "[red]L-1[/red]" in shown and "= [b]West[/b]" in shown


async def test_a_lot_logged_in_one_app_appears_in_another(small_store):
    path, _ = small_store
    first = LotwatchApp(path, poll_seconds=0.1)
    second = LotwatchApp(path, poll_seconds=0.1)
    async with first.run_test(size=SIZE) as p1, second.run_test(size=SIZE) as p2:
        await _started(p1)
        await _started(p2)
        await _show(p1, "bore", "site")
        await _show(p2, "bore", "site")
        await p1.press("n")
        await p1.pause()
        form = first.screen
        for factor, value in (("site", "North"), ("line", "L2"), ("shift", "night")):
            form._tag_inputs[factor].value = value
        form.query_one("#values", Input).value = "9.98"
        form.query_one("#lot", Input).value = "SHARED-1"
        form.query_one("#values", Input).focus()
        await p1.press("enter")
        await settle(p1, lambda: isinstance(first.screen, LotwatchScreen))
        await settle(p2, lambda: second.detail is not None
                     and any(r.lot == "SHARED-1" for r in second.detail.recent))


async def test_help_lists_bindings_and_the_caution(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        shown = screen_text(app)
        for text in ("Log lot", "Factor", "Acknowledge", "Critical F", "q-values", "Board",
                     "Lots", "Correct", "Void",
                     "Detectable shift", "not a disposition of product",
                     "qualified people"):
            assert text in shown
        await pilot.press("escape")
        await pilot.pause()
        assert isinstance(app.screen, BoardScreen)


async def test_weekly_review_lists_comparisons_by_q_and_drills_in(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await pilot.press("r")
        await settle(pilot, lambda: app.review is not None)
        rows = app.review.rows
        assert len(rows) == 2 * 3  # 2 characteristics x 3 factors
        qs = [r.q for r in rows if r.q is not None]
        assert qs == sorted(qs)
        assert "A statistical signal is a reason to investigate" in screen_text(app)
        top = rows[0]
        await pilot.press("enter")
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and app.detail.characteristic.name == top.characteristic
                     and app.detail.factor == top.factor)


async def test_store_deleted_underneath_is_reported_and_the_app_keeps_running(small_store):
    path, _ = small_store
    app = LotwatchApp(path, poll_seconds=0.1)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        for p in (path, path.with_name(path.name + "-wal"), path.with_name(path.name + "-shm")):
            p.unlink(missing_ok=True)
        await settle(pilot, lambda: any("deleted or moved" in m for m in notifications(app)))
        await pilot.press("f")
        await settle(pilot)
        assert app.is_running
        assert isinstance(app.screen, BoardScreen)


async def test_a_failed_save_keeps_the_form_and_its_contents(small_store, monkeypatch):
    from lotwatch.store import StoreLocked
    from lotwatch.tui.services import writers

    def locked(*args, **kwargs):
        raise StoreLocked("the store is locked by another writer")

    monkeypatch.setattr(writers, "log_draft", locked)
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await _show(pilot, "bore", "site")
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        for factor, value in (("site", "East"), ("line", "L1"), ("shift", "day")):
            form._tag_inputs[factor].value = value
        form.query_one("#values", Input).value = "10.01"
        form.query_one("#values", Input).focus()
        await pilot.press("enter")
        await settle(pilot, lambda: any("locked" in m for m in notifications(app)))
        assert app.screen is form
        assert form.query_one("#values", Input).value == "10.01"
        assert "What you typed is kept" in screen_text(app)


async def test_recording_the_review_opens_alerts_and_read_only_refuses(small_store):
    from lotwatch.store import Store
    from lotwatch.store.alerts import list_alerts

    path, _ = small_store
    ro = LotwatchApp(path, read_only=True)
    async with ro.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await pilot.press("r")
        await settle(pilot, lambda: ro.review is not None)
        await pilot.press("p")
        await settle(pilot)
        assert any("recording reviews is disabled" in m for m in notifications(ro))
    with Store.open(path, read_only=True) as store:
        assert list_alerts(store) == []

    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await pilot.press("r")
        await settle(pilot, lambda: app.review is not None)
        await pilot.press("p")
        await settle(pilot, lambda: any("Review recorded" in m for m in notifications(app)))
    # recording advanced every characteristic's detectors to its last day (18 days of one or
    # two lots a day are too little history for them to raise anything yet)
    with Store.open(path, read_only=True) as store:
        advanced = store.conn.execute("SELECT count(*) FROM detector_progress").fetchone()[0]
        assert list_alerts(store) == []
    assert advanced == 2


async def test_a_slow_recompute_never_repaints_over_a_newer_one(small_store, monkeypatch):
    import asyncio
    import sys
    import threading

    from lotwatch.tui.services import loaders

    real = loaders.load_detail
    release = threading.Event()  # the first comparison finishes only after the other shows
    first: list = []
    slow_thread: list[int] = []

    def slow_first(path, read_only, request):
        """The first comparison asked for (the board's most urgent) waits for ``release``."""
        if first and first[0] != (request.characteristic, request.factor):
            return real(path, read_only, request)
        first.append((request.characteristic, request.factor))
        slow_thread.append(threading.get_ident())
        assert release.wait(30)
        return real(path, read_only, request)

    def slow_worker_done() -> bool:
        """The slow worker's thread has left the worker (it computed, and posted its result
        unless the app dropped it there): none of its frames is in textual's worker runner."""
        frame = sys._current_frames().get(slow_thread[0])
        while frame is not None:
            if frame.f_code.co_filename.endswith("worker.py") and "textual" in \
                    frame.f_code.co_filename:
                return False
            frame = frame.f_back
        return True

    monkeypatch.setattr(loaders, "load_detail", slow_first)
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: bool(slow_thread))
        assert app.detail is None  # the first comparison is still computing
        other = next(r for r in app.overview.board
                     if (r.characteristic, r.factor) != first[0])
        app.post_message(ChooseView(app.view.but(characteristic=other.characteristic,
                                                 factor=other.factor)))
        await wait_until(pilot, lambda: app.detail is not None)
        assert (app.detail.characteristic.name, app.detail.factor) == (
            other.characteristic, other.factor)
        release.set()  # now the stale result completes ...
        await wait_until(pilot, slow_worker_done)
        # ... and whatever it posted is ahead of this callback in the app's message queue.
        handled = asyncio.Event()
        app.call_later(handled.set)
        await asyncio.wait_for(handled.wait(), 10)
        await pilot.pause()
        assert (app.detail.characteristic.name, app.detail.factor) == (
            other.characteristic, other.factor)


async def test_acknowledging_from_the_weekly_review(alert_store):
    from lotwatch.store import Store
    from lotwatch.store.alerts import alert_history

    path, alert_id = alert_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await pilot.press("r")
        await settle(pilot, lambda: app.review is not None)
        rows = app.review.rows
        target = next(i for i, r in enumerate(rows) if r.alert_id == alert_id)
        table = app.screen.query_one("#review-table")
        table.move_cursor(row=target)
        await pilot.press("k")
        await pilot.pause()
        assert isinstance(app.screen, AcknowledgeScreen)
        await pilot.press(*"East gauge recalibrated")
        await pilot.press("enter")
        await settle(pilot, lambda: not isinstance(app.screen, AcknowledgeScreen))
    with Store.open(path, read_only=True) as store:
        notes = [(e.by, e.note) for e in alert_history(store, alert_id)
                 if e.event == "acknowledged"]
    assert notes == [(login_name(), "East gauge recalibrated")]


async def test_boundary_texts_in_the_form_are_words_not_a_closed_app(small_store):
    """1e999999 in Values and 0001-01-01 in Time once closed the interface (exit status 0)."""
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=SIZE) as pilot:
        await _started(pilot)
        await _show(pilot, "bore", "site")
        await pilot.press("n")
        await pilot.pause()
        await _type(pilot, "values", "1e999999")
        await _type(pilot, "time", "0001-01-01")
        await pilot.press("enter")
        await settle(pilot)
        assert app.is_running and isinstance(app.screen, LotEntryScreen)
        shown = screen_text(app)
        assert "1e999999 is too large to be a measurement" in shown
        # read in the plant zone, year 1 is a real instant, refused by the year rule
        assert "0001-01-01 is before 1970" in shown
        assert _store_lot(path, "BAD-1").height == 0
