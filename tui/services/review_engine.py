"""The review engine: store aggregates in, window statistics and alert decisions out (headless).

Joins ``store`` (bucket sums, raw values, alert records) and ``stats`` (``stats.monitor`` for the
window maths, ``stats.run_battery`` for the full battery); used by the command line and the app.
Nothing here draws anything.

A review at day D (``as_of``, or the Sunday of ``--week``) evaluates the configured windows
ending at D and at the ``alert_m − 1`` previous steps, from the store's per-day bucket sums only.
The FDR family of a window position is every characteristic × factor with a defined p there; the
latest position is the review's family. Each comparison's signal history over those windows and
its stored alert state give the new state (``stats.monitor.decide_alert``); transitions are
written as alert events. Re-running the same review records nothing new (a "held" event is written
once per window), and a review dated before the latest recorded one never changes alert states
(it shows the states the rule gives at its date, replayed over the windows before it).

Settings (``lotwatch`` settings table; defaults in ``stats.monitor.ReviewSettings``):
review.window (trailing | last_n | week), review.window_days (28), review.step_days (7),
review.last_n (30), review.min_lots (5), review.alert_k (2), review.alert_m (3),
review.fdr_level (0.05), review.fdr_method (bh | by), review.tolerance_fraction (0.125),
review.no_limits_gate (detectable | skip), review.trend_windows (12).

Counting lots: the buckets count measurements. Where a lot has several replicate values for a
characteristic, "lots per group" (review.min_lots, review.last_n) counts values per group.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from typing import Any

import numpy as np
import polars as pl
from lotwatch.stats import monitor as mon
from lotwatch.stats import weeks
from lotwatch.stats.monitor import ReviewSettings
from lotwatch.stats.results import json_safe
from lotwatch.tui.caution import CAUTION

LAST_REVIEW_KEY = "review.last_recorded_as_of"


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

    def to_dict(self) -> dict[str, Any]:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["excluded"] = [{"level": lv, "n": n} for lv, n in self.excluded]
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
                         "last_n": s.last_n, "min_lots": s.min_n, "alert_k": s.alert_k,
                         "alert_m": s.alert_m, "tolerance_fraction": s.tolerance_fraction,
                         "no_limits_gate": s.no_limits_gate},
            "recorded": self.recorded,
            "comparisons": [c.to_dict() for c in self.comparisons],
            "opened": [f"{c.characteristic} by {c.factor}" for c in self.opened],
            "cleared": [f"{c.characteristic} by {c.factor}" for c in self.cleared],
            "open_alerts": len(self.active),
            "notes": list(self.notes),
            "caution": self.caution,
        })


@dataclass
class ComparisonDetail:
    """The full battery on the latest window's raw values, and each group's mean per window."""

    characteristic: Any  # store.Characteristic
    factor: str
    window_label: str
    battery: Any  # stats.BatteryResult
    trend: pl.DataFrame  # window_end: date, level: str, n: i64, mean: f64
    grand_mean: float | None
    lsl: float | None
    target: float | None
    usl: float | None
    summary: ComparisonSummary | None = None
    grand_means: pl.DataFrame | None = None  # window_end, grand_mean


@dataclass
class TrendResult:
    characteristic: Any
    factor: str
    windows: list[mon.Window]
    frame: pl.DataFrame  # window_end, window, level, n, mean
    grand_means: pl.DataFrame  # window_end, window, grand_mean
    lsl: float | None
    target: float | None
    usl: float | None
    stats: mon.WindowStats | None = None


def _f(x: Any) -> float | None:
    if x is None:
        return None
    v = float(x)
    return v if math.isfinite(v) else None


# --------------------------------------------------------------------------------------------
# inputs


def review_settings(store, *, fdr_method: str | None = None, fdr_level: float | None = None,
                    window: str | None = None) -> ReviewSettings:
    """The store's review settings, with per-run overrides; ``ValueError`` names a bad setting."""
    s = ReviewSettings.from_lookup(store.get_setting)
    changes: dict[str, Any] = {}
    if window is not None:
        changes["window"] = window
    if fdr_method is not None:
        changes["fdr_method"] = fdr_method.lower()
    if fdr_level is not None:
        changes["fdr_level"] = float(fdr_level)
    if changes:
        s = ReviewSettings(**{**s.__dict__, **changes}).validated()
    return s


