"""Benchmark: the "which group" half of the battery against scipy in the same run.

Run from the repo root: ``/work/venv/bin/python tests/bench/bench_posthoc.py [--quick]``.

Data: 12 groups, 1000 invented values in total, unequal group sizes (as bench_battery.py).
Timed (medians):
1. ptukey on the 66 pair statistics vs scipy.stats.studentized_range.sf on the same vector.
2. tukey_kramer vs scipy.stats.tukey_hsd; games_howell vs tukey_hsd(equal_var=False); dunnett vs
   scipy.stats.dunnett (seeded) — each warm (critical values cached, the steady state of a review
   rerun) and cold (every cache cleared before each call: a window with new group sizes).
3. Our whole share (Tukey-Kramer + Games-Howell + Dunnett + Dunn + letters + ANOM): warm, cold
   (new group sizes: every size- or df-dependent cache cleared) and first call in the process
   (W(·; k) interpolant rebuilt too). Goal: <= 30 ms median.
Prints medians and "speed-up: N.Nx" ratios.
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

from lotwatch.stats import _mvt, distributions  # noqa: E402
from lotwatch.stats.anom import analysis_of_means  # noqa: E402
from lotwatch.stats.distributions import ptukey  # noqa: E402
from lotwatch.stats.letters import compact_letters  # noqa: E402
from lotwatch.stats.posthoc import dunn, dunnett, games_howell, tukey_kramer  # noqa: E402


def clear_caches(*, everything: bool = False) -> None:
    """Forget cached critical values and the interpolants that depend on group sizes or df.

    The studentized-range interpolant W(·; k) depends on k only and is built once per process;
    it is cleared only when ``everything`` is set (the first analysis after start-up).
    """
    distributions._qt_cache.clear()
    if everything:
        distributions._range_interpolant.cache_clear()
    _mvt.scalar_scale_nodes.cache_clear()
    distributions._qdunnett_cached.cache_clear()
    distributions._qanom_cached.cache_clear()
    _mvt._dunnett_interpolant.cache_clear()
    _mvt._anom_interpolant.cache_clear()


def timed(fn, repeats: int, *, cold: bool = False, first: bool = False,
          warm_up: bool = True) -> float:
    """Median (wall, CPU) time of ``fn()`` in seconds (after one warm-up call unless ``warm_up``
    is False; caches cleared before each call if ``cold``; all of them if ``first``).

    CPU time (process_time) is printed too because the machine may be shared: wall time then
    includes waiting for a core, CPU time does not.
    """
    if warm_up:
        fn()
    wall, cpu = [], []
    for _ in range(repeats):
        if cold or first:
            clear_caches(everything=first)
        t, c = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t)
        cpu.append(time.process_time() - c)
    return statistics.median(wall), statistics.median(cpu)


def data(seed: int = 7) -> tuple[list[np.ndarray], list[str]]:
    rng = np.random.default_rng(seed)
    sizes = rng.multinomial(1000 - 12 * 40, [1 / 12] * 12) + 40
    samples = [np.round(rng.normal(20 + 0.05 * i, 0.5 + 0.02 * i, size=n), 2)
               for i, n in enumerate(sizes)]
    return samples, [f"line {i + 1:02d}" for i in range(12)]


def our_share(samples, names) -> None:
    tk = tukey_kramer(samples, names)
    games_howell(samples, names)
    dunnett(samples, names, reference=names[0])
    dunn(samples, names)
    compact_letters(names, tk, means={n: float(np.mean(s)) for n, s in zip(names, samples, strict=True)})
    analysis_of_means(samples, names)


def line(label: str, ours: tuple[float, float], theirs: tuple[float, float] | None = None,
         base: str = "") -> None:
    text = f"{label:<36} {ours[0] * 1e3:8.2f} ms (cpu {ours[1] * 1e3:7.2f})"
    if theirs is not None:
        text += (f" | {base:<20} {theirs[0] * 1e3:9.1f} ms (cpu {theirs[1] * 1e3:9.1f})"
                 f"  speed-up: {theirs[0] / ours[0]:.1f}x (cpu {theirs[1] / ours[1]:.1f}x)")
    print(text)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args()
    fast, slow = (5, 1) if args.quick else (31, 3)
    samples, names = data()
    k = len(samples)
    n = np.array([s.size for s in samples], dtype=float)
    df = float(n.sum() - k)
    print(f"12 groups, {int(n.sum())} values, sizes {n.astype(int).tolist()}, df = {df:.0f}")

    # 1. The studentized range on the 66 pair statistics.
    means = np.array([s.mean() for s in samples])
    mse = sum(float(((s - s.mean()) ** 2).sum()) for s in samples) / df
    i, j = np.triu_indices(k, 1)
    q = np.abs(means[i] - means[j]) / np.sqrt(mse / 2 * (1 / n[i] + 1 / n[j]))
    ours = timed(lambda: ptukey(q, k, df), fast)
    theirs = timed(lambda: sps.studentized_range.sf(q, k, df), slow, warm_up=False)
    line("ptukey, 66 pairs (vector)", ours, theirs, "studentized_range.sf")

    # 2. Each method against its scipy counterpart.
    ctrl, rest = samples[0], samples[1:]
    # scipy keeps no caches, so its calls are timed without a warm-up (GH alone takes ~40 s:
    # one studentized_range.ppf per pair).
    sp_tk = timed(lambda: sps.tukey_hsd(*samples).confidence_interval(0.95), slow, warm_up=False)
    sp_gh = timed(lambda: sps.tukey_hsd(*samples, equal_var=False).confidence_interval(0.95),
                  slow, warm_up=False)
    sp_dn = timed(lambda: sps.dunnett(*rest, control=ctrl, rng=np.random.default_rng(1))
                  .confidence_interval(0.95), slow, warm_up=False)
    for label, fn, theirs, base in (
            ("tukey_kramer", lambda: tukey_kramer(samples, names), sp_tk, "tukey_hsd"),
            ("games_howell", lambda: games_howell(samples, names), sp_gh, "tukey_hsd(eq=F)"),
            ("dunnett", lambda: dunnett(samples, names, reference=names[0]), sp_dn,
             "scipy dunnett")):
        line(f"{label} (warm)", timed(fn, fast), theirs, base)
        line(f"{label} (cold)", timed(fn, fast, cold=True), theirs, base)
    line("dunn (holm)", timed(lambda: dunn(samples, names), fast))
    tk = tukey_kramer(samples, names)
    line("compact_letters", timed(lambda: compact_letters(names, tk), fast))
    line("analysis_of_means (warm)", timed(lambda: analysis_of_means(samples, names), fast))
    line("analysis_of_means (cold)", timed(lambda: analysis_of_means(samples, names), fast,
                                           cold=True))

    # 3. The whole share.
    scipy_share = (sp_tk[0] + sp_gh[0] + sp_dn[0], sp_tk[1] + sp_gh[1] + sp_dn[1])
    warm = timed(lambda: our_share(samples, names), fast)
    cold = timed(lambda: our_share(samples, names), fast, cold=True)
    first = timed(lambda: our_share(samples, names), fast, first=True)
    line("our share (warm)", warm, scipy_share, "scipy TK+GH+Dunnett")
    line("our share (cold: new group sizes)", cold, scipy_share, "scipy TK+GH+Dunnett")
    line("our share (first call in process)", first, scipy_share, "scipy TK+GH+Dunnett")
    for label, t in (("warm", warm), ("cold", cold), ("first call", first)):
        print(f"goal: our share <= 30 ms median, {label}: wall {t[0] * 1e3:.1f} ms "
              f"({'met' if t[0] <= 0.030 else 'NOT met'}), cpu {t[1] * 1e3:.1f} ms "
              f"({'met' if t[1] <= 0.030 else 'NOT met'})")


if __name__ == "__main__":
    main()
