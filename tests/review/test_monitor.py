"""Pure window maths of stats.monitor against outside oracles (scipy, statsmodels) and published
definitions."""

from __future__ import annotations

from datetime import date, timedelta

import numpy as np
import polars as pl
import pytest
import scipy.stats as ss
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lotwatch.stats import monitor as mon
from lotwatch.stats import weeks

DAY0 = date(2026, 1, 5)  # a Monday


def _buckets(raw: pl.DataFrame, origin: int) -> pl.DataFrame:
    """Per-day bucket sums of raw unit values, as the store keeps them (n, Σd, Σd² of d = u − origin)."""
    return (raw.with_columns((pl.col("u") - origin).alias("d"))
            .group_by("characteristic", "factor", "level", "day")
            .agg(pl.len().cast(pl.Int64).alias("n"), pl.col("d").sum().alias("sum_d"),
                 (pl.col("d") ** 2).sum().alias("sum_d2")))


@st.composite
def small_store(draw):
    """Random small stores: 1-5 levels, 10-120 values over 0-60 days, integer units."""
    k = draw(st.integers(1, 5))
    n = draw(st.integers(10, 120))
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    origin = int(draw(st.integers(-50, 50)))
    centre = origin + int(draw(st.integers(-20, 20)))
    spread = draw(st.floats(0.5, 30))
    days = rng.integers(0, 61, size=n)
    levels = rng.integers(0, k, size=n)
    offsets = rng.normal(0, spread, size=k)
    units = np.round(centre + offsets[levels] + rng.normal(0, spread, size=n)).astype(np.int64)
    raw = pl.DataFrame({
        "characteristic": ["x"] * n, "factor": ["site"] * n,
        "level": [f"S{v}" for v in levels],
        "day": [DAY0 + timedelta(days=int(d)) for d in days], "u": units,
    })
    res = draw(st.sampled_from([1.0, 0.1, 0.01, 0.5]))
    kind = draw(st.sampled_from(["trailing", "week"]))
    wdays = draw(st.integers(3, 40))
    min_n = draw(st.integers(2, 6))
    as_of = DAY0 + timedelta(days=draw(st.integers(0, 70)))
    return raw, origin, res, mon.ReviewSettings(window=kind, days=wdays, min_n=min_n), as_of


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(small_store())
def test_window_results_equal_scipy_on_raw_values(case):
    """Each window's F, p, Welch F/p from bucket sums equal scipy.stats.f_oneway on that window's
    raw values (oracle: scipy.stats.f_oneway, equal_var True/False), groups below min_n left out."""
    raw, origin, res, cfg, as_of = case
    comp = mon.Comparison("x", "site", origin, res)
    wins = mon.window_plan(as_of, cfg, 4)
    first, last = mon.window_span(wins, cfg)
    cube = mon.bucket_cube(_buckets(raw, origin), [comp], first_day=first, last_day=last)
    ws = mon.window_statistics(mon.window_sums(cube, wins, cfg), min_n=cfg.min_n)
    for w, win in enumerate(wins):
        part = raw.filter((pl.col("day") >= win.start) & (pl.col("day") <= win.end))
        groups = [g["u"].to_numpy() * res for _, g in sorted(part.group_by("level"), key=lambda t: t[0])]
        usable = [g for g in groups if len(g) >= cfg.min_n]
        assert int(ws.n_total[w, 0]) == sum(len(g) for g in usable)
        assert int(ws.k[w, 0]) == len(usable)
        if len(usable) < 2 or sum(len(g) for g in usable) - len(usable) < 1:
            assert ws.status[w, 0] == mon.NOT_ENOUGH
            assert np.isnan(ws.p[w, 0])
            continue
        if all(np.ptp(g) == 0 for g in usable):
            assert ws.status[w, 0] == mon.ZERO_VARIANCE
            continue
        ref = ss.f_oneway(*usable)
        if np.isnan(ref.pvalue):
            # scipy answers NaN when every group mean is equal (F = 0); P(F >= 0) = 1
            assert ws.f[w, 0] == pytest.approx(0.0, abs=1e-12) and ws.p[w, 0] == 1.0
            continue
        assert ws.f[w, 0] == pytest.approx(ref.statistic, rel=1e-9, abs=1e-12)
        assert ws.p[w, 0] == pytest.approx(ref.pvalue, rel=1e-8, abs=1e-15)
        # every group's values differ (np.var of equal floats such as 0.1 * 3 can be 1e-34)
        if all(np.ptp(g) > 0 for g in usable):
            wref = ss.f_oneway(*usable, equal_var=False)
            assert ws.welch_f[w, 0] == pytest.approx(wref.statistic, rel=1e-8)
            assert ws.welch_p[w, 0] == pytest.approx(wref.pvalue, rel=1e-7, abs=1e-14)
            bref = ss.bartlett(*usable)  # oracle: scipy.stats.bartlett
            # scipy answers NaN for a statistic of exactly 0 (equal variances); P(X2 >= 0) = 1
            bp = 1.0 if bref.statistic == 0 and np.isnan(bref.pvalue) else bref.pvalue
            assert ws.bartlett_p[w, 0] == pytest.approx(bp, rel=1e-7, abs=1e-14)
            welch = bp < 0.05
            assert ws.test[w, 0] == ("Welch" if welch else "F")
            assert ws.p_used[w, 0] == (ws.welch_p[w, 0] if welch else ws.p[w, 0])
        # largest shift: group mean minus the mean of all other observations (definition)
        diffs = [g.mean() - np.concatenate([h for h in usable if h is not g]).mean() for g in usable]
        ranked = sorted(diffs, key=abs, reverse=True)
        assert abs(ws.largest_shift[w, 0]) == pytest.approx(abs(ranked[0]), rel=1e-9, abs=1e-12)
        if abs(ranked[0]) - abs(ranked[1]) > 1e-9 * abs(ranked[0]):  # no tie (k = 2 always ties)
            assert ws.largest_shift[w, 0] == pytest.approx(ranked[0], rel=1e-9, abs=1e-12)
        # effect sizes: eta² = SSb/SSt; omega² (Hays 1963) from the same table
        allv = np.concatenate(usable)
        sst = ((allv - allv.mean()) ** 2).sum()
        ssw = sum(((g - g.mean()) ** 2).sum() for g in usable)
        kk, nn = len(usable), len(allv)
        msw = ssw / (nn - kk)
        assert ws.eta_squared[w, 0] == pytest.approx((sst - ssw) / sst, rel=1e-9, abs=1e-12)
        assert ws.omega_squared[w, 0] == pytest.approx(
            (sst - ssw - (kk - 1) * msw) / (sst + msw), rel=1e-9, abs=1e-12)


