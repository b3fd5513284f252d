"""The detectors as a service: advance them from the store's day sums, read their state.

Two entry points (headless; the command line and the app both use them):

* ``advance_detectors(store)`` brings every characteristic's group-vs-rest detectors
  (``stats.detect``) up to the latest plant day with data, from the day after the last one
  advanced, or from the earliest day a write has touched since (corrections, voids, late lots:
  triggers on the bucket table record it), or from the first day when there is no state yet or the
  settings changed. It records alerts as the detectors raise and clear them, each with its true
  detection day. Everything (reading the state, deciding, writing state and alerts) happens in one
  ``store.write()`` (BEGIN IMMEDIATE), so two reviews at once never write an event twice: the
  second waits, then finds nothing left to do. Re-running it changes nothing.
* ``detector_status(store)`` reads the stored state WITHOUT recomputing anything: one
  ``DetectorStatus`` per characteristic x factor x group x kind, as of the last day advanced
  (or of an earlier ``day`` kept in the history). Cheap enough to call after every write.

A detector's *evidence* is its CUSUM statistic divided by its threshold: 1 or more means the
threshold is crossed (an alert is raised when the size since onset also passes the practical
gate). Thresholds come from the false-alert budget ``detect.years_per_false_alert`` (default:
one false alert per 500 comparison-years). Caution: a statistical signal is not a disposition.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date
from typing import Any

from lotwatch.stats.detect import DetectorSettings
from lotwatch.stats.review_settings import ReviewSettings
from lotwatch.store import alerts as store_alerts
from lotwatch.store import detectors as sdet
from lotwatch.tui.services.alert_text import (  # noqa: F401  (re-exported)
    alert_sentence,
    stored_alert_sentence,
)

# Reading the stored state loads no numpy or scipy (the app's first board comes from it);
# advancing imports the computation (detector_steps, detector_alerts) when it runs.
from lotwatch.tui.services.detector_fields import DIRECTIONS, _day, _f, _tolerance


@dataclass(frozen=True)
class DetectorStatus:
    """One detector (characteristic x factor x group x kind) after ``last_day``.

    ``evidence`` = statistic / threshold (None before the group has enough history to be
    watched). ``direction``: "higher"/"lower" (mean) or "wider" (spread) of the side with the
    most evidence, None when both are at zero. ``onset``: first day of the current run (of the
    alarm, when alarmed). ``size``, ``size_low``, ``size_high``: the change since the onset and
    its 95% interval in the characteristic's unit (mean: group minus rest; spread: the group's SD
    minus the rest's); ``percent_of_tolerance`` = 100 x size / (USL - LSL). ``sd_ratio``: the
    spread detector's group SD / rest SD. ``alarmed``: the detector holds an alarm (raised
    ``detected_on``). ``alert_id``/``alert_state``: the comparison's alert of this kind, if
    any.
    """

    characteristic: str
    factor: str
    group: str
    kind: str
    direction: str | None
    evidence: float | None
    onset: date | None
    last_day: date
    size: float | None
    size_low: float | None
    size_high: float | None
    percent_of_tolerance: float | None
    alarmed: bool = False
    detected_on: date | None = None
    sd_ratio: float | None = None
    threshold: float | None = None
    alert_id: int | None = None
    alert_state: str | None = None
    unit: str = ""


@dataclass
class AdvanceResult:
    """What ``advance_detectors`` did: days advanced per characteristic, alerts written."""

    advanced: dict[str, tuple[date, date]] = field(default_factory=dict)
    alerts: list[Any] = field(default_factory=list)  # store.alerts.Alert, in event order
    events: list[str] = field(default_factory=list)  # the event of each, same order

    @property
    def opened(self) -> list[Any]:
        return [a for a, e in zip(self.alerts, self.events, strict=True)
                if e in ("opened", "reopened")]

    @property
    def cleared(self) -> list[Any]:
        return [a for a, e in zip(self.alerts, self.events, strict=True) if e == "cleared"]


def detector_settings(store) -> DetectorSettings:
    """The store's ``detect.*`` settings; ``ValueError`` names a bad one."""
    return DetectorSettings.from_lookup(store.get_setting)


# --------------------------------------------------------------------------------------------
# reading


