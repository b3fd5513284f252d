"""The review's read path (``store.day_sums``: one query, each column as one text, parsed by
numpy) against a straightforward per-row computation from the raw measurement rows, on a small
store with replicates, corrections and voids; and the exactness of the integers it carries.

Oracle: every live (non-voided) measurement row read with a plain SELECT and summed in Python
integers per characteristic x factor level x plant day (n, sum d, sum d^2, distinct lots,
d = current units - origin units), then per window the same sums over the window's days, and
``scipy.stats.f_oneway`` on the values themselves.
"""

from __future__ import annotations

import random
from collections import defaultdict
from datetime import date, timedelta

import numpy as np
import pytest
import scipy.stats as ss
from lotwatch.stats import monitor as mon
from lotwatch.store import LotEntry, Store
from lotwatch.tui.services import review_engine as eng

START = date(2026, 1, 5)
FACTORS = ("site", "line", "shift")
Sums = dict[tuple[str, str, str, date], list]  # -> [n, sum_d, sum_d2, set of lots]


def _fill(store: Store, seed: int) -> None:
    """Two characteristics (different resolutions and origins), 300 lots over 70 days with one
    to three replicates each, then 25 corrections and 30 voids (a lot can lose every value)."""
    rng = random.Random(seed)
    store.add_characteristic("fill", unit="mL", resolution="0.1", target=500)
    store.add_characteristic("torque", unit="N·m", resolution="0.01", target=2.5)
    entries = []
    for k in range(300):
        site = rng.choice("AB")
        tags = {"site": site, "line": f"{site}{rng.randint(1, 2)}",
                "shift": rng.choice(["early", "late", "night"]), "operator": rng.choice("xyz")}
        at = (f"{START + timedelta(days=rng.randint(0, 69))}T"
              f"{rng.randint(0, 23):02d}:{rng.randint(0, 59):02d}:00Z")
        fill = [f"{500 + rng.gauss(0.3 if site == 'B' else 0, 1):.1f}"
                for _ in range(rng.randint(1, 3))]
        torque = [f"{2.5 + rng.gauss(0, 0.05):.2f}" for _ in range(rng.randint(1, 2))]
        entries += [LotEntry("fill", fill, tags, lot=f"K{k:03d}", measured_at=at),
                    LotEntry("torque", torque, tags, lot=f"K{k:03d}", measured_at=at)]
    ids = store.log_lots(entries).measurement_ids
    for mid in rng.sample(ids, 25):
        unit = store.conn.execute("SELECT c.resolution FROM measurements m JOIN characteristics c "
                                  "ON c.id = m.characteristic_id WHERE m.id = ?",
                                  (mid,)).fetchone()[0]
        store.correct(mid, "503.4" if unit == "0.1" else "2.71", reason="typed wrong")
    for mid in rng.sample(ids, 30):
        store.void(mid, reason="sample spilled")


def _raw(store: Store) -> tuple[Sums, dict[tuple[str, str, str, date], list[float]]]:
    """Per-row sums and values from the measurement rows (no buckets involved)."""
    rows = store.conn.execute(
        "SELECT c.name, c.origin_units, c.resolution, m.current_units, m.day, m.lot_id, t.key, "
        "t.value FROM measurements m JOIN characteristics c ON c.id = m.characteristic_id "
        "JOIN lot_tags t ON t.lot_id = m.lot_id WHERE m.voided = 0").fetchall()
    sums: Sums = defaultdict(lambda: [0, 0, 0, set()])
    values: dict[tuple[str, str, str, date], list[float]] = defaultdict(list)
    for name, origin, res, units, day, lot, key, level in rows:
        if key not in FACTORS:
            continue
        cell = sums[(name, key, level, date.fromisoformat(day))]
        d = units - origin
        cell[0] += 1
        cell[1] += d
        cell[2] += d * d
        cell[3].add(lot)
        values[(name, key, level, date.fromisoformat(day))].append(units * float(res))
    return sums, values


@pytest.mark.parametrize("seed", [3, 11])
def test_day_sums_equal_the_raw_rows(tmp_path, seed: int) -> None:
    store = Store.create(tmp_path / "s.sqlite")
    _fill(store, seed)
    raw, _ = _raw(store)
    got = store.day_sums()
    assert got.rows == len(raw) == int(got.lengths.sum())
    run = np.repeat(np.arange(len(got.keys)), got.lengths)
    read = {(*got.keys[r], date(1970, 1, 1) + timedelta(days=int(day))): (int(n), int(s1),
                                                                         int(s2), int(lots))
            for r, day, n, s1, s2, lots in zip(run, got.day, got.n, got.sum_d, got.sum_d2,
                                               got.lots, strict=True)}
    assert read == {k: (v[0], v[1], v[2], len(v[3])) for k, v in raw.items()}
    # the frame read through the same path says the same, in its documented order
    frame = store.bucket_frame()
    assert frame.rows() == sorted((*k, *v) for k, v in read.items())