def test_against_statsmodels_anova_table():
    """F and p match statsmodels' anova_oneway with use_var='equal' (oracle: statsmodels)."""
    from statsmodels.stats.oneway import anova_oneway

    rng = np.random.default_rng(7)
    n = 300
    lv = rng.integers(0, 4, n)
    u = np.round(500 + lv * 0.8 + rng.normal(0, 3, n)).astype(np.int64)
    raw = pl.DataFrame({"characteristic": "x", "factor": "line", "level": [f"L{v}" for v in lv],
                        "day": [DAY0 + timedelta(days=int(d)) for d in rng.integers(0, 28, n)],
                        "u": u})
    comp = mon.Comparison("x", "line", 500, 0.1)
    cfg = mon.ReviewSettings()
    wins = mon.window_plan(DAY0 + timedelta(days=27), cfg, 1)
    cube = mon.bucket_cube(_buckets(raw, 500), [comp], first_day=DAY0, last_day=wins[0].end)
    ws = mon.window_statistics(mon.window_sums(cube, wins, cfg), min_n=5)
    ref = anova_oneway(u * 0.1, lv, use_var="equal")
    assert ws.f[0, 0] == pytest.approx(ref.statistic, rel=1e-9)
    assert ws.p[0, 0] == pytest.approx(ref.pvalue, rel=1e-9)
    wref = anova_oneway(u * 0.1, lv, use_var="unequal", welch_correction=True)
    assert ws.welch_f[0, 0] == pytest.approx(wref.statistic, rel=1e-9)
    assert ws.welch_df2[0, 0] == pytest.approx(wref.df[1], rel=1e-9)


def test_last_n_window_takes_whole_days_back_to_n_lots():
    """last_n: per group, the fewest most-recent whole days holding at least N values
    (this tool's definition; counted by hand here)."""
    rows = []
    for d in range(10):  # level A: 3 values a day; level B: 1 value a day
        rows += [("x", "site", "A", DAY0 + timedelta(days=d), 10 + d)] * 3
        rows.append(("x", "site", "B", DAY0 + timedelta(days=d), 20 + d))
    raw = pl.DataFrame(rows, schema=["characteristic", "factor", "level", "day", "u"], orient="row")
    cfg = mon.ReviewSettings(window="last_n", last_n=5)
    comp = mon.Comparison("x", "site", 0, 1.0)
    wins = mon.window_plan(DAY0 + timedelta(days=9), cfg, 2)
    cube = mon.bucket_cube(_buckets(raw, 0), [comp], first_day=DAY0, last_day=wins[-1].end)
    gs = mon.window_sums(cube, wins, cfg)
    # latest window ends day 9: A needs days 8-9 (6 values), B needs days 5-9 (5 values)
    assert gs.levels[0] == ["A", "B"]
    assert gs.n[1, 0].tolist() == [6, 5]
    assert gs.s1[1, 0].tolist() == [3 * (18 + 19), sum(range(25, 30))]
    assert gs.first_day[1][0] == [DAY0 + timedelta(days=8), DAY0 + timedelta(days=5)]
    # previous window ends day 2: A has days 1-2, B only 3 values in all
    assert gs.n[0, 0].tolist() == [6, 3]


