"""What the app shows, as plain values: the chosen comparison and window, and ISO-week steps.

The app holds a :class:`ViewState` in a reactive attribute; screens read it and post a
:class:`~lotwatch.tui.app.messages.ChooseView` with a changed copy, never assign it themselves.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import date, timedelta
from typing import TYPE_CHECKING, Protocol

if TYPE_CHECKING:
    from lotwatch.tui.services.view_models import AlertsView, DetailView, Overview, ReviewView

from lotwatch.stats.weeks import iso_week_label, parse_iso_week

ALPHAS = (0.05, 0.01, 0.10)
WINDOW_NAMES = {"trailing": "trailing days", "last_n": "last lots per group",
                "week": "calendar week"}


@dataclass(frozen=True)
class ViewState:
    """One characteristic × factor in one window at one alpha (and Dunnett's reference)."""

    characteristic: str | None = None
    factor: str | None = None
    week: str | None = None  # ISO week whose Sunday ends the windows; None = up to today
    alpha: float = 0.05
    window: str | None = None  # trailing | last_n | week; None = the store's review setting
    reference: str | None = None

    def but(self, **changes: object) -> ViewState:
        """A copy with ``changes`` (choosing another comparison forgets the reference)."""
        if ("characteristic" in changes or "factor" in changes) and "reference" not in changes:
            changes["reference"] = None
        return replace(self, **changes)  # type: ignore[arg-type]

    def next_alpha(self) -> ViewState:
        i = ALPHAS.index(self.alpha) if self.alpha in ALPHAS else -1
        return self.but(alpha=ALPHAS[(i + 1) % len(ALPHAS)])

    def next_window(self, current_kind: str) -> ViewState:
        kinds = list(WINDOW_NAMES)
        i = kinds.index(current_kind) if current_kind in kinds else -1
        return self.but(window=kinds[(i + 1) % len(kinds)])

    def shifted_week(self, step: int, zone: str | None = None) -> ViewState:
        """The windows' end a week back or forth; forth from this week returns to today (weeks
        of the plant calendar, ``zone``)."""
        return self.but(week=step_week(self.week, step, zone))


def plant_today(zone: str | None = None) -> date:
    """Today in the plant zone (UTC when not known): the review engine's default review day."""
    from lotwatch.tui.services.review_inputs import plant_today as today

    return today(zone)


iso_week = iso_week_label  # ISO 8601 week label of a day, e.g. 2026-W49 (the one helper)


def parse_week(label: str) -> date | None:
    """Monday of an ISO week label ("2026-W49"), or None if the text is not one."""
    try:
        return parse_iso_week(label)[0]
    except ValueError:
        return None


def shift_week(label: str, step: int, zone: str | None = None) -> str:
    """The ISO week ``step`` weeks after ``label`` (a bad label: from this plant week)."""
    monday = parse_week(label)
    if monday is None:
        monday = plant_today(zone)
    return iso_week(monday + timedelta(weeks=step))


def step_week(week: str | None, step: int, zone: str | None = None) -> str | None:
    """``step`` weeks from ``week`` (None = this week of the plant calendar, ``zone``); this
    week or later becomes None."""
    this_week = iso_week(plant_today(zone))
    target = shift_week(week or this_week, step, zone)
    monday, now = parse_week(target), parse_week(this_week)
    return None if monday is None or now is None or monday >= now else target


class AppState(Protocol):
    """What screens read from the app (its reactive attributes); they never assign them."""

    overview: Overview | None
    detail: DetailView | None
    detail_problem: str
    review: ReviewView | None
    review_problem: str
    alerts: AlertsView | None
    view: ViewState
    review_week: str | None
    computing: bool
    store_note: str
    last_tags: dict[str, str]
    read_only: bool
    user: str

    def window_text(self) -> str: ...
    def window_kind(self) -> str: ...
    def refuse_read_only(self, what: str) -> None: ...
