"""Property: after any mix of inserts, corrections, voids and a late factor, the buckets equal
a recomputation from the raw rows (done here in plain Python, independently of the store's SQL),
and ``check()`` agrees."""

from __future__ import annotations

import tempfile
from collections import defaultdict
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lotwatch.store import BadInput, Conflict, LotEntry, Store
from lotwatch.store.values import format_units

CHARS = [("fill_volume", "0.1", 100.0), ("cap_torque", "0.05", None)]

log_op = st.tuples(
    st.just("log"),
    st.one_of(st.none(), st.integers(0, 6)),  # lot: generated, or one of a few (conflicts, dups)
    st.integers(0, len(CHARS) - 1),
    st.lists(st.integers(-40, 40), min_size=1, max_size=3),  # offsets in resolution units
    st.sampled_from(["north", "south"]),
    st.sampled_from(["1", "2", "3"]),
    st.one_of(st.none(), st.sampled_from(["A", "B"])),  # optional "oven" tag
    st.integers(0, 3),  # day
)
correct_op = st.tuples(st.just("correct"), st.integers(0, 10_000), st.integers(-40, 40))
void_op = st.tuples(st.just("void"), st.integers(0, 10_000))
factor_op = st.tuples(st.just("add_factor"))
ops = st.lists(st.one_of(log_op, log_op, correct_op, void_op, factor_op), max_size=25)


def _python_buckets(store: Store) -> dict[tuple, tuple[int, int, int, int]]:
    conn = store.conn
    origin = {cid: (name, o) for cid, name, o in conn.execute(
        "SELECT id, name, origin_units FROM characteristics")}
    factors = {r[0] for r in conn.execute("SELECT name FROM factors")}
    tags: dict[int, dict[str, str]] = defaultdict(dict)
    for lot_id, key, value in conn.execute("SELECT lot_id, key, value FROM lot_tags"):
        tags[lot_id][key] = value
    out: dict[tuple, list[int]] = defaultdict(lambda: [0, 0, 0])
    lots: dict[tuple, set[int]] = defaultdict(set)
    for lot_id, cid, units, voided, day in conn.execute(
            "SELECT lot_id, characteristic_id, current_units, voided, day FROM measurements"):
        if voided:
            continue
        name, o = origin[cid]
        d = units - o
        for key, level in tags[lot_id].items():
            if key in factors:
                cell = out[(name, key, level, day)]
                cell[0] += 1
                cell[1] += d
                cell[2] += d * d
                lots[(name, key, level, day)].add(lot_id)
    return {k: (*v, len(lots[k])) for k, v in out.items()}


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(ops)
def test_buckets_equal_recomputation(operations: list[tuple]) -> None:
    with tempfile.TemporaryDirectory() as tmp, Store.create(Path(tmp) / "p.sqlite") as store:
        for name, res, target in CHARS:
            store.add_characteristic(name, unit="u", resolution=res, target=target)
        origins = {c.name: c.origin_units for c in store.characteristics()}
        ids: list[int] = []
        added = False
        for op in operations:
            kind = op[0]
            try:
                if kind == "log":
                    _, lot, ci, offsets, site, line, oven, day = op
                    name, res, _ = CHARS[ci]
                    values = [format_units(origins[name] + off, res) for off in offsets]
                    tags = {"site": site, "line": line, "shift": "day"}
                    if oven:
                        tags["oven"] = oven
                    out = store.log_lots([LotEntry(
                        name, values, tags, lot=None if lot is None else f"L{lot}",
                        measured_at=f"2026-11-{10 + day:02d}T12:00:00Z")])
                    ids.extend(out.measurement_ids)
                elif kind == "correct" and ids:
                    mid = ids[op[1] % len(ids)]
                    cid = store.conn.execute(
                        "SELECT characteristic_id FROM measurements WHERE id = ?", (mid,)
                    ).fetchone()[0]
                    c = store.characteristic_by_id(cid)
                    store.correct(mid, format_units(c.origin_units + op[2], c.resolution),
                                  reason="property test")
                elif kind == "void" and ids:
                    store.void(ids[op[1] % len(ids)], reason="property test")
                elif kind == "add_factor" and not added:
                    store.add_factor("oven")
                    added = True
            except (BadInput, Conflict):
                pass  # refused input (conflicting lot, no-op correction, void twice)
        frame = store.bucket_frame()
        got = {(c, f, lv, d.isoformat()): (n, s1, s2, lots)
               for c, f, lv, d, n, s1, s2, lots in frame.rows()}
        assert got == _python_buckets(store)
        report = store.check()
        assert report.ok, report.problems
        assert report.buckets_checked == len(got)


def test_check_detects_tampering(fill: Store) -> None:
    with fill.write():
        fill.conn.execute("UPDATE buckets SET sum_d = sum_d + 1 WHERE factor = 'line'")
    report = fill.check()
    assert not report.ok
    assert any("bucket mismatch" in p and "line" in p for p in report.problems)
