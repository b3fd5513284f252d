"""The demo store: deterministic, and it contains exactly the effects its docstring documents.

The effects are checked on summary statistics of the raw stored values with numpy (not through
the stats package): group means, standard deviations and the moment coefficient of skewness
g1 = m3 / m2^1.5 (e.g. NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.5.11). Bounds are
several standard errors wide; the data are fixed by the seed, so the checks are deterministic.
"""

from __future__ import annotations

from datetime import UTC, date, datetime, timedelta

import numpy as np
import polars as pl
import pytest
from lotwatch.store import Store
from lotwatch.store.demo import (
    DEMO_CHARACTERISTICS,
    DEMO_EFFECTS,
    DEMO_SEED,
    DRIFT_PER_WEEK,
    DRIFT_START_DAY,
    build_demo_store,
    default_end,
    demo_summary,
)

END = date(2026, 11, 30)
START = date.fromordinal(END.toordinal() - 181)
COMPARE = ["lot", "characteristic", "value_text", "original_text", "voided", "measured_at",
           "site", "line", "shift", "note", "logged_by"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = build_demo_store(tmp_path_factory.mktemp("demo") / "demo.sqlite", end=END)
    with Store.open(path, read_only=True) as s:
        frame = s.measurements_frame()
        summary = demo_summary(s)
        report = s.check()
    return path, frame, summary, report


def live(frame: pl.DataFrame, characteristic: str) -> pl.DataFrame:
    f = frame.filter((pl.col("characteristic") == characteristic) & ~pl.col("voided"))
    day = (pl.col("lot").str.extract(r"-(\d{8})-", 1).str.to_date("%Y%m%d") - pl.lit(START))
    return f.with_columns(day=day.dt.total_days())


def test_size_span_and_consistency(demo):
    _, frame, _, report = demo
    assert 20_000 <= frame.height <= 40_000
    assert report.ok
    days = frame["measured_at"].dt.date()
    assert days.min() == START and days.max() in (END, date.fromordinal(END.toordinal() + 1))
    assert sorted(frame["site"].unique()) == ["Hillside", "Lakeshore", "Riverbend"]
    assert frame["line"].n_unique() == 8 and sorted(frame["shift"].unique()) == [
        "early", "late", "night"]


def test_same_seed_same_data_and_other_seed_differs(demo, tmp_path):
    _, frame, _, _ = demo
    again = build_demo_store(tmp_path / "again.sqlite", end=END)
    other = build_demo_store(tmp_path / "other.sqlite", end=END, seed=DEMO_SEED + 1)
    with Store.open(again, read_only=True) as s:
        assert s.measurements_frame().select(COMPARE).equals(frame.select(COMPARE))
    with Store.open(other, read_only=True) as s:
        assert not s.measurements_frame().select(COMPARE).equals(frame.select(COMPARE))


def test_built_once_then_reused_fresh_rebuilds(tmp_path):
    path = tmp_path / "d.sqlite"
    build_demo_store(path, end=END)
    with Store.open(path) as s:
        s.set_setting("marker", "kept")
    assert build_demo_store(path, end=END) == path
    with Store.open(path, read_only=True) as s:
        assert s.get_setting("marker") == "kept"
    build_demo_store(path, end=END, fresh=True)
    with Store.open(path, read_only=True) as s:
        assert s.get_setting("marker") is None
    assert not (tmp_path / "d.sqlite.building").exists()


@pytest.mark.parametrize("now", ["2026-12-01T03:00:00+00:00", "2026-12-01T07:00:00+00:00",
                                 "2026-12-01T23:59:00+00:00"])
def test_default_end_puts_nothing_in_the_future(now):
    now_dt = datetime.fromisoformat(now)
    end = default_end(now_dt)
    last_night_ends = datetime(end.year, end.month, end.day, 22, tzinfo=UTC) + timedelta(hours=8)
    assert last_night_ends <= now_dt
    assert (now_dt.date() - end).days <= 2  # and it ends near today


def test_default_path_is_in_user_data_dir():
    from lotwatch.tui.services.paths import demo_store_path

    p = demo_store_path()
    assert p.name == "demo.sqlite" and p.parent.name == "lotwatch"


def test_effect_a_drift_on_one_line(demo):
    f = live(demo[1], "fill_volume")
    rb2 = pl.col("line") == "RB-2"
    early = f.filter(pl.col("day") < DRIFT_START_DAY)
    late = f.filter(pl.col("day") >= 140)  # last six weeks
    diff_early = early.filter(rb2)["value"].mean() - early.filter(~rb2)["value"].mean()
    diff_late = late.filter(rb2)["value"].mean() - late.filter(~rb2)["value"].mean()
    # documented: mean over days 140..181 of 0.15 * (day - 119) / 7
    expected = float(np.mean([DRIFT_PER_WEEK * (d - DRIFT_START_DAY) / 7 for d in range(140, 182)]))
    assert abs(diff_early) < 0.1
    assert abs(diff_late - expected) < 0.15
    min_shift = next(c.min_shift for c in DEMO_CHARACTERISTICS if c.name == "fill_volume")
    assert diff_late > min_shift  # practically significant


def test_effect_b_night_shift_spread(demo):
    f = live(demo[1], "cap_torque")
    night = f.filter(pl.col("shift") == "night")["value"].to_numpy()
    other = f.filter(pl.col("shift") != "night")["value"].to_numpy()
    ratio = night.std(ddof=1) / other.std(ddof=1)
    assert 2.2 < ratio < 2.8  # documented 0.20 / 0.08 = 2.5
    assert abs(night.mean() - other.mean()) < 0.02  # mean unchanged


def skewness(x: np.ndarray) -> float:
    d = x - x.mean()
    return float(np.mean(d**3) / np.mean(d**2) ** 1.5)


def test_effect_c_skewed_characteristic(demo):
    x = live(demo[1], "turbidity")["value"].to_numpy()
    # lognormal with sigma 0.5: skewness (e^s2 + 2) sqrt(e^s2 - 1) = 1.75 (Johnson, Kotz and
    # Balakrishnan, Continuous Univariate Distributions vol. 1, ch. 14)
    assert 1.3 < skewness(x) < 2.2
    for name in ("fill_volume", "cap_torque", "label_offset"):
        assert abs(skewness(live(demo[1], name)["value"].to_numpy())) < 0.3
    assert abs(np.median(x) - 0.25) < 0.02


def test_effect_d_coarse_resolution(demo):
    x = live(demo[1], "label_offset")["value"].to_numpy()
    assert len(np.unique(x)) <= 9
    assert np.allclose(x / 0.5, np.rint(x / 0.5))
    assert 0.5 > x.std(ddof=1)  # the resolution step exceeds the spread


def test_effect_e_no_other_group_differences(demo):
    frame = demo[1]
    for spec in DEMO_CHARACTERISTICS:
        f = live(frame, spec.name)
        if spec.name == "fill_volume":
            # the only planted mean differences are fill_volume's drift (line RB-2, and so
            # site Riverbend) from week 18; before it nothing differs
            f = f.filter(pl.col("day") < DRIFT_START_DAY)
        grand, sd = f["value"].mean(), f["value"].std()
        for factor in ("site", "line", "shift"):
            groups = f.group_by(factor).agg(pl.col("value").mean().alias("m"), pl.len().alias("n"))
            for m, n in zip(groups["m"], groups["n"], strict=True):
                # within 4 standard errors of the grand mean
                assert abs(m - grand) < 4 * sd / n**0.5, (spec.name, factor, m, grand)


def test_the_null_check_would_see_the_drift(demo):
    # the check above is not blind: on the drift weeks, line RB-2 stands out by far
    f = live(demo[1], "fill_volume").filter(pl.col("day") >= 140)
    grand, sd = f["value"].mean(), f["value"].std()
    rb2 = f.filter(pl.col("line") == "RB-2")["value"]
    assert abs(rb2.mean() - grand) > 4 * sd / rb2.len() ** 0.5


def test_effects_are_documented_as_data():
    names = {c.name for c in DEMO_CHARACTERISTICS}
    kinds = {e.kind for e in DEMO_EFFECTS}
    assert kinds == {"mean_drift", "spread", "skew", "resolution"}
    assert {e.characteristic for e in DEMO_EFFECTS} <= names
    direct = [e for e in DEMO_EFFECTS if not e.implied]
    assert len(direct) == 4


def test_notes_correction_and_void(demo):
    path, frame, _, _ = demo
    assert frame.filter(pl.col("note").is_not_null())["lot"].n_unique() == 5
    corrected = frame.filter(pl.col("value_text") != pl.col("original_text"))
    assert corrected.height == 1
    assert float(corrected["original_text"][0]) - float(corrected["value_text"][0]) == \
        pytest.approx(10.0)
    assert frame.filter(pl.col("voided")).height == 1
    with Store.open(path, read_only=True) as s:
        mid = int(corrected["id"][0])
        assert [h.action for h in s.history(mid)] == ["log", "correct"]


def test_summary_mentions_scenario_and_effects(demo):
    summary = demo[2]
    n_live = demo[1].filter(~pl.col("voided")).height
    assert f"{n_live:,} measurements" in summary
    assert "Riverbend" in summary and "fill_volume" in summary
    # days are plant days, and the summary says which zone (issue 11, item 3)
    days = sorted(demo[1].filter(~pl.col("voided"))["measured_at"].dt.date().unique())
    assert f"plant days {days[0]} to {days[-1]} (UTC)" in summary  # the demo plant keeps UTC
    for e in DEMO_EFFECTS:
        if not e.implied:
            assert e.description in summary