def resolve_as_of(*, as_of: date | None = None, week: str | None = None) -> date:
    """The review day: the Sunday of ``week``, else ``as_of``, else today (UTC)."""
    if week is not None and as_of is not None:
        raise ValueError("give either a week or an as-of date, not both")
    if week is not None:
        return weeks.parse_iso_week(week)[1]
    if as_of is not None:
        return as_of
    return datetime.now(UTC).date()


def comparisons_of(store, characteristic: str | None = None,
                   factor: str | None = None) -> tuple[list[mon.Comparison], dict[str, Any]]:
    """Every characteristic × factor of the store (or the one asked for), and the characteristics
    by name."""
    chars = {c.name: c for c in store.characteristics()}
    if characteristic is not None:
        chars = {characteristic: store.characteristic(characteristic)}
    factors = [f.name for f in store.factors()]
    if factor is not None:
        if factor not in factors:
            from lotwatch.store import NotFound

            raise NotFound(f"no grouping factor named {factor!r}; factors: {', '.join(factors)}")
        factors = [factor]
    comps = [mon.Comparison(c.name, f, int(c.origin_units), float(c.resolution_value),
                            lsl=c.lsl, usl=c.usl, min_shift=c.min_shift)
             for c in chars.values() for f in factors]
    return comps, chars


def compute_windows(store, comps: list[mon.Comparison], windows: list[mon.Window],
                    settings: ReviewSettings, *,
                    characteristic: str | None = None,
                    factor: str | None = None) -> mon.WindowStats:
    """Window statistics for the comparisons over the windows, from the store's bucket sums."""
    first, last = mon.window_span(windows, settings)
    buckets = store.bucket_frame(characteristic=characteristic, factor=factor, since=first,
                                 until=last)
    if first is None:
        first = buckets["day"].min() if buckets.height else last
        first = min(first, last)
    cube = mon.bucket_cube(buckets, comps, first_day=first, last_day=last)
    sums = mon.window_sums(cube, windows, settings)
    return mon.window_statistics(sums, min_n=settings.min_n, alpha=settings.alpha)


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
    """The sentence an alert carries (always with the caution)."""
    who = ", ".join(groups) if groups else "one group"
    size_s = f"{size:.4g} {unit}".strip() if size is not None else "an unknown amount"
    frac = f" ({fraction:.0%} of the tolerance)" if fraction is not None else ""
    qs = f", q = {q:.3g}" if q is not None else ""
    how = f"{direction} than" if direction else "differs from"
    return (f"{characteristic} by {factor}: {who} {how} the others by {size_s}{frac} in "
            f"{window}{qs}. {CAUTION}")


REPLAY_WINDOWS = 12  # windows replayed to reconstruct alert states for an earlier review


