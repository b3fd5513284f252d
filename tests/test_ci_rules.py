"""The test-suite rules in tests/conftest.py, run on tiny suites in a scratch folder (pytester):
on CI a skip fails the run unless listed; outside CI a failing run names its hypothesis seed."""

from __future__ import annotations

from pathlib import Path

import pytest

pytest_plugins = ["pytester"]

CONFTEST = (Path(__file__).parent / "conftest.py").read_text(encoding="utf-8")


def _suite(pytester: pytest.Pytester, body: str) -> None:
    pytester.makeconftest(CONFTEST)
    pytester.makepyfile(test_tiny=body)


def test_skip_fails_on_ci(pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("LOTWATCH_CI", "1")
    _suite(pytester, "import pytest\n\ndef test_needs_tool():\n    pytest.skip('no tool')\n\n"
                     "def test_fine():\n    pass\n")
    result = pytester.runpytest_subprocess("-p", "no:cacheprovider")
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines(["*skipped on CI*no tool*"])


def test_skip_is_a_skip_outside_ci(pytester: pytest.Pytester,
                                   monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("LOTWATCH_CI", raising=False)
    _suite(pytester, "import pytest\n\ndef test_needs_tool():\n    pytest.skip('no tool')\n")
    pytester.runpytest_subprocess("-p", "no:cacheprovider").assert_outcomes(skipped=1)


def test_failing_property_run_prints_its_seed(pytester: pytest.Pytester,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("LOTWATCH_CI", raising=False)
    _suite(pytester, "from hypothesis import given, strategies as st\n\n"
                     "@given(st.integers())\ndef test_prop(x):\n    assert x < 10\n")
    result = pytester.runpytest_subprocess("-p", "no:cacheprovider")
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*hypothesis seed * --hypothesis-seed=*"])
