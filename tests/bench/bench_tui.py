"""How fast the terminal interface gets to the screen, and how soon a saved lot appears.

Run: ``python tests/bench/bench_tui.py [--quick]``. Builds the demo store in
a temporary data directory, then in fresh processes (imports included):

* first paint, in a real terminal (tmux, 80×24, private socket): from launching ``python -m
  lotwatch.tui demo`` until the board's frame (footer) is on screen, against a bare Textual app
  showing one Static launched the same way in the same run (ratio printed); goal <= 0.5 s;
* the board's numbers: until board rows with their states, evidence and alert sizes show
  (before the window's review; its q follows), goal <= 1.0 s; then until the most urgent
  comparison's ANOVA decision shows;
* keypress to repaint (headless Pilot): arrow down on the board until the new row's headline is
  painted from what is already computed, against a bare Textual DataTable's cursor move in the
  same run; goal <= 100 ms;
* save to board (headless Pilot): from Enter in the entry form until the board is reloaded with
  the new data (the store poller's 0.5 s included); goal <= 1 s.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

LOTWATCH = r"""
import sys, time, asyncio
sys.path.insert(0, ROOT)
from lotwatch.tui.app.application import LotwatchApp
from textual.widgets import Input

async def until(cond, timeout=30):
    end = time.perf_counter() + timeout
    while not cond():
        if time.perf_counter() > end:
            raise SystemExit("timed out")
        await asyncio.sleep(0.002)

async def main():
    app = LotwatchApp(DB, poll_seconds=0.5)
    async with app.run_test(size=(80, 24)) as pilot:
        await until(lambda: app.detail is not None and not app.computing)
        await pilot.pause()
        # keypress: move the board's cursor; the new row's headline is repainted from the
        # overview already computed (the comparison itself is recomputed after a pause).
        board = app.screen.query_one("#board")
        preview = app.screen.query_one("#preview")
        times = []
        for _ in range(5):
            before = board.cursor_row
            t0 = time.perf_counter()
            await pilot.press("down")
            await until(lambda: board.cursor_row != before)
            row = app.overview.board[board.cursor_row]
            key = f"{row.characteristic} by {row.factor}"
            await until(lambda: key in preview.content.renderables[0].plain)
            times.append(time.perf_counter() - t0)
        print(f"keypress {min(times):.4f}")
        await until(lambda: app.detail is not None and not app.computing)
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        for factor, value in (("site", "Riverbend"), ("line", "RB-2"), ("shift", "early")):
            form._tag_inputs[factor].value = value
        values = next(v for v in form._values if v.characteristic.name == "fill_volume")
        values.value = "500.2"
        form.query_one("#lot", Input).value = "BENCH-" + str(time.time_ns())
        values.focus()
        before = app.overview
        t1 = time.perf_counter()
        await pilot.press("enter")
        await until(lambda: app.overview is not before and not app.overview.partial)
        print(f"save {time.perf_counter() - t1:.3f}")
asyncio.run(main())
"""

BARE_KEYS = r"""
import time, asyncio
from textual.app import App
from textual.widgets import DataTable

class A(App):
    def compose(self):
        yield DataTable(cursor_type="row")
    def on_mount(self):
        t = self.query_one(DataTable)
        t.add_columns("a", "b", "c")
        for i in range(12):
            t.add_row(str(i), "x" * 10, f"{i / 7:.4f}")
        t.focus()

async def main():
    app = A()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        t = app.query_one(DataTable)
        times = []
        for _ in range(5):
            before = t.cursor_row
            t0 = time.perf_counter()
            await pilot.press("down")
            while t.cursor_row == before:
                await asyncio.sleep(0.002)
            times.append(time.perf_counter() - t0)
        print(f"keypress {min(times):.4f}")