def run_review(store, *, as_of: date | None = None, week: str | None = None,
               fdr_method: str | None = None, fdr_level: float | None = None,
               persist: bool = True, by: str | None = None) -> ReviewResult:
    """Evaluate every characteristic × factor over the review's windows and update alerts.

    ``fdr_method``/``fdr_level`` default to the store's settings (BH at 0.05). With ``persist``
    the alert transitions are recorded. A review dated before the latest recorded one records
    nothing; its alert states are reconstructed by replaying the K-of-M rule over the
    ``REPLAY_WINDOWS`` windows up to its date (acknowledgements are not replayed), and a note
    says so. Raises ``ValueError`` for a bad week/date/setting, ``StoreError`` from the store.
    """
    from lotwatch.store import alerts as store_alerts

    settings = review_settings(store, fdr_method=fdr_method, fdr_level=fdr_level)
    day = resolve_as_of(as_of=as_of, week=week)
    m = settings.alert_m
    last_recorded = store.get_setting(LAST_REVIEW_KEY)
    historical = bool(last_recorded) and date.fromisoformat(last_recorded) > day
    record = persist and not getattr(store, "read_only", False) and not historical
    notes: list[str] = []
    if historical:
        notes.append(f"a review up to {last_recorded} is already recorded, so this earlier "
                     "review changes no alert; the alert states shown are what the K-of-M rule "
                     f"gives at {day.isoformat()}, replayed over the {REPLAY_WINDOWS} windows "
                     "before it (acknowledgements are not replayed)")
    plan = mon.window_plan(day, settings, max(m, REPLAY_WINDOWS) if historical else m)
    windows = plan[-m:]
    latest = plan[-1]
    label = f"{week.upper()} ({latest.label})" if week else latest.label
    comps, chars = comparisons_of(store)
    if not comps:
        return ReviewResult(day, label, 0, settings.fdr_method, settings.fdr_level, [], [], [],
                            settings, windows, False, ["the store has no characteristics yet"])
    ws = compute_windows(store, comps, plan, settings)
    q, sizes = mon.family_fdr(ws.p_used, settings.fdr_method)
    detect = mon.detectable_shift(ws, alpha=settings.alpha)
    sig, gates = mon.signals(ws, q, settings, detect)
    W = len(plan) - 1

    def describe(w: int, c: int, anom: dict[str, str]) -> tuple[list[str], str | None,
                                                                  float | None, float | None]:
        """Groups driving window w's difference (ANOM flags on the side of the largest shift,
        after the largest-shift group), direction, size and size / tolerance."""
        ch = chars[comps[c].characteristic]
        shift = _f(ws.largest_shift[w, c])
        direction = None if shift is None else ("higher" if shift > 0 else "lower")
        side = "above" if direction == "higher" else "below"
        top = ws.group_name(c, int(ws.largest_group[w, c]))
        groups = ([top] if top else []) + [lv for lv, fl in anom.items()
                                           if fl == side and lv != top]
        tol = (ch.usl - ch.lsl) if ch.lsl is not None and ch.usl is not None else None
        size = abs(shift) if shift is not None else None
        return groups, direction, size, (size / tol if size is not None and tol else None)

    summaries: list[ComparisonSummary] = []
    transitions: list[tuple[int, store_alerts.Transition]] = []
    for c, comp in enumerate(comps):
        ch = chars[comp.characteristic]
        anom = _anom(ws, W, c, settings.alpha)
        groups, direction, size, fraction = describe(W, c, anom)
        shift = _f(ws.largest_shift[W, c])
        qv = _f(q[W, c])
        _, gate_src = mon.practical_gate(comp, settings)
        previous = store_alerts.latest_alert(store, comp.characteristic, comp.factor)
        prev_state = previous.state if previous else None
        text = None
        event = None
        if historical:
            state = None
            for i in range(m - 1, W + 1):  # replay the rule window by window
                state = mon.decide_alert(sig[i - m + 1:i + 1, c].tolist(), state,
                                         k=settings.alert_k, m=m,
                                         latest_testable=ws.status[i, c] != mon.NOT_ENOUGH).state
            alert_id = None
            if state in ("open", "acknowledged"):
                hits = [i for i in range(W + 1) if sig[i, c]]
                w = hits[-1] if hits else W
                g2, d2, s2, f2 = describe(w, c, anom if w == W else {})
                text = alert_text(comp.characteristic, comp.factor, g2, d2, s2, ch.unit, f2,
                                  plan[w].label, _f(q[w, c]))
        else:
            decision = mon.decide_alert(sig[W - m + 1:, c].tolist(), prev_state,
                                        k=settings.alert_k, m=m,
                                        latest_testable=ws.status[W, c] != mon.NOT_ENOUGH)
            event = decision.event
            if event == "held" and previous is not None and previous.last_window == latest.label:
                event = None  # this window was already recorded
            if not record:
                event = None
            state = decision.state if record else prev_state
            alert_id = previous.id if previous else None
            if record and event is not None:
                t_groups, t_dir, t_size, t_frac, t_q = groups, direction, size, fraction, qv
                if event in ("held", "cleared") and not sig[W, c] and previous is not None:
                    # no signal in this window: the alert keeps describing its last signal
                    t_groups, t_dir, t_size = previous.groups, previous.direction, previous.size
                    t_frac, t_q = previous.size_fraction, previous.q
                t_text = alert_text(comp.characteristic, comp.factor, t_groups, t_dir, t_size,
                                    ch.unit, t_frac, latest.label, t_q)
                details = {"text": t_text, "q": t_q, "p": _f(ws.p[W, c]), "f": _f(ws.f[W, c]),
                           "welch_p": _f(ws.welch_p[W, c]), "gate": _f(gates[W, c]),
                           "gate_source": gate_src, "signals_in_last_m": decision.count,
                           "k": settings.alert_k, "m": m, "anom": anom,
                           "family_size": int(sizes[W]), "fdr_method": settings.fdr_method,
                           "signal_in_window": bool(sig[W, c]), "window_q": qv,
                           "window_shift": shift, "window_end": latest.end.isoformat()}
                transitions.append((len(summaries), store_alerts.Transition(
                    comp.characteristic, comp.factor, event, latest.label, t_groups, t_dir,
                    t_size, t_frac, t_q, details)))
            elif previous is not None and state in ("open", "acknowledged"):
                text = _stored_alert_text(previous, ch.unit)
        summaries.append(ComparisonSummary(
            characteristic=comp.characteristic, factor=comp.factor, window_label=latest.label,
            k=int(ws.k[W, c]), n_total=int(ws.n_total[W, c]), f=_f(ws.f[W, c]),
            p=_f(ws.p[W, c]), welch_f=_f(ws.welch_f[W, c]), welch_p=_f(ws.welch_p[W, c]), q=qv,
            omega_squared=_f(ws.omega_squared[W, c]), largest_shift=shift,
            largest_shift_group=ws.group_name(c, int(ws.largest_group[W, c])),
            detectable_shift=_f(detect[W, c]), alert_state=state, status=str(ws.status[W, c]),
            excluded=ws.excluded(W, c), eta_squared=_f(ws.eta_squared[W, c]),
            welch_df2=_f(ws.welch_df2[W, c]), window_short=latest.short, gate=_f(gates[W, c]),
            gate_source=gate_src, signal=bool(sig[W, c]),
            signal_history=[bool(x) for x in sig[W - m + 1:, c]], event=event,
            alert_id=alert_id, anom=anom, groups=groups, direction=direction,
            size_fraction=fraction, unit=ch.unit, test=str(ws.test[W, c]),
            bartlett_p=_f(ws.bartlett_p[W, c]), p_used=_f(ws.p_used[W, c]), alert_text=text))

    if record:
        with store.write():  # the transitions and the review date in one transaction
            written = store_alerts.record_transitions(store, [t for _, t in transitions],
                                                      by=by or getattr(store, "user", None))
            store.set_setting(LAST_REVIEW_KEY, day.isoformat())
        for (i, _), alert in zip(transitions, written, strict=True):
            s_ = summaries[i]
            if alert.state == "cleared":
                text = (f"alert {alert.id}: {alert.characteristic} by {alert.factor} cleared in "
                        f"{alert.last_window}: no signal in the last {m} windows (it last showed "
                        f"{', '.join(alert.groups) or 'a group'} {alert.direction or 'differing'} "
                        f"by {_num(alert.size)} {s_.unit}). {CAUTION}")
            else:
                text = _stored_alert_text(alert, s_.unit)
            summaries[i] = ComparisonSummary(**{
                **s_.__dict__, "alert_id": alert.id, "alert_state": alert.state,
                "alert_text": text})
    summaries.sort(key=lambda s: (s.q is None, s.q if s.q is not None else 0.0,
                                  s.characteristic, s.factor))
    opened = [s for s in summaries if s.event in ("opened", "reopened")]
    cleared = [s for s in summaries if s.event == "cleared"]
    return ReviewResult(day, label, int(sizes[W]), settings.fdr_method, settings.fdr_level,
                        summaries, opened, cleared, settings, windows, record, notes)


