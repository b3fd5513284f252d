"""Display safety: text that came from people (notes, tags, lot IDs, names, who, reasons) holding
Rich markup, ANSI CSI/OSC escape sequences, C0/C1 control characters, bidi overrides and very
long strings is shown literally and cut cleanly, in the interface and in the command line's text
output, and no ESC byte or bidi override reaches the terminal.

The command line runs in a real pseudo-terminal (so ``sys.stdout.isatty()`` is true and click
does not strip anything): what the test reads is exactly what a terminal would receive.
"""

from __future__ import annotations

import os
import pty
import select
import subprocess
from pathlib import Path

import pytest
from lotwatch.store import LotEntry, Store, StoreError
from lotwatch.store.alerts import Transition, acknowledge, record_transitions

from tests.reliability.helpers import CHAR, cli_cmd, make_store, subprocess_env

MARKUP = "[bold red]boom[/] [@click=app.quit]x[/]"
CSI = "\x1b[2J\x1b[31m"
OSC = "\x1b]0;pwned\x07"
C1 = "\u009b31m\u0085\u009d0;t\u009c"
C0 = "\x07\x08\x0b\x0c\x7f"
BIDI = "\u202eevil\u202c\u2066iso\u2069\u200f"
LONG = "W" * 600
HOSTILE = MARKUP + CSI + OSC + C1 + C0 + BIDI
# What must never reach the terminal: ESC, the C1 controls (8-bit CSI/OSC/ST/NEL), BEL, BS,
# DEL, and the Unicode bidi controls (Trojan Source, CVE-2021-42574).
FORBIDDEN = ["\x1b", "\x9b", "\x9d", "\x9c", "\x85", "\x07", "\x08", "\x7f", "\u202e",
             "\u202c", "\u2066", "\u2069", "\u200f"]


def _try(fn, *args, **kw):
    """Store what the store accepts; a refusal (StoreError) is fine: refused text is never shown."""
    try:
        return fn(*args, **kw)
    except StoreError:
        return None


# Identifiers (lot IDs, tags, names) holding display controls are refused at input
# (store/text.py); a store can still hold them (written by another program, or before that
# rule), so the fixture puts them in with SQL and every output must stay safe anyway.
MARK = "\u00a7ctl\u00a7"  # placeholder replaced by BIDI + C1 after logging


def _inject_display_controls(s: Store) -> None:
    bad = "\u202e" + "\u009b" + BIDI + C1
    with s.write():
        for table, column in (("lots", "lot_code"), ("lot_tags", "value"), ("buckets", "level"),
                              ("characteristics", "name"), ("factors", "name"),
                              ("lot_tags", "key"), ("buckets", "factor"),
                              ("alerts", "groups")):
            s.conn.execute(f"UPDATE {table} SET {column} = replace({column}, ?, ?)", (MARK, bad))


def hostile_store(path: Path) -> dict[str, object]:
    """A store whose every user-text field holds hostile text."""
    make_store(path)
    info: dict[str, object] = {}
    with Store.open(path) as s:
        _try(s.add_characteristic, "chr" + MARKUP + MARK, unit="u" + CSI + MARKUP,
             resolution="0.1", target=500)
        _try(s.add_factor, "oven" + MARKUP + MARK)
        tag_values = ["north" + MARKUP + MARK, "south", "L" + LONG, "1", "day", "night"]
        entries = []
        for i in range(18):  # 6 lots per site: at least review.min_lots (5) lots per group
            entries.append(LotEntry(
                CHAR, [f"{500 + i % 5 / 10:.1f}", f"{500 + i % 3 / 10:.1f}"],
                {"site": tag_values[i % 3], "line": str(1 + i % 2), "shift": tag_values[4 + i % 2]},
                lot=f"L{i}" + MARKUP + MARK + "x" * 40,
                measured_at=f"2026-11-{20 + i % 5:02d}T08:00:00Z",
                note="note" + HOSTILE + LONG, by="who" + HOSTILE))
        out = s.log_lots(entries)
        mid = out.measurement_ids[0]
        s.correct(mid, "500.4", reason="why" + HOSTILE + LONG, by="fixer" + HOSTILE)
        s.correct(mid, "500.3", reason="again" + MARKUP, by="[i]x[/i]")
        [alert] = record_transitions(s, [Transition(
            CHAR, "site", "opened", "W" + MARKUP, ["north" + MARKUP + MARK], "higher", 0.2,
            0.1, 0.001)], by="review" + HOSTILE)
        acknowledge(s, alert.id, by="eng" + HOSTILE, note="ack" + HOSTILE + LONG)
        _inject_display_controls(s)
        assert s.check().ok
        info.update(mid=mid, alert=alert.id, chars=[c.name for c in s.characteristics()])
    return info


