"""Helpers for Pilot tests: wait for the app's workers, read what widgets show."""

from __future__ import annotations

import asyncio
import time
from collections.abc import Callable

from rich.console import Group
from rich.table import Table
from rich.text import Text
from textual.widgets import DataTable, OptionList, Static


async def settle(pilot, condition: Callable[[], bool] | None = None,
                 timeout: float = 8.0) -> None:
    """Wait for every worker except the store poller (it never ends), until ``condition``."""
    app = pilot.app
    deadline = time.monotonic() + timeout
    while True:
        busy = [w for w in app.workers if w.group != "poll" and not w.is_finished]
        if busy:
            await app.workers.wait_for_complete(busy)
        await pilot.pause()
        if condition is None or condition():
            if not [w for w in app.workers if w.group != "poll" and not w.is_finished]:
                return
        if time.monotonic() > deadline:
            raise AssertionError("the app did not reach the expected state in time")
        await asyncio.sleep(0.05)


def _plain(obj: object) -> str:
    if isinstance(obj, Text):
        return obj.plain
    if isinstance(obj, str):
        return obj
    if isinstance(obj, Group):
        return "\n".join(_plain(r) for r in obj.renderables)
    if isinstance(obj, Table):
        lines = [" ".join(_plain(c.header) for c in obj.columns)]
        for i in range(obj.row_count):
            lines.append(" ".join(_plain(list(c.cells)[i]) for c in obj.columns))
        return "\n".join(lines)
    return str(obj)


def screen_text(app) -> str:
    """The text held by the visible screen's Statics, tables and option lists."""
    parts: list[str] = []
    for w in app.screen.query("*"):
        if isinstance(w, Static):
            parts.append(_plain(w.content))
        elif isinstance(w, DataTable):
            for r in range(w.row_count):
                parts.append(" ".join(_plain(c) for c in w.get_row_at(r)))
        elif isinstance(w, OptionList):
            parts.extend(_plain(w.get_option_at_index(i).prompt)
                         for i in range(w.option_count))
    return "\n".join(parts)


def notifications(app) -> list[str]:
    return [n.message for n in app._notifications]


async def wait_until(pilot, condition: Callable[[], bool], timeout: float = 8.0) -> None:
    """Poll ``condition`` between pauses, without waiting for workers to finish."""
    deadline = time.monotonic() + timeout
    while not condition():
        if time.monotonic() > deadline:
            raise AssertionError("the app did not reach the expected state in time")
        await pilot.pause(0.02)
