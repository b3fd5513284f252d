"""Shared pieces of the reliability tests: a ready store, running the real command line in a
subprocess, and counting what a store holds with a plain read-only sqlite3 connection (so the
counts do not depend on the code under test)."""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
PYTHON = sys.executable
CHAR = "fill_volume"
TAGS = {"site": "north", "line": "1", "shift": "day"}

# Markers of an unhandled exception reaching the person at the terminal.
TRACEBACK_MARKERS = ("Traceback (most recent call last)", "sqlite3.", "OperationalError",
                     "IntegrityError", "DatabaseError")


def make_store(path: Path, *, extra_chars: bool = False) -> Path:
    """A store with fill_volume (mL, resolution 0.1, target 500, plausible 400..600)."""
    from lotwatch.store import Store

    with Store.create(path) as s:
        s.add_characteristic(CHAR, unit="mL", resolution="0.1", lsl=495, target=500, usl=505,
                             plausible=(400, 600))
        if extra_chars:
            s.add_characteristic("torque", unit="N·m", resolution="0.01", target=12,
                                 plausible=(0, 50))
    return path


def subprocess_env(extra: dict[str, str] | None = None) -> dict[str, str]:
    """Environment for ``python -m lotwatch.tui`` from the repository (no user data touched)."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    env.setdefault("XDG_DATA_HOME", "/nonexistent-lotwatch-test-home")
    env["COLUMNS"] = "100"
    env.pop("LOTWATCH_DB", None)
    env.update(extra or {})
    return env


def cli_cmd(*args: object) -> list[str]:
    return [PYTHON, "-m", "lotwatch.tui", *(str(a) for a in args)]


def run_cli(*args: object, timeout: float = 120, env: dict[str, str] | None = None,
            input: str | None = None, user: str | None = None) -> subprocess.CompletedProcess:
    """Run ``lotwatch ARGS`` in a fresh interpreter; text output captured.

    ``user``: run as that Unix account (via ``runuser``; tests that use it run as root).
    """
    cmd = cli_cmd(*args)
    if user is not None:
        cmd = ["runuser", "-u", user, "--", "env", *(f"{k}={v}" for k, v in
                                                      (env or subprocess_env()).items()), *cmd]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=timeout,
                          env=env or subprocess_env(), cwd=str(ROOT), input=input)


def assert_clean_refusal(result: subprocess.CompletedProcess, *, contains: tuple[str, ...] = (),
                         ) -> str:
    """The command failed with a message and no traceback; returns the combined output."""
    out = (result.stdout or "") + (result.stderr or "")
    assert result.returncode != 0, f"expected a refusal, got status 0:\n{out}"
    for marker in TRACEBACK_MARKERS:
        assert marker not in out, f"traceback or raw sqlite error shown:\n{out}"
    assert out.strip(), "refused without saying why"
    low = out.lower()
    for word in contains:
        assert word.lower() in low, f"expected {word!r} in the message:\n{out}"
    return out


def ro_connect(path: Path) -> sqlite3.Connection:
    """A plain read-only connection (the oracle for counting)."""
    return sqlite3.connect(Path(path).absolute().as_uri() + "?mode=ro", uri=True, timeout=30)


def lot_value_counts(path: Path) -> dict[str, int]:
    """lot code -> number of measurement rows, for every lot."""
    with ro_connect(path) as conn:
        rows = conn.execute(
            "SELECT l.lot_code, count(m.id) FROM lots l LEFT JOIN measurements m "
            "ON m.lot_id = l.id GROUP BY l.id").fetchall()
    conn.close()
    return dict(rows)


@dataclass(frozen=True)
class Snapshot:
    """Row counts and sums that any write changes."""

    lots: int
    measurements: int
    audit: int
    corrections: int
    voids: int
    voided: int
    current_sum: int
    alerts: int
    alert_events: int
    acknowledged: int

    @classmethod
    def of(cls, path: Path) -> Snapshot:
        conn = ro_connect(path)
        try:
            q = lambda sql: conn.execute(sql).fetchone()[0]  # noqa: E731
            return cls(
                lots=q("SELECT count(*) FROM lots"),
                measurements=q("SELECT count(*) FROM measurements"),
                audit=q("SELECT count(*) FROM audit"),
                corrections=q("SELECT count(*) FROM audit WHERE action = 'correct'"),
                voids=q("SELECT count(*) FROM audit WHERE action = 'void'"),
                voided=q("SELECT count(*) FROM measurements WHERE voided = 1"),
                current_sum=q("SELECT coalesce(sum(current_units), 0) FROM measurements"),
                alerts=q("SELECT count(*) FROM alerts"),
                alert_events=q("SELECT count(*) FROM alert_events"),
                acknowledged=q("SELECT count(*) FROM alert_events WHERE event = 'acknowledged'"),
            )
        finally:
            conn.close()


def check_ok(path: Path) -> None:
    """``lotwatch check`` in a subprocess passes, and ``PRAGMA integrity_check`` says ok."""
    res = run_cli("check", "--db", path)
    assert res.returncode == 0, res.stdout + res.stderr
    assert "consistent" in res.stdout
    conn = ro_connect(path)
    try:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    finally:
        conn.close()


def write_long_csv(path: Path, rows: list[tuple[str, str, str, str, str, str]]) -> Path:
    """A long-layout import file: lot, characteristic, value, site, line, shift (+ measured_at)."""
    lines = ["lot,characteristic,value,site,line,shift,measured_at"]
    for lot, char, value, site, line, shift in rows:
        lines.append(f"{lot},{char},{value},{site},{line},{shift},2026-11-20T08:00:00Z")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def log_named_lots(store, *lots: str) -> None:
    """Log one value of CHAR with TAGS for each lot ID (through the store's API)."""
    from lotwatch.store import LotEntry

    store.log_lots([LotEntry(CHAR, ["500.1"], TAGS, lot=lot) for lot in lots])


def backup_copy(path: Path, to: Path) -> Path:
    """A backup made while the store is in use, as the README advises (sqlite3 ".backup")."""
    src, dst = sqlite3.connect(path), sqlite3.connect(to)
    try:
        src.backup(dst)
    finally:
        src.close()
        dst.close()
    return to

