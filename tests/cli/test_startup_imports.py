"""Commands that compute no statistic must not load the numerical stack (numpy, polars,
scipy) or the interface (textual): that is what keeps them starting in a fraction of a second
(tests/bench/bench_startup.py measures the time; numpy alone costs about 0.1 s, scipy and polars
more). Checked in a fresh interpreter, the way tests/test_layering.py checks the package
layers."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from tests.cli.helpers import subprocess_env

_PROBE = (
    "import json, sys\n"
    "import click\n"
    "from lotwatch.tui.cli import main\n"
    "try:\n"
    "    main(sys.argv[1:], standalone_mode=False)\n"
    "except (SystemExit, click.ClickException):  # a refusal still shows what was loaded\n"
    "    pass\n"
    "print(json.dumps(sorted(sys.modules)), file=sys.stderr)\n"
)


def _loaded(args: list[str]) -> set[str]:
    out = subprocess.run([sys.executable, "-c", _PROBE, *args], capture_output=True, text=True,
                         env=subprocess_env(), check=True)
    return set(json.loads(out.stderr.strip().splitlines()[-1]))


@pytest.fixture(scope="module")
def db(tmp_path_factory) -> Path:
    from lotwatch.store import LotEntry, Store

    path = tmp_path_factory.mktemp("startup") / "s.sqlite"
    with Store.create(path) as s:
        s.add_characteristic("fill_volume", unit="mL", resolution="0.1")
        s.log_lots([LotEntry("fill_volume", ["500.1"], {"site": "A", "line": "L1",
                                                         "shift": "early"}, lot="B1")])
    return path


HEAVY = ("numpy", "polars", "scipy", "textual", "matplotlib", "plotext")


@pytest.mark.parametrize("command", [
    ["alerts", "list"], ["alerts", "show", "1"], ["settings", "list"],
    ["settings", "set", "review.window_days", "14"], ["settings", "reset", "review.window_days"],
    ["characteristic", "list"], ["characteristic", "show", "fill_volume"], ["factor", "list"],
    ["zone", "show"], ["history", "1"],
    ["log", "fill_volume", "500.2", "--tag", "site=A", "--tag", "line=L1", "--tag", "shift=late"],
])
def test_commands_computing_nothing_load_no_numerical_stack(db: Path,
                                                            command: list[str]) -> None:
    loaded = _loaded([*command, "--db", str(db)])
    assert "lotwatch.tui.cli" in loaded  # the probe really ran the command line
    heavy = sorted(m for m in loaded if m.split(".")[0] in HEAVY)
    assert heavy == [], f"{' '.join(command)} imported {heavy[:5]}"


def test_the_probe_sees_scipy_when_a_command_needs_it(db: Path, tmp_path: Path) -> None:
    # analyze computes the battery: it must load scipy, so the probe above can fail.
    data = tmp_path / "d.csv"
    data.write_text("g,x\n" + "".join(f"{'ab'[i % 2]},{i % 7}\n" for i in range(20)))
    loaded = _loaded(["analyze", str(data), "--value", "x", "--by", "g"])
    assert {"scipy", "numpy", "polars"} <= loaded
