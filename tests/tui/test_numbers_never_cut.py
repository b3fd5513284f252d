"""Numbers are shown whole, in one style (issue 11, items 4 and 11).

Oracles: numpy for the residual SD (sqrt of MS_within, Montgomery ch. 3); the p-value style is
a lotwatch decision ("p < 0.0001", never "p = <0.0001"; common practice in reports)."""

from __future__ import annotations

import math
import re

import numpy as np
from lotwatch.stats.battery import run_battery
from lotwatch.tui.render.battery_text import render_battery
from lotwatch.tui.render.numbers import fixed, lots_and_values, measured, p_is, pval


def test_one_formatter_rules() -> None:
    assert fixed(-0.0004, 2) == "0.00" and fixed(-0.004, 2) == "0.00"  # never "-0.00"
    assert fixed(-0.006, 2) == "-0.01"
    assert measured(500.04, "0.1") == "500.04"  # resolution decimals + 1, not 4 sig. figures
    assert p_is(3e-9) == "p < 0.0001" and p_is(0.01234) == "p = 0.0123"
    assert p_is(4.4e-112, "q") == "q < 0.0001"
    assert pval(4.4e-112) == "<0.0001" and pval(0.5) == "0.5000"
    assert lots_and_values(943, 1886) == "943 lots, 1,886 values"
    assert lots_and_values(15, 15) == "15 lots"


def test_battery_text_wraps_and_never_cuts_a_number() -> None:
    rng = np.random.default_rng(5)
    groups = [rng.normal(1000.0 + k * 0.05, 0.1416, 40) for k in range(3)]
    r = run_battery(groups, ["alpha-site-long-name", "beta", "gamma"])
    text = render_battery(r)
    assert max(len(line) for line in text.splitlines()) <= 80
    ms_within = sum(((g - g.mean()) ** 2).sum() for g in groups) / (120 - 3)  # numpy oracle
    resid = f"{math.sqrt(ms_within):.6g}"
    assert f"residual SD = {resid}" in " ".join(text.split())
    # with the data's unit and resolution: the resolution's decimals plus one, then the unit
    with_unit = " ".join(render_battery(r, unit="mL", resolution="0.1").split())
    assert f"residual SD = {math.sqrt(ms_within):.2f} mL" in with_unit
    assert "p = <" not in text and "F crit" not in text
    assert "Critical F" in text or "critical F" in text
    assert not re.search(r"\b-0\.0+\b", text)
