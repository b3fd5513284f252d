"""The detectors on real stores (tui/services/detection.py over store day sums): a planted mean
or spread change is found with the right group, kind and onset; a null store raises nothing;
catching up equals advancing day by day; re-runs are idempotent; two recorded reviews at once
write each event once; a correction of a past day is recomputed; alerts clear and reopen."""

from __future__ import annotations

import shutil
import threading
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import numpy as np
import pytest
from lotwatch.store import LotEntry, Store
from lotwatch.store import alerts as store_alerts
from lotwatch.tui.caution import CAUTION
from lotwatch.tui.services import detection, review_engine

DAY0 = date(2026, 1, 5)
SITES = "ABCD"


def _entries(days: range, *, rng, effect=None, lots: int = 6) -> list[LotEntry]:
    """Four sites, ``lots`` lots per site per day, values N(50, 1) g at resolution 0.01; lines
    and shifts drawn at random (unrelated to the site). ``effect(site, day) -> (shift, sd
    factor)``."""
    out = []
    for d in days:
        day = DAY0 + timedelta(days=d)
        for s in SITES:
            shift, sdf = effect(s, d) if effect else (0.0, 1.0)
            for i in range(lots):
                v = 50 + shift + sdf * rng.normal(0, 1.0)
                at = datetime(day.year, day.month, day.day, 6 + 2 * i, tzinfo=UTC)
                out.append(LotEntry("x", [f"{v:.2f}"], {
                    "site": s, "line": f"L{rng.integers(1, 4)}",
                    "shift": ("early", "late", "night")[rng.integers(0, 3)]},
                    lot=f"{s}-{day:%Y%m%d}-{i}", measured_at=at))
    return out


def _store(path: Path, days: int, effect=None, seed: int = 11) -> Store:
    store = Store.create(path)
    store.add_characteristic("x", unit="g", resolution="0.01", lsl=44.0, usl=56.0,
                             min_shift=1.0)
    store.log_lots(_entries(range(days), rng=np.random.default_rng(seed), effect=effect))
    return store


def _day(i: int) -> str:
    return (DAY0 + timedelta(days=i)).isoformat()


def _rows(store: Store) -> list[tuple]:
    return store.conn.execute("SELECT * FROM detector_days ORDER BY characteristic_id, day, "
                              "factor, level, kind").fetchall()


def test_planted_mean_shift_is_found_with_group_kind_and_onset(tmp_path):
    """Site C +1 g (= the minimum shift, 1 sd) from day 60: one mean alert naming C, higher,
    onset within 3 days of day 60, detected within 7 days; nothing else alerts."""
    store = _store(tmp_path / "s.sqlite", 100, lambda s, d: (1.0 if s == "C" and d >= 60 else 0.0,
                                                            1.0))
    result = review_engine.run_review(store)
    alerts = store_alerts.list_alerts(store)
    assert [(a.factor, a.kind, a.groups, a.direction) for a in alerts] == [
        ("site", "mean", ["C"], "higher")]
    a = alerts[0]
    onset = date.fromisoformat(a.onset)
    detected = date.fromisoformat(a.detected_on)
    assert abs((onset - (DAY0 + timedelta(days=60))).days) <= 3
    assert 0 <= (detected - (DAY0 + timedelta(days=60))).days <= 10  # 6 lots a day
    assert a.size_low < a.size < a.size_high and 0.5 < a.size < 2.0
    assert a.percent_of_tolerance == pytest.approx(100 * a.size / 12.0)
    assert [c.event for c in result.comparisons if c.factor == "site"] == ["opened"]
    (site,) = [c for c in result.comparisons if c.factor == "site"]
    assert site.detector_group == "C" and site.detector_kind == "mean"
    assert site.detector_evidence >= 1 and site.alert_text.endswith(CAUTION)
    store.close()


def test_planted_spread_change_alerts_as_spread(tmp_path):
    """Site B's sd x2.5 from day 50 (mean unchanged): a spread alert naming B, wider; no mean
    alert."""
    store = _store(tmp_path / "s.sqlite", 90, lambda s, d: (0.0, 2.5 if s == "B" and d >= 50
                                                           else 1.0))
    detection.advance_detectors(store)
    alerts = store_alerts.list_alerts(store)
    assert [(a.factor, a.kind, a.groups, a.direction) for a in alerts] == [
        ("site", "spread", ["B"], "wider")]
    assert abs((date.fromisoformat(alerts[0].onset) - (DAY0 + timedelta(days=50))).days) <= 3
    status = {(s.factor, s.group, s.kind): s for s in detection.detector_status(store)}
    assert status[("site", "B", "spread")].sd_ratio == pytest.approx(2.5, rel=0.25)
    store.close()


