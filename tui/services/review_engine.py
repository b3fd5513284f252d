"""The review engine: advance the detectors, explain with the windowed ANOVA family (headless).

Joins ``store`` (bucket sums, raw values, alert records) and ``stats`` (``stats.monitor`` for the
window maths, ``stats.run_battery`` for the full battery); used by the command line and the app.
Nothing here draws anything.

A recorded review first advances the sequential detectors (``tui/services/detection.py``): alerts
open and clear there, each on its true detection day. Then it explains: the latest window ending
at D (``as_of``, the Sunday of ``--week``, or today) is evaluated for every characteristic ×
factor from the store's per-day bucket sums, with the FDR family of that window (BH or BY
q-values), ANOM flags and the largest shift; each comparison also carries its detectors' state
(evidence as a fraction of the threshold, kind, group, onset). Re-running a review changes
nothing.

Settings (``lotwatch`` settings table; defaults in ``stats.monitor.ReviewSettings`` and
``stats.detect.DetectorSettings``): review.window (trailing | last_n | week),
review.window_days (28), review.step_days (7), review.last_n (30), review.min_lots (5),
review.fdr_level (0.05), review.fdr_method (bh | by), review.tolerance_fraction (0.125),
review.no_limits_gate (detectable | skip), review.trend_windows (12), detect.* (see
``DetectorSettings``).

Counting lots: the buckets count values (n) and distinct lots (lots); "lots per group"
(review.min_lots, review.last_n) counts lots, so replicate values of one lot count once.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import date
from typing import Any

import numpy as np
from lotwatch.stats import monitor as mon
from lotwatch.stats.monitor import ReviewSettings
from lotwatch.stats.results import json_safe
from lotwatch.tui.caution import CAUTION
from lotwatch.tui.render.numbers import p_is
from lotwatch.tui.services.review_detail import (  # noqa: F401  (re-exported for callers)
    ComparisonDetail,
    TrendResult,
    comparison_detail,
    trend,
    window_values,
)
from lotwatch.tui.services.review_inputs import (  # noqa: F401  (re-exported for callers)
    _f,
    comparisons_of,
    compute_windows,
    resolve_as_of,
    review_settings,
)


@dataclass(frozen=True)
class ComparisonSummary:
    """One characteristic × factor in the latest window of a review."""

    characteristic: str
    factor: str
    window_label: str
    k: int
    n_total: int
    f: float | None
    p: float | None
    welch_f: float | None
    welch_p: float | None
    q: float | None
    omega_squared: float | None
    largest_shift: float | None
    largest_shift_group: str | None
    detectable_shift: float | None
    alert_state: str | None  # open | acknowledged | cleared | None
    status: str
    excluded: list[tuple[str, int]]
    eta_squared: float | None = None
    welch_df2: float | None = None
    window_short: str = ""
    gate: float | None = None
    gate_source: str = ""
    signal: bool = False
    signal_history: list[bool] = field(default_factory=list)
    event: str | None = None  # what this review recorded: opened/reopened/held/cleared
    alert_id: int | None = None
    anom: dict[str, str] = field(default_factory=dict)  # level -> above/within/below
    groups: list[str] = field(default_factory=list)  # groups driving a signal
    direction: str | None = None
    size_fraction: float | None = None
    unit: str = ""
    test: str = "F"  # the test whose p feeds q: "F" or "Welch" (Bartlett p < alpha)
    bartlett_p: float | None = None
    p_used: float | None = None
    alert_text: str | None = None  # the active alert's sentence (with the caution)
    # the detector of this comparison with the most evidence (see tui/services/detection.py)
    detector_evidence: float | None = None  # statistic / threshold; >= 1 crossed
    detector_kind: str | None = None  # mean | spread
    detector_group: str | None = None
    detector_direction: str | None = None
    detector_onset: str | None = None  # ISO plant day
    detector_size: float | None = None  # in the characteristic's unit
    detector_day: str | None = None  # the day of that state
    # lots in the groups used (n_total counts values; they differ when lots carry replicates)
    lots_total: int | None = None
    resolution: str = ""  # the characteristic's resolution: sizes are written with its decimals

    def to_dict(self) -> dict[str, Any]:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        # a group is left out for too few lots: the count is of lots ("n" kept for scripts
        # that read it before "lots" was added; it holds the same count)
        d["excluded"] = [{"level": lv, "lots": n, "n": n} for lv, n in self.excluded]
        return json_safe(d)


@dataclass
class ReviewResult:
    """What one review found; ``comparisons`` sorted by q (undefined last)."""

    as_of: date
    window_label: str
    family_size: int
    fdr_method: str
    fdr_level: float
    comparisons: list[ComparisonSummary]
    opened: list[ComparisonSummary]
    cleared: list[ComparisonSummary]
    settings: ReviewSettings = field(default_factory=ReviewSettings)
    windows: list[mon.Window] = field(default_factory=list)
    recorded: bool = False
    notes: list[str] = field(default_factory=list)
    caution: str = CAUTION
    budget_years: float | None = None  # detect.years_per_false_alert

    @property
    def family_statement(self) -> str:
        method = ("Benjamini-Hochberg" if self.fdr_method == "bh" else
                  "Benjamini-Yekutieli (valid under any dependence)")
        return (f"FDR family: {self.family_size} comparison(s) with a defined p in the latest "
                f"window ({self.window_label}); {method} at q <= {self.fdr_level:g}.")

    @property
    def active(self) -> list[ComparisonSummary]:
        return [c for c in self.comparisons if c.alert_state in ("open", "acknowledged")]

    def to_dict(self) -> dict[str, Any]:
        s = self.settings
        return json_safe({
            "as_of": self.as_of.isoformat(), "window": self.window_label,
            "windows": [{"label": w.label, "start": w.start.isoformat() if w.start else None,
                         "end": w.end.isoformat()} for w in self.windows],
            "family": {"size": self.family_size, "method": self.fdr_method,
                       "level": self.fdr_level, "statement": self.family_statement},
            "settings": {"window": s.window, "days": s.days, "step_days": s.step_days,
                         "last_n": s.last_n, "min_lots": s.min_n,
                         "tolerance_fraction": s.tolerance_fraction,
                         "no_limits_gate": s.no_limits_gate,
                         "years_per_false_alert": self.budget_years},
            "recorded": self.recorded,
            "comparisons": [c.to_dict() for c in self.comparisons],
            "opened": [f"{c.characteristic} by {c.factor}" for c in self.opened],
            "cleared": [f"{c.characteristic} by {c.factor}" for c in self.cleared],
            "open_alerts": len(self.active),
            "notes": list(self.notes),
            "caution": self.caution,
        })


# --------------------------------------------------------------------------------------------
# the review


def _anom(ws: mon.WindowStats, w: int, c: int, alpha: float) -> dict[str, str]:
    """ANOM flags of the usable groups of one window × comparison (from the summaries)."""
    if ws.status[w, c] != mon.OK:
        return {}
    usable = np.flatnonzero(ws.usable[w, c])
    ns = [int(ws.sums.n[w, c, g]) for g in usable]
    h = mon.anom_critical_value(ns, float(ws.df_within[w, c]), alpha)
    if h is None or not math.isfinite(h):
        return {}
    means = [float(ws.mean[w, c, g]) for g in usable]
    flags = mon.anom_flags_from_summary(means, ns, float(ws.grand_mean[w, c]),
                                        float(ws.ms_within[w, c]), float(h))
    return {ws.sums.levels[c][g]: fl for g, fl in zip(usable, flags, strict=True)}


def alert_text(characteristic: str, factor: str, groups: list[str], direction: str | None,
               size: float | None, unit: str, fraction: float | None, window: str,
               q: float | None) -> str:
    """The sentence describing a window's difference (no alert behind it; with the caution)."""
    who = ", ".join(groups) if groups else "one group"
    size_s = f"{size:.4g} {unit}".strip() if size is not None else "an unknown amount"
    frac = f" ({fraction:.0%} of the tolerance)" if fraction is not None else ""
    qs = f", {p_is(q, 'q')}" if q is not None else ""  # one q style (tui/render/numbers.py)
    how = f"{direction} than" if direction else "differs from"
    return (f"{characteristic} by {factor}: {who} {how} the others by {size_s}{frac} in "
            f"{window}{qs}. {CAUTION}")