def test_iso_weeks():
    """ISO 8601 weeks (datetime.date.fromisocalendar is the oracle)."""
    assert weeks.parse_iso_week("2026-W48") == (date(2026, 11, 23), date(2026, 11, 29))
    assert weeks.iso_week_label(date(2027, 1, 1)) == "2026-W53"  # 2026 has 53 ISO weeks
    with pytest.raises(ValueError, match="ISO week"):
        weeks.parse_iso_week("2026-48")
    plan = mon.window_plan(date(2026, 11, 25), mon.ReviewSettings(window="week"), 2)
    assert [w.label for w in plan] == ["2026-W47", "2026-W48"]
    assert plan[-1].end == date(2026, 11, 25)  # cut at the review day


@given(st.lists(st.one_of(st.floats(0, 1), st.just(float("nan"))), min_size=1, max_size=40),
       st.sampled_from(["bh", "by"]))
def test_family_fdr_matches_scipy(ps, method):
    """BH and BY adjusted p equal scipy.stats.false_discovery_control on the non-NaN family."""
    p = np.array(ps)
    q, size = mon.family_fdr(p[None, :], method)
    valid = ~np.isnan(p)
    assert size[0] == valid.sum()
    assert np.all(np.isnan(q[0, ~valid]))
    if valid.any():
        ref = ss.false_discovery_control(p[valid], method=method)
        np.testing.assert_allclose(q[0, valid], ref, rtol=1e-12, atol=1e-15)


def test_family_fdr_rows_are_separate_families():
    """Each window row is its own family (BH by hand: m = 3, p = .01 .02 .03 → q = .03 each)."""
    p = np.array([[0.01, 0.02, 0.03], [0.01, np.nan, np.nan]])
    q, size = mon.family_fdr(p, "bh")
    np.testing.assert_allclose(q[0], [0.03, 0.03, 0.03])
    assert q[1, 0] == pytest.approx(0.01)
    assert size.tolist() == [3, 1]


def test_detectable_shift_matches_power_analysis():
    """The vectorised 80%-power detectable shift equals stats.power_analysis's (brentq on the
    noncentral F) for the same group sizes and SD."""
    from lotwatch.stats.power import power_analysis

    rng = np.random.default_rng(3)
    rows = []
    for lv, n in (("A", 12), ("B", 20), ("C", 7)):
        for _ in range(n):
            rows.append(("x", "site", lv, DAY0, int(rng.normal(100, 5))))
    raw = pl.DataFrame(rows, schema=["characteristic", "factor", "level", "day", "u"], orient="row")
    cfg = mon.ReviewSettings()
    comp = mon.Comparison("x", "site", 100, 0.1)
    wins = mon.window_plan(DAY0, cfg, 1)
    cube = mon.bucket_cube(_buckets(raw, 100), [comp], first_day=wins[0].start, last_day=DAY0)
    ws = mon.window_statistics(mon.window_sums(cube, wins, cfg), min_n=5)
    got = mon.detectable_shift(ws)[0, 0]
    ref = power_analysis([12, 20, 7], float(np.sqrt(ws.ms_within[0, 0]))).detectable_shift_80
    assert got == pytest.approx(ref, rel=1e-5)  # ncfdtrinc solves to ~1e-6 relative


def test_practical_gate_sources():
    """min_shift first, then 1/8 of the tolerance (this tool's default), then the setting."""
    cfg = mon.ReviewSettings()
    assert mon.practical_gate(mon.Comparison("x", "f", 0, 1, 1, 9, 0.5), cfg) == (0.5, "min_shift")
    assert mon.practical_gate(mon.Comparison("x", "f", 0, 1, 1, 9), cfg) == (1.0, "tolerance")
    assert mon.practical_gate(mon.Comparison("x", "f", 0, 1, None, 9), cfg) == (None, "detectable")
    skip = mon.ReviewSettings(no_limits_gate="skip")
    assert mon.practical_gate(mon.Comparison("x", "f", 0, 1), skip) == (None, "skip")


