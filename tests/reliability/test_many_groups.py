"""Memory linear in the number of groups.

``analyze`` of a 35 KB file with 1,000 groups was killed at 16 GB: all-pairs comparisons of k
groups make k(k-1)/2 pairs (499,500 for k = 1,000; a count any combinatorics text gives), each
with its own studentized-range quadrature. All-pairs methods now stop at MAX_PAIRWISE_GROUPS with
a note saying so; Dunnett (k - 1 comparisons) and analysis of means (k groups against the grand
mean) still run. Letters stop at one alphabet of groups and at a bounded number of columns
(Piepho 2004's insert-and-absorb grows as 2^(k/2) for a perfect matching of significant pairs).
"""

from __future__ import annotations

import resource
import subprocess
from pathlib import Path

import numpy as np
import pytest
from lotwatch.stats.battery import run_battery
from lotwatch.stats.letters import MAX_LETTER_GROUPS, compact_letters, letter_columns
from lotwatch.stats.posthoc import MAX_PAIRWISE_GROUPS
from lotwatch.stats.results import PairComparison

from tests.reliability.helpers import cli_cmd, subprocess_env

MEMORY_LIMIT = 2 * 1024**3  # address space for the whole interpreter with numpy and scipy


def _limit() -> None:
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, MEMORY_LIMIT))


def _groups(k: int, per: int = 8) -> tuple[list[np.ndarray], list[str]]:
    rng = np.random.default_rng(12)
    return ([np.round(rng.normal(10 + (g % 7) * 0.5, 1.0, per), 1) for g in range(k)],
            [f"G{g:04d}" for g in range(k)])


@pytest.mark.slow  # about 10 s for the interpreter and 1,000 groups
def test_analyze_1000_groups_in_bounded_memory(tmp_path: Path) -> None:
    arrays, names = _groups(1000)
    src = tmp_path / "wide.csv"
    src.write_text("line,volume\n" + "".join(f"{n},{v}\n" for n, a in zip(names, arrays,
                                                                           strict=True)
                                             for v in a))
    assert src.stat().st_size < 120_000
    res = subprocess.run(cli_cmd("analyze", src, "--value", "volume", "--by", "line",
                                 "--reference", names[0]),
                         capture_output=True, text=True, timeout=300, env=subprocess_env(),
                         preexec_fn=_limit)
    assert res.returncode == 0, res.stdout[-2000:] + res.stderr[-2000:]
    out = res.stdout
    assert "499,500 pairs" in out and f"up to {MAX_PAIRWISE_GROUPS} groups" in out
    assert "Traceback" not in res.stderr


def test_battery_beyond_the_pairwise_limit_says_so_and_keeps_the_rest() -> None:
    k = MAX_PAIRWISE_GROUPS + 1
    arrays, names = _groups(k)
    res = run_battery(arrays, names, reference=names[0], resolution="0.1")
    assert res.anova.df_between == k - 1
    assert res.letters == {}  # no letters without the pairs they summarise
    assert res.anom.critical_value is not None and len(res.anom.groups) == k
    assert res.dunnett is not None and len(res.dunnett) == k - 1
    text = " ".join(res.notes)
    assert f"{k * (k - 1) // 2:,} pairs" in text and "Tukey-Kramer: not computed" in text


def test_battery_at_the_pairwise_limit_still_compares_every_pair() -> None:
    arrays, names = _groups(MAX_PAIRWISE_GROUPS)
    res = run_battery(arrays, names)
    k = MAX_PAIRWISE_GROUPS
    assert len(res.tukey) == len(res.games_howell) == k * (k - 1) // 2


def test_letters_refuse_more_groups_than_an_alphabet_and_exploding_patterns() -> None:
    with pytest.raises(ValueError, match="up to 26 groups"):
        letter_columns(MAX_LETTER_GROUPS + 1, [])
    # perfect matching: pairs (0,1), (2,3), ... significant; Piepho's columns double per pair
    k = MAX_LETTER_GROUPS
    matching = [(i, i + 1) for i in range(0, k, 2)]
    with pytest.raises(ValueError, match="read the pairwise table"):
        letter_columns(k, matching)
    # an ordinary pattern is unchanged: 3 groups, only the extremes differ -> ab, a, b
    pairs = [PairComparison("A", "C", 2.0, 1.0, 3.0, 0.01, True),
             PairComparison("A", "B", 1.0, -1.0, 3.0, 0.3, False),
             PairComparison("B", "C", 1.0, -1.0, 3.0, 0.3, False)]
    got = compact_letters(["A", "B", "C"], pairs, means={"A": 3.0, "B": 2.0, "C": 1.0})
    assert got == {"A": "a", "B": "ab", "C": "b"}  # Piepho (2004), worked by hand
