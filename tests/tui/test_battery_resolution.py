"""The battery's text report (``lotwatch analyze --resolution``, the weekly report's full battery)
writes measured quantities with the resolution's decimals plus one, like every other screen, and
its capability table keeps each number in its own column (issue 11, items 1 and 4).

Oracles: numpy for means and moving ranges; d2 = 1.128 for moving ranges of two (common
practice); Bissell (1990) for the Cpk interval, Cpk +- z * sqrt(1/(9n) + Cpk^2/(2(n-1))); two
decimals for capability indices (common practice)."""

from __future__ import annotations

import math
import re

import numpy as np
from lotwatch.stats.battery import run_battery
from lotwatch.tui.render.battery_text import render_battery
from scipy.stats import norm

LSL, USL = 1.6, 2.4


def _groups() -> tuple[list[np.ndarray], list[str]]:
    rng = np.random.default_rng(11)
    sds = (0.08, 0.08, 0.21)  # a wide night group, as in the demo's planted effect
    groups = [np.round(rng.normal(2.0, sd, 60), 2) for sd in sds]  # resolution 0.01
    return groups, ["early", "late", "night"]


def _section(text: str, title: str) -> list[str]:
    lines = text.splitlines()
    start = lines.index(title) + 2
    end = next((i for i in range(start, len(lines)) if not lines[i].strip()), len(lines))
    return lines[start:end]


def test_measured_quantities_follow_the_resolution() -> None:
    groups, names = _groups()
    text = render_battery(run_battery(groups, names, resolution="0.01", lsl=LSL, usl=USL),
                          resolution="0.01")
    rows = {line.split()[0]: line.split() for line in _section(
        text, "Groups, 0.95 confidence intervals of the mean")[1:] if line.split()[0] in names}
    for g, name in zip(groups, names, strict=True):
        row = rows[name]
        assert row[2] == f"{g.mean():.3f}", row  # numpy mean, 2 + 1 decimals
        assert row[3] == f"{g.std(ddof=1):.3f}", row
    # the pairwise differences too, never six significant digits
    tukey = _section(text, "Tukey-Kramer comparisons")[1:]
    assert tukey and all(re.fullmatch(r"-?\d+\.\d{3}", line.split()[3]) for line in tukey)
    assert re.search(r"grand mean \d+\.\d{3},", text)
    assert max(len(line) for line in text.splitlines()) <= 80


def test_capability_columns_stay_apart_and_match_the_oracle() -> None:
    groups, names = _groups()
    r = run_battery(groups, names, resolution="0.01", lsl=LSL, usl=USL)
    text = render_battery(r, resolution="0.01")
    table = _section(text, "Capability of each group from its own spread")
    rows = [line.split() for line in table if line.split() and line.split()[0] in names]
    assert len(rows) == 3
    z = norm.ppf(0.975)
    for g, row in zip(groups, rows, strict=True):
        assert len(row) == 7, row  # group Cp Cpk interval Pp Ppk within-SD: never run together
        n, mean = len(g), g.mean()
        sd_within = np.abs(np.diff(g)).mean() / 1.128  # individuals: average moving range / d2
        cpk = min(USL - mean, mean - LSL) / (3 * sd_within)
        half = z * math.sqrt(1 / (9 * n) + cpk ** 2 / (2 * (n - 1)))  # Bissell 1990
        assert row[2] == f"{cpk:.2f}", (row, cpk)
        assert row[3] == f"{cpk - half:.2f}..{cpk + half:.2f}", (row, cpk, half)
        ppk = min(USL - mean, mean - LSL) / (3 * g.std(ddof=1))
        assert row[5] == f"{ppk:.2f}", (row, ppk)
        assert row[6] == f"{sd_within:.3f}", (row, sd_within)


def test_lots_are_counted_as_lots_beside_values() -> None:
    """With two replicates per lot the group table shows both counts (issue 11, item 2)."""
    groups, names = _groups()
    lots = [[f"{name}-{i // 2}" for i in range(len(g))] for g, name in zip(groups, names,
                                                                             strict=True)]
    text = render_battery(run_battery(groups, names, resolution="0.01", lots=lots),
                          resolution="0.01")
    table = _section(text, "Groups, 0.95 confidence intervals of the mean")
    assert table[0].split()[:3] == ["group", "lots", "values"]
    for line in table[1:]:
        if line.split()[0] in names:
            assert line.split()[1:3] == ["30", "60"], line  # 60 values in 30 lots
    assert max(len(line) for line in text.splitlines()) <= 80
