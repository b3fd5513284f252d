"""Import speed: ``lotwatch import`` of a long CSV, and the demo store build, against baselines
measured in the same run.

Run: cd /work/main && /work/venv/bin/python tests/bench/bench_import.py [--rows N]

Baselines:
- reading the same file with ``polars.read_csv`` (all columns as text): the floor for reading it;
- ``Store.log_lots`` on the same entries already built in memory: the floor for storing them.
The import's own overhead (cleaning cells, timestamps, grouping rows into entries) is the
difference. Goals: whole import >= 20,000 rows/s; demo build < 10 s.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import polars as pl  # noqa: E402
from lotwatch.store import Store  # noqa: E402
from lotwatch.store.demo import build_demo_store  # noqa: E402
from lotwatch.store.importer import ImportOptions, parse_import, store_import  # noqa: E402


def make_csv(path: Path, rows: int) -> None:
    rng = np.random.default_rng(3)
    units = np.rint(rng.normal(5000, 6, rows)).astype(np.int64)
    minutes = np.arange(rows) // 2
    pl.DataFrame({
        "lot": [f"B{i // 2:07d}" for i in range(rows)],
        "characteristic": "fill_volume",
        "value": [f"{u // 10}.{u % 10}" for u in units],
        "measured_at": [f"2026-11-{1 + (m // 1440) % 28:02d}T{(m // 60) % 24:02d}:{m % 60:02d}:00Z"
                        for m in minutes],
        "site": "S",
        "line": [f"L{(i // 2) % 6}" for i in range(rows)],
        "shift": [("early", "late", "night")[(i // 2) % 3] for i in range(rows)],
    }).write_csv(path)


def new_store(path: Path) -> Store:
    s = Store.create(path)
    s.add_characteristic("fill_volume", unit="mL", resolution="0.1", plausible=(400, 600))
    return s


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--rows", type=int, default=200_000)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        csv_path = d / "bench.csv"
        make_csv(csv_path, args.rows)

        t = time.perf_counter()
        pl.read_csv(csv_path, infer_schema=False)
        t_read = time.perf_counter() - t

        store = new_store(d / "a.sqlite")
        t = time.perf_counter()
        parsed = parse_import(csv_path, ImportOptions(), factors=["site", "line", "shift"],
                              characteristics=["fill_volume"])
        t_parse = time.perf_counter() - t
        t = time.perf_counter()
        summary = store_import(store, parsed)
        t_store = time.perf_counter() - t
        store.close()
        assert summary.stored == args.rows

        baseline = new_store(d / "b.sqlite")
        t = time.perf_counter()
        baseline.log_lots(parsed.entries)
        t_log = time.perf_counter() - t
        baseline.close()

        t = time.perf_counter()
        build_demo_store(d / "demo.sqlite")
        t_demo = time.perf_counter() - t

    total = t_parse + t_store
    print(f"rows: {args.rows:,}")
    print(f"read+parse: {t_parse:.2f} s (polars read_csv alone {t_read:.2f} s, "
          f"ratio {t_parse / t_read:.1f}x)")
    print(f"store:      {t_store:.2f} s (log_lots on prebuilt entries {t_log:.2f} s, "
          f"ratio {t_store / t_log:.2f}x)")
    print(f"whole import: {total:.2f} s = {args.rows / total:,.0f} rows/s (goal >= 20,000)")
    print(f"demo build: {t_demo:.2f} s (goal < 10 s)")


if __name__ == "__main__":
    main()
