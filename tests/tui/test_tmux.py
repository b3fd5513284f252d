"""A person at an 80×24 terminal: run ``python -m lotwatch.tui demo`` in tmux, read the board,
log a lot.

Skipped where tmux is not installed. The tmux server runs on a private socket and is killed at
the end, so nothing else running tmux is touched.
"""

from __future__ import annotations

import os
import shlex
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

pytestmark = pytest.mark.skipif(shutil.which("tmux") is None, reason="tmux is not installed")


class Tmux:
    def __init__(self, socket: str) -> None:
        self.base = ["tmux", "-L", socket]

    def run(self, *args: str) -> str:
        return subprocess.run(self.base + list(args), check=True, capture_output=True,
                              text=True).stdout

    def alive(self) -> bool:
        """Whether the session still runs (the server exits with its last session)."""
        done = subprocess.run(self.base + ["has-session", "-t", "lw"], capture_output=True)
        return done.returncode == 0

    def screen(self) -> str:
        return self.run("capture-pane", "-p", "-t", "lw")

    def keys(self, *keys: str, pause: float = 0.15) -> None:
        for k in keys:
            self.run("send-keys", "-t", "lw", k)
            time.sleep(pause)

    def type(self, text: str) -> None:
        self.run("send-keys", "-t", "lw", "-l", text)
        time.sleep(0.2)

    def wait_for(self, text: str, timeout: float = 15.0) -> str:
        deadline = time.monotonic() + timeout
        while True:
            screen = self.screen()
            if text in screen:
                return screen
            if time.monotonic() > deadline:
                raise AssertionError(f"{text!r} never appeared; the screen was:\n{screen}")
            time.sleep(0.1)


@pytest.fixture
def tmux():
    socket = f"lotwatch-test-{os.getpid()}"
    t = Tmux(socket)
    yield t
    subprocess.run(t.base + ["kill-server"], capture_output=True)
    # tmux leaves its socket file behind; it lives in $TMUX_TMPDIR (default /tmp)/tmux-UID.
    tmpdir = Path(os.environ.get("TMUX_TMPDIR", "/tmp")) / f"tmux-{os.getuid()}"
    (tmpdir / socket).unlink(missing_ok=True)


def test_the_board_first_then_log_a_lot_in_the_demo_at_80x24(tmux, demo_data_home):
    from lotwatch.store import Store

    db = demo_data_home / "lotwatch" / "demo.sqlite"
    env = (f"XDG_DATA_HOME={shlex.quote(str(demo_data_home))} "
           f"LOTWATCH_DB={shlex.quote(str(db))} TERM=xterm-256color")
    command = (f"cd {shlex.quote(str(ROOT))} && env {env} {shlex.quote(sys.executable)} "
               "-m lotwatch.tui demo")
    tmux.run("new-session", "-d", "-s", "lw", "-x", "80", "-y", "24", command)
    # No key pressed: the board, its most urgent row highlighted, and beneath it that
    # comparison's flagged group, size with its unit and ANOVA table. The demo plants a
    # +1 mL drift on line RB-2's fill_volume (store/demo.py, effect (a)).
    screen = tmux.wait_for("Decision:")
    lines = screen.splitlines()
    assert any(line.lstrip().startswith(("! mean alert", "~ acknowledged", "watching"))
               and "fill_volume" in line and "line" in line and "RB-2" in line
               for line in lines[:4]), screen
    assert "fill_volume by line:" in screen and "RB-2 high by +1.0" in screen
    assert " mL" in screen
    header = next(line for line in lines if line.split()[:2] == ["Source", "df"])
    assert header.split() == ["Source", "df", "SS", "MS", "F", "p"]
    between = next(line for line in lines if line.lstrip().startswith("Between")).split()
    within = next(line for line in lines if line.lstrip().startswith("Within")).split()
    assert len(between) == 6 and len(within) == 4  # df SS MS F p / df SS MS
    assert "Help" in screen and "Quit" in screen  # the footer names the keys
    assert all(len(line) <= 80 for line in lines)

    tmux.keys("n")
    screen = tmux.wait_for("Log a lot")
    assert "site *" in screen and "fill_volume *" in screen  # the highlighted one first
    assert "cap_torque" in screen  # ... and the others: one lot, several characteristics
    # Wait for each field to show what was typed before moving on (a loaded machine may
    # still be drawing the form when keys arrive).
    tmux.type("Riverbend")
    tmux.wait_for("site *         Riverbend")
    tmux.keys("Tab", pause=0.4)
    tmux.type("RB-2")
    tmux.wait_for("line *         RB-2")
    tmux.keys("Tab", pause=0.4)
    tmux.type("early")
    tmux.wait_for("shift *        early")
    tmux.keys("Tab", pause=0.4)
    tmux.type("500.x")
    screen = tmux.wait_for("is not a number")
    tmux.keys("BSpace")
    tmux.type("3")
    tmux.wait_for("fill_volume *  500.3")
    tmux.keys("Tab", pause=0.4)
    tmux.type("TMUX-1")
    tmux.wait_for("Lot ID         TMUX-1")
    tmux.keys("Enter")
    screen = tmux.wait_for("Stored lot TMUX-1")
    assert "Log a lot" not in screen

    with Store.open(db, read_only=True) as store:
        frame = store.values_frame("fill_volume", "line")
    row = frame.filter(frame["lot"] == "TMUX-1")
    assert row["value"].to_list() == [500.3] and row["level"].to_list() == ["RB-2"]

    tmux.keys("q")
    deadline = time.monotonic() + 10
    while tmux.alive():
        if time.monotonic() > deadline:
            raise AssertionError("the app did not quit on q")
        time.sleep(0.2)
