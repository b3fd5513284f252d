"""The mixed load used by tests/reliability/test_load.py and tests/bench/bench_load.py.

Writers (separate processes) log lots one per ``store.log_lots`` call, or import small CSV files
through the ``lotwatch import`` command (click, in-process, plus a few real subprocesses), while
readers (separate processes) rerun the review (``run_review(store, persist=False)``) or read
aggregate and value frames. Every process reports what it stored, its per-call latencies and
every exception text to the parent, which then counts the store by lot id.
"""

from __future__ import annotations

import multiprocessing as mp
import random
import re
import time
import traceback
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path

from tests.reliability.helpers import CHAR, run_cli

SITES = ("north", "south")
SHIFTS = ("day", "night")


@dataclass
class WorkerResult:
    """What one process did."""

    role: str
    index: int
    stored_lots: list[str] = field(default_factory=list)  # lot ids it stored itself
    attempted_lots: list[str] = field(default_factory=list)
    latencies: list[float] = field(default_factory=list)  # seconds per log_lots call
    iterations: int = 0
    errors: list[str] = field(default_factory=list)


def _lot_fields(rng: random.Random, writer: int, k: int) -> tuple[str, dict[str, str], str]:
    day = datetime.now(UTC) - timedelta(days=rng.randint(0, 40), minutes=rng.randint(0, 600))
    tags = {"site": SITES[(writer + k) % 2], "line": str(1 + (k % 4)), "shift": SHIFTS[k % 2]}
    return f"{500 + rng.randint(-30, 30) / 10:.1f}", tags, day.strftime("%Y-%m-%dT%H:%M:%SZ")


def api_writer(path: str, writer: int, n_lots: int, shared: int, barrier, results) -> None:
    """Log ``n_lots`` own lots (one per call), then ``shared`` lots every writer also logs."""
    from lotwatch.store import LotEntry, Store

    res = WorkerResult("api-writer", writer)
    rng = random.Random(1000 + writer)
    try:
        with Store.open(path) as store:
            if barrier is not None:
                barrier.wait(timeout=120)
            for k in range(n_lots):
                value, tags, at = _lot_fields(rng, writer, k)
                lot = f"A{writer}-{k:05d}"
                res.attempted_lots.append(lot)
                t0 = time.perf_counter()
                out = store.log_lots([LotEntry(CHAR, [value], tags, lot=lot, measured_at=at)])
                res.latencies.append(time.perf_counter() - t0)
                if out.stored:
                    res.stored_lots.extend(out.lots)
            for k in range(shared):
                # the same lot, values and tags from every writer: stored exactly once
                entry = LotEntry(CHAR, ["501.0", "500.9"],
                                 {"site": "north", "line": "9", "shift": "day"},
                                 lot=f"S-{k:04d}", measured_at="2026-11-25T06:00:00Z")
                res.attempted_lots.append(entry.lot)
                t0 = time.perf_counter()
                out = store.log_lots([entry])
                res.latencies.append(time.perf_counter() - t0)
                if out.stored:
                    res.stored_lots.extend(out.lots)
    except BaseException:  # noqa: BLE001 - everything goes back to the parent
        res.errors.append(traceback.format_exc())
    results.put(res)


def import_writer(path: str, writer: int, n_files: int, lots_per_file: int, workdir: str,
                  subprocess_every: int, barrier, results) -> None:
    """Import ``n_files`` small long-layout CSV files through ``lotwatch import``; each file is
    imported twice (the second time must store nothing). Every ``subprocess_every``-th file goes
    through a real ``python -m lotwatch.tui import`` process, the rest through click in this process."""
    from click.testing import CliRunner
    from lotwatch.tui.cli import main

    res = WorkerResult("import-writer", writer)
    rng = random.Random(2000 + writer)
    runner = CliRunner()
    try:
        if barrier is not None:
            barrier.wait(timeout=120)
        for f in range(n_files):
            lines = ["lot,characteristic,value,site,line,shift,measured_at,note"]
            lots = []
            for j in range(lots_per_file):
                value, tags, at = _lot_fields(rng, writer, f * lots_per_file + j)
                lot = f"I{writer}-{f:04d}-{j:03d}"
                lots.append(lot)
                lines.append(f"{lot},{CHAR},{value},{tags['site']},{tags['line']},"
                             f"{tags['shift']},{at},file {f}")
            csv_path = Path(workdir) / f"w{writer}-f{f:04d}.csv"
            csv_path.write_text("\n".join(lines) + "\n", encoding="utf-8")
            res.attempted_lots.extend(lots)
            for attempt in (1, 2):
                t0 = time.perf_counter()
                if subprocess_every and f % subprocess_every == 0 and attempt == 1:
                    done = run_cli("import", csv_path, "--db", path, timeout=300)
                    code, output = done.returncode, done.stdout + done.stderr
                else:
                    r = runner.invoke(main, ["import", str(csv_path), "--db", path],
                                      catch_exceptions=True)
                    code, output = r.exit_code, r.output
                    if r.exception is not None and not isinstance(r.exception, SystemExit):
                        output += "".join(traceback.format_exception(r.exception))
                res.latencies.append((time.perf_counter() - t0) / lots_per_file)
                expect = lots_per_file if attempt == 1 else 0
                if code != 0 or not re.search(rf"values stored:\s+{expect:,}\n", output):
                    res.errors.append(f"file {csv_path.name} attempt {attempt}: exit {code}\n"
                                      f"{output}")
                elif attempt == 1:
                    res.stored_lots.extend(lots)
    except BaseException:  # noqa: BLE001
        res.errors.append(traceback.format_exc())
    results.put(res)