def test_null_store_raises_no_alert_and_a_plant_wide_step_is_no_group_change(tmp_path):
    """No group differs; on day 40 every site moves +3 g together: no alert (the contrast of a
    group with the rest of the same day does not move)."""
    store = _store(tmp_path / "s.sqlite", 120, lambda s, d: (3.0 if d >= 40 else 0.0, 1.0))
    detection.advance_detectors(store)
    assert store_alerts.list_alerts(store) == []
    st = detection.detector_status(store)
    assert len(st) == 2 * (4 + 3 + 3) and all(s.last_day == DAY0 + timedelta(days=119)
                                              for s in st)
    assert max(s.evidence for s in st) < 1
    store.close()


def _copy(src: Path, dst: Path) -> Path:
    shutil.copy(src, dst)
    return dst


def test_catch_up_equals_day_by_day_and_re_runs_change_nothing(tmp_path):
    def effect(s, d):
        return ((1.2 if s == "A" and d >= 45 else 0.0, 1.0))
    store = _store(tmp_path / "a.sqlite", 75, effect)
    store.close()
    path_b = _copy(tmp_path / "a.sqlite", tmp_path / "b.sqlite")
    with Store.open(tmp_path / "a.sqlite") as a:
        detection.advance_detectors(a)
        rows_a = _rows(a)
        alerts_a = [(x.factor, x.kind, x.groups, x.onset, x.detected_on)
                    for x in store_alerts.list_alerts(a)]
        n_events = a.conn.execute("SELECT count(*) FROM alert_events").fetchone()[0]
        again = detection.advance_detectors(a)  # idempotent
        assert again.advanced == {} and again.alerts == []
        assert _rows(a) == rows_a
        assert a.conn.execute("SELECT count(*) FROM alert_events").fetchone()[0] == n_events
    with Store.open(path_b) as b:
        for i in range(75):
            detection.advance_detectors(b, until=DAY0 + timedelta(days=i))
        assert len(_rows(b)) == len(rows_a)
        for ra, rb in zip(rows_a, _rows(b), strict=True):
            assert ra[:5] == rb[:5]
            np.testing.assert_allclose([x if x is not None else np.nan for x in ra[5:]],
                                       [x if x is not None else np.nan for x in rb[5:]],
                                       rtol=1e-9, equal_nan=True)
        assert [(x.factor, x.kind, x.groups, x.onset, x.detected_on)
                for x in store_alerts.list_alerts(b)] == alerts_a
    assert alerts_a and alerts_a[0][:3] == ("site", "mean", ["A"])


def test_lots_logged_day_by_day_give_the_catch_up_result(tmp_path):
    """Data arriving a day at a time, with an advance after each day (as the interface does after
    a write), ends in the same state as one catch-up over the whole history."""
    rng = np.random.default_rng(3)
    def effect(s, d):
        return ((1.5 if s == "D" and d >= 30 else 0.0, 1.0))
    entries = [_entries(range(d, d + 1), rng=rng, effect=effect) for d in range(50)]
    stores = []
    for name in ("live", "batch"):
        s = Store.create(tmp_path / f"{name}.sqlite")
        s.add_characteristic("x", unit="g", resolution="0.01", lsl=44.0, usl=56.0, min_shift=1.0)
        stores.append(s)
    live, batch = stores
    for day_entries in entries:
        half = len(day_entries) // 2
        live.log_lots(day_entries[:half])
        detection.advance_detectors(live)  # part of the day: recomputed when the rest arrives
        live.log_lots(day_entries[half:])
        detection.advance_detectors(live)
        batch.log_lots(day_entries)
    detection.advance_detectors(batch)
    assert _rows(live) == _rows(batch)
    key = [(a.factor, a.kind, a.groups, a.onset, a.detected_on)
           for a in store_alerts.list_alerts(live)]
    assert key == [(a.factor, a.kind, a.groups, a.onset, a.detected_on)
                   for a in store_alerts.list_alerts(batch)]
    assert key and key[0][:3] == ("site", "mean", ["D"])
    live.close()
    batch.close()


