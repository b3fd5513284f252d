"""The weekly report's data: run the review, then gather every active alert's battery, trend
and events (rendered by ``tui.render.weekly``)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


@dataclass
class AlertSection:
    summary: Any  # ComparisonSummary
    detail: Any  # ComparisonDetail
    trend: Any  # TrendResult
    events: list[Any]


@dataclass
class WeeklyReport:
    result: Any  # ReviewResult
    sections: list[AlertSection]
    new_alerts: list[Any]  # ComparisonSummary opened/reopened in this window
    cleared: list[Any]
    zone: str = "UTC"  # the plant time zone: event times are shown in it


def build_weekly_report(store, *, week: str | None = None, as_of=None,
                        fdr_method: str | None = None, persist: bool = True) -> WeeklyReport:
    """Run the review (recording it, as ``lotwatch review`` does, unless ``persist`` is False),
    then gather every active alert's battery and trend."""
    from lotwatch.store import alerts as store_alerts
    from lotwatch.tui.services import review_engine as eng

    result = eng.run_review(store, week=week, as_of=as_of, fdr_method=fdr_method,
                            persist=persist)
    sections, new, cleared = [], [], []
    for c in result.comparisons:
        events = store_alerts.alert_history(store, c.alert_id) if c.alert_id else []
        if c.event in ("opened", "reopened"):  # recorded by this review's detector advance
            new.append(c)
        if c.event == "cleared":
            cleared.append(c)
        if c.alert_state in ("open", "acknowledged"):
            detail = eng.comparison_detail(store, c.characteristic, c.factor, as_of=result.as_of,
                                           summary=c)
            tr = eng.trend(store, c.characteristic, c.factor, as_of=result.as_of)
            sections.append(AlertSection(c, detail, tr, events))
    return WeeklyReport(result, sections, new, cleared, store.plant_zone)