def test_settings_from_lookup_and_errors():
    table = {"review.window_days": "14", "review.fdr_method": "by"}
    s = mon.ReviewSettings.from_lookup(table.get)
    assert (s.days, s.fdr_method, s.step_days) == (14, "by", 7)
    with pytest.raises(ValueError, match="review.window_days"):
        mon.ReviewSettings.from_lookup({"review.window_days": "four"}.get)
    with pytest.raises(ValueError, match="review.fdr_level"):
        mon.ReviewSettings.from_lookup({"review.fdr_level": "1.5"}.get)


def test_signals_apply_practical_gate():
    """A tiny but significant difference (q small, shift below min_shift) is not a signal."""
    rng = np.random.default_rng(11)
    rows = []
    for lv, mu in (("A", 1000.0), ("B", 1003.0)):  # 0.3 units of 0.1 apart, sd 0.2 units
        for u in np.round(rng.normal(mu, 2, 400)).astype(int):
            rows.append(("x", "site", lv, DAY0, int(u)))
    raw = pl.DataFrame(rows, schema=["characteristic", "factor", "level", "day", "u"], orient="row")
    cfg = mon.ReviewSettings()
    comps = [mon.Comparison("x", "site", 1000, 0.1, min_shift=1.0)]
    wins = mon.window_plan(DAY0, cfg, 1)
    cube = mon.bucket_cube(_buckets(raw, 1000), comps, first_day=wins[0].start, last_day=DAY0)
    ws = mon.window_statistics(mon.window_sums(cube, wins, cfg), min_n=5)
    q, _ = mon.family_fdr(ws.p)
    assert q[0, 0] < 1e-6  # clearly significant
    sig, gates = mon.signals(ws, q, cfg, mon.detectable_shift(ws))
    assert gates[0, 0] == 1.0 and abs(ws.largest_shift[0, 0]) < 0.5
    assert not sig[0, 0]
    comps2 = [mon.Comparison("x", "site", 1000, 0.1, min_shift=0.1)]
    ws2 = mon.window_statistics(mon.window_sums(
        mon.bucket_cube(_buckets(raw, 1000), comps2, first_day=wins[0].start, last_day=DAY0),
        wins, cfg), min_n=5)
    sig2, _ = mon.signals(ws2, q, cfg, mon.detectable_shift(ws2))
    assert sig2[0, 0]


def test_windows_before_and_after_the_data_are_empty():
    """A window that ends before the first bucket day (or starts after the last) holds nothing
    (regression: a negative index must not wrap around to the end of the data)."""
    raw = pl.DataFrame({"characteristic": "x", "factor": "site", "level": ["A", "B"] * 10,
                        "day": [DAY0 + timedelta(days=i % 5) for i in range(20)], "u": list(range(20))})
    comp = mon.Comparison("x", "site", 0, 1.0)
    for kind in ("trailing", "last_n", "week"):
        cfg = mon.ReviewSettings(window=kind, days=7, last_n=3)
        wins = [mon.Window("before", "b", DAY0 - timedelta(days=20), DAY0 - timedelta(days=10)),
                mon.Window("after", "a", DAY0 + timedelta(days=30), DAY0 + timedelta(days=40))]
        cube = mon.bucket_cube(_buckets(raw, 0), [comp], first_day=DAY0,
                               last_day=DAY0 + timedelta(days=4))
        gs = mon.window_sums(cube, wins, cfg)
        assert gs.n[0].sum() == 0
        if kind == "last_n":  # the last 3 lots before day 40 are still there
            assert gs.n[1, 0].tolist() == [4, 4]
        else:
            assert gs.n[1].sum() == 0


def test_bucket_cube_does_not_depend_on_row_order():
    """The store returns buckets sorted; any order must give the same cube."""
    rng = np.random.default_rng(2)
    n = 400
    raw = pl.DataFrame({"characteristic": rng.choice(["a", "b"], n).tolist(),
                        "factor": rng.choice(["site", "line"], n).tolist(),
                        "level": rng.choice(["L1", "L2", "L3"], n).tolist(),
                        "day": [DAY0 + timedelta(days=int(d)) for d in rng.integers(0, 30, n)],
                        "u": rng.integers(-50, 50, n)})
    b = _buckets(raw, 0)
    comps = [mon.Comparison(c, f, 0, 1.0) for c in "ab" for f in ("site", "line")]
    last = DAY0 + timedelta(days=29)
    one = mon.bucket_cube(b.sort("characteristic", "factor", "level", "day"), comps,
                          first_day=DAY0, last_day=last)
    two = mon.bucket_cube(b.sample(fraction=1.0, shuffle=True, seed=3), comps, first_day=DAY0,
                          last_day=last)
    assert one.levels == two.levels
    for x, y in ((one.cum_n, two.cum_n), (one.cum_s1, two.cum_s1), (one.cum_s2, two.cum_s2)):
        np.testing.assert_array_equal(x, y)
    assert one.cum_n[:, :, -1].sum() == n
