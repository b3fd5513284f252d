"""The run chart's data, read in a worker thread: each group's daily means from the day sums
(``store.bucket_frame``) over the weeks before the window's end, and each group's detector
evidence day by day (``store.detectors.evidence_rows``).

A plant day's mean is origin + Σd / n and its SD sqrt((Σd² − (Σd)²/n) / (n − 1)), both times the
resolution (d = units − origin, the store's exact integer sums; the usual computing formula of
the sample variance, NIST/SEMATECH e-Handbook 1.3.5.6 / 7.2.1).
"""

from __future__ import annotations

import math
from datetime import date, timedelta
from typing import TYPE_CHECKING

from lotwatch.tui.services.view_models import DayMean, RunChart

if TYPE_CHECKING:
    from lotwatch.store import Store

CHART_DAYS = 84  # twelve weeks before the window's end: a drift and the weeks before it
MAX_DAYS = 182  # reaching back to an earlier onset, at most half a year
ONSET_LEAD = 14  # days shown before the earliest onset, so the change is seen as a change


def chart_span(until: date, onsets: list[date], first_data: date | None) -> tuple[date, date]:
    """First and last plant day of the chart: ``CHART_DAYS`` up to ``until``, reaching back
    to ``ONSET_LEAD`` days before the earliest onset (at most ``MAX_DAYS``), never before the
    first day with data."""
    start = until - timedelta(days=CHART_DAYS - 1)
    if onsets:
        start = min(start, min(onsets) - timedelta(days=ONSET_LEAD))
    start = max(start, until - timedelta(days=MAX_DAYS - 1))
    if first_data is not None and first_data > start:
        start = min(first_data, until)
    return start, until


def day_mean(offset: int, n: int, sum_d: int, sum_d2: int, origin_units: int,
             resolution: float) -> DayMean:
    """One bucket as a day's mean and SD in the unit (see the module docstring)."""
    mean = (origin_units + sum_d / n) * resolution
    sd = None
    if n > 1:
        # Exact in integers up to the division: no cancellation in floats.
        ss = (n * sum_d2 - sum_d * sum_d) / n
        sd = math.sqrt(max(ss, 0.0) / (n - 1)) * resolution
    return DayMean(offset, n, mean, sd)


def run_chart(store: Store, characteristic: str, factor: str, *, until: date,
              onsets: list[date]) -> RunChart:
    """The chart of ``characteristic`` by ``factor`` ending on plant day ``until``."""
    from lotwatch.store import detectors as sdet

    ch = store.characteristic(characteristic)
    start, end = chart_span(until, onsets, None)
    frame = store.bucket_frame(characteristic=characteristic, factor=factor, since=start,
                               until=end)
    if frame.height:
        start, end = chart_span(until, onsets, min(frame["day"]))
    series: dict[str, list[DayMean]] = {}
    for level, day, n, sum_d, sum_d2 in frame.select(
            "level", "day", "n", "sum_d", "sum_d2").iter_rows():
        if n and day >= start:
            series.setdefault(str(level), []).append(
                day_mean((day - start).days, int(n), int(sum_d), int(sum_d2),
                         int(ch.origin_units), float(ch.resolution_value)))
    evidence: dict[tuple[str, str], list[tuple[int, float]]] = {}
    for level, kind, day, ev in sdet.evidence_rows(store, ch.id, factor, start.isoformat(),
                                                   end.isoformat()):
        if ev is not None and math.isfinite(ev):
            evidence.setdefault((str(level), str(kind)), []).append(
                ((date.fromisoformat(day) - start).days, float(ev)))
    return RunChart(first_day=start.isoformat(), last_day=end.isoformat(),
                    resolution=ch.resolution, unit=ch.unit, lsl=ch.lsl, target=ch.target,
                    usl=ch.usl, series={k: tuple(v) for k, v in sorted(series.items())},
                    evidence={k: tuple(v) for k, v in sorted(evidence.items())})