asyncio.run(main())
"""


BARE_APP = ("from textual.app import App\nfrom textual.widgets import Static\n"
            "class A(App):\n    def compose(self):\n        yield Static('bare app')\nA().run()")


def tmux_paint(command: list[str], env: dict[str, str], painted: str,
               ready: str, middle: str | None = None) -> tuple[float, float, float]:
    """Seconds from launch until ``painted``, ``middle`` (when given) and ``ready`` appear in an
    80×24 tmux pane."""
    import shlex
    import time

    sock = f"lotwatch-bench-{os.getpid()}"
    base = ["tmux", "-L", sock]
    line = " ".join(f"{k}={shlex.quote(v)}" for k, v in env.items())
    cmd = f"cd {shlex.quote(str(ROOT))} && env {line} " + " ".join(map(shlex.quote, command))
    t0 = time.monotonic()
    subprocess.run(base + ["new-session", "-d", "-s", "b", "-x", "80", "-y", "24", cmd],
                   check=True)
    first = done = mid = None
    try:
        while time.monotonic() - t0 < 30:
            out = subprocess.run(base + ["capture-pane", "-p", "-t", "b"], capture_output=True,
                                 text=True).stdout
            now = time.monotonic() - t0
            if first is None and painted in out:
                first = now
            if mid is None and middle is not None and middle in out:
                mid = now
            if first is not None and ready in out:
                done = now
                break
            time.sleep(0.01)
    finally:
        subprocess.run(base + ["kill-server"], capture_output=True)
        tmpdir = Path(os.environ.get("TMUX_TMPDIR", "/tmp")) / f"tmux-{os.getuid()}"
        (tmpdir / sock).unlink(missing_ok=True)
        time.sleep(0.3)
    if first is None or done is None:
        raise RuntimeError(f"{command}: the screen never showed {painted!r}/{ready!r}")
    return first, (mid if mid is not None else done), done


def run(code: str, env: dict[str, str]) -> dict[str, float]:
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env=env, cwd=ROOT)
    if done.returncode != 0:
        raise RuntimeError(f"benchmark child failed:\n{done.stderr[-3000:]}")
    out = done.stdout
    return {k: float(v) for k, v in (line.split() for line in out.splitlines() if line)}


def main(repeats: int = 3) -> None:
    with tempfile.TemporaryDirectory() as home:
        env = {**os.environ, "XDG_DATA_HOME": home}
        sys.path.insert(0, str(ROOT))
        os.environ["XDG_DATA_HOME"] = home
        from lotwatch.store.demo import build_demo_store
        from lotwatch.tui.cli.interface import _replay_reviews
        from lotwatch.tui.services.paths import demo_store_path

        db = build_demo_store(demo_store_path())
        _replay_reviews(db)  # as ``lotwatch demo`` does for a new store: alerts, detectors
        code = LOTWATCH.replace("ROOT", repr(str(ROOT))).replace("DB", repr(str(db)))
        xdg = {"XDG_DATA_HOME": home, "TERM": "xterm-256color"}
        base, paints, rows, datas, keys, bare_keys, saves = [], [], [], [], [], [], []
        for _ in range(repeats):
            base.append(tmux_paint([sys.executable, "-c", BARE_APP], xdg, "bare app",
                                   "bare app")[0])
            p, m, d = tmux_paint([sys.executable, "-m", "lotwatch.tui", "demo"], xdg, "Log lot",
                                 "Decision:", middle="watching ")
            paints.append(p)
            rows.append(m)
            datas.append(d)
            got = run(code, env)
            keys.append(got["keypress"])
            saves.append(got["save"])
            bare_keys.append(run(BARE_KEYS, env)["keypress"])
        b, paint, board, data = min(base), min(paints), min(rows), min(datas)
        key, bare_key, save = min(keys), min(bare_keys), min(saves)
        print(f"bare Textual app, first paint (tmux):        {b:.3f} s")
        print(f"lotwatch demo, first paint (tmux):           {paint:.3f} s  "
              f"(ratio {paint / b:.2f}; goal <= 0.5 s)")
        print(f"lotwatch demo, board rows with numbers:      {board:.3f} s  "
              f"(ratio {board / b:.2f}; goal <= 1.0 s)")
        print(f"lotwatch demo, and the top row's ANOVA:      {data:.3f} s  "
              f"(ratio {data / b:.2f})")
        print(f"bare DataTable, keypress to repaint (Pilot): {bare_key * 1000:.1f} ms")
        print(f"board, keypress to repaint (Pilot):          {key * 1000:.1f} ms  "
              f"(ratio {key / bare_key:.2f}; goal <= 100 ms)")
        print(f"save to board reloaded (Pilot, poll 0.5 s):  {save:.3f} s  (goal <= 1 s)")


if __name__ == "__main__":
    import argparse

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one repeat instead of three")
    main(1 if parser.parse_args().quick else 3)
