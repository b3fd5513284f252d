"""mypy over the three packages, against tests/mypy_baseline.txt (tests/typecheck.py)."""

from __future__ import annotations

import pytest

from tests import typecheck


def test_baseline_is_small() -> None:
    # The baseline started at 6 (below 10) and may only shrink.
    assert len(typecheck.read_baseline()) <= 3


def test_compare_counts_repeats() -> None:
    new, gone = typecheck.compare(["a [x]", "a [x]", "b [y]"], ["a [x]", "c [z]"])
    assert new == ["a [x]", "b [y]"] and gone == ["c [z]"]


@pytest.mark.slow  # 10-20 s on a cold cache; about a second after (python tests/typecheck.py)
def test_mypy_matches_the_baseline() -> None:
    found, text = typecheck.run_mypy()
    new, gone = typecheck.compare(found, typecheck.read_baseline())
    assert not new, f"new type errors (fix them):\n{text}"
    assert not gone, f"fixed errors still in tests/mypy_baseline.txt, delete them: {gone}"
