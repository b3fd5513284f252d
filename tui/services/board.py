"""The board: every characteristic × factor with data, in order of urgency.

Built from one review of the latest window (``persist=False``: looking never opens or clears
alerts), the detectors' stored state (``detection.detector_status``, read through the review) and
the alert log. The state of a row: an active alert not yet acknowledged is a "mean alert" or a
"spread alert" after the detector that raised it, an acknowledged one "acknowledged"; without an
alert, "watching" when the window's statistics could be computed, else "not enough data".
With an alert, group, direction, size, onset and % of tolerance are the alert's (the change since
its estimated onset); without one, the window's most shifted group and its mean minus the mean
of the other lots. ``evidence`` is the detector's statistic over its threshold (1 = crossed), so
"getting close" is visible; it also orders rows of the same state.
"""

from __future__ import annotations

from collections.abc import Iterable
from types import SimpleNamespace
from typing import TYPE_CHECKING, Any

from lotwatch.tui.services.view_models import (
    ACKNOWLEDGED,
    MEAN_ALERT,
    NOT_ENOUGH,
    SPREAD_ALERT,
    WATCHING,
    AlertRow,
    BoardRow,
    CharacteristicInfo,
)

if TYPE_CHECKING:
    from lotwatch.tui.services.review_engine import ComparisonSummary

# Which of a comparison's alerts the board shows first: open before acknowledged, mean first.
_ALERT_RANK = {("open", "mean"): 0, ("open", "spread"): 1, ("acknowledged", "mean"): 2,
               ("acknowledged", "spread"): 3}


def percent_of_tolerance(size: float | None, lsl: float | None, usl: float | None) -> float | None:
    """|size| / (USL − LSL) × 100, or None without both limits (common practice)."""
    if size is None or lsl is None or usl is None or usl <= lsl:
        return None
    return abs(size) / (usl - lsl) * 100.0


def _leading(alerts: Iterable[AlertRow]) -> dict[tuple[str, str], AlertRow]:
    out: dict[tuple[str, str], AlertRow] = {}
    for a in alerts:
        key = (a.characteristic, a.factor)
        rank = _ALERT_RANK.get((a.state, a.kind), 9)
        old = out.get(key)
        if old is None or rank < _ALERT_RANK.get((old.state, old.kind), 9):
            out[key] = a
    return out


def early_rows(statuses: Iterable[Any], chars: Iterable[CharacteristicInfo],
               active_alerts: Iterable[AlertRow]) -> list[BoardRow]:
    """The board before the window's review has run: from the detectors' stored state
    (``detection.detector_status``) and the alert log only, so the first screen has its states,
    alerts and evidence while the statistics stack loads. q, and the group of rows without an
    alert, follow with the review."""
    by: dict[tuple[str, str], list[Any]] = {}
    for s in statuses:
        by.setdefault((s.characteristic, s.factor), []).append(s)
    early = []
    for (characteristic, factor), mine in by.items():
        top = max(mine, key=lambda s: s.evidence if s.evidence is not None else -1.0)
        early.append(SimpleNamespace(
            characteristic=characteristic, factor=factor, n_total=1, status="ok",
            largest_shift_group=None, direction=None, largest_shift=None, gate=None, q=None,
            alert_id=None, window_label="", detector_evidence=top.evidence,
            detector_onset=top.onset.isoformat() if top.onset is not None else None))
    return board_rows(early, chars, active_alerts)


def board_rows(comparisons: Iterable[ComparisonSummary | Any], chars: Iterable[CharacteristicInfo],
               active_alerts: Iterable[AlertRow]) -> list[BoardRow]:
    """One row per comparison that has data, sorted by :attr:`BoardRow.urgency`.

    Comparisons of characteristics not in ``chars`` (retired) and comparisons without a single
    lot in the window (a factor no lot carries) are left out.
    """
    info = {c.name: c for c in chars}
    alerts = _leading(active_alerts)
    rows: list[BoardRow] = []
    for c in comparisons:
        ch = info.get(c.characteristic)
        if ch is None or c.n_total == 0:
            continue
        alert = alerts.get((c.characteristic, c.factor))
        evidence = getattr(c, "detector_evidence", None)
        onset = getattr(c, "detector_onset", None) if evidence else None
        if alert is not None:
            if alert.state == "acknowledged":
                state = ACKNOWLEDGED
            else:
                state = SPREAD_ALERT if alert.kind == "spread" else MEAN_ALERT
            group, direction, size = alert.groups, alert.direction, alert.size
            onset = alert.onset or onset
            pct = (abs(alert.percent_of_tolerance) if alert.percent_of_tolerance is not None
                   else None)
        else:
            state = WATCHING if c.status == "ok" else NOT_ENOUGH
            ok = c.status == "ok"
            group = c.largest_shift_group if ok else None
            direction = c.direction if ok else None
            size = abs(c.largest_shift) if ok and c.largest_shift is not None else None
            pct = None
        if size is not None and direction == "lower":
            size = -abs(size)
        if pct is None:
            pct = percent_of_tolerance(size, ch.lsl, ch.usl)
        rows.append(BoardRow(
            characteristic=c.characteristic, factor=c.factor, unit=ch.unit,
            resolution=ch.resolution, state=state, group=group, direction=direction,
            size=size, percent_of_tolerance=pct, min_shift=c.gate, q=c.q,
            alert_id=alert.id if alert is not None else c.alert_id, onset=onset,
            evidence=evidence, window_label=c.window_label))
    rows.sort(key=lambda r: r.urgency)
    return rows