def _num(x: float | None) -> str:
    return "?" if x is None else f"{x:.4g}"


def _stored_alert_text(alert: Any, unit: str) -> str:
    """The sentence of a stored alert (its last signal), with its id."""
    return f"alert {alert.id}: " + alert_text(alert.characteristic, alert.factor, alert.groups,
                                               alert.direction, alert.size, unit,
                                               alert.size_fraction, alert.last_window or "",
                                               alert.q)


# --------------------------------------------------------------------------------------------
# trend and detail


def trend(store, characteristic: str, factor: str, *, as_of: date | None = None,
          week: str | None = None, windows: int | None = None,
          window: str | None = None) -> TrendResult:
    """Each group's mean per window (oldest first) with the grand mean, from bucket sums.

    ``window`` overrides the kind (trailing | last_n | week), ``windows`` the count.
    """
    settings = review_settings(store, window=window)
    day = resolve_as_of(as_of=as_of, week=week)
    plan = mon.window_plan(day, settings, windows or settings.trend_windows)
    comps, chars = comparisons_of(store, characteristic, factor)
    ws = compute_windows(store, comps, plan, settings, characteristic=characteristic,
                         factor=factor)
    rows = []
    for w, win in enumerate(plan):
        for g, lv in enumerate(ws.sums.levels[0]):
            n = int(ws.sums.n[w, 0, g])
            if n > 0:
                rows.append((win.end, win.label, lv, n, float(ws.mean[w, 0, g])))
    frame = pl.DataFrame(rows, schema={"window_end": pl.Date, "window": pl.String,
                                       "level": pl.String, "n": pl.Int64, "mean": pl.Float64},
                         orient="row")
    gm = pl.DataFrame([(win.end, win.label, _f(ws.grand_mean[w, 0])) for w, win in enumerate(plan)],
                      schema={"window_end": pl.Date, "window": pl.String,
                              "grand_mean": pl.Float64}, orient="row")
    ch = chars[characteristic]
    return TrendResult(ch, factor, plan, frame, gm, ch.lsl, ch.target, ch.usl, ws)


