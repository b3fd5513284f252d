"""Store core speed: log_lots on a 100k-measurement batch, and bucket_frame / values_frame on a
1M-measurement store, each against a baseline measured in the same run.

Run: cd /work/main && /work/venv/bin/python tests/bench/bench_store_core.py [--measurements N]
Baselines: a bare executemany of the same rows into an unindexed table (the floor for writing
them at all); for bucket_frame, a full ``SELECT count(*)`` scan of the measurements it summarises.
"""

from __future__ import annotations

import argparse
import random
import sqlite3
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import lotwatch.store.queries  # noqa: E402, F401 - also up front (it imports numpy)
import polars  # noqa: E402, F401 - imported up front so no timing includes it
from lotwatch.store import LotEntry, Store  # noqa: E402


def _entries(n: int, start: int, rng: random.Random) -> list[LotEntry]:
    out = []
    for i in range(start, start + n):
        day = 1 + i % 28
        out.append(LotEntry(
            "fill_volume", [f"{500 + rng.randint(-30, 30) / 10:.1f}"],
            {"site": f"s{i % 3}", "line": str(i % 4 + 1), "shift": ("day", "night")[i % 2]},
            lot=f"B{i:08d}", measured_at=f"2026-11-{day:02d}T{i % 24:02d}:00:00Z"))
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--measurements", type=int, default=1_000_000)
    args = ap.parse_args()
    rng = random.Random(7)
    # polars sets itself up on first use (~0.2 s): do that before any timing
    polars.DataFrame({"d": ["2026-01-01"]}).with_columns(polars.col("d").str.to_date("%Y-%m-%d"))
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.sqlite"
        store = Store.create(path)
        store.add_characteristic("fill_volume", unit="mL", resolution="0.1", target=500)

        batch = _entries(100_000, 0, rng)
        t0 = time.perf_counter()
        out = store.log_lots(batch)
        t_log = time.perf_counter() - t0
        assert out.stored == 100_000

        base = sqlite3.connect(Path(tmp) / "base.sqlite", isolation_level=None)
        base.execute("CREATE TABLE m (id INTEGER PRIMARY KEY, lot TEXT, v INTEGER, at TEXT)")
        rows = [(e.lot, int(float(e.values[0]) * 10), e.measured_at) for e in batch]
        t0 = time.perf_counter()
        base.execute("BEGIN IMMEDIATE")
        base.executemany("INSERT INTO m(lot, v, at) VALUES (?, ?, ?)", rows)
        base.execute("COMMIT")
        t_base = time.perf_counter() - t0
        print(f"log_lots 100,000 measurements: {t_log:.2f} s; bare executemany baseline "
              f"{t_base:.2f} s; ratio {t_log / t_base:.1f}x")

        done = 100_000
        while done < args.measurements:
            n = min(100_000, args.measurements - done)
            store.log_lots(_entries(n, done, rng))
            done += n

        t0 = time.perf_counter()
        frame = store.bucket_frame()
        t_first = time.perf_counter() - t0
        times = []
        for _ in range(5):
            t0 = time.perf_counter()
            frame = store.bucket_frame()
            times.append(time.perf_counter() - t0)
        t_bucket = sorted(times)[2]
        t0 = time.perf_counter()
        store.conn.execute("SELECT count(*), sum(current_units) FROM measurements").fetchone()
        t_scan = time.perf_counter() - t0
        print(f"bucket_frame on {done:,} measurements ({frame.height:,} rows): first call "
              f"{t_first * 1000:.0f} ms, then median {t_bucket * 1000:.1f} ms; full-scan "
              f"baseline {t_scan * 1000:.0f} ms; ratio {t_bucket / t_scan:.3f}x")

        t0 = time.perf_counter()
        last = store.values_frame("fill_volume", "line", last_n=50)
        t_last = time.perf_counter() - t0
        t0 = time.perf_counter()
        window = store.values_frame("fill_volume", "line", since=frame["day"].max(),
                                    until=frame["day"].max())
        t_win = time.perf_counter() - t0
        print(f"values_frame last_n=50: {last.height} rows in {t_last * 1000:.0f} ms; "
              f"one-day window: {window.height:,} rows in {t_win * 1000:.0f} ms")

        t0 = time.perf_counter()
        report = store.check()
        print(f"check(): ok={report.ok} in {time.perf_counter() - t0:.2f} s")
        t0 = time.perf_counter()
        m = store.measurements_frame()
        print(f"measurements_frame: {m.height:,} rows in {time.perf_counter() - t0:.2f} s")
        store.close()


if __name__ == "__main__":
    main()
