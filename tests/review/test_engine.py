"""The review engine on real stores: window results against raw values (scipy and the stats
battery as oracles), the alert lifecycle, the practical gate, idempotence, incremental updates,
and the demo store's planted effects (store.demo.DEMO_EFFECTS)."""

from __future__ import annotations

import math
import tempfile
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import numpy as np
import pytest
import scipy.stats as ss
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lotwatch.stats import monitor as mon
from lotwatch.store import LotEntry, Store
from lotwatch.store import alerts as store_alerts
from lotwatch.tui.services import review_engine as eng

MONDAY = date(2026, 3, 2)


def _at(day: date, hour: int = 8) -> datetime:
    return datetime(day.year, day.month, day.day, hour, tzinfo=UTC)


def _entry(char: str, value: float, site: str, day: date, hour: int = 8, shift: str = "early",
           digits: int = 1) -> LotEntry:
    return LotEntry(char, [f"{value:.{digits}f}"], {"site": site, "line": f"{site}-1",
                                                     "shift": shift}, measured_at=_at(day, hour))


# ---------------------------------------------------------------- windows vs raw values


@st.composite
def store_case(draw):
    k = draw(st.integers(2, 4))
    n = draw(st.integers(15, 80))
    seed = draw(st.integers(0, 2**31 - 1))
    kind = draw(st.sampled_from(["trailing", "week", "last_n"]))
    days = draw(st.integers(5, 30))
    last_n = draw(st.integers(3, 15))
    as_of = MONDAY + timedelta(days=draw(st.integers(10, 45)))
    return k, n, seed, kind, days, last_n, as_of


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(store_case())
def test_store_windows_equal_raw_value_oracles(case):
    """For random small stores and windows, the bucket-sum results of every window equal
    scipy.stats.f_oneway (classical and Welch) and stats.run_battery's ANOVA table on the raw
    values that window holds (store.values_frame)."""
    from lotwatch.stats import run_battery

    k, n, seed, kind, days, last_n, as_of = case
    rng = np.random.default_rng(seed)
    with tempfile.TemporaryDirectory() as tmp:
        store = Store.create(Path(tmp) / "s.sqlite")
        store.add_characteristic("x", unit="mm", resolution="0.1")
        entries = [_entry("x", 10 + rng.normal(0, 1) + (0.5 if s == 0 else 0), f"S{s}",
                          MONDAY + timedelta(days=int(rng.integers(0, 50))), int(rng.integers(0, 24)))
                   for s in rng.integers(0, k, n)]
        store.log_lots(entries)
        store.set_setting("review.window", kind)
        store.set_setting("review.window_days", str(days))
        store.set_setting("review.last_n", str(last_n))
        store.set_setting("review.min_lots", "3")
        cfg = eng.review_settings(store)
        comps, _ = eng.comparisons_of(store, "x", "site")
        plan = mon.window_plan(as_of, cfg, 3)
        ws = eng.compute_windows(store, comps, plan, cfg, characteristic="x", factor="site")
        for w, win in enumerate(plan):
            if kind == "last_n":
                vals = store.values_frame("x", "site", until=win.end)
                firsts = dict(zip(ws.sums.levels[0], ws.sums.first_day[w][0], strict=True))
                vals = vals.filter([firsts.get(lv) is not None and at.date() >= firsts[lv]
                                    for lv, at in zip(vals["level"], vals["measured_at"], strict=True)])
            else:
                vals = store.values_frame("x", "site", since=win.start, until=win.end)
            groups = {lv: part["value"].to_numpy() for (lv,), part in
                      vals.partition_by("level", as_dict=True).items()}
            usable = {lv: g for lv, g in sorted(groups.items()) if len(g) >= 3}
            assert int(ws.n_total[w, 0]) == sum(len(g) for g in usable.values())
            if len(usable) < 2:
                assert ws.status[w, 0] == mon.NOT_ENOUGH
                continue
            ref = ss.f_oneway(*usable.values())
            assert ws.f[w, 0] == pytest.approx(ref.statistic, rel=1e-9)
            assert ws.p[w, 0] == pytest.approx(ref.pvalue, rel=1e-8)
            if all(np.var(g) > 0 for g in usable.values()):  # Welch needs every s_i > 0
                wref = ss.f_oneway(*usable.values(), equal_var=False)
                assert ws.welch_f[w, 0] == pytest.approx(wref.statistic, rel=1e-8)
            else:
                assert np.isnan(ws.welch_f[w, 0])
            bat = run_battery(list(usable.values()), list(usable), resolution="0.1", min_n=3)
            assert ws.f[w, 0] == pytest.approx(bat.anova.f, rel=1e-9)
            assert ws.ss_within[w, 0] == pytest.approx(bat.anova.ss_within, rel=1e-9)
            assert ws.grand_mean[w, 0] == pytest.approx(bat.anova.grand_mean, rel=1e-12)
        store.close()