def window_values(store, characteristic: str, factor: str, window: mon.Window,
                  settings: ReviewSettings,
                  first_days: dict[str, date | None] | None = None) -> pl.DataFrame:
    """The raw current values of one window (for the full battery).

    For "last_n" windows ``first_days`` gives each level's first day in the window (from
    ``GroupSums.first_day``), so the battery sees exactly the values the bucket sums covered.
    """
    if settings.window == "last_n":
        starts = {lv: d for lv, d in (first_days or {}).items() if d is not None}
        if not starts:
            return store.values_frame(characteristic, factor, until=window.end,
                                      last_n=settings.last_n)
        vals = store.values_frame(characteristic, factor, since=min(starts.values()),
                                  until=window.end)
        begin = pl.DataFrame({"level": list(starts), "first_day": list(starts.values())},
                             schema={"level": pl.String, "first_day": pl.Date})
        return (vals.join(begin, on="level", how="inner")
                .filter(pl.col("measured_at").dt.date() >= pl.col("first_day"))
                .drop("first_day"))
    return store.values_frame(characteristic, factor, since=window.start, until=window.end)


def comparison_detail(store, characteristic: str, factor: str, *, as_of: date | None = None,
                      week: str | None = None, alpha: float = 0.05,
                      summary: ComparisonSummary | None = None,
                      window: str | None = None,
                      reference: str | None = None) -> ComparisonDetail:
    """The full battery (``stats.run_battery``) on the latest window's raw values, plus the
    trend of each group's mean per window; ``reference`` adds Dunnett's test against it."""
    from lotwatch.stats import run_battery

    settings = review_settings(store, window=window)
    day = resolve_as_of(as_of=as_of, week=week)
    tr = trend(store, characteristic, factor, as_of=day, window=window)
    latest = tr.windows[-1]
    ch = tr.characteristic
    firsts = None
    if tr.stats is not None and tr.stats.sums.first_day:
        firsts = dict(zip(tr.stats.sums.levels[0], tr.stats.sums.first_day[-1][0], strict=False))
    values = window_values(store, characteristic, factor, latest, settings, firsts)
    parts = sorted(values.partition_by("level", as_dict=True).items())
    names = [lv[0] if isinstance(lv, tuple) else lv for lv, _ in parts]
    samples, lots = [p["value"].to_numpy() for _, p in parts], [p["lot"].to_list() for _, p in parts]
    comp = mon.Comparison(ch.name, factor, ch.origin_units, ch.resolution_value, lsl=ch.lsl,
                          usl=ch.usl, min_shift=ch.min_shift)
    gate, _ = mon.practical_gate(comp, settings)
    battery = run_battery(samples, names, alpha=alpha, resolution=ch.resolution, lsl=ch.lsl,
                          usl=ch.usl, shift=gate, min_n=settings.min_n, reference=reference,
                          lots=lots)
    gm = tr.grand_means["grand_mean"][-1] if tr.grand_means.height else None
    return ComparisonDetail(ch, factor, latest.label, battery, tr.frame.select(
        "window_end", "level", "n", "mean"), gm, ch.lsl, ch.target, ch.usl, summary,
        tr.grand_means.select("window_end", "grand_mean"))


