"""Fixtures for the store tests: a fresh temporary store per test, always closed afterwards."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from lotwatch.store import LotEntry, Store

TAGS = {"site": "north", "line": "1", "shift": "day"}


@pytest.fixture
def store_path(tmp_path: Path) -> Path:
    return tmp_path / "lotwatch.sqlite"


@pytest.fixture
def store(store_path: Path) -> Iterator[Store]:
    s = Store.create(store_path, zone="UTC")  # fixed plant calendar: days equal UTC dates
    try:
        yield s
    finally:
        s.close()


@pytest.fixture
def fill(store: Store) -> Store:
    """A store with one characteristic, fill_volume (mL, resolution 0.1, 495..505, target 500,
    plausible 400..600), and one stored lot L1 with two values."""
    store.add_characteristic("fill_volume", unit="mL", resolution="0.1", lsl=495, target=500,
                             usl=505, plausible=(400, 600))
    store.log_lots([LotEntry("fill_volume", ["500.1", "499.8"], dict(TAGS), lot="L1",
                             measured_at="2026-11-30T14:05:00Z")])
    return store


def dump(store: Store) -> list[str]:
    """The whole database as SQL text (to prove a refused write changed nothing)."""
    return list(store.conn.iterdump())


def entry(values: list[str] | str, lot: str | None = None, **kw) -> LotEntry:
    tags = kw.pop("tags", dict(TAGS))
    if isinstance(values, str):
        values = [values]
    return LotEntry(kw.pop("characteristic", "fill_volume"), values, tags, lot=lot, **kw)


@pytest.fixture(name="dump")
def dump_fixture():
    return dump


@pytest.fixture(name="entry")
def entry_fixture():
    return entry
