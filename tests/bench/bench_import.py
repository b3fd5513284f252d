"""Import speed and memory: ``import_file`` of a long CSV against baselines measured in the same run.

Run: python tests/bench/bench_import.py [--quick] [--rows N]

Each measured import runs in a fresh child process, so its peak memory (``ru_maxrss``) is its own.
Baselines:
- reading the same file with ``polars.read_csv`` (all columns as text): the floor for reading;
- a bare ``executemany`` of the same rows into a table shaped like ``measurements`` (no lots,
  tags, audit rows or day sums): the floor for writing.
A refused import (the same file with one bad cell in its last row) is timed against the real one.
Goals (issue 13): >= 200,000 rows/s for a 1M-row file, peak memory < 1 GB, a refused import
<= 10% of a real one. The demo store build is timed too (goal < 10 s).
"""

from __future__ import annotations

import argparse
import json
import resource
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import polars as pl  # noqa: E402


def make_csv(path: Path, rows: int, *, bad_last: bool = False) -> None:
    """Two replicate values per lot, six lines, three shifts, one site; invented numbers."""
    rng = np.random.default_rng(3)
    units = np.rint(rng.normal(5000, 6, rows)).astype(np.int64)
    lot = np.arange(rows) // 2
    minutes = lot
    day = 1 + (minutes // 1440) % 28
    lots = pl.Series("lot", lot).cast(pl.String).str.zfill(7)
    frame = pl.DataFrame({
        "lot": "B" + lots,
        "characteristic": pl.Series(["fill_volume"] * rows),
        "value": pl.Series(units // 10).cast(pl.String) + "." + pl.Series(units % 10).cast(pl.String),
        "measured_at": ("2026-11-" + pl.Series(day).cast(pl.String).str.zfill(2) + "T"
                        + pl.Series((minutes // 60) % 24).cast(pl.String).str.zfill(2) + ":"
                        + pl.Series(minutes % 60).cast(pl.String).str.zfill(2) + ":00Z"),
        "site": pl.Series(["S"] * rows),
        "line": "L" + pl.Series(lot % 6).cast(pl.String),
        "shift": pl.Series(np.array(["early", "late", "night"])[lot % 3]),
    })
    if bad_last:
        frame = frame.with_columns(
            pl.when(pl.int_range(pl.len()) == rows - 1).then(pl.lit("5OO.1"))
            .otherwise(pl.col("value")).alias("value"))
    frame.write_csv(path)


def new_store(path: Path) -> None:
    from lotwatch.store import Store

    with Store.create(path) as s:
        s.add_characteristic("fill_volume", unit="mL", resolution="0.1", plausible=(400, 600))


def child(csv_path: str, db: str) -> None:
    """Run one import and print its time, outcome and peak memory as JSON."""
    import lotwatch.store.bulk  # noqa: F401  (modules and polars loaded before the clock starts)
    from lotwatch.store import BadInput, Store
    from lotwatch.store.importer import import_file

    with Store.open(db) as store:
        t = time.perf_counter()
        try:
            summary = import_file(store, csv_path)
            outcome = f"stored {summary.stored}"
        except BadInput as exc:
            outcome = f"refused ({len(exc.problems)} problem)"
        elapsed = time.perf_counter() - t
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"seconds": elapsed, "outcome": outcome, "peak_mb": peak_mb}))


def run_child(csv_path: Path, db: Path, *, floor_log: bool = False) -> dict:
    """One import in a child process. With ``floor_log``, this process meanwhile logs one lot
    every 0.2 s into the same store (a floor terminal) and records the longest wait."""
    proc = subprocess.Popen([sys.executable, __file__, "--child", str(csv_path), str(db)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    waits: list[float] = []
    if floor_log:
        from lotwatch.store import LotEntry, Store

        with Store.open(db) as store:
            i = 0
            while proc.poll() is None:
                t = time.perf_counter()
                store.log_lots([LotEntry("fill_volume", ["500.0"],
                                         {"site": "F", "line": "F1", "shift": "early"},
                                         lot=f"FLOOR{i}")])
                waits.append(time.perf_counter() - t)
                i += 1
                time.sleep(0.2)
    out, err = proc.communicate()
    if proc.returncode != 0:
        raise RuntimeError(err)
    result = json.loads(out.strip().splitlines()[-1])
    result["floor_waits"] = waits
    return result


def bare_executemany(frame: pl.DataFrame, db: Path) -> float:
    conn = sqlite3.connect(db)
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("CREATE TABLE m (id INTEGER PRIMARY KEY, lot TEXT, characteristic TEXT, "
                 "value TEXT, measured_at TEXT, site TEXT, line TEXT, shift TEXT) STRICT")
    t = time.perf_counter()
    with conn:
        conn.executemany("INSERT INTO m(lot, characteristic, value, measured_at, site, line, "
                         "shift) VALUES (?, ?, ?, ?, ?, ?, ?)", frame.iter_rows())
    elapsed = time.perf_counter() - t
    conn.close()
    return elapsed


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--rows", type=int, default=None)
    ap.add_argument("--quick", action="store_true", help="100,000 rows instead of 1,000,000")
    ap.add_argument("--child", nargs=2, metavar=("CSV", "DB"), help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        child(*args.child)
        return
    rows = args.rows or (100_000 if args.quick else 1_000_000)
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        good, bad = d / "good.csv", d / "bad.csv"
        make_csv(good, rows)
        make_csv(bad, rows, bad_last=True)

        t = time.perf_counter()
        frame = pl.read_csv(good, infer_schema=False)
        t_read = time.perf_counter() - t
        t_bare = bare_executemany(frame, d / "bare.sqlite")
        del frame

        new_store(d / "a.sqlite")
        real = run_child(good, d / "a.sqlite")
        new_store(d / "c.sqlite")
        shared = run_child(good, d / "c.sqlite", floor_log=True)
        new_store(d / "b.sqlite")
        refused = run_child(bad, d / "b.sqlite")
        again = run_child(good, d / "a.sqlite")  # re-import: every lot a duplicate

        from lotwatch.store.demo import build_demo_store

        t = time.perf_counter()
        build_demo_store(d / "demo.sqlite")
        t_demo = time.perf_counter() - t

    rate = rows / real["seconds"]
    print(f"rows: {rows:,} ({real['outcome']})")
    print(f"baselines: polars.read_csv {t_read:.2f} s; bare executemany {t_bare:.2f} s "
          f"({rows / t_bare:,.0f} rows/s)")
    print(f"import: {real['seconds']:.2f} s = {rate:,.0f} rows/s "
          f"({real['seconds'] / t_read:.0f}x read_csv, {real['seconds'] / t_bare:.1f}x bare "
          f"executemany); goal >= 200,000 rows/s: {'met' if rate >= 200_000 else 'NOT met'}")
    print(f"peak memory: {real['peak_mb']:,.0f} MB; goal < 1024 MB: "
          f"{'met' if real['peak_mb'] < 1024 else 'NOT met'}")
    share = refused["seconds"] / real["seconds"]
    print(f"refused import (one bad cell, {refused['outcome']}): {refused['seconds']:.2f} s = "
          f"{share:.1%} of the real one; goal <= 10%: {'met' if share <= 0.10 else 'NOT met'}")
    waits = shared["floor_waits"] or [0.0]
    print(f"a floor terminal logging one lot every 0.2 s during an import: {len(waits)} lots, "
          f"longest wait {max(waits):.2f} s, median {sorted(waits)[len(waits) // 2]:.3f} s "
          f"(goal: never more than a couple of seconds)")
    print(f"re-import of the same file ({again['outcome']}): {again['seconds']:.2f} s, "
          f"peak {again['peak_mb']:,.0f} MB")
    print(f"demo build: {t_demo:.2f} s (goal < 10 s)")


if __name__ == "__main__":
    main()
