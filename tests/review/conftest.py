"""Fixtures for the review engine tests: the demo store built once per session, replayed weekly."""

from __future__ import annotations

import shutil
from dataclasses import dataclass
from datetime import date, timedelta
from pathlib import Path

import pytest

DEMO_END = date(2026, 11, 29)  # a Sunday: the demo's 26 weeks end on it


@dataclass
class DemoReplay:
    path: Path  # the store after the weekly reviews (alerts recorded)
    pristine: Path  # the store as built, never reviewed
    reviews: list  # ReviewResult per week, oldest first
    start: date  # day index 0 of the demo
    onset: date  # first day of the planted drift


@pytest.fixture(scope="session")
def demo_replay(tmp_path_factory) -> DemoReplay:
    """The demo store (store.demo.build_demo_store) reviewed every Sunday from week 4 to the end."""
    from lotwatch.store import Store
    from lotwatch.store.demo import DAYS, DRIFT_START_DAY, build_demo_store
    from lotwatch.tui.services import review_engine as eng

    base = tmp_path_factory.mktemp("demo")
    pristine = build_demo_store(base / "pristine.sqlite", fresh=True, end=DEMO_END)
    path = base / "replayed.sqlite"
    shutil.copy(pristine, path)
    reviews = []
    with Store.open(path) as store:
        for j in range(22, -1, -1):
            reviews.append(eng.run_review(store, as_of=DEMO_END - timedelta(days=7 * j)))
    start = DEMO_END - timedelta(days=DAYS - 1)
    return DemoReplay(path, Path(pristine), reviews, start, start + timedelta(days=DRIFT_START_DAY))


@pytest.fixture()
def demo_copy(demo_replay, tmp_path) -> Path:
    """A private copy of the replayed demo store (tests may write to it)."""
    p = tmp_path / "demo.sqlite"
    shutil.copy(demo_replay.path, p)
    return p
