"""Compact letter display: hand-worked cases and the defining property.

Hand-worked cases follow the insert-and-absorb algorithm of Piepho (2004), J. Computational and
Graphical Statistics 13, 456-466, by hand (common practice for letter displays).
"""

from __future__ import annotations

import itertools
import re

from hypothesis import given, settings
from hypothesis import strategies as st
from lotwatch.stats.letters import compact_letters, letter_columns
from lotwatch.stats.results import PairComparison


def _pairs(names, significant):
    sig = {frozenset(p) for p in significant}
    return [PairComparison(a=a, b=b, diff=0.0, lower=None, upper=None,
                           p=0.01 if frozenset((a, b)) in sig else 0.5,
                           significant=frozenset((a, b)) in sig)
            for a, b in itertools.combinations(names, 2)]


def test_nothing_significant_one_letter():
    names = ["A", "B", "C"]
    assert compact_letters(names, _pairs(names, [])) == {"A": "a", "B": "a", "C": "a"}


def test_everything_significant_one_letter_each_by_mean():
    names = ["A", "B", "C"]
    means = {"A": 1.0, "B": 3.0, "C": 2.0}
    got = compact_letters(names, _pairs(names, [("A", "B"), ("A", "C"), ("B", "C")]), means=means)
    # The highest mean gets "a" (common practice).
    assert got == {"B": "a", "C": "b", "A": "c"}


def test_middle_group_overlaps_both_ends():
    # A > B > C, only A-C significant: A "a", B "ab", C "b" (worked by hand).
    names = ["A", "B", "C"]
    got = compact_letters(names, _pairs(names, [("A", "C")]), means={"A": 3, "B": 2, "C": 1})
    assert got == {"A": "a", "B": "ab", "C": "b"}


def test_four_groups_chain():
    # Significant: A-C, A-D, B-D. Insert/absorb by hand gives columns {A,B}, {B,C}, {C,D}.
    names = ["A", "B", "C", "D"]
    got = compact_letters(names, _pairs(names, [("A", "C"), ("A", "D"), ("B", "D")]))
    assert got == {"A": "a", "B": "ab", "C": "bc", "D": "c"}


def test_non_adjacent_overlap_needs_extra_letter():
    # Significant: A-B and C-D only. Columns by hand: {A,C}, {A,D}, {B,C}, {B,D}.
    names = ["A", "B", "C", "D"]
    got = compact_letters(names, _pairs(names, [("A", "B"), ("C", "D")]))
    assert got == {"A": "ab", "B": "cd", "C": "ac", "D": "bd"}


def test_more_than_52_columns_get_primed_letters():
    # Only the six pairs (i, i+6) of 12 groups are significant: the non-significance graph is a
    # Moon-Moser graph with 2^6 = 64 maximal cliques, so 64 letter columns (worked by hand); past
    # a..z, A..Z the tokens carry primes and must stay distinct.
    names = [f"G{i:02d}" for i in range(12)]
    sig = [(names[i], names[i + 6]) for i in range(6)]
    got = compact_letters(names, _pairs(names, sig))
    tokens = set().union(*(_letters(v) for v in got.values()))
    assert len(tokens) == 64
    assert "a'" in tokens


def test_empty_and_unknown_names():
    assert compact_letters([], []) == {}
    stray = [PairComparison(a="A", b="Z", diff=1, lower=None, upper=None, p=0.0,
                            significant=True)]
    assert compact_letters(["A", "B"], stray) == {"A": "a", "B": "a"}


def _letters(text: str) -> set[str]:
    """Split a display into letters (a letter plus optional primes beyond the 52nd column)."""
    return set(re.findall(r"[A-Za-z]'*", text))


@st.composite
def _patterns(draw):
    k = draw(st.integers(min_value=1, max_value=8))
    pairs = list(itertools.combinations(range(k), 2))
    sig = [p for p in pairs if draw(st.booleans())]
    means = draw(st.lists(st.floats(-10, 10, allow_nan=False), min_size=k, max_size=k))
    return k, sig, means


@settings(max_examples=150, deadline=None)
@given(_patterns())
def test_share_a_letter_iff_not_significant(pattern):
    # The defining property of a letter display (Piepho 2004): two groups share a letter exactly
    # when their comparison is not significant; and no letter column is redundant.
    k, sig, means = pattern
    names = [f"G{i}" for i in range(k)]
    pairs = _pairs(names, [(names[a], names[b]) for a, b in sig])
    got = compact_letters(names, pairs, means=dict(zip(names, means, strict=True)))
    sigset = {frozenset((names[a], names[b])) for a, b in sig}
    for a, b in itertools.combinations(names, 2):
        share = bool(_letters(got[a]) & _letters(got[b]))
        assert share == (frozenset((a, b)) not in sigset)
    assert all(got[n] for n in names)
    cols = letter_columns(k, sig)
    assert not any(c < d for c in cols for d in cols)
