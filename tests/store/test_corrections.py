"""Corrections and voids keep the original value and leave an audit trail; buckets follow."""

from __future__ import annotations

import re
from datetime import date

import pytest
from lotwatch.store import BadInput, Conflict, NotFound, Store


def _row(store: Store, mid: int) -> tuple:
    return store.conn.execute(
        "SELECT original_units, current_units, voided FROM measurements WHERE id = ?", (mid,)
    ).fetchone()


def test_correct_keeps_original_and_trail(fill: Store) -> None:
    step = fill.correct(1, "500.4", reason="typing error", by="kim")
    assert (step.action, step.old_value, step.new_value, step.by) == (
        "correct", "500.1", "500.4", "kim")
    assert _row(fill, 1) == (5001, 5004, 0)
    fill.correct(1, "500.3", reason="second look")
    trail = fill.history(1)
    assert [(a.action, a.old_value, a.new_value, a.reason) for a in trail] == [
        ("log", None, "500.1", None),
        ("correct", "500.1", "500.4", "typing error"),
        ("correct", "500.4", "500.3", "second look"),
    ]
    assert trail[2].by == fill.user
    # d = 5003 - 5000 = 3 and 4998 - 5000 = -2: n 2, sum 1, sum of squares 9 + 4 = 13
    assert fill.bucket_frame(factor="site").rows() == [
        ("fill_volume", "site", "north", date(2026, 11, 30), 2, 1, 13, 1)]
    assert fill.check().ok


def test_void_keeps_row_and_trail(fill: Store) -> None:
    fill.void(2, reason="sample spilled", by="kim")
    assert _row(fill, 2) == (4998, 4998, 1)
    assert [a.action for a in fill.history(2)] == ["log", "void"]
    assert fill.history(2)[1].old_value == "499.8"
    assert fill.values_frame("fill_volume", "line")["measurement_id"].to_list() == [1]
    assert fill.bucket_frame(factor="line")["n"].to_list() == [1]
    assert fill.bucket_frame(factor="line")["lots"].to_list() == [1]  # one live value left
    assert fill.check().ok
    fill.void(1, reason="whole lot suspect")
    assert fill.bucket_frame().height == 0  # emptied buckets are removed
    assert fill.conn.execute("SELECT count(*) FROM measurements").fetchone()[0] == 2
    assert fill.check().ok


def test_voided_cannot_change_again(fill: Store, dump) -> None:
    fill.void(2, reason="spilled")
    before = dump(fill)
    with pytest.raises(Conflict, match="already voided"):
        fill.void(2, reason="again")
    with pytest.raises(Conflict, match="is voided; a voided measurement cannot be corrected"):
        fill.correct(2, "500.0", reason="fix")
    assert dump(fill) == before


def test_bad_corrections_change_nothing(fill: Store, dump) -> None:
    before = dump(fill)
    with pytest.raises(BadInput, match="a reason is required"):
        fill.correct(1, "500.2", reason="  ")
    with pytest.raises(BadInput, match="a reason is required"):
        fill.void(1, reason="")
    with pytest.raises(BadInput, match=re.escape(
            "500.25 is finer than the resolution 0.1 mL of fill_volume; use --round")):
        fill.correct(1, "500.25", reason="r")
    with pytest.raises(BadInput, match="'many' is not a number"):
        fill.correct(1, "many", reason="r")
    with pytest.raises(BadInput, match="outside the plausible range 400 to 600 mL"):
        fill.correct(1, "700.0", reason="r")
    with pytest.raises(Conflict, match="already has the value 500.1"):
        fill.correct(1, "500.10", reason="r")
    with pytest.raises(NotFound, match="no measurement with id 99"):
        fill.correct(99, "500.0", reason="r")
    with pytest.raises(NotFound, match="no measurement with id 99"):
        fill.history(99)
    assert dump(fill) == before


def test_correct_with_rounding(fill: Store) -> None:
    fill.correct(1, "500.25", reason="r", round_value=True)  # 5002.5 -> 5002 (half-even)
    assert _row(fill, 1) == (5001, 5002, 0)


def test_no_api_deletes_measurements() -> None:
    public = [n for n in dir(Store) if not n.startswith("_")]
    assert not [n for n in public if any(w in n for w in ("delete", "remove", "purge", "drop"))]
