"""Group-vs-rest CUSUMs for a mean shift and for a wider spread, advanced one plant day at a time.

For each slot (a level of a grouping factor) and day t with a usable contrast (see
``contrasts``), the log-likelihood ratio of "the group differs from its rest by the design
shift" against "it does not" is, for a normal contrast ``c_t`` with variance ``v_t``::

    mean, upward:    l_t = (delta c_t - delta^2 / 2) / v_t       (and the mirror for downward)
    spread, upward:  l_t = the exact log-likelihood ratio of the day's variance ratio F for a
                     variance spread_ratio^2 times the rest's (``skewness.spread_llr``: the F
                     distribution, degrees of freedom shrunk by the measured dispersion)

and the CUSUM is ``S_t = max(0, S_{t-1} + l_t)`` (Page 1954; the log-likelihood-ratio form of
Hawkins & Olwell 1998, ch. 2 and 6 for scale). Days without a usable contrast leave S as it is.
The standardised contrast enters winsorised at ``a/2 +- 3`` (Hawkins 1993, "Robustification of
cumulative sum charts by winsorization"): a single wild day of skewed data then cannot cross the
threshold alone, at the price of a second day for a change much larger than the design shift.
A spread step is cut at ``h / SPREAD_CAP`` for the same reason.

Threshold. With ``a = delta / sqrt(v)`` the step is ``a (z - a/2)``: a tabular CUSUM of the
standardised contrast z with reference ``k = a/2``, scaled by a. The threshold is
``h = a_typ x h_z`` where ``h_z`` is the decision interval whose in-control one-sided ARL (Brook &
Evans 1972 Markov chain, ``arl.decision_interval_markov``) is::

    ARL0 = years_per_false_alert x 3 K x (reporting days per year of the group)

for ``K`` watched groups in the comparison, each with three one-sided detectors (mean up, mean
down, spread up): so the comparison's false alerts stay at or below one per
``years_per_false_alert`` years (a sum of rates over its detectors; dependence between them only
lowers the union's rate). ``a_typ`` uses the group's average values per day over the trailing
days. Where the contrasts are skewed toward one side (``skewness.contrast_skewness``), that side's
threshold is divided by ``skew_factor`` (<= 1), which keeps its run length near the target.
The spread detector's steps are exact log-likelihood ratios, so its threshold is
``h = ln ARL0`` (a CUSUM of log-likelihood ratios runs at least ``e^h`` in control; Lorden
1971), divided by ``skew_factor`` of the log ratio's skewness where heavy tails skew it.

Onset, size, gate. The estimated onset is the first day of the current run of S above zero (the
day after S was last 0). The size since the onset is the precision-weighted mean contrast over
the run, ``sum(c/v) / sum(1/v)`` with standard error ``1/sqrt(sum 1/v)`` (v includes phi); it is
biased away from zero by the selection (an alarm happens when the run looks large), so the
interval is an indication, not a guarantee. An alarm is raised when S exceeds h and the 95%
interval of the size reaches the minimum shift (the practical gate: a change shown to be smaller
than what matters raises nothing), either since the onset or over the last ``clear_days // 2``
days (a drift that grows is judged by where it has got to, not by its average since it began). Once a group's mean alarm is raised, the other groups of its
comparison restart and their rests leave the alarmed group out (a shifted group moves every
other group's rest the other way; it should not get them named). After an alarm the size accumulates from the onset on. The alarm clears when, at least ``clear_days`` after detection, the size over the last ``clear_days``
days is shown below the gate (its upper 95% bound under it); S then restarts at zero, and so
do the non-alarmed detectors of the same comparison and kind (their rests carried the change).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from lotwatch.stats.detect.arl import decision_interval_markov
from lotwatch.stats.detect.contrasts import Contrasts
from lotwatch.stats.detect.settings import DetectorSettings

KINDS = ("mean", "spread")
Z95 = 1.959963984540054
STATE_FIELDS = ("s_hi", "s_lo", "onset_hi", "onset_lo", "w_hi", "wc_hi", "w_lo", "wc_lo",
                "alarm", "detected", "alarm_onset", "aw", "awc")
NONE = -1  # no day
SPREAD_CAP = 2.0  # the largest share of the threshold one day of the spread CUSUM may add
WINSOR = 3.0  # standard errors beyond half the design shift at which a day's contrast is cut


def empty_state(slots: int) -> dict[str, np.ndarray]:
    """The state of a detector that has seen nothing: S = 0, no run, no alarm."""
    st = {f: np.zeros(slots) for f in STATE_FIELDS}
    for f in ("onset_hi", "onset_lo", "detected", "alarm_onset"):
        st[f][:] = NONE
    return st


@dataclass
class Event:
    """An alarm raised or cleared: slot, kind, "raised"/"cleared", day, direction."""

    slot: int
    kind: str
    event: str
    t: int
    direction: int  # +1 higher / wider, -1 lower


@dataclass
class DayRecords:
    """Per processed day (rows) and slot (columns), for each kind: the state after the day and
    what a person reads (threshold, evidence = S / h, size and its 95% interval, d units for the
    mean; the SD ratio for spread)."""

    first: int
    origin: int = 0
    state: dict[str, dict[str, np.ndarray]] = field(default_factory=dict)  # kind -> field -> (D,S)
    threshold: dict[str, np.ndarray] = field(default_factory=dict)
    evidence: dict[str, np.ndarray] = field(default_factory=dict)
    size: dict[str, np.ndarray] = field(default_factory=dict)
    low: dict[str, np.ndarray] = field(default_factory=dict)
    high: dict[str, np.ndarray] = field(default_factory=dict)
    used: dict[str, np.ndarray] = field(default_factory=dict)  # the day had a usable contrast


def skew_factor(gamma: np.ndarray, a: np.ndarray) -> np.ndarray:
    """theta* <= 1 for one side of a CUSUM whose standardised steps have skewness ``gamma`` >= 0
    toward that side: the root of the step's cumulant generating function to third order,
    ``E exp(theta X) = 1`` for ``X = a (z - a/2)`` with ``K(s) = s^2/2 + gamma s^3/6``::

        theta + c theta^2 = 1,  c = gamma a / 3   =>   theta = (sqrt(1 + 4c) - 1) / (2c)

    (theta = 1 for normal steps). The in-control run length grows as ``exp(theta h)`` (the
    exponential bound behind Siegmund's approximation), so ``h / theta`` keeps it."""
    c = np.maximum(gamma, 0.0) * a / 3.0
    with np.errstate(invalid="ignore", divide="ignore"):
        theta = np.where(c > 1e-9, (np.sqrt(1.0 + 4.0 * c) - 1.0) / (2.0 * c), 1.0)
    return theta


def thresholds(con: Contrasts, settings: DetectorSettings, first: int
               ) -> dict[str, dict[str, np.ndarray]]:
    """h (LLR scale) per kind, side ("hi", "lo"), slot and day t >= first (NaN where the group
    is not watched): the normal theory's, divided by ``skew_factor`` of the side's skewness."""
    arl = settings.run_length(con.groups[:, first:], con.days_per_year[:, first:])
    out: dict[str, dict[str, np.ndarray]] = {}
    for kind, a, skew in (("mean", con.a_typ_m[:, first:], con.skew_m),
                          ("spread", con.a_typ_s[:, first:], con.skew_s)):
        ok = np.isfinite(a) & (a > 0) & np.isfinite(arl) & (arl >= 1)
        if kind == "spread" and con.llr_s is not None:
            # exact log-likelihood ratios: run length >= e^h (Lorden 1971)
            h = np.where(ok, np.log(np.maximum(arl, 1.0)), np.nan)
            if skew is not None:  # heavy-tailed values skew the log ratio to the right
                h = h / skew_factor(skew[0][:, first:], np.nan_to_num(a))
            out[kind] = {"hi": h, "lo": h}
            continue
        h = np.full(a.shape, np.nan)
        if ok.any():
            h[ok] = a[ok] * decision_interval_markov(a[ok] / 2.0, arl[ok])
        out[kind] = {}
        for side, i in (("hi", 0), ("lo", 1)):
            g = skew[i][:, first:] if skew is not None else np.zeros(a.shape)
            out[kind][side] = h / skew_factor(g, np.nan_to_num(a))
    return out


def _recent(x: np.ndarray, ok: np.ndarray, days: int) -> np.ndarray:
    """Sum of x over usable days among the last ``days`` days including each day."""
    y = np.where(ok, x, 0.0)
    cs = np.zeros((y.shape[0], y.shape[1] + 1))
    np.cumsum(y, axis=1, out=cs[:, 1:])
    t = np.arange(1, y.shape[1] + 1)
    return cs[:, t] - cs[:, np.maximum(t - days, 0)]


def _set_apart(con: Contrasts, alarm: np.ndarray, t: int, x: np.ndarray, w: np.ndarray,
               ok: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Day t's mean contrast of every non-alarmed slot against its rest without the alarmed
    groups of its comparison (a shifted group moves the rest of every other group the other
    way; once it is alarmed it no longer speaks for the rest). Returns (x, w, ok)."""
    if (con.comp is None or con.n is None or con.s1 is None or con.var_g is None
            or con.var_r is None or not alarm.any()):
        return x, w, ok
    on = alarm != 0
    C = int(con.comp.max()) + 1
    an = np.zeros(C)
    as1 = np.zeros(C)
    tn = np.zeros(C)
    ts1 = np.zeros(C)
    n, s1 = con.n[:, t], con.s1[:, t]
    np.add.at(an, con.comp, np.where(on, n, 0.0))
    np.add.at(as1, con.comp, np.where(on, s1, 0.0))
    np.add.at(tn, con.comp, n)
    np.add.at(ts1, con.comp, s1)
    affected = ~on & (an[con.comp] > 0)
    rn = tn[con.comp] - n - an[con.comp]
    rs1 = ts1[con.comp] - s1 - as1[con.comp]
    with np.errstate(invalid="ignore", divide="ignore"):
        c2 = s1 / n - rs1 / rn
        v2 = (con.var_g[:, t] / n + con.var_r[:, t] / rn) * con.phi_m[:, t]
    ok2 = np.where(affected, ok & (n > 0) & (rn > 0), ok)
    return (np.where(affected & ok2, c2, x), np.where(affected & ok2, 1.0 / v2, w), ok2)


def run(con: Contrasts, settings: DetectorSettings, first: int,
        state: dict[str, dict[str, np.ndarray]] | None = None, *,
        origin: int = 0) -> tuple[DayRecords, list[Event]]:
    """Advance every slot's mean and spread CUSUM over days ``first .. T-1`` from ``state``
    (the state after day ``first - 1``; None = nothing seen). Returns the per-day records and the
    alarms raised and cleared, in day order. Days in the state, the records and the events are
    ``origin + index`` (pass the first day's ordinal to get calendar ordinals)."""
    S, T = con.c.shape
    st = {k: ({f: v.copy() for f, v in state[k].items()} if state else empty_state(S))
          for k in KINDS}
    hs = thresholds(con, settings, first)
    D = T - first
    rec = DayRecords(first=first, origin=origin)
    for k in KINDS:
        rec.state[k] = {f: np.zeros((D, S)) for f in STATE_FIELDS}
        for name in ("threshold", "evidence", "size", "low", "high"):
            getattr(rec, name)[k] = np.full((D, S), np.nan)
        rec.used[k] = np.zeros((D, S), dtype=bool)
    events: list[Event] = []
    log_gate = 2.0 * np.log(settings.spread_ratio)
    with np.errstate(divide="ignore", invalid="ignore"):
        w_m = np.where(con.mean_ok, 1.0 / con.v, 0.0)
        w_s = np.where(con.spread_ok, 1.0 / con.var_u, 0.0)
        data = {
            "mean": (con.mean_ok, con.c, w_m, con.delta),
            "spread": (con.spread_ok, con.u, w_s, np.full(con.c.shape, log_gate)),
        }
        recent = {k: (_recent(w, ok, settings.clear_days), _recent(w * x, ok, settings.clear_days),
                      _recent(ok.astype(np.float64), ok, settings.clear_days))
                  for k, (ok, x, w, _) in data.items()}
        week = max(3, settings.clear_days // 2)
        lately = {k: (_recent(w, ok, week), _recent(w * x, ok, week))
                  for k, (ok, x, w, _) in data.items()}
    for j, t in enumerate(range(first, T)):
        day = origin + t
        for k in KINDS:
            ok, x, w, gate = (a[:, t] for a in data[k])
            s = st[k]
            if k == "mean":
                x, w, ok = _set_apart(con, s["alarm"], t, x, w, ok)
            h_hi, h_lo = hs[k]["hi"][:, j], hs[k]["lo"][:, j]
            two_sided = k == "mean"
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                # winsorised at WINSOR standard errors beyond the midpoint (Hawkins 1993): one
                # wild day of skewed data cannot cross the threshold on its own
                reach = gate / 2.0 + WINSOR / np.sqrt(w)
                xw = np.clip(x, -reach, reach)
                up = np.where(ok, (gate * xw - gate * gate / 2.0) * w, 0.0)
                if k == "spread" and con.llr_s is not None:
                    # no single day crosses alone (as the winsorised mean steps)
                    up = np.where(ok, np.minimum(con.llr_s[:, t], h_hi / SPREAD_CAP), 0.0)
                dn = np.where(ok, (-gate * xw - gate * gate / 2.0) * w, 0.0)
            for side, inc in (("hi", up), ("lo", dn)):
                if side == "lo" and not two_sided:
                    continue
                prev = s[f"s_{side}"]
                new = np.maximum(0.0, prev + inc)
                begin = ok & (prev <= 0) & (new > 0)
                s[f"onset_{side}"] = np.where(begin, day, s[f"onset_{side}"])
                s[f"w_{side}"] = np.where(begin, 0.0, s[f"w_{side}"])
                s[f"wc_{side}"] = np.where(begin, 0.0, s[f"wc_{side}"])
                run_on = new > 0
                s[f"w_{side}"] = np.where(run_on, s[f"w_{side}"] + np.where(ok, w, 0.0), 0.0)
                s[f"wc_{side}"] = np.where(run_on, s[f"wc_{side}"] + np.where(ok, w * x, 0.0), 0.0)
                s[f"onset_{side}"] = np.where(run_on, s[f"onset_{side}"], NONE)
                s[f"s_{side}"] = new
            alarmed = s["alarm"] != 0
            # accumulate the size of an existing alarm
            s["aw"] = np.where(alarmed & ok, s["aw"] + w, s["aw"])
            s["awc"] = np.where(alarmed & ok, s["awc"] + w * x, s["awc"])
            # raise
            with np.errstate(divide="ignore", invalid="ignore"):
                ev_hi = s["s_hi"] / h_hi
                ev_lo = s["s_lo"] / h_lo if two_sided else np.zeros(S)
                size_hi = s["wc_hi"] / s["w_hi"]
                size_lo = -s["wc_lo"] / s["w_lo"]
                lw, lwx = (a[:, t] for a in lately[k])
                l_size, l_se = lwx / lw, 1.0 / np.sqrt(lw)
                pass_hi = ((size_hi + Z95 / np.sqrt(s["w_hi"]) >= gate)
                           | (l_size + Z95 * l_se >= gate))
                pass_lo = ((size_lo + Z95 / np.sqrt(s["w_lo"]) >= gate)
                           | (-l_size + Z95 * l_se >= gate))
            fire_hi = ~alarmed & ok & (ev_hi > 1) & pass_hi
            fire_lo = ~alarmed & ok & (ev_lo > 1) & pass_lo if two_sided else np.zeros(S, bool)
            pick_lo = fire_lo & (~fire_hi | (ev_lo > ev_hi))
            pick_hi = fire_hi & ~pick_lo
            if two_sided and con.comp is not None and (pick_hi | pick_lo).sum() > 1:
                # one new mean alarm per comparison a day: the strongest (the others' rests
                # hold it; they restart without it below and are judged again). Strength is
                # the size since the onset in standard errors, |sum w c| / sqrt(sum w): the
                # winsorised statistics of a group and of the others whose rest it moved can
                # be equal when a change is far beyond the design shift
                with np.errstate(divide="ignore", invalid="ignore"):
                    z_hi = s["wc_hi"] / np.sqrt(s["w_hi"])
                    z_lo = -s["wc_lo"] / np.sqrt(s["w_lo"])
                strength = np.where(pick_hi, z_hi, np.where(pick_lo, z_lo, -np.inf))
                best = np.full(int(con.comp.max()) + 1, -np.inf)
                np.maximum.at(best, con.comp, strength)
                lead = np.zeros(S, dtype=bool)
                for c_ in np.flatnonzero(np.isfinite(best)):
                    members = np.flatnonzero((con.comp == c_) & (strength == best[c_]))
                    lead[members[0]] = True
                pick_hi &= lead
                pick_lo &= lead
            for pick, side, sign in ((pick_hi, "hi", 1), (pick_lo, "lo", -1)):
                if not pick.any():
                    continue
                s["alarm"] = np.where(pick, sign, s["alarm"])
                s["detected"] = np.where(pick, day, s["detected"])
                s["alarm_onset"] = np.where(pick, s[f"onset_{side}"], s["alarm_onset"])
                s["aw"] = np.where(pick, s[f"w_{side}"], s["aw"])
                s["awc"] = np.where(pick, s[f"wc_{side}"], s["awc"])
                events.extend(Event(int(i), k, "raised", day, sign) for i in np.flatnonzero(pick))
            raised = pick_hi | pick_lo
            if two_sided and raised.any() and con.comp is not None:
                # the others restart, their rests now without the alarmed group
                others = np.isin(con.comp, con.comp[raised]) & (s["alarm"] == 0)
                fresh = empty_state(S)
                for f in STATE_FIELDS:
                    s[f] = np.where(others, fresh[f], s[f])
            # clear
            rw, rwx, rcount = (r[:, t] for r in recent[k])
            with np.errstate(divide="ignore", invalid="ignore"):
                r_size = s["alarm"] * rwx / rw
                r_high = r_size + Z95 / np.sqrt(rw)
            clear = (alarmed & (day - s["detected"] >= settings.clear_days)
                     & (rcount >= settings.clear_days / 2) & (r_high < gate))
            if clear.any():
                events.extend(Event(int(i), k, "cleared", day, int(s["alarm"][i]))
                              for i in np.flatnonzero(clear))
                # the comparison starts afresh: the others' statistics carry the cleared
                # group's change through their rest
                reset = clear.copy()
                if con.comp is not None:
                    reset |= np.isin(con.comp, con.comp[clear]) & (s["alarm"] == 0)
                fresh = empty_state(S)
                for f in STATE_FIELDS:
                    s[f] = np.where(reset, fresh[f], s[f])
            # records
            for f in STATE_FIELDS:
                rec.state[k][f][j] = s[f]
            rec.used[k][j] = ok
            with np.errstate(divide="ignore", invalid="ignore"):
                ev_lo_now = s["s_lo"] / h_lo if two_sided else np.zeros(S)
                ev_hi_now = s["s_hi"] / h_hi
                lead_lo = (ev_lo_now > ev_hi_now) if two_sided else np.zeros(S, bool)
                rec.threshold[k][j] = np.where(lead_lo, h_lo, h_hi)
                rec.evidence[k][j] = np.fmax(ev_hi_now, ev_lo_now)
                now_alarm = s["alarm"] != 0
                w_run = np.where(now_alarm, s["aw"], np.where(lead_lo, s["w_lo"], s["w_hi"]))
                wc_run = np.where(now_alarm, s["awc"], np.where(lead_lo, s["wc_lo"], s["wc_hi"]))
                est = wc_run / w_run
                se = 1.0 / np.sqrt(w_run)
                rec.size[k][j] = est
                rec.low[k][j] = est - Z95 * se
                rec.high[k][j] = est + Z95 * se
    return rec, events


def final_state(rec: DayRecords) -> dict[str, dict[str, np.ndarray]]:
    """The state after the last processed day."""
    return {k: {f: v[-1].copy() for f, v in rec.state[k].items()} for k in rec.state}
