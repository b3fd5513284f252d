"""The sentences alerts carry (light: no statistics stack, so listing alerts starts fast)."""

from __future__ import annotations

from datetime import date
from typing import Any

from lotwatch.tui.caution import CAUTION
from lotwatch.tui.render.numbers import num
from lotwatch.tui.render.numbers import size as size_text


def alert_sentence(characteristic: str, factor: str, groups: list[str], kind: str,
                   direction: str | None, onset: date | str | None,
                   detected_on: date | str | None, size: float | None, low: float | None,
                   high: float | None, percent: float | None, unit: str,
                   budget_years: float | None = None, resolution: str | None = None) -> str:
    """The sentence an alert carries: group, mean or spread, direction, onset, size in units and
    % of tolerance with its interval, detection day, and the caution. With the characteristic's
    ``resolution``, sizes carry its decimals plus one."""
    who = ", ".join(groups) if groups else "a group"
    what = "mean" if kind == "mean" else "spread (SD)"
    how = direction or "different"
    size_s = (size_text(size, resolution, unit, sign=True) if size is not None
              else "an unknown amount")
    interval = (f" (95% interval {size_text(low, resolution)} to {size_text(high, resolution)})"
                if low is not None and high is not None else "")
    pct = f", {num(percent, 3)}% of the tolerance" if percent is not None else ""
    budget = (f" Thresholds allow one false alert per {num(budget_years, 4)} comparison-years."
              if budget_years else "")
    return (f"{characteristic} by {factor}: {who} {what} {how} than the rest since about "
            f"{onset or '?'} (detected {detected_on or '?'}), by {size_s}{interval}{pct}."
            f"{budget} {CAUTION}")


def stored_alert_sentence(alert: Any, unit: str, budget_years: float | None = None,
                          resolution: str | None = None) -> str:
    """The sentence of a stored alert, with its id (see ``alert_sentence``)."""
    if alert.state == "cleared":
        why = getattr(alert, "closed_because", None)
        because = (why.rstrip(".") if why else
                   f"back within the gate (last {alert.last_window or '?'})")
        return (f"alert {alert.id}: {alert.characteristic} by {alert.factor} "
                f"({', '.join(alert.groups) or 'a group'}, {alert.kind}) cleared: {because}. "
                f"{CAUTION}")
    return f"alert {alert.id}: " + alert_sentence(
        alert.characteristic, alert.factor, list(alert.groups), alert.kind, alert.direction,
        alert.onset, alert.detected_on, alert.size, alert.size_low, alert.size_high,
        alert.percent_of_tolerance, unit, budget_years, resolution)