def reader(path: str, index: int, mode: str, stop, barrier, results) -> None:
    """Until ``stop`` is set: ``run_review(persist=False)`` (mode "review") or bucket and value
    frame reads with a consistency check of each frame (mode "frames")."""
    from lotwatch.store import Store
    from lotwatch.tui.services.review_engine import run_review

    res = WorkerResult(f"reader-{mode}", index)
    try:
        with Store.open(path, read_only=True) as store:
            if barrier is not None:
                barrier.wait(timeout=120)
            while not stop.is_set():
                if mode == "review":
                    run_review(store, persist=False)
                else:
                    frame = store.bucket_frame(characteristic=CHAR)
                    # one snapshot: every factor sees the same number of measurements
                    by_factor = {f: int(frame.filter(frame["factor"] == f)["n"].sum())
                                 for f in ("site", "line", "shift")}
                    if len(set(by_factor.values())) > 1:
                        res.errors.append(f"bucket totals differ between factors: {by_factor}")
                    store.values_frame(CHAR, "line", last_n=20)
                res.iterations += 1
    except BaseException:  # noqa: BLE001
        res.errors.append(traceback.format_exc())
    results.put(res)


@dataclass
class LoadRun:
    """Everything a load run produced."""

    results: list[WorkerResult]
    seconds: float
    expected_lots: set[str]


def run_load(path: Path, workdir: Path, *, api_writers: int = 6, lots_per_api_writer: int = 2500,
             shared: int = 100, import_writers: int = 2, files_per_import_writer: int = 50,
             lots_per_file: int = 50, subprocess_every: int = 20, review_readers: int = 2,
             frame_readers: int = 2, timeout: float = 900) -> LoadRun:
    """Run the writers and readers at once against the store at ``path`` (already made)."""
    ctx = mp.get_context("spawn")
    n_procs = api_writers + import_writers + review_readers + frame_readers
    barrier = ctx.Barrier(n_procs)
    results = ctx.Queue()
    stop = ctx.Event()
    writers = [ctx.Process(target=api_writer,
                           args=(str(path), w, lots_per_api_writer, shared, barrier, results))
               for w in range(api_writers)]
    writers += [ctx.Process(target=import_writer,
                            args=(str(path), w, files_per_import_writer, lots_per_file,
                                  str(workdir), subprocess_every, barrier, results))
                for w in range(import_writers)]
    readers = [ctx.Process(target=reader, args=(str(path), r, "review", stop, barrier, results))
               for r in range(review_readers)]
    readers += [ctx.Process(target=reader, args=(str(path), r, "frames", stop, barrier, results))
                for r in range(frame_readers)]
    t0 = time.perf_counter()
    for p in writers + readers:
        p.start()
    out: list[WorkerResult] = []
    deadline = time.monotonic() + timeout
    try:
        while len(out) < len(writers):
            out.append(results.get(timeout=max(1.0, deadline - time.monotonic())))
        stop.set()
        while len(out) < n_procs:
            out.append(results.get(timeout=max(1.0, deadline - time.monotonic())))
    finally:
        stop.set()
        for p in writers + readers:
            p.join(timeout=60)
            if p.is_alive():
                p.kill()
    seconds = time.perf_counter() - t0
    expected = {f"A{w}-{k:05d}" for w in range(api_writers) for k in range(lots_per_api_writer)}
    expected |= {f"S-{k:04d}" for k in range(shared)}
    expected |= {f"I{w}-{f:04d}-{j:03d}" for w in range(import_writers)
                 for f in range(files_per_import_writer) for j in range(lots_per_file)}
    return LoadRun(out, seconds, expected)


def single_writer_latencies(path: Path, n_lots: int) -> list[float]:
    """The same logging as one API writer, alone (the baseline)."""
    ctx = mp.get_context("spawn")
    results = ctx.Queue()
    p = ctx.Process(target=api_writer, args=(str(path), 0, n_lots, 0, None, results))
    p.start()
    res: WorkerResult = results.get(timeout=600)
    p.join(timeout=60)
    if res.errors:
        raise RuntimeError("\n".join(res.errors))
    return res.latencies


def percentile(xs: list[float], q: float) -> float:
    """Nearest-rank percentile (common practice), q in 0..100."""
    s = sorted(xs)
    if not s:
        return float("nan")
    k = max(0, min(len(s) - 1, int(round(q / 100 * len(s) + 0.5)) - 1))
    return s[k]
