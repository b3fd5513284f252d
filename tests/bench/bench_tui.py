"""How fast the terminal interface gets to the screen, and how soon a saved lot appears.

Run: ``cd /work/main && /work/venv/bin/python tests/bench/bench_tui.py``. Builds the demo store in
a temporary data directory, then in fresh processes (imports included):

* first paint, in a real terminal (tmux, 80×24, private socket): from launching ``python -m lotwatch.tui
  demo`` until the main view's tabs are on screen, against a bare Textual app showing one Static
  launched the same way in the same run (ratio printed); goal: under 1.5 s on the demo store;
* first data: until the selected comparison's group table is on screen;
* save to screen (headless Pilot): from pressing Enter in the entry form to the new lot shown
  in the main view; goal: under one second.
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
async def main():
    app = LotwatchApp(DB)
    async with app.run_test(size=(80, 24)) as pilot:
        while app.detail is None:
            await asyncio.sleep(0.01)
        await pilot.pause()
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        for factor, value in (("site", "Riverbend"), ("line", "RB-2"), ("shift", "early")):
            form._tag_inputs[factor].value = value
        from textual.widgets import Input
        form.query_one("#values", Input).value = "2.02"
        form.query_one("#lot", Input).value = "BENCH-" + str(time.time_ns())
        lot = form.query_one("#lot", Input).value
        form.query_one("#values", Input).focus()
        t1 = time.perf_counter()
        await pilot.press("enter")
        while not (app.detail and any(r.lot == lot for r in app.detail.recent)):
            await asyncio.sleep(0.01)
        print(f"save {time.perf_counter() - t1:.3f}")
asyncio.run(main())
"""


BARE_APP = ("from textual.app import App\nfrom textual.widgets import Static\n"
            "class A(App):\n    def compose(self):\n        yield Static('bare app')\nA().run()")


def tmux_paint(command: list[str], env: dict[str, str], painted: str,
               ready: str) -> tuple[float, float]:
    """Seconds from launch until ``painted`` and then ``ready`` appear in an 80×24 tmux pane."""
    import shlex
    import time

    sock = f"lotwatch-bench-{os.getpid()}"
    base = ["tmux", "-L", sock]
    line = " ".join(f"{k}={shlex.quote(v)}" for k, v in env.items())
    cmd = f"cd {shlex.quote(str(ROOT))} && env {line} " + " ".join(map(shlex.quote, command))
    t0 = time.monotonic()
    subprocess.run(base + ["new-session", "-d", "-s", "b", "-x", "80", "-y", "24", cmd],
                   check=True)
    first = done = None
    try:
        while time.monotonic() - t0 < 30:
            out = subprocess.run(base + ["capture-pane", "-p", "-t", "b"], capture_output=True,
                                 text=True).stdout
            now = time.monotonic() - t0
            if first is None and painted in out:
                first = now
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
    return first, done


def run(code: str, env: dict[str, str]) -> dict[str, float]:
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=env, cwd=ROOT, check=True).stdout
    return {k: float(v) for k, v in (line.split() for line in out.splitlines() if line)}


def main(repeats: int = 3) -> None:
    with tempfile.TemporaryDirectory() as home:
        env = {**os.environ, "XDG_DATA_HOME": home}
        sys.path.insert(0, str(ROOT))
        os.environ["XDG_DATA_HOME"] = home
        from lotwatch.store.demo import build_demo_store
        from lotwatch.tui.services.paths import demo_store_path

        db = build_demo_store(demo_store_path())
        code = LOTWATCH.replace("ROOT", repr(str(ROOT))).replace("DB", repr(str(db)))
        xdg = {"XDG_DATA_HOME": home, "TERM": "xterm-256color"}
        base, paints, datas, saves = [], [], [], []
        for _ in range(repeats):
            base.append(tmux_paint([sys.executable, "-c", BARE_APP], xdg, "bare app",
                                   "bare app")[0])
            p, d = tmux_paint([sys.executable, "-m", "lotwatch.tui", "demo"], xdg, "1 Groups", "Hillside ")
            paints.append(p)
            datas.append(d)
            saves.append(run(code, env)["save"])
        b, paint, data, save = min(base), min(paints), min(datas), min(saves)
        print(f"bare Textual app, first paint (tmux):   {b:.3f} s")
        print(f"lotwatch demo, first paint (tmux):      {paint:.3f} s  "
              f"(ratio {paint / b:.2f}; goal < 1.5 s)")
        print(f"lotwatch demo, group table shown:       {data:.3f} s")
        print(f"save to lot shown in main view (Pilot): {save:.3f} s  (goal < 1 s)")


if __name__ == "__main__":
    main()
