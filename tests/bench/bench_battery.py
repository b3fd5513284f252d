"""Benchmark: the full battery, and the batch ANOVA + Welch from sufficient statistics.

Run from the repo root: ``/work/venv/bin/python tests/bench/bench_battery.py [--quick]``.

1. ``run_battery`` on 12 groups with 1000 values in total (invented data on a 0.01 grid, with and
   without the exact route) against the scipy route in the same run: f_oneway + kruskal +
   levene(center="median") + tukey_hsd + tukey_hsd(equal_var=False) + dunnett. Goal: battery
   median <= 50 ms.
2. ``anova_batch`` + ``welch_batch`` over 10,000 comparisons of 12 groups from (n, Σd, Σd²) and
   (n, mean, var), against a Python loop calling scipy.stats.f_oneway (classical and Welch) on the
   raw data of the same comparisons. Goal: <= 50 ms for the batch.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np
from scipy import stats as sps

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from lotwatch.stats.anova import anova_batch  # noqa: E402
from lotwatch.stats.battery import run_battery  # noqa: E402
from lotwatch.stats.welch import welch_batch  # noqa: E402


def timed(fn, repeats: int) -> float:
    """Median wall time of ``fn()`` in seconds over ``repeats`` runs (after one warm-up)."""
    fn()
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def battery_data(seed: int = 7) -> tuple[list[np.ndarray], list[str]]:
    rng = np.random.default_rng(seed)
    sizes = rng.multinomial(1000 - 12 * 40, [1 / 12] * 12) + 40  # 1000 values, unequal groups
    samples = [np.round(rng.normal(20 + 0.05 * i, 0.5 + 0.02 * i, size=n), 2)
               for i, n in enumerate(sizes)]
    return samples, [f"line {i + 1:02d}" for i in range(12)]


def scipy_route(samples: list[np.ndarray], with_dunnett: bool = True) -> None:
    sps.f_oneway(*samples)
    sps.kruskal(*samples)
    sps.levene(*samples, center="median")
    sps.tukey_hsd(*samples)
    sps.tukey_hsd(*samples, equal_var=False)
    if with_dunnett:
        sps.dunnett(*samples[1:], control=samples[0], rng=np.random.default_rng(1))


def bench_battery(repeats: int) -> None:
    samples, names = battery_data()
    print(f"battery: 12 groups, {sum(s.size for s in samples)} values, median of {repeats}")
    base = timed(lambda: scipy_route(samples), repeats)
    print(f"  scipy route (f_oneway+kruskal+levene+tukey_hsd x2+dunnett): {1000 * base:8.2f} ms")
    no_dunnett = timed(lambda: scipy_route(samples, with_dunnett=False), repeats)
    print(f"  (of which without dunnett: {1000 * no_dunnett:.2f} ms)")
    for label, res in (("float route", None), ("exact route (resolution 0.01)", "0.01")):
        t = timed(lambda res=res: run_battery(samples, names, resolution=res,
                                              reference=names[0], lsl=18.0, usl=22.0,
                                              shift=0.2), repeats)
        print(f"  lotwatch run_battery, {label:<30}: {1000 * t:8.2f} ms   "
              f"speed-up: {base / t:.1f}x   goal <= 50 ms: {'met' if t <= 0.05 else 'NOT met'}")


def bench_batch(m: int, loop_m: int, repeats: int) -> None:
    rng = np.random.default_rng(11)
    k = 12
    n = rng.integers(3, 15, size=(m, k))
    n[rng.random((m, k)) < 0.05] = 0  # some absent groups (n = 0 pads)
    n[:, :2] = np.maximum(n[:, :2], 3)
    raw = [[np.round(rng.normal(0.1 * (j % 3), 1.0, size=n[i, j]), 2) for j in range(k)]
           for i in range(m)]
    s1 = np.array([[g.sum() for g in row] for row in raw])
    s2 = np.array([[(g * g).sum() for g in row] for row in raw])
    safe = np.maximum(n, 1)
    mean = s1 / safe
    var = np.where(n > 1, (s2 - s1 * mean) / np.maximum(n - 1, 1), 0.0)

    def batch() -> None:
        anova_batch(n, s1, s2)
        welch_batch(n, mean, var)

    t_batch = timed(batch, repeats)

    def loop() -> None:
        for row in raw[:loop_m]:
            present = [g for g in row if g.size]
            sps.f_oneway(*present)
            sps.f_oneway(*present, equal_var=False)

    t0 = time.perf_counter()
    loop()
    t_loop = (time.perf_counter() - t0) * m / loop_m
    a, w = anova_batch(n, s1, s2), welch_batch(n, mean, var)
    check = [sps.f_oneway(*[g for g in row if g.size]) for row in raw[:200]]
    check_w = [sps.f_oneway(*[g for g in row if g.size], equal_var=False) for row in raw[:200]]
    rel = max(np.max(np.abs(a.f[:200] - [c.statistic for c in check]) / a.f[:200]),
              np.max(np.abs(w.f[:200] - [c.statistic for c in check_w]) / w.f[:200]))
    scaled = f" (loop timed on {loop_m}, scaled)" if loop_m < m else ""
    print(f"batch: {m} comparisons x {k} groups, ANOVA + Welch from sufficient statistics")
    print(f"  scipy f_oneway loop (classical + Welch){scaled}: {1000 * t_loop:10.1f} ms")
    print(f"  lotwatch anova_batch + welch_batch: {1000 * t_batch:10.2f} ms   "
          f"ratio: {t_loop / t_batch:.0f}x   goal <= 50 ms: "
          f"{'met' if t_batch <= 0.05 else 'NOT met'}   max rel diff vs scipy: {rel:.1e}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer repeats, shorter scipy loop")
    args = ap.parse_args()
    bench_battery(repeats=5 if args.quick else 21)
    bench_batch(10_000, loop_m=500 if args.quick else 10_000, repeats=5 if args.quick else 21)


if __name__ == "__main__":
    main()
