"""Typed messages: requests that screens post up to the app, and results workers post back.

Screens never call the app's methods: they post a request (``ChooseView``, ``OpenComparison``,
``SaveLot`` ...) that bubbles to the app. Workers never touch widgets: they post a result to the
app (which stores it in a reactive attribute that screens watch) or, for a form's write, to the
form that asked (``reply_to``), which then dismisses itself or shows the problem.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from textual.message import Message

if TYPE_CHECKING:
    from lotwatch.tui.app.state import ViewState
    from lotwatch.tui.services.view_models import (
        AlertsView,
        AuditLine,
        DetailView,
        EntryDraft,
        LoggedLot,
        LotsRequest,
        LotsView,
        Overview,
        ReviewView,
    )
    from textual.message_pump import MessagePump


# --- results from workers ----------------------------------------------------------------------


class StoreChanged(Message):
    """A connection committed to the store (``PRAGMA data_version`` moved): the one trigger
    for reloading after any write, the app's own included."""

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
    """Characteristics, factors, known tag values, open alerts and the board."""

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


class ComparisonFailed(Message):
    """The comparison could not be computed; ``message`` says why in words."""

    def __init__(self, message: str) -> None:
        super().__init__()
        self.message = message


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


class LotsLoaded(Message):
    """The lots of one group, for the screen that asked."""

    def __init__(self, lots: LotsView) -> None:
        super().__init__()
        self.lots = lots


class HistoryLoaded(Message):
    """A value's audit trail, for the screen that asked."""

    def __init__(self, measurement_id: int, lines: list[AuditLine]) -> None:
        super().__init__()
        self.measurement_id = measurement_id
        self.lines = lines


class LotLogged(Message):
    """The entry form's lot was stored (one transaction); posted to the form, bubbles up."""

    def __init__(self, logged: LoggedLot) -> None:
        super().__init__()
        self.logged = logged


class WriteDone(Message):
    """A write (acknowledge, correct, void, record) succeeded; ``text`` says what was done."""

    def __init__(self, kind: str, text: str) -> None:
        super().__init__()
        self.kind = kind
        self.text = text


class WriteFailed(Message):
    """A write failed; the form that asked for it stays open and shows ``message``."""

    def __init__(self, kind: str, message: str) -> None:
        super().__init__()
        self.kind = kind
        self.message = message


# --- requests from screens ---------------------------------------------------------------------


class ChooseView(Message):
    """Show this comparison / window / alpha (the app recomputes, debounced)."""

    def __init__(self, view: ViewState) -> None:
        super().__init__()
        self.view = view


class OpenComparison(Message):
    """Open the comparison view of one characteristic × factor (optionally in a week)."""

    def __init__(self, characteristic: str, factor: str, week: str | None = None) -> None:
        super().__init__()
        self.characteristic = characteristic
        self.factor = factor
        self.week = week


class ShowReviewWeek(Message):
    """The weekly review of another week (None = up to today)."""

    def __init__(self, week: str | None) -> None:
        super().__init__()
        self.week = week


class Reload(Message):
    """A screen came into view and wants its data loaded (``what``: review | alerts)."""

    def __init__(self, what: str) -> None:
        super().__init__()
        self.what = what


class RecordReview(Message):
    """Record the shown week's review (opens, holds or clears alerts)."""


class Request(Message):
    """A request whose answer goes back to the screen that asked (``reply_to``)."""

    def __init__(self, reply_to: MessagePump) -> None:
        super().__init__()
        self.reply_to = reply_to


class SaveLot(Request):
    def __init__(self, reply_to: MessagePump, draft: EntryDraft) -> None:
        super().__init__(reply_to)
        self.draft = draft


class Acknowledge(Request):
    def __init__(self, reply_to: MessagePump, alert_id: int, note: str) -> None:
        super().__init__(reply_to)
        self.alert_id = alert_id
        self.note = note


class CorrectValue(Request):
    def __init__(self, reply_to: MessagePump, measurement_id: int, new_value: str,
                 reason: str) -> None:
        super().__init__(reply_to)
        self.measurement_id = measurement_id
        self.new_value = new_value
        self.reason = reason


class VoidValue(Request):
    def __init__(self, reply_to: MessagePump, measurement_id: int, reason: str) -> None:
        super().__init__(reply_to)
        self.measurement_id = measurement_id
        self.reason = reason


class LoadLots(Request):
    def __init__(self, reply_to: MessagePump, request: LotsRequest) -> None:
        super().__init__(reply_to)
        self.request = request


class LoadHistory(Request):
    def __init__(self, reply_to: MessagePump, measurement_id: int) -> None:
        super().__init__(reply_to)
        self.measurement_id = measurement_id
