"""The board: every characteristic × factor with data, in order of urgency.

Built from one review of the latest window (``persist=False``: looking never opens or clears
alerts) and the alert log. The state of a row: an active alert that is not yet acknowledged is a
"mean alert" (the review's alerts are on group means), an acknowledged one "acknowledged";
without an alert, "watching" when the window's statistics could be computed, else "not enough
data". Size is the flagged (or most shifted) group's mean minus the mean of the other lots.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import TYPE_CHECKING

from lotwatch.tui.services.view_models import (
    ACKNOWLEDGED,
    MEAN_ALERT,
    NOT_ENOUGH,
    WATCHING,
    AlertRow,
    BoardRow,
    CharacteristicInfo,
)

if TYPE_CHECKING:
    from lotwatch.tui.services.review_engine import ComparisonSummary


def percent_of_tolerance(size: float | None, lsl: float | None, usl: float | None) -> float | None:
    """|size| / (USL − LSL) × 100, or None without both limits (common practice)."""
    if size is None or lsl is None or usl is None or usl <= lsl:
        return None
    return abs(size) / (usl - lsl) * 100.0


def board_rows(comparisons: Iterable[ComparisonSummary], chars: Iterable[CharacteristicInfo],
               active_alerts: Iterable[AlertRow]) -> list[BoardRow]:
    """One row per comparison that has data, sorted by :attr:`BoardRow.urgency`.

    Comparisons of characteristics not in ``chars`` (retired) and comparisons without a single
    lot in the window (a factor no lot carries) are left out.
    """
    info = {c.name: c for c in chars}
    alerts = {(a.characteristic, a.factor): a for a in active_alerts}
    rows: list[BoardRow] = []
    for c in comparisons:
        ch = info.get(c.characteristic)
        if ch is None or c.n_total == 0:
            continue
        alert = alerts.get((c.characteristic, c.factor))
        if alert is not None:
            state = ACKNOWLEDGED if alert.state == "acknowledged" else MEAN_ALERT
            group = alert.groups
            direction = alert.direction
            size = alert.size
        else:
            state = WATCHING if c.status == "ok" else NOT_ENOUGH
            group = c.largest_shift_group if c.status == "ok" else None
            direction = c.direction if c.status == "ok" else None
            size = abs(c.largest_shift) if c.largest_shift is not None else None
            if c.status != "ok":
                size = None
        if size is not None and direction == "lower":
            size = -abs(size)
        rows.append(BoardRow(
            characteristic=c.characteristic, factor=c.factor, unit=ch.unit,
            resolution=ch.resolution, state=state, group=group, direction=direction,
            size=size, percent_of_tolerance=percent_of_tolerance(size, ch.lsl, ch.usl),
            min_shift=c.gate, q=c.q, alert_id=alert.id if alert is not None else c.alert_id,
            window_label=c.window_label))
    rows.sort(key=lambda r: r.urgency)
    return rows
