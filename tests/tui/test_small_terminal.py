"""Below 80×24 every screen shows the "terminal too small" notice instead of cut numbers: the
lots screen and the forms too (the rule of lotwatch's layout, README "The terminal
interface"; 80×24 is the classic terminal size, common practice)."""

from __future__ import annotations

from lotwatch.tui.app.application import LotwatchApp
from lotwatch.tui.app.messages import OpenComparison
from lotwatch.tui.app.screens.entry import LotEntryScreen
from lotwatch.tui.app.screens.lots import LotsScreen
from lotwatch.tui.app.screens.reason import ReasonScreen
from textual.widgets import DataTable, Input
from tui_helpers import screen_text, settle


def _notice_shown(app, size: str) -> bool:
    found = app.screen.query("#too-small")
    return bool(found) and found.first().region.width > 0 and \
        f"Terminal too small: {size}" in screen_text(app)


async def _check(pilot, content_selector: str) -> None:
    app = pilot.app
    await pilot.resize_terminal(60, 20)
    await settle(pilot, lambda: _notice_shown(app, "60×20"))
    assert app.screen.query_one(content_selector).region.width == 0
    await pilot.resize_terminal(79, 30)  # one column short is too small as well
    await settle(pilot, lambda: _notice_shown(app, "79×30"))
    await pilot.resize_terminal(80, 24)
    await settle(pilot, lambda: app.screen.query_one(content_selector).region.width > 0)
    assert app.screen.query_one("#too-small").region.width == 0


async def test_the_lots_screen_and_the_forms_show_the_notice_below_80x24(small_store):
    path, _ = small_store
    app = LotwatchApp(path)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, lambda: app.detail is not None and not app.computing, timeout=30)
        app.post_message(OpenComparison("bore", "site"))
        await settle(pilot, lambda: app.current_mode == "comparison"
                     and app.detail.factor == "site" and not app.computing)
        await pilot.press("l")
        await settle(pilot, lambda: isinstance(app.screen, LotsScreen)
                     and app.screen.lots is not None)
        await _check(pilot, DataTable)

        await pilot.press("v")  # the void form, a modal over the lots
        await settle(pilot, lambda: isinstance(app.screen, ReasonScreen))
        await _check(pilot, "#reason")
        # The form still works at a size where it fits.
        assert app.screen.query_one("#reason", Input).has_focus
        await pilot.press("escape")
        await settle(pilot, lambda: isinstance(app.screen, LotsScreen))
        await pilot.press("escape")
        await pilot.press("n")  # the entry form
        await settle(pilot, lambda: isinstance(app.screen, LotEntryScreen))
        await _check(pilot, "#form")
