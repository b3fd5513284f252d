"""Alert transitions from processed detector days, and the sentences alerts carry (headless)."""

from __future__ import annotations

import math
from datetime import timedelta

import numpy as np
from lotwatch.stats.detect import DetectorSettings, cusum
from lotwatch.store import alerts as store_alerts
from lotwatch.tui.services.alert_text import alert_sentence
from lotwatch.tui.services.detector_steps import DIRECTIONS, _day, _f, _Run, _tolerance


def _alarm_sets(run: _Run, kind: str) -> dict[str, np.ndarray]:
    alarm = run.rec.state[kind]["alarm"]  # (D, S)
    return {f: np.array([i for i, (ff, _) in enumerate(run.slots) if ff == f])
            for f in sorted({f for f, _ in run.slots})} if alarm.size else {}


def _transition(run: _Run, kind: str, factor: str, members: list[int], j: int, event: str,
                s: DetectorSettings, when: int | None = None) -> store_alerts.Transition:
    """The alert record described by day ``j``'s state of the slots ``members`` (the event is
    dated ``when``, default ``j``)."""
    rec = run.rec
    ev = rec.evidence[kind][j]
    order = sorted(members, key=lambda i: -(ev[i] if math.isfinite(ev[i]) else 0.0))
    p = order[0]
    st = {f: rec.state[kind][f][j][p] for f in ("alarm", "alarm_onset", "detected")}
    day = run.start + timedelta(days=j if when is None else when)
    tol = _tolerance(run.ch)
    size = _f(run.show[kind]["size"][j][p])
    low, high = _f(run.show[kind]["size_low"][j][p]), _f(run.show[kind]["size_high"][j][p])
    if kind == "mean" and st["alarm"] < 0 and low is not None and high is not None:
        low, high = min(low, high), max(low, high)
    pct = 100.0 * size / tol if tol and size is not None else None
    groups = [run.slots[i][1] for i in order]
    direction = DIRECTIONS.get((kind, int(st["alarm"]) or 1))
    onset, detected = _day(st["alarm_onset"]), _day(st["detected"])
    text = alert_sentence(run.ch.name, factor, groups, kind, direction, onset, detected, size,
                          low, high, pct, run.ch.unit, s.years_per_false_alert,
                          run.ch.resolution)
    ref = _f(run.show[kind]["ref_sd"][j][p])
    details = {"text": text, "evidence": _f(ev[p]), "threshold": _f(rec.threshold[kind][j][p]),
               "day": day.isoformat(), "budget_years": s.years_per_false_alert,
               "sd_ratio": (1.0 + size / ref) if kind == "spread" and size is not None and ref
               else None}
    return store_alerts.Transition(
        run.ch.name, factor, event, f"day {day.isoformat()}", groups, direction, size,
        size / tol if tol and size is not None else None, None, details, kind=kind,
        onset=onset.isoformat() if onset else None,
        detected_on=detected.isoformat() if detected else None, size_low=low, size_high=high,
        percent_of_tolerance=pct, evidence=_f(ev[p]))


def _decide(run: _Run, latest: dict, s: DetectorSettings) -> list[store_alerts.Transition]:
    """Alert transitions from the processed days, in day order. Days recomputed after a write to
    the past are compared with the alerts only on the last of them (the alerts record what was
    known then); new days are compared one by one."""
    out: list[tuple[int, store_alerts.Transition]] = []
    D = (run.last - run.start).days + 1
    j0 = (run.reprocessed_through - run.start).days if run.reprocessed_through else 0
    j0 = min(j0, D - 1)
    for kind in cusum.KINDS:
        alarm = run.rec.state[kind]["alarm"]
        for factor, members in _alarm_sets(run, kind).items():
            alert = latest.get((run.ch.name, factor, kind))
            active = alert is not None and alert.state in ("open", "acknowledged")
            prev: frozenset[int] | None = None
            last_t = None
            for j in range(j0, D):
                cur = frozenset(int(i) for i in members if alarm[j, i] != 0)
                if cur and not active:
                    event = "opened" if alert is None else "reopened"
                    out.append((j, _transition(run, kind, factor, sorted(cur), j, event, s)))
                    alert, active = True, True  # an alert exists from now on
                elif not cur and active:
                    out.append((j, _transition(run, kind, factor, sorted(prev or []) or
                                               list(members[:1]), max(j - 1, 0), "cleared", s, j)))
                    active = False
                elif cur and prev is not None and cur != prev:
                    out.append((j, _transition(run, kind, factor, sorted(cur), j, "held", s)))
                prev = cur
                last_t = j
            if active and prev and last_t is not None:
                out.append((D, _transition(run, kind, factor, sorted(prev), last_t, "updated",
                                           s)))
    out.sort(key=lambda x: x[0])
    return [t for _, t in out]
