"""Shared test set-up: make the repo importable, hypothesis seeding, and CI's rule on skips.

Randomised property tests (hypothesis) explore fresh inputs on every run: each session draws a
new seed, prints it in the header and again after a failure, and ``--hypothesis-seed=N`` replays
it. With ``LOTWATCH_CI=1`` (set by ``.ci/run``) they replay one fixed derandomized sequence, so a
landing never depends on luck, and a test that skips fails the run unless it is listed in
``CI_MAY_SKIP`` with the test that covers the same ground in CI's environment.
"""

from __future__ import annotations

import os
import random
import sys
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest
from hypothesis import settings

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

ON_CI = os.environ.get("LOTWATCH_CI") == "1"

settings.register_profile("ci", derandomize=True, print_blob=True, database=None)
settings.register_profile("dev", print_blob=True)
settings.load_profile("ci" if ON_CI else "dev")


def _is_root() -> bool:
    return os.geteuid() == 0


# Skips CI accepts, each with the condition under which it may skip and what covers it then.
CI_MAY_SKIP: dict[str, tuple[Callable[[], bool], str]] = {
    "tests/store/test_schema.py::test_read_only_in_unwritable_folder": (
        _is_root, "root ignores folder permissions; "
                  "test_read_only_in_unwritable_folder_as_other_user runs it as user nobody"),
    "tests/store/test_schema.py::test_file_not_writable": (
        _is_root, "root can write read-only files; "
                  "test_read_only_in_unwritable_folder_as_other_user checks the refusal"),
}

_seed: int | None = None


def pytest_configure(config: pytest.Config) -> None:
    """Fresh hypothesis seed per session outside CI (unless ``--hypothesis-seed`` is given)."""
    global _seed
    if ON_CI:
        return
    given = config.getoption("--hypothesis-seed", default=None)
    if given is not None:
        _seed = int(given)
        return
    from hypothesis import core

    _seed = random.SystemRandom().randrange(2**32)
    core.global_force_seed = _seed  # what --hypothesis-seed sets (hypothesis' pytest plugin)


def _seed_line() -> str:
    if ON_CI:
        return "hypothesis: derandomized (LOTWATCH_CI=1); skips fail unless listed in CI_MAY_SKIP"
    return f"hypothesis seed {_seed}: replay this run's random inputs with --hypothesis-seed={_seed}"


def pytest_report_header(config: pytest.Config) -> str:
    return _seed_line()


def pytest_terminal_summary(terminalreporter, exitstatus: int, config: pytest.Config) -> None:
    if terminalreporter.stats.get("failed") or terminalreporter.stats.get("error"):
        terminalreporter.write_line(_seed_line())


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item: pytest.Item, call: pytest.CallInfo) -> Iterator[None]:
    """On CI, a skip is a failure unless ``CI_MAY_SKIP`` allows it here."""
    outcome = yield
    if not ON_CI:
        return
    report = outcome.get_result()
    if not report.skipped or hasattr(report, "wasxfail"):
        return
    allowed = CI_MAY_SKIP.get(item.nodeid)
    if allowed is not None and allowed[0]():
        return
    reason = report.longrepr[2] if isinstance(report.longrepr, tuple) else str(report.longrepr)
    report.outcome = "failed"
    report.longrepr = (f"{item.nodeid} skipped on CI ({reason}). Every test must run on CI: "
                       "install what it needs in .ci/run, or list it in CI_MAY_SKIP in "
                       "tests/conftest.py with the test that covers it.")
