"""Compact letter display of pairwise comparisons.

Groups that share a letter do not differ significantly; groups with no letter in common do.
Algorithm: insert-and-absorb of Piepho (2004), "An algorithm for a letter-based representation of
all-pairwise comparisons", J. Computational and Graphical Statistics 13, 456-466:

1. start with one letter column holding every group;
2. for each significant pair (i, j), every column holding both is replaced by two copies, one
   without i and one without j (insert);
3. after each insertion, drop columns that are subsets of another column (absorb).

Every non-significant pair keeps a column in common (a split column always keeps a copy with both
members of any pair other than (i, j)), and no significant pair shares one, so the display is
exact. The number of columns is small for significance patterns that follow the ordering of the
means (the usual case) but can grow exponentially in contrived patterns (2^(k/2) for k groups
whose only significant pairs form a perfect matching). Columns are then lettered a, b, c, ... in the order of their best-ranked member, where the
ranking is by decreasing mean when ``means`` are given, else the order of ``names``.
"""

from __future__ import annotations

import string
from collections.abc import Mapping, Sequence

from lotwatch.stats.results import PairComparison

_ALPHABET = string.ascii_lowercase + string.ascii_uppercase


def _letter(index: int) -> str:
    """a..z, A..Z, then a', b', ... (more than 52 columns is rare but allowed)."""
    base, rounds = index % len(_ALPHABET), index // len(_ALPHABET)
    return _ALPHABET[base] + "'" * rounds


def _absorb(columns: list[frozenset[int]]) -> list[frozenset[int]]:
    unique = list(dict.fromkeys(columns))
    return [c for c in unique if not any(c < other for other in unique)]


# Letters are a display for a handful of groups: beyond 26 groups (one alphabet) they are not
# read, and the insert-and-absorb steps grow with the square of the columns per significant pair.
MAX_LETTER_GROUPS = 26


def letter_columns(k: int, significant: Sequence[tuple[int, int]]) -> list[frozenset[int]]:
    """Piepho's insert-and-absorb on group indices 0..k-1; returns the letter columns.
    Raises ``ValueError`` beyond ``MAX_LETTER_GROUPS`` groups or when more than ``2 k + 52``
    columns would be needed (the contrived patterns that grow exponentially)."""
    if k > MAX_LETTER_GROUPS:
        raise ValueError(f"letters are shown for up to {MAX_LETTER_GROUPS} groups, not {k:,}; "
                         "read the pairwise table")
    limit = 2 * k + 52
    columns = [frozenset(range(k))]
    for i, j in significant:
        new: list[frozenset[int]] = []
        for col in columns:
            if i in col and j in col:
                new.append(col - {i})
                new.append(col - {j})
            else:
                new.append(col)
        columns = _absorb(new)
        if len(columns) > limit:
            raise ValueError(f"this pattern of differences needs more than {limit} letters; "
                             "read the pairwise table")
    return columns


def compact_letters(names: Sequence[str], pairs: Sequence[PairComparison], *,
                    means: Mapping[str, float] | None = None) -> dict[str, str]:
    """Letters per group from pairwise results (``pair.significant``); {} for no groups.

    Pairs naming a group not in ``names`` are ignored; pairs that are missing count as not
    significant. Each group's letters are returned in alphabetical order of assignment.
    """
    names = list(names)
    if not names:
        return {}
    index = {name: t for t, name in enumerate(names)}
    sig = []
    for p in pairs:
        if p.significant and p.a in index and p.b in index and p.a != p.b:
            sig.append((index[p.a], index[p.b]))
    columns = letter_columns(len(names), sig)
    if means is not None:
        rank_order = sorted(range(len(names)), key=lambda t: (-float(means.get(names[t], 0.0)), t))
    else:
        rank_order = list(range(len(names)))
    rank = {g: r for r, g in enumerate(rank_order)}
    columns.sort(key=lambda col: sorted(rank[g] for g in col))
    out = {name: "" for name in names}
    for c, col in enumerate(columns):
        for g in sorted(col, key=rank.__getitem__):
            out[names[g]] += _letter(c)
    return out