# ---------------------------------------------------------------- alert lifecycle


def _weekly_store(path: Path, effect_weeks: set[int], weeks: int, *, shift: float = 3.0,
                  min_shift: float = 1.0, lsl=None, usl=None) -> Store:
    """Three sites, 10 lots per site per ISO week (sd 0.2); site B is `shift` higher in the
    given weeks (numbered from 1)."""
    rng = np.random.default_rng(5)
    store = Store.create(path)
    store.add_characteristic("x", unit="g", resolution="0.01", min_shift=min_shift, lsl=lsl,
                             usl=usl)
    entries = []
    for wk in range(1, weeks + 1):
        for site in "ABC":
            for i in range(10):
                day = MONDAY + timedelta(weeks=wk - 1, days=i % 7)
                v = 50 + rng.normal(0, 0.2) + (shift if site == "B" and wk in effect_weeks else 0)
                entries.append(_entry("x", v, site, day, 6 + i, digits=2))
    store.log_lots(entries)
    store.set_setting("review.window", "week")
    return store


def _sunday(week: int) -> date:
    return MONDAY + timedelta(weeks=week - 1, days=6)


def _state(result, factor="site"):
    (c,) = [c for c in result.comparisons if c.factor == factor]
    return c


def test_practical_gate_stops_tiny_significant_difference(tmp_path):
    """Site B is 0.2 g higher in every week: highly significant with 10 lots a week at sd 0.2...
    but below the gate of 1/8 of the 4 g tolerance (0.5 g), so no signal and no alert (the mean
    detector, designed for 0.5 g, drifts down at a shift under half of it)."""
    store = _weekly_store(tmp_path / "s.sqlite", set(range(1, 9)), 8, shift=0.2, min_shift=None,
                          lsl=48, usl=52)
    store.set_setting("review.window", "trailing")  # 28 days: 40 lots per site
    r = eng.run_review(store, as_of=_sunday(8))
    c = _state(r)
    assert c.q is not None and c.q < 1e-6
    assert c.gate == pytest.approx(0.5) and c.gate_source == "tolerance"
    assert abs(c.largest_shift) < 0.5
    assert not c.signal and c.alert_state is None
    store.close()


def test_not_enough_data_is_not_no_difference(tmp_path):
    store = Store.create(tmp_path / "s.sqlite")
    store.add_characteristic("x", unit="g", resolution="0.1")
    store.log_lots([_entry("x", 5 + i * 0.1, "A" if i < 8 else "B", MONDAY, 8 + i % 10)
                    for i in range(10)])
    r = eng.run_review(store, as_of=MONDAY)
    c = _state(r)
    assert c.status == mon.NOT_ENOUGH and c.p is None and c.q is None
    assert c.excluded == [("B", 2)]
    assert c.to_dict()["excluded"] == [{"level": "B", "lots": 2, "n": 2}]  # counted as lots
    assert r.family_size == 0
    store.close()