# --------------------------------------------------------------------------------------------
# incremental latest window


class LatestWindow:
    """The latest window's statistics for every comparison, kept current from stored aggregates.

    Holds the window's per-day group sums; after lots are logged, ``refresh_day(day)`` re-reads
    only that day's buckets and recomputes the window (no rescans of measurements, no rereads of
    other days). A new level or characteristic triggers a full reload.
    """

    PER_NAME_READS = 3  # beyond this many characteristics one whole-day read is cheaper

    def __init__(self, store, *, as_of: date | None = None) -> None:
        self.store = store
        self.settings = review_settings(store)
        if self.settings.window == "last_n":
            raise ValueError("incremental updates need a trailing or week window")
        self.as_of = resolve_as_of(as_of=as_of)
        self.window = mon.window_plan(self.as_of, self.settings, 1)[0]
        self.reload()

    def reload(self) -> None:
        self.comps, self.chars = comparisons_of(self.store)
        start = self.window.start if self.window.start is not None else self.window.end
        b = self.store.bucket_frame(since=start, until=self.window.end)
        cube = mon.bucket_cube(b, self.comps, first_day=start,
                               last_day=self.window.end)
        self.levels = cube.levels
        self._lv = {(c, lv): g for c in range(len(self.comps)) for g, lv in enumerate(self.levels[c])}
        self._ci = {(x.characteristic, x.factor): i for i, x in enumerate(self.comps)}
        self.day_n = np.diff(cube.cum_n, axis=2)
        self.day_s1 = np.diff(cube.cum_s1, axis=2)
        self.day_s2 = np.diff(cube.cum_s2, axis=2)
        self._compute()

    def refresh_day(self, day: date, characteristics: list[str] | None = None) -> None:
        """Bring the window up to date after writes on ``day`` (UTC).

        ``characteristics``: the ones written (a logged ``LotEntry`` names one); only their
        buckets of that day are re-read (one read per characteristic, each a short scan of the
        characteristic's own buckets). None, or more than a few, re-reads the whole day at once.
        """
        if self.window.start is None or not (self.window.start <= day <= self.window.end):
            return
        names: list[str | None] = [None]
        if characteristics is not None and len(set(characteristics)) <= self.PER_NAME_READS:
            names = list(dict.fromkeys(characteristics))
        if any(n is not None and n not in self.chars for n in names):
            self.reload()  # a characteristic new to this window
            return
        t = (day - self.window.start).days
        for name in names:
            b = self.store.bucket_frame(characteristic=name, since=day, until=day)
            cs, gs, ns, s1, s2 = [], [], [], [], []
            for ch, fa, lv, _, n, a, q, _lots in b.iter_rows():
                c = self._ci.get((ch, fa))
                g = self._lv.get((c, lv)) if c is not None else None
                if g is None:  # a factor or level new to this window
                    self.reload()
                    return
                cs.append(c)
                gs.append(g)
                ns.append(n)
                s1.append(a)
                s2.append(q)
            rows = slice(None) if name is None else [
                i for i, x in enumerate(self.comps) if x.characteristic == name]
            self.day_n[rows, :, t] = 0
            self.day_s1[rows, :, t] = 0
            self.day_s2[rows, :, t] = 0
            self.day_n[cs, gs, t] = ns
            self.day_s1[cs, gs, t] = s1
            self.day_s2[cs, gs, t] = s2
        self._compute()

    def _compute(self) -> None:
        sums = mon.GroupSums([self.window], self.comps, self.levels,
                             self.day_n.sum(axis=2)[None], self.day_s1.sum(axis=2)[None],
                             self.day_s2.sum(axis=2)[None])
        self.stats = mon.window_statistics(sums, min_n=self.settings.min_n,
                                           alpha=self.settings.alpha)
        self.q, self.family_size = mon.family_fdr(self.stats.p_used, self.settings.fdr_method)


def review_days(start: date, end: date, step: int = 7) -> list[date]:
    """Review days from ``start`` to ``end`` every ``step`` days (for replaying weekly reviews)."""
    out, d = [], start
    while d <= end:
        out.append(d)
        d += timedelta(days=step)
    return out
