"""Fixtures for the terminal-interface tests: small stores built through the store API.

Snapshot tests are deliberately absent: pytest-textual-snapshot 1.1.0 pins syrupy 4.8, which
needs pytest < 9, and this project runs pytest 9. Screens are checked through widget contents in
Pilot tests and through real terminal output in the tmux test instead.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pytest

SITES = ("North", "South", "East")
LINES = ("L1", "L2")
SHIFTS = ("day", "night")
N_LOTS = 36


def lot_tags(i: int) -> dict[str, str]:
    return {"site": SITES[i % 3], "line": LINES[i % 2], "shift": SHIFTS[(i // 2) % 2]}


def make_store(path: Path) -> dict[str, dict[str, list[float]]]:
    """Two characteristics, 36 lots over the last 18 days; returns the values by tag for oracles.

    bore (mm, 0.01) runs 0.15 mm high at site East; weight (g, 0.1) 1 g heavy on line L2.
    """
    from lotwatch.store import LotEntry, Store

    rng = np.random.default_rng(20261201)
    store = Store.create(path)
    store.add_characteristic("bore", unit="mm", resolution="0.01", lsl=9.5, target=10.0,
                             usl=10.5, plausible=(9.0, 11.0))
    store.add_characteristic("weight", unit="g", resolution="0.1", plausible=(0.0, 100.0))
    now = datetime.now(UTC).replace(microsecond=0)
    entries = []
    values: dict[str, dict[str, list[float]]] = {"bore": {}, "weight": {}}
    for i in range(N_LOTS):
        tags = lot_tags(i)
        at = now - timedelta(hours=12 * (i + 2))
        bore = round(10.0 + (0.15 if tags["site"] == "East" else 0.0) + rng.normal(0, 0.05), 2)
        weight = round(50.0 + (1.0 if tags["line"] == "L2" else 0.0) + rng.normal(0, 0.3), 1)
        for name, v, fmt in (("bore", bore, "{:.2f}"), ("weight", weight, "{:.1f}")):
            entries.append(LotEntry(name, [fmt.format(v)], dict(tags), lot=f"B{i:03d}",
                                    measured_at=at, by="fixture"))
            for key, level in tags.items():
                values[name].setdefault(f"{key}={level}", []).append(v)
    store.log_lots(entries)
    store.close()
    return values


@pytest.fixture
def small_store(tmp_path: Path) -> tuple[Path, dict[str, dict[str, list[float]]]]:
    path = tmp_path / "small.sqlite"
    return path, make_store(path)


@pytest.fixture
def alert_store(small_store):
    """The small store with one open alert on bore by site (recorded through store.alerts),
    its detectors current first: the app brings them current when it opens, and detectors
    that had not seen the data yet would clear an alert they do not hold."""
    from lotwatch.store import Store
    from lotwatch.store.alerts import Transition, record_transitions
    from lotwatch.tui.services.detection import advance_detectors

    path, values = small_store
    with Store.open(path) as store:
        advance_detectors(store)
        [alert] = record_transitions(store, [Transition(
            "bore", "site", "opened", "28 days to today", ["East"], "higher", 0.15, 0.15,
            0.001)], by="review")
    return path, alert.id


@pytest.fixture(scope="session")
def demo_data_home(tmp_path_factory) -> Path:
    """An XDG data directory holding the demo store, built once per session."""
    import os

    home = tmp_path_factory.mktemp("xdg")
    old = os.environ.get("XDG_DATA_HOME")
    os.environ["XDG_DATA_HOME"] = str(home)
    try:
        from lotwatch.store.demo import build_demo_store
        from lotwatch.tui.services.paths import demo_store_path

        build_demo_store(demo_store_path())
    finally:
        if old is None:
            del os.environ["XDG_DATA_HOME"]
        else:
            os.environ["XDG_DATA_HOME"] = old
    return home


@pytest.fixture(scope="module")
def demo_copy(demo_data_home, tmp_path_factory) -> Path:
    """A copy of the demo store with its last weekly reviews recorded (as ``lotwatch demo``
    does for a new store), so the planted RB-2 drift has an open alert."""
    import sqlite3

    from lotwatch.tui.cli.interface import _replay_reviews

    src = demo_data_home / "lotwatch" / "demo.sqlite"
    dst = tmp_path_factory.mktemp("demo") / "demo.sqlite"
    with sqlite3.connect(src) as a, sqlite3.connect(dst) as b:
        a.backup(b)
    _replay_reviews(dst)
    return dst