# ---------------------------------------------------------------- demo store


def test_demo_review_finds_the_drifting_line_and_nothing_else(demo_replay):
    """store.demo.DEMO_EFFECTS: line RB-2's fill_volume drifts up from week 18 by 0.15 mL a week
    (its size passes the 0.5 mL minimum shift on day 119 + 0.5/0.15 x 7 = 142.3); night-shift
    cap_torque has a wider spread from the start. The weekly reviews (detectors advanced to each
    Sunday) open: RB-2 higher (mean) detected within 7 days of that day, the night shift as
    spread, and nothing else but the effects the drift implies for site Riverbend."""
    from lotwatch.store.demo import DEMO_EFFECTS, DRIFT_PER_WEEK, DRIFT_START_DAY

    allowed = {(e.characteristic, e.factor, e.level) for e in DEMO_EFFECTS if e.factor}
    with Store.open(demo_replay.path, read_only=True) as store:
        alerts = store_alerts.list_alerts(store)
    for a in alerts:
        assert (a.characteristic, a.factor, a.groups[0]) in allowed, a
    got = {(a.characteristic, a.factor, a.kind): a for a in alerts}
    rb2 = got[("fill_volume", "line", "mean")]
    assert (rb2.groups, rb2.direction, rb2.state) == (["RB-2"], "higher", "open")
    passes = demo_replay.start + timedelta(days=math.ceil(DRIFT_START_DAY + 0.5 / DRIFT_PER_WEEK * 7))
    detected = date.fromisoformat(rb2.detected_on)
    assert demo_replay.onset < detected <= passes + timedelta(days=7)
    assert demo_replay.onset <= date.fromisoformat(rb2.onset) < detected
    night = got[("cap_torque", "shift", "spread")]
    assert (night.groups, night.direction) == (["night"], "wider")
    assert ("cap_torque", "shift", "mean") not in got
    for key in got:
        assert key[:2] in {("fill_volume", "line"), ("fill_volume", "site"),
                           ("cap_torque", "shift")}, key
    opened = [r for r in demo_replay.reviews
              if any(c.event == "opened" and c.factor == "line" for c in r.comparisons)]
    assert len(opened) == 1 and opened[0].as_of >= detected


def test_demo_unequal_spread_routes_to_welch(demo_replay):
    """Night-shift cap_torque has sd 0.20 against 0.08 (DEMO_EFFECTS 'spread'): the review's
    variance check (Bartlett from sums) reads Welch, the battery's Brown-Forsythe flags it and
    recommends Welch with Games-Howell; the mean is unchanged, so the alert is a spread one."""
    last = demo_replay.reviews[-1]
    (c,) = [c for c in last.comparisons if (c.characteristic, c.factor) == ("cap_torque", "shift")]
    assert c.test == "Welch" and c.bartlett_p < 1e-6
    assert c.alert_state == "open" and not c.signal
    assert (c.detector_kind, c.detector_group, c.detector_direction) == ("spread", "night", "wider")
    with Store.open(demo_replay.path, read_only=True) as store:
        kinds = {a.kind for a in store_alerts.list_alerts(store)
                 if (a.characteristic, a.factor) == ("cap_torque", "shift")}
        d = eng.comparison_detail(store, "cap_torque", "shift", as_of=last.as_of)
    assert kinds == {"spread"}
    b = d.battery
    assert b.brown_forsythe.p < 0.05
    assert (b.recommendation.test, b.recommendation.posthoc) == ("Welch ANOVA", "Games-Howell")
    assert b.welch.p == pytest.approx(c.welch_p, rel=1e-9)  # same window, raw vs sums