def test_a_correction_of_a_past_day_is_recomputed_from_that_day(tmp_path):
    store = _store(tmp_path / "s.sqlite", 60)
    detection.advance_detectors(store)
    mid = store.conn.execute("SELECT id FROM measurements WHERE day = ? LIMIT 1",
                             (_day(20),)).fetchone()[0]
    store.correct(mid, "58.00", reason="test: keyed wrong", by="qe")
    (prog,) = store.conn.execute("SELECT dirty_from FROM detector_progress").fetchall()
    assert prog[0] == _day(20)  # recorded by the bucket triggers
    result = detection.advance_detectors(store)
    assert result.advanced == {"x": (DAY0 + timedelta(days=20), DAY0 + timedelta(days=59))}
    rows = _rows(store)
    store.conn.execute("DELETE FROM detector_progress")  # a fresh computation from day 0
    detection.advance_detectors(store)
    assert _rows(store) == rows
    store.close()


def test_alert_clears_when_back_within_the_gate_and_reopens(tmp_path):
    """Site B +2 g on days 40-59 and again from day 110: opened, acknowledged, cleared (at
    least clear_days after detection, once back within the gate), reopened; the trail keeps
    each event once."""
    def effect(s, d):
        return ((2.0 if s == "B" and (40 <= d < 60 or d >= 110) else 0.0, 1.0))
    store = _store(tmp_path / "s.sqlite", 130, effect)
    detection.advance_detectors(store, until=DAY0 + timedelta(days=65))
    (a,) = store_alerts.list_alerts(store)
    store_alerts.acknowledge(store, a.id, by="qe-anna", note="checking filler B")
    r = detection.advance_detectors(store)
    assert r.events == ["cleared", "reopened"]
    events = [(e.event, e.by) for e in store_alerts.alert_history(store, a.id)]
    assert [e for e, _ in events] == ["opened", "acknowledged", "cleared", "reopened"]
    cleared = store_alerts.alert_history(store, a.id)[2]
    day = date.fromisoformat(cleared.window.split()[-1])
    assert DAY0 + timedelta(days=60) < day <= DAY0 + timedelta(days=60 + 2 * 14)
    store.close()


def test_two_recorded_reviews_at_once_write_each_event_once(tmp_path):
    def effect(s, d):
        return ((1.5 if s == "C" and d >= 40 else 0.0, 2.0 if s == "A" and d >= 30
                                else 1.0))
    _store(tmp_path / "s.sqlite", 70, effect).close()
    solo = _copy(tmp_path / "s.sqlite", tmp_path / "solo.sqlite")
    with Store.open(solo) as s:
        review_engine.run_review(s)
        expected = s.conn.execute("SELECT count(*) FROM alert_events").fetchone()[0]
    assert expected >= 2
    barrier = threading.Barrier(2)
    errors: list[BaseException] = []

    def review() -> None:
        try:
            with Store.open(tmp_path / "s.sqlite") as s:
                barrier.wait()
                review_engine.run_review(s)
        except BaseException as exc:  # reported below
            errors.append(exc)

    threads = [threading.Thread(target=review) for _ in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    with Store.open(tmp_path / "s.sqlite") as s:
        got = s.conn.execute("SELECT event, count(*) FROM alert_events GROUP BY event").fetchall()
    assert dict(got) == {"opened": expected}


def test_a_lot_logged_in_the_interface_brings_the_detectors_current(tmp_path):
    """The interface's writer advances the detectors after the lot is stored: the board reads
    the state of the lot's day at once, and equals what a catch-up from nothing gives."""
    from lotwatch.tui.services import writers
    from lotwatch.tui.services.view_models import EntryDraft

    store = _store(tmp_path / "s.sqlite", 40)
    detection.advance_detectors(store)
    store.close()
    day = DAY0 + timedelta(days=40)
    draft = EntryDraft(values={"x": ["50.40"]}, tags={"site": "A", "line": "L1",
                                                       "shift": "early"},
                       lot="A-new", measured_at=f"{day.isoformat()}T09:00:00Z", note=None)
    writers.log_draft(tmp_path / "s.sqlite", draft, "qe")
    with Store.open(tmp_path / "s.sqlite") as s:
        assert {st.last_day for st in detection.detector_status(s)} == {day}
        live = _rows(s)
    with Store.open(tmp_path / "s.sqlite") as s:
        with s.write():
            s.conn.execute("DELETE FROM detector_progress")
        detection.advance_detectors(s)
        assert _rows(s) == live