def _last_n_start(raw: Sums, key: tuple[str, str, str], end: date, n: int) -> date | None:
    """The latest day from which the group's days up to ``end`` hold at least n lots (all its
    days when they hold fewer); None when the group has no data by then."""
    days = sorted((d for (c, f, lv, d) in raw if (c, f, lv) == key and d <= end), reverse=True)
    total, start = 0, None
    for d in days:
        total += len(raw[(*key, d)][3])
        start = d
        if total >= n:
            break
    return start


@pytest.mark.parametrize("kind", ["trailing", "week", "last_n"])
def test_review_windows_equal_the_raw_rows(tmp_path, kind: str) -> None:
    store = Store.create(tmp_path / "s.sqlite")
    _fill(store, 5)
    raw, values = _raw(store)
    store.set_setting("review.window", kind)
    store.set_setting("review.window_days", "14")
    store.set_setting("review.step_days", "7")
    store.set_setting("review.last_n", "12")
    store.set_setting("review.min_lots", "3")
    cfg = eng.review_settings(store)
    comps, _ = eng.comparisons_of(store)
    plan = mon.window_plan(START + timedelta(days=66), cfg, 6)
    ws = eng.compute_windows(store, comps, plan, cfg)
    checked = 0
    for w, win in enumerate(plan):
        for c, comp in enumerate(comps):
            groups: dict[str, list[float]] = {}
            for g, level in enumerate(ws.sums.levels[c]):
                key = (comp.characteristic, comp.factor, level)
                if kind == "last_n":
                    first = _last_n_start(raw, key, win.end, cfg.last_n)
                    assert ws.sums.first_day[w][c][g] == first
                    lo = first or win.end + timedelta(days=1)
                else:
                    lo = win.start
                days = [d for (ch, f, lv, d) in raw if (ch, f, lv) == key and lo <= d <= win.end]
                want = [sum(raw[(*key, d)][i] for d in days) for i in range(3)]
                lots = sum(len(raw[(*key, d)][3]) for d in days)
                assert [int(ws.sums.n[w, c, g]), int(ws.sums.s1[w, c, g]),
                        int(ws.sums.s2[w, c, g]), int(ws.sums.lots[w, c, g])] == [*want, lots]
                if lots >= cfg.min_n:
                    groups[level] = [v for d in days for v in values[(*key, d)]]
            if len(groups) >= 2:
                ref = ss.f_oneway(*groups.values())
                assert ws.f[w, c] == pytest.approx(ref.statistic, rel=1e-9)
                assert ws.p[w, c] == pytest.approx(ref.pvalue, rel=1e-8, abs=1e-300)
                checked += 1
    assert checked >= 20  # the comparison is not vacuous


def test_day_sums_carry_64_bit_integers_exactly(tmp_path) -> None:
    """The text route loses nothing at SQLite's integer limits (-2^63, 2^63 - 1)."""
    store = Store.create(tmp_path / "s.sqlite")
    store.add_characteristic("x", unit="mm", resolution="1")
    tags = {"site": "A", "line": "A1", "shift": "early"}
    store.log_lots([LotEntry("x", ["5"], tags, lot="L1", measured_at="2026-03-02T08:00:00Z")])
    big, small = 2**63 - 1, -(2**63)
    store.conn.execute("UPDATE buckets SET sum_d = ?, sum_d2 = ? WHERE factor = 'site'",
                       (small, big))
    store.conn.execute("UPDATE buckets SET sum_d = ?, sum_d2 = ? WHERE factor = 'line'",
                       (big, big - 1))
    got = store.day_sums()
    by_factor = {k[1]: r for r, k in enumerate(got.keys)}
    assert (int(got.sum_d[by_factor["site"]]), int(got.sum_d2[by_factor["site"]])) == (small, big)
    assert (int(got.sum_d[by_factor["line"]]), int(got.sum_d2[by_factor["line"]])) == (
        big, big - 1)
    assert got.day.tolist() == [(date(2026, 3, 2) - date(1970, 1, 1)).days] * 3


def test_an_empty_read(tmp_path) -> None:
    store = Store.create(tmp_path / "s.sqlite")
    got = store.day_sums()
    assert got.rows == 0 and got.keys == [] and got.n.dtype == np.int64


def test_last_n_starts_at_once_equal_one_group_at_a_time() -> None:
    """The single laid-out search gives each group's own search (the definition), for groups
    that never reach N lots, empty groups, flat runs of days and ends at the cube's edges."""
    from lotwatch.stats.windows import _last_n_starts, _last_n_starts_each

    rng = np.random.default_rng(7)
    for _ in range(50):
        C, K, D = int(rng.integers(1, 5)), int(rng.integers(1, 6)), int(rng.integers(2, 40))
        per_day = rng.integers(0, 4, (C, K, D)) * (rng.random((C, K, D)) < 0.6)
        cl = np.concatenate([np.zeros((C, K, 1), dtype=np.int64), per_day.cumsum(axis=2)], axis=2)
        ends = np.sort(rng.integers(0, D + 1, int(rng.integers(1, 8))))
        last_n = int(rng.integers(1, 25))
        assert np.array_equal(_last_n_starts(cl, ends, last_n),
                              _last_n_starts_each(cl, ends, last_n))