def run_in_terminal(*args: object, timeout: float = 120) -> str:
    """Run ``lotwatch ARGS`` with stdout and stderr on a pseudo-terminal; everything it wrote."""
    master, slave = pty.openpty()
    env = subprocess_env({"TERM": "xterm-256color", "COLUMNS": "100", "LINES": "40"})
    env.pop("NO_COLOR", None)
    proc = subprocess.Popen(cli_cmd(*args), stdin=slave, stdout=slave, stderr=slave, env=env,
                            close_fds=True)
    os.close(slave)
    chunks: list[bytes] = []
    try:
        while True:
            ready, _, _ = select.select([master], [], [], timeout)
            if not ready:
                proc.kill()
                raise AssertionError(f"lotwatch {args} produced no output for {timeout} s")
            try:
                data = os.read(master, 65536)
            except OSError:  # EIO: the child closed the terminal
                break
            if not data:
                break
            chunks.append(data)
    finally:
        os.close(master)
        proc.wait(timeout=60)
    return b"".join(chunks).decode("utf-8", errors="replace")


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    path = tmp_path_factory.mktemp("hostile") / "hostile.sqlite"
    return path, hostile_store(path)


def _assert_safe(out: str, what: str) -> None:
    bad = {repr(ch): out.count(ch) for ch in FORBIDDEN if ch in out}
    assert bad == {}, f"{what}: control characters reached the terminal: {bad}\n{out[:2000]!r}"
    assert "Traceback" not in out, f"{what}:\n{out}"


COMMANDS = [
    ("history", "{mid}"),
    ("characteristic", "list"),
    ("factor", "list"),
    ("export",),
    ("review", "--dry-run", "--as-of", "2026-11-25"),
    ("review", "--dry-run", "--as-of", "2026-11-25", "--format", "md"),
    ("alerts", "list"),
    ("alerts", "show", "{alert}"),
    ("trend", CHAR, "--by", "site", "--as-of", "2026-11-25", "--no-chart"),
    ("analyze", "{csv}", "--value", "value", "--by", "site"),
]


@pytest.mark.parametrize("args", COMMANDS, ids=lambda a: " ".join(a[:2]))
def test_cli_text_output_is_terminal_safe(hostile, tmp_path: Path, args) -> None:
    path, info = hostile
    csv = tmp_path / "groups.csv"
    csv.write_text("site,value\n" + "".join(
        f"\"{('north' + MARKUP + BIDI) if i % 2 else 's' + CSI}\",{500 + i % 3}\n"
        for i in range(12)), encoding="utf-8")
    argv = [a.format(mid=info["mid"], alert=info["alert"], csv=csv) for a in args]
    out = run_in_terminal(*argv, "--db", path) if args[0] != "analyze" else run_in_terminal(*argv)
    _assert_safe(out, " ".join(argv))
    assert out.strip()


def test_history_shows_markup_literally(hostile) -> None:
    path, info = hostile
    out = run_in_terminal("history", info["mid"], "--db", path)
    assert "[bold red]boom[/] [@click=app.quit]x[/]" in out
    assert "again[bold red]boom[/]" in out and "by [i]x[/i]" in out
    assert "500.3" in out and "500.4" in out


def test_export_to_a_pipe_keeps_the_exact_text(hostile) -> None:
    """Only a terminal gets the cleaned text; a pipe or file keeps the data as stored."""
    path, _ = hostile
    res = subprocess.run(cli_cmd("export", "--db", path), capture_output=True, text=True,
                         env=subprocess_env(), timeout=120)
    assert res.returncode == 0, res.stderr
    assert "\x1b]0;pwned\x07" in res.stdout and "\u202e" in res.stdout


async def test_interface_shows_hostile_text_literally_and_cut(hostile) -> None:
    from lotwatch.tui.app.application import LotwatchApp
    from textual.widgets import DataTable

    from tests.tui.tui_helpers import screen_text, wait_until

    path, _ = hostile
    app = LotwatchApp(path)
    async with app.run_test(size=(80, 24)) as pilot:
        await wait_until(pilot, lambda: app.detail is not None, timeout=30)
        shown = screen_text(app)
        _assert_safe(shown, "board")
        tables = list(app.screen.query(DataTable))
        cells = [str(getattr(c, "plain", c)) for t in tables for r in range(t.row_count)
                 for c in t.get_row_at(r)]
        assert cells, "the main view shows no table"
        assert max(len(c) for c in cells) < 200, "a 600-character text was not cut"
        # A cut name ends in an ellipsis (on the board a direction word may follow it).
        assert any("…" in c for c in cells), "long text is cut without an ellipsis"
        assert "[bold red]boom[/]" in shown or any("[bold red]" in c for c in cells)
        await pilot.press("a")
        await wait_until(pilot, lambda: bool(app.alerts), timeout=30)
        await pilot.pause(0.3)
        shown = screen_text(app)
        _assert_safe(shown, "alerts view")
        assert "[bold red]boom[/]" in shown
        assert app.is_running


@pytest.mark.parametrize("args", [("characteristic", "list"), ("factor", "list"),
                                  ("alerts", "list")], ids=lambda a: " ".join(a))
def test_cli_tables_cut_long_text(hostile, args) -> None:
    path, _ = hostile
    out = run_in_terminal(*args, "--db", path)
    lines = out.replace("\r\n", "\n").splitlines()
    assert lines and max(len(line) for line in lines) <= 160, max(lines, key=len)
    assert "W" * 100 not in out
