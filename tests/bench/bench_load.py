"""Time to log one lot under mixed load, against the same logging by one writer alone.

The load is tests/reliability/helpers_load.run_load: 6 processes logging one lot per
``store.log_lots`` call, 2 processes importing small CSV files through ``lotwatch import``, 2
processes rerunning the review and 2 reading frames, all on one store (20,100 lots by default).
The baseline, measured in the same run, is one process logging the same number of lots as one
loaded API writer into a fresh store with nothing else running. Prints p50 and p99 of the API
writers' per-call latency in both and their ratio (nearest-rank percentiles).

Run: cd /work/main && /work/venv/bin/python tests/bench/bench_load.py [--lots-per-writer N]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.reliability.helpers import lot_value_counts, make_store  # noqa: E402
from tests.reliability.helpers_load import (  # noqa: E402
    percentile,
    run_load,
    single_writer_latencies,
)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--lots-per-writer", type=int, default=2500)
    ap.add_argument("--files-per-import-writer", type=int, default=50)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp_path = Path(tmp)
        base = make_store(tmp_path / "alone.sqlite")
        alone = single_writer_latencies(base, args.lots_per_writer)

        path = make_store(tmp_path / "load.sqlite")
        work = tmp_path / "files"
        work.mkdir()
        run = run_load(path, work, lots_per_api_writer=args.lots_per_writer,
                       files_per_import_writer=args.files_per_import_writer)
        errors = [e for r in run.results for e in r.errors]
        loaded = [x for r in run.results if r.role == "api-writer" for x in r.latencies]
        imported = [x for r in run.results if r.role == "import-writer" for x in r.latencies]
        counts = lot_value_counts(path)
        missing = len(run.expected_lots - set(counts))
        extra = len(set(counts) - run.expected_lots)

    ms = 1000.0
    a50, a99 = percentile(alone, 50) * ms, percentile(alone, 99) * ms
    l50, l99 = percentile(loaded, 50) * ms, percentile(loaded, 99) * ms
    print(f"lots stored under load: {len(counts):,} (expected {len(run.expected_lots):,}; "
          f"missing {missing}, unexpected {extra}); errors surfaced: {len(errors)}")
    print(f"load run: {run.seconds:.1f} s; reader iterations: "
          + ", ".join(f"{r.role}#{r.index}={r.iterations}" for r in run.results
                      if r.role.startswith("reader")))
    print(f"one writer alone ({len(alone):,} calls): p50 {a50:.2f} ms  p99 {a99:.2f} ms")
    print(f"under load ({len(loaded):,} API calls): p50 {l50:.2f} ms  p99 {l99:.2f} ms")
    print(f"ratio loaded/alone: p50 x{l50 / a50:.1f}  p99 x{l99 / a99:.1f}")
    if imported:
        i50, i99 = percentile(imported, 50) * ms, percentile(imported, 99) * ms
        print(f"import path, per lot ({len(imported):,} file imports incl. re-imports): "
              f"p50 {i50:.2f} ms  p99 {i99:.2f} ms")
    if errors:
        print("first error:\n" + errors[0])
        sys.exit(1)


if __name__ == "__main__":
    main()
