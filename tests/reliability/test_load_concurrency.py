"""Eight writer processes and four reader processes on one store at once: nothing lost, nothing
doubled, aggregates consistent, no error ("database is locked" or any other) reaches a process.

Correctness only; the latency figures of the same workload are printed by
tests/bench/bench_load.py (never timed assertions here).
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import pytest
from lotwatch.store import Store

from tests.reliability.helpers import check_ok, lot_value_counts, make_store
from tests.reliability.helpers_load import run_load


def _verify(path: Path, run, *, shared_values: int = 2) -> dict[str, int]:
    errors = [f"{r.role} {r.index}:\n{e}" for r in run.results for e in r.errors]
    assert not errors, "\n\n".join(errors[:5])
    stored_by = Counter(lot for r in run.results for lot in r.stored_lots)
    # each lot was stored by exactly one process, and every expected lot was stored by someone
    assert [lot for lot, n in stored_by.items() if n > 1] == []
    assert set(stored_by) == run.expected_lots
    counts = lot_value_counts(path)
    assert set(counts) == run.expected_lots, (
        f"missing {sorted(run.expected_lots - set(counts))[:5]}, "
        f"extra {sorted(set(counts) - run.expected_lots)[:5]}")
    wrong = {lot: n for lot, n in counts.items()
             if n != (shared_values if lot.startswith("S-") else 1)}
    assert wrong == {}
    with Store.open(path, read_only=True) as s:
        report = s.check()
        assert report.ok, report.problems
        total = sum(counts.values())
        assert report.measurements == total
        frame = s.bucket_frame()
        for factor in ("site", "line", "shift"):
            assert frame.filter(frame["factor"] == factor)["n"].sum() == total
    check_ok(path)
    readers = [r for r in run.results if r.role.startswith("reader")]
    assert all(r.iterations > 0 for r in readers), [(r.role, r.iterations) for r in readers]
    return {"lots": len(counts), "measurements": total,
            "reader_iterations": sum(r.iterations for r in readers)}


def test_small_mixed_load(tmp_path: Path) -> None:
    """A quick version of the load below (fast suite): 3 writers + 2 readers, 700 lots."""
    path = make_store(tmp_path / "load.sqlite")
    work = tmp_path / "files"
    work.mkdir()
    run = run_load(path, work, api_writers=2, lots_per_api_writer=200, shared=20,
                   import_writers=1, files_per_import_writer=6, lots_per_file=50,
                   subprocess_every=0, review_readers=1, frame_readers=1, timeout=240)
    figures = _verify(path, run)
    assert figures["lots"] == 720
    print(f"small load: {figures} in {run.seconds:.1f} s")


@pytest.mark.slow
def test_eight_writers_four_readers_20k_lots(tmp_path: Path) -> None:
    """6 API writers x 2,500 lots + 100 lots every writer logs (stored once) + 2 import writers
    x 50 files x 50 lots (each file imported twice; every 20th through a real subprocess), while
    2 processes rerun the review and 2 read frames: 20,100 lots."""
    path = make_store(tmp_path / "load.sqlite")
    work = tmp_path / "files"
    work.mkdir()
    run = run_load(path, work)
    figures = _verify(path, run)
    assert figures["lots"] == 20_100
    print(f"load: {figures} in {run.seconds:.1f} s")
