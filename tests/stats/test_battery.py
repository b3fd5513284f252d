"""The whole battery: agreement with scipy on ordinary data, and a status for every degenerate case."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lotwatch.stats.battery import run_battery
from lotwatch.tui.caution import CAUTION
from lotwatch.tui.render.battery_text import render_battery
from scipy import stats as sps

HANDBOOK = [[6.9, 5.4, 5.8, 4.6, 4.0], [8.3, 6.8, 7.8, 9.2, 6.5], [8.0, 10.5, 8.1, 6.9, 9.3]]


def twelve_groups(seed: int = 3, n: int = 12) -> tuple[list[np.ndarray], list[str]]:
    rng = np.random.default_rng(seed)
    names = [f"line {i:02d}" for i in range(12)][::-1]  # given out of order
    return [np.round(rng.normal(50 + 0.4 * (i % 3), 1.0, size=n), 1) for i in range(12)], names


def test_battery_agrees_with_scipy() -> None:
    samples, names = twelve_groups()
    r = run_battery(samples, names, resolution="0.1", reference="line 00", lsl=45, usl=55,
                    shift=1.0)
    assert r.status == "ok" and r.anova.exact
    assert [g.name for g in r.groups] == sorted(names)  # groups sorted by name
    ordered = [samples[names.index(g.name)] for g in r.groups]
    # oracles: scipy.stats f_oneway (classical and Welch), kruskal, levene(median), bartlett
    assert r.anova.f == pytest.approx(sps.f_oneway(*ordered).statistic, rel=1e-10)
    assert r.welch.f == pytest.approx(sps.f_oneway(*ordered, equal_var=False).statistic,
                                      rel=1e-10)
    assert r.kruskal.statistic == pytest.approx(sps.kruskal(*ordered).statistic, rel=1e-10)
    assert r.brown_forsythe.statistic == pytest.approx(
        sps.levene(*ordered, center="median").statistic, rel=1e-9)
    assert r.bartlett.statistic == pytest.approx(sps.bartlett(*ordered).statistic, rel=1e-9)
    assert len(r.tukey) == len(r.games_howell) == len(r.dunn) == 66
    assert r.dunnett is not None and len(r.dunnett) == 11
    assert set(r.letters) == set(names)
    assert r.capability is not None and len(r.capability) == 12
    for g, a in zip(r.groups, ordered, strict=True):
        others = np.concatenate([b for b in ordered if b is not a])
        assert g.diff_from_others == pytest.approx(a.mean() - others.mean(), rel=1e-9, abs=1e-12)
        half = sps.t.ppf(0.975, a.size - 1) * a.std(ddof=1) / math.sqrt(a.size)
        assert (g.ci_low, g.ci_high) == pytest.approx((a.mean() - half, a.mean() + half))
    d = r.to_dict()
    text = json.dumps(d, allow_nan=False)
    assert json.loads(text)["anova"]["f"] == r.anova.f  # full double precision survives JSON


def test_render_fits_80_columns_and_escapes_names() -> None:
    names = ["L1", "L2\x1b[31mRED\x07", "L3 with a rather long name indeed"]
    r = run_battery(HANDBOOK, names, resolution="0.1", reference="L1", lsl=2, usl=12, shift=2)
    out = render_battery(r, unit="mm")
    assert all(len(line) <= 80 for line in out.splitlines())
    # the escape sequence and BEL are removed (tui.render.safe_text, the one sanitizer)
    assert "\x1b" not in out and "\x07" not in out and "L2RED" in out
    assert CAUTION in out.replace("\n", " ")
    for part in ("Between groups", "Within groups", "Total", "Critical F", "Recommended:",
                 "Tukey-Kramer", "Games-Howell", "Dunn", "Dunnett", "eta-squared",
                 "80% power", "Cpk"):
        assert part in out, part


@pytest.mark.parametrize(("samples", "names", "status"), [
    ([], [], "no groups"),
    ([[1.0, 2.0, 3.0]], ["A"], "fewer than two groups"),
    ([[1.0, 2.0, 3.0], [4.0]], ["A", "B"], "fewer than two groups"),  # single-lot group excluded
    ([[2.0, 2.0], [2.0, 2.0, 2.0]], ["A", "B"], "all values equal"),
    ([[1.0, 1.0], [2.0, 2.0]], ["A", "B"], "zero within-group variance"),
    ([[np.nan, np.inf], [1.0, 2.0]], ["A", "B"], "fewer than two groups"),
    ([[], []], ["A", "B"], "fewer than two groups"),
])
def test_degenerate_inputs_give_status(samples, names, status) -> None:
    r = run_battery(samples, names, resolution="0.5", reference="A", lsl=0, usl=5, shift=1)
    assert r.status == status
    json.dumps(r.to_dict(), allow_nan=False)
    out = render_battery(r)
    assert all(len(line) <= 80 for line in out.splitlines())
    assert r.tukey == [] and r.recommendation.test == "none"


def test_non_finite_values_dropped_with_note_and_small_groups_excluded() -> None:
    samples = [[1.0, 2.0, np.nan, 3.0], [2.0, 3.0, 4.0, np.inf], [5.0]]
    r = run_battery(samples, ["B", "A", "C"])
    assert r.status == "ok"
    assert [g.name for g in r.groups] == ["A", "B"] and [g.n for g in r.groups] == [3, 3]
    assert [(e.name, e.n) for e in r.excluded] == [("C", 1)]
    assert "fewer than 2" in r.excluded[0].reason
    assert sum("non-finite" in n for n in r.notes) == 2


def test_off_grid_resolution_falls_back_with_note() -> None:
    r = run_battery(HANDBOOK, ["a", "b", "c"], resolution="0.5")
    assert r.status == "ok" and not r.anova.exact
    assert any("not a multiple" in n for n in r.notes)
    assert r.anova.f == pytest.approx(sps.f_oneway(*HANDBOOK).statistic, rel=1e-12)


def test_reference_not_present_is_noted() -> None:
    r = run_battery(HANDBOOK, ["a", "b", "c"], reference="zzz")
    assert r.dunnett is None and any("zzz" in n for n in r.notes)


def test_zero_shift_is_ignored_with_note() -> None:
    r = run_battery(HANDBOOK, ["a", "b", "c"], shift=0.0)
    assert r.power.shift is None and r.power.detectable_shift_80 is not None
    assert any("ignored" in n for n in r.notes)


def test_bad_arguments_are_refused() -> None:
    with pytest.raises(ValueError, match="names"):
        run_battery(HANDBOOK, ["a", "b"])
    with pytest.raises(ValueError, match="duplicate"):
        run_battery(HANDBOOK, ["a", "a", "b"])
    with pytest.raises(ValueError, match="USL"):
        run_battery(HANDBOOK, ["a", "b", "c"], lsl=5, usl=1)


VALUE = st.one_of(st.sampled_from([0.0, 1.0, 1.5, -2.0, 1e6, np.nan, np.inf, -np.inf]),
                  st.floats(-100, 100, allow_nan=False).map(lambda x: round(x, 1)))


@settings(max_examples=50, deadline=None)
@given(st.lists(st.lists(VALUE, max_size=6), max_size=5), st.sampled_from([None, "0.1"]),
       st.booleans())
def test_battery_never_raises_on_awkward_data(groups, resolution, with_limits) -> None:
    names = [f"g{i}" for i in range(len(groups))]
    r = run_battery(groups, names, resolution=resolution, reference=names[0] if names else None,
                    lsl=-50.0 if with_limits else None, usl=50.0 if with_limits else None,
                    shift=1.0)
    assert isinstance(r.status, str) and r.status
    json.dumps(r.to_dict(), allow_nan=False)
    assert all(len(line) <= 80 for line in render_battery(r).splitlines())
    if r.status == "ok":
        assert r.anova.f is not None and math.isfinite(r.anova.f) and 0 <= r.anova.p <= 1