_STATE_RANK = {"open": 0, "acknowledged": 1, "cleared": 2}


def _status_day(store, day: date, explicit: bool) -> date | None:
    """The day whose stored detector state a review shows: its own day when it is before the
    last day advanced (kept in the history), else the latest state (None)."""
    if not explicit:
        return None
    from lotwatch.store import detectors as sdet

    through = [date.fromisoformat(p.through_day) for p in sdet.progress(store).values()]
    return day if through and day < max(through) else None


def _lots_used(ws: mon.WindowStats, w: int, c: int) -> int | None:
    """Lots in the groups window ``w`` of comparison ``c`` uses (None when lots are unknown)."""
    lots = ws.sums.lots
    if lots is None:
        return None
    return int(np.where(ws.usable[w, c], lots[w, c], 0).sum())


def run_review(store, *, as_of: date | None = None, week: str | None = None,
               fdr_method: str | None = None, fdr_level: float | None = None,
               persist: bool = True, by: str | None = None) -> ReviewResult:
    """Advance the detectors (recording their alerts) and explain every characteristic × factor
    with the latest window's ANOVA family and FDR q-values.

    With no date the detectors advance to the latest day with data; with ``as_of``/``week`` to
    that day at most (a later review continues from there; an earlier one changes nothing and
    shows the detectors' state on its day from the stored history). ``persist`` False (or a
    read-only store) records nothing and shows the stored state. Raises ``ValueError`` for a bad
    week/date/setting, ``StoreError`` from the store.
    """
    from lotwatch.store import alerts as store_alerts
    from lotwatch.tui.services import detection

    settings = review_settings(store, fdr_method=fdr_method, fdr_level=fdr_level)
    dset = detection.detector_settings(store)
    explicit = as_of is not None or week is not None
    day = resolve_as_of(as_of=as_of, week=week, zone=store.plant_zone)
    record = persist and not getattr(store, "read_only", False)
    notes: list[str] = []
    events: dict[tuple[str, str], str] = {}
    if record:
        adv = detection.advance_detectors(store, until=day if explicit else None,
                                          by=by or getattr(store, "user", None), review=settings)
        for a, e in zip(adv.alerts, adv.events, strict=True):
            events[(a.characteristic, a.factor)] = e
    plan = mon.window_plan(day, settings, 1)
    latest = plan[-1]
    label = f"{week.upper()} ({latest.label})" if week else latest.label
    comps, chars = comparisons_of(store)
    if not comps:
        return ReviewResult(day, label, 0, settings.fdr_method, settings.fdr_level, [], [], [],
                            settings, plan, False, ["the store has no characteristics yet"])
    status_day = _status_day(store, day, explicit)
    if status_day is not None:
        notes.append(f"state as of that week: detectors as they were after "
                     f"{status_day.isoformat()}; alerts as they stand now (acknowledgements "
                     "made since included)")
    status: dict[tuple[str, str], list[Any]] = {}
    for st in detection.detector_status(store, day=status_day):
        status.setdefault((st.characteristic, st.factor), []).append(st)
    alerts: dict[tuple[str, str], Any] = {}
    for (ch_name, fa, _kind), a in store_alerts.latest_alerts(store).items():
        old = alerts.get((ch_name, fa))
        if old is None or _STATE_RANK[a.state] < _STATE_RANK[old.state]:
            alerts[(ch_name, fa)] = a
    ws = compute_windows(store, comps, plan, settings)
    q, sizes = mon.family_fdr(ws.p_used, settings.fdr_method)
    detect = mon.detectable_shift(ws, alpha=settings.alpha)
    sig, gates = mon.signals(ws, q, settings, detect)
    W = 0
    summaries: list[ComparisonSummary] = []
    for c, comp in enumerate(comps):
        ch = chars[comp.characteristic]
        key = (comp.characteristic, comp.factor)
        anom = _anom(ws, W, c, settings.alpha)
        shift = _f(ws.largest_shift[W, c])
        direction = None if shift is None else ("higher" if shift > 0 else "lower")
        side = "above" if direction == "higher" else "below"
        top = ws.group_name(c, int(ws.largest_group[W, c]))
        groups = ([top] if top else []) + [lv for lv, fl in anom.items()
                                           if fl == side and lv != top]
        tol = (ch.usl - ch.lsl) if ch.lsl is not None and ch.usl is not None else None
        size = abs(shift) if shift is not None else None
        fraction = size / tol if size is not None and tol else None
        _, gate_src = mon.practical_gate(comp, settings)
        best = max(status.get(key, []), key=lambda s_: s_.evidence or 0.0, default=None)
        alert = alerts.get(key)
        text = None
        if alert is not None and (alert.state != "cleared" or key in events):
            text = detection.stored_alert_sentence(alert, ch.unit, dset.years_per_false_alert,
                                                   ch.resolution)
        summaries.append(ComparisonSummary(
            characteristic=comp.characteristic, factor=comp.factor, window_label=latest.label,
            k=int(ws.k[W, c]), n_total=int(ws.n_total[W, c]), f=_f(ws.f[W, c]),
            p=_f(ws.p[W, c]), welch_f=_f(ws.welch_f[W, c]), welch_p=_f(ws.welch_p[W, c]),
            q=_f(q[W, c]), omega_squared=_f(ws.omega_squared[W, c]), largest_shift=shift,
            largest_shift_group=top, detectable_shift=_f(detect[W, c]),
            alert_state=alert.state if alert else None, status=str(ws.status[W, c]),
            excluded=ws.excluded(W, c), eta_squared=_f(ws.eta_squared[W, c]),
            welch_df2=_f(ws.welch_df2[W, c]), window_short=latest.short, gate=_f(gates[W, c]),
            gate_source=gate_src, signal=bool(sig[W, c]), event=events.get(key),
            alert_id=alert.id if alert else None, anom=anom, groups=groups,
            direction=direction, size_fraction=fraction, unit=ch.unit,
            test=str(ws.test[W, c]), bartlett_p=_f(ws.bartlett_p[W, c]),
            p_used=_f(ws.p_used[W, c]), alert_text=text,
            detector_evidence=best.evidence if best else None,
            detector_kind=best.kind if best else None,
            detector_group=best.group if best else None,
            detector_direction=best.direction if best else None,
            detector_onset=best.onset.isoformat() if best and best.onset else None,
            detector_size=best.size if best else None,
            detector_day=best.last_day.isoformat() if best else None,
            lots_total=_lots_used(ws, W, c), resolution=ch.resolution))
    summaries.sort(key=lambda s: (s.q is None, s.q if s.q is not None else 0.0,
                                  s.characteristic, s.factor))
    opened = [s for s in summaries if s.event in ("opened", "reopened")]
    cleared = [s for s in summaries if s.event == "cleared"]
    return ReviewResult(day, label, int(sizes[W]), settings.fdr_method, settings.fdr_level,
                        summaries, opened, cleared, settings, plan, record, notes,
                        budget_years=dset.years_per_false_alert)
