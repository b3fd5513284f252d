"""Review engine speed: all rolling windows of a large store from bucket sums, against a
straightforward pandas + scipy baseline measured in the same run.

Run: cd /work/main && /work/venv/bin/python tests/bench/bench_review.py [--quick] [--ten-million]
[--phases]

Synthetic store (fixed seed): 20 characteristics, 12 sites (two lines each), 3 shifts, 2 years
ending 2026-11-29; 1,000,000 measurements (one lot = one value of each characteristic). To build
it in seconds the script writes lots, tags, measurements and the per-day buckets directly with
``executemany`` inside one ``store.write()`` transaction (the same tables and the same bucket
definition ``log_lots`` maintains, but no audit rows), instead of going through ``log_lots``.

Measured (medians over repeats; CPU time is shared, so expect noise):

* baseline: load measurements with their site and shift tags into pandas (``pandas.read_sql``),
  then for each of 52 weekly 4-week windows × 20 characteristics × 2 factors (site, shift) select
  the rows by boolean mask and call ``scipy.stats.f_oneway``;
* review: ``store.day_sums`` (one query, numpy arrays) → day-wise cumulative sums → ANOVA, Welch, Bartlett, eta²/omega²,
  largest shift for the same 52 windows × every characteristic × every factor (site, line and
  shift: 60 comparisons, a superset of the baseline's 40), then BH per window; F and p of the 40
  shared comparisons are checked against the baseline to 1e-9 relative;
* run_review: the latest weekly review (3 windows, detectable shifts, ANOM, alert decisions;
  not recorded);
* (the one-lot update of the sequential detectors is measured by ``bench_detection.py``);
* memory: tracemalloc peak of one full review (a separate, untimed pass), and the peak resident
  set size of a fresh process that opens the store and runs one full review;
* ``--ten-million``: the same on 10,000,000 measurements, review cost relative to 1M (this build
  takes several minutes and ~2 GB of disk, hence optional).

The last line is ``speed-up: N.Nx over the straightforward baseline`` (baseline median / review
median, wall clock); the process-CPU ratio is printed just before it, since the machine may be
shared. Goals (issue 13): at least 150x the baseline at 1M; 10M at most 1.2x the 1M time and
under 300 MB. Most of the review's time is SQLite reading ~290k day sums (``store.day_sums``
has SQLite write each column as one text per characteristic x factor x level, parsed by numpy);
the statistics over all windows take about 10 ms.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
import tracemalloc
from datetime import date, timedelta
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import polars as pl  # noqa: E402
from lotwatch.stats import monitor as mon  # noqa: E402
from lotwatch.store import Store  # noqa: E402
from lotwatch.tui.services import review_engine as eng  # noqa: E402

END = date(2026, 11, 29)
DAYS = 730
N_CHARS = 20
SITES = [f"site{i:02d}" for i in range(12)]
SHIFTS = ["early", "late", "night"]
WINDOWS = 52
SEED = 20_261_129


def build_store(path: Path, n_measurements: int, seed: int = SEED) -> Store:
    """Create the synthetic store at ``path`` (see the module docstring)."""
    rng = np.random.default_rng(seed)
    store = Store.create(path)
    chars = []
    for i in range(N_CHARS):
        res = "0.1" if i % 2 == 0 else "0.01"
        target = 100.0 + 10 * i
        sd = 1.0 if res == "0.1" else 0.15
        store.add_characteristic(f"c{i:02d}", unit="u", resolution=res, target=target,
                                 lsl=target - 6 * sd, usl=target + 6 * sd)
        chars.append((store.characteristic(f"c{i:02d}"), sd))
    n_lots = n_measurements // N_CHARS
    site = rng.integers(0, len(SITES), n_lots)
    line = rng.integers(0, 2, n_lots)
    shift = rng.integers(0, len(SHIFTS), n_lots)
    start = END - timedelta(days=DAYS - 1)
    day_idx = rng.integers(0, DAYS, n_lots)
    secs = rng.integers(0, 86400, n_lots)
    days = [start + timedelta(days=int(d)) for d in range(DAYS)]
    day_txt = [d.isoformat() for d in days]
    stamps = [f"{day_txt[d]}T{s // 3600:02d}:{s % 3600 // 60:02d}:{s % 60:02d}Z"
              for d, s in zip(day_idx.tolist(), secs.tolist(), strict=True)]
    site_effect = rng.normal(0, 0.1, (N_CHARS, len(SITES)))
    conn = store.conn
    with store.write():
        conn.executemany("INSERT INTO lots(id, lot_code, created_at) VALUES (?, ?, ?)",
                         ((i + 1, f"B{i:08d}", stamps[i]) for i in range(n_lots)))
        tags = []
        for i in range(n_lots):
            s = SITES[site[i]]
            tags += [(i + 1, "site", s), (i + 1, "line", f"{s}-L{line[i] + 1}"),
                     (i + 1, "shift", SHIFTS[shift[i]])]
        conn.executemany("INSERT INTO lot_tags(lot_id, key, value) VALUES (?, ?, ?)", tags)
        del tags
        frames = []
        mid = 0
        for c, (ch, sd) in enumerate(chars):
            mean = ch.target + site_effect[c, site] * sd
            units = np.round((mean + rng.normal(0, sd, n_lots)) / ch.resolution_value).astype(np.int64)
            ids = np.arange(mid + 1, mid + n_lots + 1)
            mid += n_lots
            conn.executemany(
                "INSERT INTO measurements(id, lot_id, characteristic_id, seq, original_units, "
                "current_units, voided, measured_at, day, logged_at, logged_by, note, source) "
                "VALUES (?, ?, ?, 0, ?, ?, 0, ?, ?, ?, 'bench', NULL, 'bench')",
                ((int(ids[i]), i + 1, ch.id, int(units[i]), int(units[i]), stamps[i],
                  day_txt[day_idx[i]], stamps[i]) for i in range(n_lots)))
            d = units - ch.origin_units
            frames.append(pl.DataFrame({
                "characteristic_id": np.full(n_lots, ch.id), "day": day_idx, "d": d,
                "site": site, "line": site * 2 + line, "shift": shift}))
        allm = pl.concat(frames)
        for factor, names in (("site", SITES), ("line", [f"{s}-L{j + 1}" for s in SITES
                                                         for j in range(2)]), ("shift", SHIFTS)):
            b = (allm.group_by("characteristic_id", factor, "day")
                 .agg(pl.len().alias("n"), pl.col("d").sum().alias("s1"),
                      (pl.col("d") * pl.col("d")).sum().alias("s2")))
            # one value per lot and characteristic here, so each bucket holds n lots
            conn.executemany(
                "INSERT INTO buckets(characteristic_id, factor, level, day, n, sum_d, sum_d2, "
                "lots) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                ((cid, factor, names[lv], day_txt[dd], n, s1, s2, n)
                 for cid, lv, dd, n, s1, s2 in b.iter_rows()))
    conn.execute("ANALYZE")
    return store


# ---------------------------------------------------------------- the two sides


def window_plan() -> tuple[mon.ReviewSettings, list[mon.Window]]:
    cfg = mon.ReviewSettings(min_n=2)  # f_oneway uses every group with data
    return cfg, mon.window_plan(END, cfg, WINDOWS)


def baseline(path: Path) -> dict[tuple[str, str, int], tuple[float, float]]:
    """The straightforward route: everything into pandas, one mask + f_oneway per test."""
    import sqlite3

    import pandas as pd
    from scipy.stats import f_oneway

    conn = sqlite3.connect(path)
    df = pd.read_sql(
        "SELECT c.name AS characteristic, m.current_units * CAST(c.resolution AS REAL) AS value, "
        "m.day AS day, ts.value AS site, th.value AS shift FROM measurements m "
        "JOIN characteristics c ON c.id = m.characteristic_id "
        "JOIN lot_tags ts ON ts.lot_id = m.lot_id AND ts.key = 'site' "
        "JOIN lot_tags th ON th.lot_id = m.lot_id AND th.key = 'shift' WHERE m.voided = 0",
        conn)
    conn.close()
    df["day"] = pd.to_datetime(df["day"])
    _, wins = window_plan()
    out = {}
    for w, win in enumerate(wins):
        lo, hi = pd.Timestamp(win.start), pd.Timestamp(win.end)
        for ch in sorted(df["characteristic"].unique()):
            for factor in ("site", "shift"):
                sub = df[(df["characteristic"] == ch) & (df["day"] >= lo) & (df["day"] <= hi)]
                groups = [g["value"].to_numpy() for _, g in sub.groupby(factor)]
                r = f_oneway(*groups)
                out[(ch, factor, w)] = (float(r.statistic), float(r.pvalue))
    return out


def full_review(store: Store) -> tuple[mon.WindowStats, np.ndarray]:
    """Every window × comparison from bucket sums: ANOVA, Welch, Bartlett, effect sizes, largest
    shift, then BH per window."""
    cfg, wins = window_plan()
    comps, _ = eng.comparisons_of(store)
    ws = eng.compute_windows(store, comps, wins, cfg)
    q, _ = mon.family_fdr(ws.p_used, "bh")
    return ws, q


def phases(store: Store, repeats: int) -> dict[str, float]:
    """Median process CPU seconds of each step of ``full_review``: the day-sum read, the
    day-wise cube, the window sums, the statistics and BH."""
    cfg, wins = window_plan()
    comps, _ = eng.comparisons_of(store)
    first, last = mon.window_span(wins, cfg)
    steps = {
        "read (store.day_sums)": lambda _: store.day_sums(since=first, until=last),
        "cube (day_runs_cube)": lambda sums: mon.day_runs_cube(sums, comps, first_day=first,
                                                               last_day=last),
        "window sums": lambda cube: mon.window_sums(cube, wins, cfg),
        "statistics": lambda sums: mon.window_statistics(sums, min_n=cfg.min_n,
                                                         alpha=cfg.alpha),
        "BH": lambda ws: mon.family_fdr(ws.p_used, "bh"),
    }
    times: dict[str, list[float]] = {name: [] for name in steps}
    for _ in range(repeats):
        out: object = None
        for name, step in steps.items():
            c0 = time.process_time()
            out = step(out)
            times[name].append(time.process_time() - c0)
    return {name: statistics.median(t) for name, t in times.items()}


def check_same(ws: mon.WindowStats, ref: dict) -> float:
    """Largest relative difference of F and p between the review and the baseline."""
    index = {(c.characteristic, c.factor): i for i, c in enumerate(ws.sums.comparisons)}
    worst = 0.0
    for (ch, factor, w), (f, p) in ref.items():
        c = index[(ch, factor)]
        for mine, theirs in ((ws.f[w, c], f), (ws.p[w, c], p)):
            rel = abs(mine - theirs) / max(abs(theirs), 1e-300)
            worst = max(worst, rel)
    return worst


CPU: dict[str, float] = {}  # median process CPU seconds per timed step


def timed(fn, repeats: int, name: str = "") -> tuple[float, object]:
    """Median wall-clock seconds over ``repeats`` calls (process CPU medians go to ``CPU``)."""
    times, cpu, result = [], [], None
    for _ in range(repeats):
        c0, t0 = time.process_time(), time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    if name:
        CPU[name] = statistics.median(cpu)
    return statistics.median(times), result


def memory_peak(store: Store) -> float:
    """tracemalloc peak (Python and numpy allocations; polars' own allocator is not traced)."""
    tracemalloc.start()
    full_review(store)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak / 2**20


_RSS_PROBE = """
import sys
sys.path.insert(0, {root!r}); sys.path.insert(0, {bench!r})
def hwm():
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM:"):
            return int(line.split()[1])
import bench_review as b
from lotwatch.store import Store
store = Store.open({path!r}, read_only=True)
before = hwm()
b.full_review(store)
print(before, hwm())
"""


def rss_peak(path: Path) -> tuple[float, float]:
    """Peak resident set size (MB, Linux VmHWM of a fresh process: ru_maxrss would carry this
    process's peak across fork and exec) after imports and opening the store, and after one
    full review."""
    import subprocess

    code = _RSS_PROBE.format(root=str(ROOT), bench=str(Path(__file__).parent), path=str(path))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    return int(out[0]) / 1024, int(out[1]) / 1024


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="100k measurements, fewer repeats")
    ap.add_argument("--ten-million", action="store_true", help="also build and review 10M")
    ap.add_argument("--measurements", type=int, default=None)
    ap.add_argument("--phases", action="store_true",
                    help="also print the CPU time of each step of the full review")
    args = ap.parse_args()
    n = args.measurements or (100_000 if args.quick else 1_000_000)
    reps, base_reps = (3, 1) if args.quick else (7, 1)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.sqlite"
        t0 = time.perf_counter()
        store = build_store(path, n)
        print(f"built {n:,} measurements in {time.perf_counter() - t0:.1f} s "
              f"(direct executemany; {path.stat().st_size / 2**20:.0f} MB)")
        t_base, ref = timed(lambda: baseline(path), base_reps, "baseline")
        print(f"baseline (pandas + f_oneway, {len(ref)} tests): median {t_base:.3f} s "
              f"over {base_reps} (CPU {CPU['baseline']:.3f} s)")
        t_rev, (ws, _q) = timed(lambda: full_review(store), reps, "review")
        W, C = ws.f.shape
        print(f"full review ({W} windows x {C} comparisons, F, Welch, Bartlett, effect sizes, "
              f"BH): median {t_rev * 1000:.1f} ms over {reps} (CPU {CPU['review'] * 1000:.1f} ms)")
        if args.phases:
            for name, t in phases(store, reps).items():
                print(f"  {name}: median {t * 1000:.1f} ms CPU")
        worst = check_same(ws, ref)
        print(f"same F and p as the baseline: max relative difference {worst:.2e} "
              f"({'ok' if worst <= 1e-9 else 'FAILED'}, limit 1e-9)")
        t_run, res = timed(lambda: eng.run_review(store, as_of=END, persist=False), reps)
        print(f"run_review (latest week, {res.family_size} in family, ANOM, detectable shift): "
              f"median {t_run * 1000:.1f} ms")
        peak = memory_peak(store)
        base_rss, rss = rss_peak(path)
        print(f"memory of one full review: tracemalloc peak {peak:.1f} MB; process peak RSS "
              f"{rss:.0f} MB ({base_rss:.0f} MB after imports and opening the store)")
        store.close()
        if args.ten_million:
            big = Path(tmp) / "big.sqlite"
            t0 = time.perf_counter()
            bstore = build_store(big, 10_000_000)
            print(f"built 10,000,000 measurements in {time.perf_counter() - t0:.0f} s")
            t_big, _ = timed(lambda: full_review(bstore), reps)
            big_peak = memory_peak(bstore)
            big_base, big_rss = rss_peak(big)
            print(f"full review at 10M: median {t_big * 1000:.1f} ms, "
                  f"{t_big / t_rev:.2f}x the 1M cost (goal <= 1.2x); tracemalloc peak "
                  f"{big_peak:.1f} MB, process peak RSS {big_rss:.0f} MB ({big_base:.0f} MB "
                  f"before the review; goal < 300 MB)")
            bstore.close()
    print(f"(process CPU time ratio, less sensitive to other load on the machine: "
          f"{CPU['baseline'] / CPU['review']:.1f}x)")
    print(f"speed-up: {t_base / t_rev:.1f}x over the straightforward baseline (goal at 1M: "
          f">= 150x)")


if __name__ == "__main__":
    main()
