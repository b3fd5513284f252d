"""Cost of noticing a store copied over in place (``store.file_generation``) on a floor write.

Each write (one lot, one transaction, as a floor terminal logs it) reads the write counter of the
file on disk through an ``immutable`` SQLite connection, twice. Baseline in the same run: the
same writes with that read replaced by the counters the store already has (everything else,
including the counter update, unchanged). Prints the median and 95th percentile per write and
the ratio.

Run: /work/venv/bin/python tests/bench/bench_write_check.py [--writes N] [--quick]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from lotwatch.store import LotEntry, Store, file_generation  # noqa: E402


def _writes(path: Path, n: int, start: int) -> list[float]:
    out = []
    with Store.open(path) as store:
        for i in range(start, start + n):
            entry = LotEntry("fill_volume", [f"{500 + (i % 7) / 10:.1f}"],
                             {"site": "north", "line": str(i % 4 + 1), "shift": "day"},
                             lot=f"W{i:07d}")
            t0 = time.perf_counter()
            store.log_lots([entry])
            out.append(time.perf_counter() - t0)
    return out


def _no_disk_read(conn, path, seen):  # the baseline: the counters without reading the file
    view = file_generation.counters(conn)
    return (seen, -1, 0) if view is None else (seen, view[0], view[1])


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--writes", type=int, default=2000)
    ap.add_argument("--quick", action="store_true", help="200 writes each")
    args = ap.parse_args()
    n = 200 if args.quick else args.writes
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.sqlite"
        with Store.create(path) as s:
            s.add_characteristic("fill_volume", unit="mL", resolution="0.1")
        _writes(path, 50, 0)  # warm up
        real = file_generation.check
        results = {}
        # alternate halves so a change in machine load hits both alike
        for rnd in range(2):
            for name in ("baseline", "checked"):
                file_generation.check = _no_disk_read if name == "baseline" else real
                start = 100 + (rnd * 2 + (name == "checked")) * n
                results.setdefault(name, []).extend(_writes(path, n // 2, start))
        file_generation.check = real
    for name, xs in results.items():
        xs.sort()
        print(f"{name:>8}: {len(xs)} writes, median {statistics.median(xs) * 1000:.2f} ms, "
              f"p95 {xs[int(0.95 * len(xs))] * 1000:.2f} ms")
    ratio = statistics.median(results["checked"]) / statistics.median(results["baseline"])
    print(f"ratio checked/baseline (median per write): {ratio:.2f}")


if __name__ == "__main__":
    main()
