"""One characteristic's detector days: read the day sums and the state before them, run
``stats.detect``, write the state of each day (headless; used by ``detection``)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date, timedelta
from typing import Any

import numpy as np
from lotwatch.stats.detect import DetectorSettings, cusum
from lotwatch.stats.detect import contrasts as dcon
from lotwatch.stats.monitor import Comparison, ReviewSettings, practical_gate
from lotwatch.store import detectors as sdet

# Re-exported: detector_alerts reads them from here.
from lotwatch.tui.services.detector_fields import (  # noqa: F401
    DIRECTIONS,
    _day,
    _f,
    _tolerance,
)

# --------------------------------------------------------------------------------------------
# advancing


def _history_days(s: DetectorSettings) -> int:
    """Days of buckets before the first day to process that the contrasts read back."""
    return s.trailing_days + s.dispersion_days + s.clear_days + 1


def _gate(ch, review: ReviewSettings) -> tuple[float, bool, str]:
    """(mean gate in d units or NaN for "pooled SDs", skip the mean detector, source)."""
    comp = Comparison(ch.name, "", int(ch.origin_units), float(ch.resolution_value), lsl=ch.lsl,
                      usl=ch.usl, min_shift=ch.min_shift)
    gate, source = practical_gate(comp, review)
    if source == "skip":
        return math.nan, True, source
    if gate is None:
        return math.nan, False, "pooled SDs"
    return gate / float(ch.resolution_value), False, source


def _fingerprint(s: DetectorSettings, ch, gate: float, skip: bool) -> str:
    return (f"{s.fingerprint()};gate={gate!r};skip={skip};res={ch.resolution};"
            f"origin={ch.origin_units}")


@dataclass
class _Run:
    """One characteristic's processed days, ready to be written and turned into alerts."""

    ch: Any
    start: date
    last: date
    slots: list[tuple[str, str]]
    rec: cusum.DayRecords
    show: dict[str, dict[str, np.ndarray]]  # kind -> size/size_low/size_high/ref_sd in units
    reprocessed_through: date | None  # the old through_day when days were recomputed


def _process(store, ch, prog: sdet.Progress | None, first: str, last: str,
             s: DetectorSettings, review: ReviewSettings, until: date | None) -> _Run | None:
    gate, skip, _ = _gate(ch, review)
    fp = _fingerprint(s, ch, gate, skip)
    if prog is not None and prog.fingerprint != fp:
        sdet.forget(store, ch.id)
        prog = None
    last_day = date.fromisoformat(last)
    if until is not None:
        last_day = min(last_day, until)
    if prog is None:
        start = date.fromisoformat(first)
    elif prog.dirty_from is not None:
        start = min(date.fromisoformat(prog.dirty_from),
                    date.fromisoformat(prog.through_day) + timedelta(days=1))
    else:
        start = date.fromisoformat(prog.through_day) + timedelta(days=1)
    if prog is not None:
        # a day after the data (every bucket of the last days removed) still needs its state
        last_day = max(last_day, min(date.fromisoformat(prog.through_day),
                                     until or date.max))
    if start > last_day:
        return None
    H = _history_days(s)
    day0 = start - timedelta(days=H)
    rows = sdet.bucket_rows(store, ch.id, day0.isoformat(), last_day.isoformat())
    before = sdet.state_on(store, ch.id, (start - timedelta(days=1)).isoformat())
    slots = sorted({(r[0], r[1]) for r in rows} | {(f, lv) for f, lv, _ in before})
    if not slots:
        return None
    index = {sl: i for i, sl in enumerate(slots)}
    factors = sorted({f for f, _ in slots})
    comp = np.array([factors.index(f) for f, _ in slots], dtype=np.int64)
    T = (last_day - day0).days + 1
    n = np.zeros((len(slots), T))
    s1 = np.zeros((len(slots), T))
    s2 = np.zeros((len(slots), T))
    o0 = day0.toordinal()
    for f, lv, d, nn, a, b in rows:
        i, t = index[(f, lv)], date.fromisoformat(d).toordinal() - o0
        n[i, t], s1[i, t], s2[i, t] = nn, a, b
    con = dcon.contrasts(n, s1, s2, comp, np.full(len(factors), gate),
                         np.full(len(factors), skip), s, H)
    state = {k: cusum.empty_state(len(slots)) for k in cusum.KINDS}
    for (f, lv, kind), vals in before.items():
        if kind in state:
            for name, v in zip(sdet.STATE_COLUMNS, vals, strict=True):
                state[kind][name][index[(f, lv)]] = v
    rec, _ = cusum.run(con, s, H, state, origin=o0)
    res = float(ch.resolution_value)
    ref = con.ref_sd[:, H:].T * res
    show = {
        "mean": {"size": rec.size["mean"] * res, "size_low": rec.low["mean"] * res,
                 "size_high": rec.high["mean"] * res, "ref_sd": ref},
        "spread": {name: ref * (np.exp(getattr(rec, attr)["spread"] / 2.0) - 1.0)
                   for name, attr in (("size", "size"), ("size_low", "low"),
                                      ("size_high", "high"))} | {"ref_sd": ref},
    }
    old = date.fromisoformat(prog.through_day) if prog is not None else None
    return _Run(ch, start, last_day, slots, rec, show,
                old if old is not None and old >= start else None)


def _write_rows(store, run: _Run) -> None:
    rec = run.rec
    D = (run.last - run.start).days + 1
    rows = []
    for j in range(D):
        d = (run.start + timedelta(days=j)).isoformat()
        for k in cusum.KINDS:
            st = np.stack([rec.state[k][f][j] for f in sdet.STATE_COLUMNS], axis=1)
            shows = np.stack([rec.used[k][j].astype(np.float64), rec.threshold[k][j],
                              rec.evidence[k][j], run.show[k]["size"][j],
                              run.show[k]["size_low"][j], run.show[k]["size_high"][j],
                              run.show[k]["ref_sd"][j]], axis=1)
            for i, (f, lv) in enumerate(run.slots):
                sv = st[i]
                rows.append((run.ch.id, d, f, lv, k, float(sv[0]), float(sv[1]), int(sv[2]),
                             int(sv[3]), float(sv[4]), float(sv[5]), float(sv[6]), float(sv[7]),
                             int(sv[8]), int(sv[9]), int(sv[10]), float(sv[11]), float(sv[12]),
                             int(shows[i, 0]), *(_f(x) for x in shows[i, 1:])))
    sdet.replace_from(store, run.ch.id, run.start.isoformat(), rows)
