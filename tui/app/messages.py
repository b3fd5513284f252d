"""Typed messages that carry results from thread workers back to the event loop.

Workers never touch widgets: they post one of these to the app (thread-safe), and the app hands
the payload to the screen that shows it. Every result that can be superseded carries the
``generation`` of the request that produced it, so a slow recompute never repaints over a newer
one.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from textual.message import Message

if TYPE_CHECKING:
    from lotwatch.tui.services.data import AlertsView, DetailView, Overview, ReviewView


class StoreChanged(Message):
    """Another connection committed to the store (``PRAGMA data_version`` moved)."""

    def __init__(self, data_version: int) -> None:
        super().__init__()
        self.data_version = data_version


class StoreTrouble(Message):
    """The store file disappeared, was replaced, or can no longer be read."""

    def __init__(self, what: str, advice: str, *, recovered: bool = False) -> None:
        super().__init__()
        self.what = what
        self.advice = advice
        self.recovered = recovered


class OverviewLoaded(Message):
    """Characteristics with their state, factors, known tag values, open alerts."""

    def __init__(self, overview: Overview, generation: int) -> None:
        super().__init__()
        self.overview = overview
        self.generation = generation


class ComparisonComputed(Message):
    """The battery, trend and window of one characteristic × factor were computed."""

    def __init__(self, detail: DetailView, generation: int) -> None:
        super().__init__()
        self.detail = detail
        self.generation = generation


class ReviewComputed(Message):
    """Every comparison of one week, sorted by q."""

    def __init__(self, review: ReviewView, generation: int) -> None:
        super().__init__()
        self.review = review
        self.generation = generation


class AlertsLoaded(Message):
    """Open and past alerts with their histories."""

    def __init__(self, alerts: AlertsView, generation: int) -> None:
        super().__init__()
        self.alerts = alerts
        self.generation = generation


@dataclass(frozen=True)
class LoggedLot:
    """What was stored by one save of the entry form."""

    characteristic: str
    lot: str | None
    stored: int
    duplicates: int
    rounded: int


class LotLogged(Message):
    """The entry form's lots were stored (one transaction)."""

    def __init__(self, logged: LoggedLot) -> None:
        super().__init__()
        self.logged = logged


class AlertAcknowledged(Message):
    """An alert was acknowledged with a note."""

    def __init__(self, alert_id: int, by: str) -> None:
        super().__init__()
        self.alert_id = alert_id
        self.by = by


class ReviewRecorded(Message):
    """A review was recorded: alerts were opened, held or cleared as it decided."""

    def __init__(self, opened: int, cleared: int, notes: list[str]) -> None:
        super().__init__()
        self.opened = opened
        self.cleared = cleared
        self.notes = notes


class WriteFailed(Message):
    """A write (log or acknowledge) failed; the form that asked for it stays open."""

    def __init__(self, kind: str, message: str) -> None:
        super().__init__()
        self.kind = kind
        self.message = message