def detector_status(store, *, day: date | None = None) -> list[DetectorStatus]:
    """Every detector's stored state after its last advanced day (or after ``day``), with the
    latest alert of its comparison and kind. Reads only; recomputes nothing (two queries)."""
    chars = {c.name: c for c in store.characteristics() if c.retired_at is None}
    retired_factors = {f.name for f in store.factors() if f.retired_at is not None}
    latest = store_alerts.latest_alerts(store)
    out = []
    n_state = len(sdet.STATE_COLUMNS)
    for row in sdet.rows_on(store, day.isoformat() if day else None):
        name, d, factor, level, kind = row[:5]
        st = dict(zip(sdet.STATE_COLUMNS, row[5:5 + n_state], strict=True))
        used, h, ev, size, lo, hi, ref = row[5 + n_state:]
        ch = chars.get(name)
        if ch is None or factor in retired_factors:
            continue  # retired: hidden from the board and the review, state kept
        alarm = int(st["alarm"])
        if alarm:
            side, onset = alarm, st["alarm_onset"]
        elif st["s_hi"] > 0 or st["s_lo"] > 0:
            # the side whose statistic the stored evidence x threshold is (sides may differ in
            # threshold where the contrasts are skewed)
            lead = (_f(ev) or 0.0) * (_f(h) or 0.0)
            side = 1 if abs(lead - st["s_hi"]) <= abs(lead - st["s_lo"]) else -1
            onset = st["onset_hi"] if side == 1 else st["onset_lo"]
        else:
            side, onset = 0, -1
        alert = latest.get((name, factor, kind))
        tol = _tolerance(ch) if ch else None
        ratio = None
        if kind == "spread" and _f(ref) and _f(size) is not None:
            ratio = 1.0 + float(size) / float(ref)
        out.append(DetectorStatus(
            characteristic=name, factor=factor, group=level, kind=kind,
            direction=DIRECTIONS.get((kind, side)), evidence=_f(ev), onset=_day(onset),
            last_day=date.fromisoformat(d), size=_f(size), size_low=_f(lo), size_high=_f(hi),
            percent_of_tolerance=(100.0 * float(size) / tol if tol and _f(size) is not None
                                  else None),
            alarmed=bool(alarm), detected_on=_day(st["detected"]) if alarm else None,
            sd_ratio=ratio, threshold=_f(h),
            alert_id=alert.id if alert and level in alert.groups else None,
            alert_state=alert.state if alert and level in alert.groups else None,
            unit=ch.unit if ch else ""))
    return out


def advance_detectors(store, *, until: date | None = None, by: str | None = None,
                      review: ReviewSettings | None = None,
                      settings: DetectorSettings | None = None) -> AdvanceResult:
    """Advance every characteristic's detectors to its latest day with data (or ``until``),
    store their state and record the alerts they raise and clear (see the module docstring).

    Returns what was advanced and the alerts written. Raises ``ValueError`` for a bad setting and
    ``StoreError`` from the store (a read-only store refuses before anything is computed).
    """
    from lotwatch.tui.services.detector_alerts import _decide
    from lotwatch.tui.services.detector_steps import _fingerprint, _gate, _process, _write_rows

    result = AdvanceResult()
    with store.write():
        s = settings or detector_settings(store)
        rv = review or ReviewSettings.from_lookup(store.get_setting)
        progress = sdet.progress(store)
        spans = sdet.bucket_span(store)
        latest = store_alerts.latest_alerts(store)
        transitions: list[store_alerts.Transition] = []
        retired_factors = {f.name for f in store.factors() if f.retired_at is not None}
        for ch in store.characteristics():
            if ch.id not in spans or ch.retired_at is not None:
                continue
            first, last = spans[ch.id]
            run = _process(store, ch, progress.get(ch.id), first, last, s, rv, until)
            if run is None:
                continue
            _write_rows(store, run)
            sdet.set_progress(store, ch.id, run.last.isoformat(),
                              _fingerprint(s, ch, *_gate(ch, rv)[:2]))
            result.advanced[ch.name] = (run.start, run.last)
            transitions.extend(t for t in _decide(run, latest, s)
                               if t.factor not in retired_factors)
        if transitions:
            written = store_alerts.record_transitions(store, transitions,
                                                      by=by or getattr(store, "user", None))
            for t, a in zip(transitions, written, strict=True):
                if t.event != "updated":
                    result.alerts.append(a)
                    result.events.append(t.event)
    return result
