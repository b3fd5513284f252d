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

# A bound for a hung app, not a speed goal (bench_tui.py measures speed): generous, since four
# test runs may share two cores.
WAIT = 120.0


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

    def keys(self, *keys: str) -> None:
        """Send keys; the terminal delivers them in order, so no pause is needed between them.
        What they do is checked by waiting for the screen to show it (``wait_for``)."""
        for k in keys:
            self.run("send-keys", "-t", "lw", k)

    def type(self, text: str) -> None:
        self.run("send-keys", "-t", "lw", "-l", text)

    def cursor_row(self) -> int:
        return int(self.run("display-message", "-p", "-t", "lw", "#{cursor_y}").strip())

    def tab_to(self, label: str, timeout: float = WAIT) -> None:
        """Tab to the form field labelled ``label`` and wait until it has the focus (the
        terminal's cursor sits on its row). Without the wait, letters typed right after Tab
        can reach the field being left: Textual forwards keys to the focused widget while the
        Tab is still bubbling up to the screen's binding."""
        self.keys("Tab")
        self.wait_until(lambda screen: any(
            line.lstrip("│ ").startswith(label) and i == self.cursor_row()
            for i, line in enumerate(screen.splitlines())), f"the focus on {label!r}", timeout)

    def wait_for(self, text: str, timeout: float = WAIT) -> str:
        """The screen once it shows ``text``. Waits on the screen's content, never on a fixed
        time: a loaded machine only makes it slower (``WAIT`` is a bound for a hung app)."""
        return self.wait_until(lambda screen: text in screen, repr(text), timeout)

    def wait_gone(self, text: str, timeout: float = WAIT) -> str:
        return self.wait_until(lambda screen: text not in screen, f"{text!r} gone", timeout)

    def wait_until(self, condition, what: str, timeout: float = WAIT) -> str:
        deadline = time.monotonic() + timeout
        screen = ""
        while True:
            if not self.alive():
                raise AssertionError(f"the app ended while waiting for {what}; the screen "
                                     f"was:\n{screen}")
            screen = self.screen()
            if condition(screen):
                return screen
            if time.monotonic() > deadline:
                raise AssertionError(f"{what} never appeared; the screen was:\n{screen}")
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
    # Each field is checked on the screen before the next key; keys arrive in order, so a
    # loaded machine that is still drawing the form only delays what the waits see.
    tmux.type("Riverbend")
    tmux.wait_for("site *         Riverbend")
    tmux.tab_to("line *")
    tmux.type("RB-2")
    tmux.wait_for("line *         RB-2")
    tmux.tab_to("shift *")
    tmux.type("early")
    tmux.wait_for("shift *        early")
    tmux.tab_to("fill_volume *")
    tmux.type("500.x")
    screen = tmux.wait_for("is not a number")
    tmux.keys("BSpace")
    # Wait for the backspace to show before typing on: a character arriving in the same read
    # as a backspace is dropped together with it (seen with Textual 8.2.8 under load).
    tmux.wait_until(lambda screen: any("fill_volume *  500. " in line and "500.x" not in line
                                       for line in screen.splitlines()), "the x deleted")
    tmux.type("3")
    tmux.wait_for("fill_volume *  500.3")
    tmux.wait_gone("is not a number")
    tmux.tab_to("Lot ID")
    tmux.type("TMUX-1")
    tmux.wait_for("Lot ID         TMUX-1")
    tmux.keys("Enter")
    # The form closes once the lot is stored (the toast saying so is transient: a slow
    # capture can miss it, so the store is read instead).
    tmux.wait_gone("Log a lot")
    with Store.open(db, read_only=True) as store:
        frame = store.values_frame("fill_volume", "line")
    row = frame.filter(frame["lot"] == "TMUX-1")
    assert row["value"].to_list() == [500.3] and row["level"].to_list() == ["RB-2"]

    tmux.keys("q")
    deadline = time.monotonic() + WAIT
    while tmux.alive():
        if time.monotonic() > deadline:
            raise AssertionError("the app did not quit on q")
        time.sleep(0.2)


@pytest.mark.slow
def test_the_comparison_and_its_chart_read_without_colour_at_80x24(tmux, demo_data_home,
                                                                   demo_copy):
    """NO_COLOR in a real terminal: no colour codes at all, and the chart still tells the
    flagged group ("#") from the others ("·"), with LSL and USL on the scale. The store is the
    demo with its weekly reviews recorded (as ``lotwatch demo`` does for a new store), so the
    RB-2 drift has its alert."""
    env = (f"XDG_DATA_HOME={shlex.quote(str(demo_data_home))} "
           f"TERM=xterm-256color NO_COLOR=1")
    command = (f"cd {shlex.quote(str(ROOT))} && env {env} {shlex.quote(sys.executable)} "
               f"-m lotwatch.tui watch --db {shlex.quote(str(demo_copy))}")
    tmux.run("new-session", "-d", "-s", "lw", "-x", "80", "-y", "24", command)
    tmux.wait_for("Decision:")
    tmux.keys("Enter")
    screen = tmux.wait_for("(flagged)")
    lines = screen.splitlines()
    legend = next(i for i, line in enumerate(lines) if "(flagged)" in line)
    assert lines[legend].startswith("# RB-2 (flagged)  · others")  # store/demo.py effect (a)
    plot = lines[legend + 1:legend + 10]
    assert plot[0].rstrip().endswith("USL") and any(x.rstrip().endswith("LSL") for x in plot)
    assert sum(x.count("#") for x in plot) > 20 and sum(x.count("·") for x in plot) > 20
    assert any(line.startswith("Between") for line in lines)  # the ANOVA table beside it
    # Textual honours NO_COLOR by drawing in greys: every 256-colour code is black, white or
    # on the grey ramp (232-255; xterm's palette, common practice), so nothing rests on hue.
    import re

    coloured = tmux.run("capture-pane", "-p", "-e", "-t", "lw")
    codes = {int(n) for n in re.findall(r"[34]8;5;(\d+)", coloured)}
    assert codes and codes <= {0, 7, 8, 15, 16, 231} | set(range(232, 256)), codes
    assert not re.search(r"\x1b\[(?:[0-9;]*;)?3[1-6]m", coloured)  # no basic hues either
    tmux.keys("q")