def test_demo_anom_flags_match_battery(demo_replay):
    """The review's ANOM flags (from sums) equal stats.analysis_of_means on the window's raw
    values (the battery's ANOM) for fill_volume by line."""
    last = demo_replay.reviews[-1]
    (c,) = [c for c in last.comparisons if (c.characteristic, c.factor) == ("fill_volume", "line")]
    with Store.open(demo_replay.path, read_only=True) as store:
        d = eng.comparison_detail(store, "fill_volume", "line", as_of=last.as_of)
    assert {g.group: g.flag for g in d.battery.anom.groups} == c.anom
    assert c.anom["RB-2"] == "above"
    assert d.trend.filter(d.trend["level"] == "RB-2")["mean"][-1] > d.grand_mean


def test_by_method_is_more_conservative(demo_replay):
    with Store.open(demo_replay.path, read_only=True) as store:
        bh = eng.run_review(store, as_of=demo_replay.reviews[-1].as_of, persist=False)
        by = eng.run_review(store, as_of=demo_replay.reviews[-1].as_of, persist=False,
                            fdr_method="by")
    qb = {(c.characteristic, c.factor): c.q for c in bh.comparisons}
    for c in by.comparisons:
        if c.q is not None:
            assert c.q >= qb[(c.characteristic, c.factor)] - 1e-15
    assert "Yekutieli" in by.family_statement and str(by.family_size) in by.family_statement


@pytest.mark.parametrize("kind", ["trailing", "last_n", "week"])
def test_detail_battery_sees_the_window_the_review_saw(tmp_path, kind):
    """comparison_detail's battery (raw values) and the review (bucket sums) agree on the latest
    window for every window kind: same N, same F (stats.run_battery as the oracle)."""
    store = _weekly_store(tmp_path / "s.sqlite", {2, 3}, 4)
    store.set_setting("review.window", kind)
    store.set_setting("review.last_n", "13")
    r = eng.run_review(store, as_of=_sunday(4) - timedelta(days=2), persist=False)
    c = _state(r)
    d = eng.comparison_detail(store, "x", "site", as_of=_sunday(4) - timedelta(days=2))
    assert d.battery.anova.n_total == c.n_total
    assert d.battery.anova.f == pytest.approx(c.f, rel=1e-9)
    assert d.window_label == c.window_label
    store.close()


def test_window_kind_override_reads_other_lots_and_leaves_the_setting(demo_replay):
    """comparison_detail(window=...) reads that window kind without changing the store's setting;
    the battery on it agrees with scipy.stats.f_oneway on the same raw values (oracle)."""
    import scipy.stats as sps
    from lotwatch.store import Store
    from lotwatch.tui.services import review_engine as eng

    from tests.review.conftest import DEMO_END

    with Store.open(demo_replay.pristine, read_only=True) as store:
        trailing = eng.comparison_detail(store, "fill_volume", "line", as_of=DEMO_END)
        last_n = eng.comparison_detail(store, "fill_volume", "line", as_of=DEMO_END,
                                       window="last_n")
        assert store.get_setting("review.window") is None
        assert eng.review_settings(store).window == "trailing"
        settings = eng.review_settings(store, window="last_n")
        latest = eng.mon.window_plan(DEMO_END, settings, 1)[-1]
        tr = eng.trend(store, "fill_volume", "line", as_of=DEMO_END, window="last_n")
        firsts = dict(zip(tr.stats.sums.levels[0], tr.stats.sums.first_day[-1][0], strict=False))
        # whole days from each line's first day that reaches its last 30 lots (bucket days)
        values = eng.window_values(store, "fill_volume", "line", latest, settings, firsts)
    assert trailing.window_label != last_n.window_label
    n_by_group = {g.name: g.n for g in last_n.battery.groups}
    # the last 30 lots of every line; a lot may carry replicate values, so n is at least 30
    assert min(n_by_group.values()) >= settings.last_n
    samples = [part["value"].to_numpy()
               for _, part in sorted(values.partition_by("level", as_dict=True).items())]
    assert last_n.battery.anova.f == pytest.approx(sps.f_oneway(*samples).statistic, rel=1e-9)
