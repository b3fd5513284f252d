"""The lotwatch Textual app: screens, key bindings, command palette, workers and their failures.

Everything that touches the store or computes statistics runs in a thread worker started here
(each opens its own Store: a SQLite connection belongs to one thread). Results come back as typed
messages (``tui.messages``); each carries the generation of its request and is dropped if a newer
request was made since, so a slow recompute never repaints over a newer one. A long-lived poller
thread watches ``PRAGMA data_version`` (and the file's identity) every half second and posts
``StoreChanged``. Worker failures are turned into words in one place: ``on_worker_state_changed``.
"""

from __future__ import annotations

import sqlite3
import threading
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

from lotwatch.tui.app.messages import (
    AlertAcknowledged,
    AlertsLoaded,
    ComparisonComputed,
    LoggedLot,
    LotLogged,
    OverviewLoaded,
    ReviewComputed,
    ReviewRecorded,
    StoreChanged,
    StoreTrouble,
    WriteFailed,
)
from lotwatch.tui.app.screens.acknowledge import AcknowledgeScreen
from lotwatch.tui.app.screens.alerts import AlertsScreen
from lotwatch.tui.app.screens.entry import LotEntryScreen
from lotwatch.tui.app.screens.help import HelpScreen
from lotwatch.tui.app.screens.main import MainScreen
from lotwatch.tui.app.screens.review import ReviewScreen
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services import data
from lotwatch.tui.services.data import (
    AlertRow,
    AlertsView,
    DetailRequest,
    DetailView,
    EntryDraft,
    Overview,
)
from textual import work
from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.screen import ModalScreen, Screen
from textual.timer import Timer
from textual.worker import Worker, WorkerState, get_current_worker

ALPHAS = [0.05, 0.01, 0.10]
WINDOW_NAMES = {"trailing": "trailing days", "last_n": "last lots per group",
                "week": "calendar week"}
POLL_SECONDS = 0.5
DETAIL_DEBOUNCE = 0.12

# Actions that open or switch screens: refused while a modal (form, question) is on top, so a
# letter typed in the wrong place never throws away a half-filled form.
_SCREEN_ACTIONS = {"new_lot", "review", "alerts", "main", "help", "quit"}


@dataclass
class ViewState:
    """What the main view shows: one characteristic × factor in one window at one alpha."""

    characteristic: str | None = None
    factor: str | None = None
    week: str | None = None  # ISO week whose Sunday ends the windows; None = up to today
    alpha: float = 0.05
    window: str | None = None  # trailing | last_n | week; None = the store's review setting


# --- errors in words ---------------------------------------------------------------------------


def describe_error(exc: BaseException | None, task: str) -> str:
    """What happened and what to do, for a worker that failed while doing ``task``."""
    from lotwatch.store.errors import (
        BadInput,
        NotFound,
        StoreError,
        StoreFull,
        StoreLocked,
        StoreMissing,
        StoreReadOnly,
    )

    if exc is None:
        return f"{task} failed for an unknown reason. The app keeps running; try again."
    raw = clean(str(exc), 400).strip()
    said = raw + ("." if raw and raw[-1] not in ".!?" else "")
    said = said[:1].upper() + said[1:]
    # The store's messages already say what happened and what to do; add only what the app
    # itself knows: that the form keeps what was typed.
    if isinstance(exc, (StoreLocked, StoreFull)):
        return f"{said} What you typed is kept: press Enter in the form to try again."
    if isinstance(exc, StoreReadOnly):
        return f"{said} To make changes, quit and reopen without --read-only."
    if isinstance(exc, StoreMissing):
        return (f"{said} The store file is gone. Restore it, or quit and start lotwatch with "
                "--db pointing at a store.")
    if isinstance(exc, BadInput):
        return f"{said} Correct the form and save again."
    if isinstance(exc, NotFound):
        return f"{said} It may have been changed by someone else; the view will refresh."
    if isinstance(exc, StoreError):
        return said
    if isinstance(exc, sqlite3.Error):
        return (f"{task}: the store could not be read or written ({raw}). If the file was "
                "moved, replaced or damaged, quit and reopen it (lotwatch check can verify it).")
    if isinstance(exc, ValueError):  # the review engine's word for a bad setting or week
        return f"{task}: {raw}."
    if isinstance(exc, OSError):
        return f"{task}: {raw}. Check the disk and the file's permissions."
    return (f"{task} failed unexpectedly ({type(exc).__name__}: {raw}). The app keeps "
            "running; please report this with what you did just before.")


# --- weeks ---------------------------------------------------------------------------------------


def utc_today() -> date:
    """Today's date in UTC: the review engine's default review day."""
    return datetime.now(UTC).date()


def iso_week(day: date) -> str:
    """ISO 8601 week label of a day, e.g. 2026-W49."""
    y, w, _ = day.isocalendar()
    return f"{y}-W{w:02d}"


def parse_week(label: str) -> date | None:
    """Monday of an ISO week label ("2026-W49"), or None if the text is not one."""
    try:
        y, w = label.strip().upper().split("-W")
        return date.fromisocalendar(int(y), int(w[:2]), 1)
    except (ValueError, IndexError):
        return None


def shift_week(label: str, step: int) -> str:
    """The ISO week ``step`` weeks after ``label``."""
    monday = parse_week(label)
    if monday is None:
        monday = utc_today()
    return iso_week(monday + timedelta(weeks=step))


# --- the app -----------------------------------------------------------------------------------


class LotwatchApp(App[None]):
    """lotwatch's terminal interface on one store file."""

    CSS_PATH = "app.tcss"
    TITLE = "lotwatch"
    MODES = {"main": MainScreen, "review": ReviewScreen, "alerts": AlertsScreen}
    DEFAULT_MODE = "main"

    BINDINGS = [
        Binding("q", "quit", "Quit", tooltip="Leave lotwatch"),
        Binding("question_mark", "help", "Help", key_display="?",
                tooltip="Keys and what every number means"),
        Binding("n", "new_lot", "Log lot", tooltip="Open the lot entry form"),
        Binding("r", "review", "Review", tooltip="Weekly review of every comparison"),
        Binding("a", "alerts", "Alerts", tooltip="Open and past alerts"),
        Binding("m", "main", "Main", show=False, tooltip="Back to the main view"),
    ]

    def __init__(self, db_path: Path | str, *, read_only: bool = False,
                 poll_seconds: float = POLL_SECONDS) -> None:
        super().__init__()
        self.db_path = Path(db_path)
        self.read_only = read_only
        self.poll_seconds = poll_seconds
        self.user = data.login_name()
        self.view = ViewState()
        self.overview: Overview | None = None
        self.detail: DetailView | None = None
        self.review: data.ReviewView | None = None
        self.review_week: str | None = None
        self.alerts: AlertsView | None = None
        self.main_screen: MainScreen | None = None
        self._generation: dict[str, int] = {}
        self._detail_timer: Timer | None = None
        self._stop_polling = threading.Event()
        if read_only:
            self.sub_title = "read-only"

    # --- lifecycle -------------------------------------------------------------------------

    def on_mount(self) -> None:
        self.title = f"lotwatch: {clean(self.db_path.name, 40)}"
        # Start the store work once the first frame is out: the workers' first job imports
        # polars/scipy, which would otherwise compete with the first paint for the GIL.
        self.call_after_refresh(self._start_work)

    def _start_work(self) -> None:
        self.request_overview()
        self._poll_store()

    def on_unmount(self) -> None:
        self._stop_polling.set()

    def _next(self, group: str) -> int:
        self._generation[group] = self._generation.get(group, 0) + 1
        return self._generation[group]

    def _current(self, group: str, generation: int) -> bool:
        return self._generation.get(group) == generation

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        screen = self.screen
        if action in _SCREEN_ACTIONS and isinstance(screen, ModalScreen):
            return False
        # The key that opens the screen already shown is hidden there (room in the footer).
        if (action, type(screen)) in (("review", ReviewScreen), ("alerts", AlertsScreen),
                                      ("main", MainScreen)):
            return False
        return True

    # --- requests (each runs in an exclusive thread worker) ---------------------------------

    def request_overview(self) -> None:
        self._load_overview(self._next("overview"))

    def request_detail(self) -> None:
        v = self.view
        if not v.characteristic or not v.factor:
            return
        req = DetailRequest(characteristic=v.characteristic, factor=v.factor, week=v.week,
                            alpha=v.alpha, window=v.window)
        self._load_detail(req, self._next("detail"))

    def request_review(self) -> None:
        self._load_review(self.review_week, self._next("review"))

    def request_alerts(self) -> None:
        self._load_alerts(self._next("alerts"))

    def refresh_all(self) -> None:
        self.request_overview()
        self.request_detail()
        if isinstance(self.screen, ReviewScreen):
            self.request_review()
        if isinstance(self.screen, AlertsScreen):
            self.request_alerts()

    @work(thread=True, exclusive=True, group="overview", exit_on_error=False,
          description="loading the characteristics")
    def _load_overview(self, generation: int) -> None:
        import textual_plotext  # noqa: F401  (warm the chart's import here, off the event loop)

        worker = get_current_worker()

        def frame(partial: Overview) -> None:
            if not worker.is_cancelled:
                self.post_message(OverviewLoaded(partial, generation))

        ov = data.load_overview(self.db_path, self.read_only,
                                on_frame=frame if self.overview is None else None)
        if not worker.is_cancelled:
            self.post_message(OverviewLoaded(ov, generation))

    @work(thread=True, exclusive=True, group="detail", exit_on_error=False,
          description="computing the comparison")
    def _load_detail(self, request: DetailRequest, generation: int) -> None:
        detail = data.load_detail(self.db_path, self.read_only, request)
        if not get_current_worker().is_cancelled:
            self.post_message(ComparisonComputed(detail, generation))

    @work(thread=True, exclusive=True, group="review", exit_on_error=False,
          description="computing the weekly review")
    def _load_review(self, week: str | None, generation: int) -> None:
        review = data.load_review(self.db_path, self.read_only, week)
        if not get_current_worker().is_cancelled:
            self.post_message(ReviewComputed(review, generation))

    @work(thread=True, exclusive=True, group="alerts", exit_on_error=False,
          description="loading the alerts")
    def _load_alerts(self, generation: int) -> None:
        alerts = data.load_alerts(self.db_path, self.read_only)
        if not get_current_worker().is_cancelled:
            self.post_message(AlertsLoaded(alerts, generation))

    @work(thread=True, group="write-lot", exit_on_error=False, description="saving the lot")
    def save_draft(self, draft: EntryDraft) -> None:
        """Store the form's lot in one transaction (the form stays open until this succeeds)."""
        stored, duplicates, rounded, lot = data.log_draft(self.db_path, draft, self.user)
        self.post_message(LotLogged(LoggedLot(draft.characteristic, lot, stored, duplicates,
                                              rounded)))

    @work(thread=True, exclusive=True, group="write-review", exit_on_error=False,
          description="recording the review")
    def _record_review(self, week: str | None) -> None:
        opened, cleared, notes = data.record_review(self.db_path, week, self.user)
        self.post_message(ReviewRecorded(opened, cleared, notes))

    def record_review(self) -> None:
        """Record the shown week's review (opens/clears alerts); refused when read-only."""
        if self.read_only:
            self.refuse_read_only("recording reviews")
            return
        self._record_review(self.review_week)

    @work(thread=True, group="write-ack", exit_on_error=False,
          description="recording the acknowledgement")
    def acknowledge(self, alert_id: int, note: str) -> None:
        data.acknowledge_alert(self.db_path, alert_id, self.user, note)
        self.post_message(AlertAcknowledged(alert_id, self.user))

    @work(thread=True, group="poll", exit_on_error=False, description="watching the store")
    def _poll_store(self) -> None:
        """Watch the store from one long-lived connection (``data_version`` is per connection).

        Posts StoreChanged when another connection committed, StoreTrouble when the file
        disappears, is replaced by another file, or cannot be opened; reopens when it is back.
        """
        from lotwatch.store import Store, StoreError

        worker = get_current_worker()
        store = None
        identity = None
        last_version: int | None = None
        trouble: str | None = None

        def report(what: str, advice: str, recovered: bool = False) -> None:
            nonlocal trouble
            if trouble != what:
                trouble = None if recovered else what
                self.post_message(StoreTrouble(what, advice, recovered=recovered))

        try:
            while not worker.is_cancelled and not self._stop_polling.is_set():
                current = data.file_identity(self.db_path)
                if current is None:
                    if store is not None:
                        store.close()
                        store = None
                    report(f"The store file {self.db_path} was deleted or moved.",
                           "Restore it (the view shows the last data read); nothing can be "
                           "saved until it is back.")
                elif store is None or current != identity:
                    replaced = store is not None
                    if store is not None:
                        store.close()
                        store = None
                    try:
                        store = Store.open(self.db_path, read_only=self.read_only)
                        identity = current
                        last_version = store.data_version()
                        if getattr(store, "immutable", False):
                            last_version = hash((last_version, data.file_stamp(self.db_path)))
                        if replaced or trouble is not None:
                            report("The store file was replaced or restored; showing its "
                                   "current contents.", "", recovered=True)
                            self.post_message(StoreChanged(last_version))
                    except StoreError as exc:
                        report(f"The store cannot be opened: {clean(str(exc), 300)}",
                               "Fix or restore the file; lotwatch retries every second.")
                else:
                    try:
                        version = store.data_version()
                        if getattr(store, "immutable", False):
                            version = hash((version, data.file_stamp(self.db_path)))
                    except (sqlite3.Error, StoreError) as exc:
                        report(f"Reading the store failed: {clean(str(exc), 200)}",
                               "lotwatch will try to reopen it.")
                        store.close()
                        store = None
                    else:
                        if version != last_version:
                            last_version = version
                            self.post_message(StoreChanged(version))
                self._stop_polling.wait(self.poll_seconds)
        finally:
            if store is not None:
                store.close()

    # --- failures: the one place ------------------------------------------------------------

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        if event.state != WorkerState.ERROR:
            return
        worker = event.worker
        message = describe_error(worker.error, worker.description or worker.name)
        group = worker.group
        screen = self.screen
        if group in ("write-lot", "write-ack"):
            self.post_message(WriteFailed(group, message))
        elif group == "detail" and self.main_screen is not None:
            self.main_screen.show_detail_problem(message)
        elif group == "overview" and self.main_screen is not None:
            self.main_screen.refresh_status(note="store not read")
        elif group == "review" and isinstance(screen, ReviewScreen):
            screen.show_problem(message)
        elif group == "poll":  # the poller died: keep watching with a fresh one
            self.set_timer(1.0, self._poll_store)
        self.notify(message, title="Problem", severity="error", markup=False, timeout=12)

    def on_write_failed(self, message: WriteFailed) -> None:
        """The form that asked for the write stays open with its contents and says why."""
        screen = self.screen
        if isinstance(screen, (LotEntryScreen, AcknowledgeScreen)):
            screen.save_failed(message.message)

    # --- results ---------------------------------------------------------------------------

    def on_overview_loaded(self, message: OverviewLoaded) -> None:
        if not self._current("overview", message.generation):
            return
        ov = message.overview
        self.overview = ov
        names = [c.name for c in ov.characteristics]
        factors = [f.name for f in ov.factors]
        changed = False
        if self.view.characteristic not in names:
            self.view.characteristic = names[0] if names else None
            changed = True
        if self.view.factor not in factors:
            self.view.factor = factors[0] if factors else None
            changed = True
        if self.main_screen is not None:
            self.main_screen.show_overview(ov)
        if changed or "detail" not in self._generation:
            self.request_detail()

    def on_comparison_computed(self, message: ComparisonComputed) -> None:
        if not self._current("detail", message.generation):
            return
        self.detail = message.detail
        if self.main_screen is not None:
            self.main_screen.show_detail(message.detail)

    def on_review_computed(self, message: ReviewComputed) -> None:
        if not self._current("review", message.generation):
            return
        self.review = message.review
        if isinstance(self.screen, ReviewScreen):
            self.screen.show_review(message.review)

    def on_alerts_loaded(self, message: AlertsLoaded) -> None:
        if not self._current("alerts", message.generation):
            return
        self.alerts = message.alerts
        if isinstance(self.screen, AlertsScreen):
            self.screen.show_alerts(message.alerts)

    def on_store_changed(self, message: StoreChanged) -> None:
        self.refresh_all()

    def on_store_trouble(self, message: StoreTrouble) -> None:
        text = message.what + (f" {message.advice}" if message.advice else "")
        self.notify(text, title="Store", severity="information" if message.recovered else "error",
                    markup=False, timeout=8 if message.recovered else 30)
        if self.main_screen is not None:
            self.main_screen.refresh_status(note="store recovered" if message.recovered
                                            else "store unavailable")

    def on_lot_logged(self, message: LotLogged) -> None:
        logged = message.logged
        if isinstance(self.screen, LotEntryScreen):
            self.screen.dismiss(None)
        lot = clean(logged.lot or "", 30)
        if logged.stored:
            text = f"Stored lot {lot} of {clean(logged.characteristic, 30)}."
            if logged.rounded:
                text += f" {logged.rounded} value(s) were rounded to the resolution."
            self.notify(text, markup=False)
        else:
            self.notify(f"Lot {lot} was already stored with these values; nothing new was "
                        "saved.", severity="warning", markup=False)
        self.refresh_all()

    def on_review_recorded(self, message: ReviewRecorded) -> None:
        text = (f"Review recorded: {message.opened} alert(s) opened, {message.cleared} "
                "cleared.")
        if message.notes:
            text += " " + " ".join(clean(n, 200) for n in message.notes)
        self.notify(text, markup=False, timeout=8)
        self.refresh_all()
        self.request_alerts()
        self.request_review()

    def on_alert_acknowledged(self, message: AlertAcknowledged) -> None:
        if isinstance(self.screen, AcknowledgeScreen):
            self.screen.dismiss(None)
        self.notify(f"Alert #{message.alert_id} acknowledged by {clean(message.by, 24)}.",
                    markup=False)
        self.refresh_all()
        self.request_alerts()
        self.request_review()

    # --- choices from the keyboard ----------------------------------------------------------

    def window_kind(self) -> str:
        """The window kind shown: the one chosen with w, else the store's review setting."""
        if self.view.window:
            return self.view.window
        return self.overview.window_kind if self.overview else "trailing"

    def window_text(self) -> str:
        d = self.detail
        if d is not None and d.request.week == self.view.week and \
                d.request.window == self.view.window:
            return d.window_label
        return WINDOW_NAMES.get(self.window_kind(), self.window_kind()) + (
            f" to {self.view.week}" if self.view.week else "")

    def choose(self, *, characteristic: str | None = None, factor: str | None = None) -> None:
        """Show another characteristic or factor (debounced: arrowing down the list is cheap)."""
        if characteristic is not None:
            self.view.characteristic = characteristic
        if factor is not None:
            self.view.factor = factor
        if self.main_screen is not None:
            self.main_screen.refresh_status()
        if self._detail_timer is not None:
            self._detail_timer.stop()
        self._detail_timer = self.set_timer(DETAIL_DEBOUNCE, self.request_detail)

    def cycle_factor(self, step: int) -> None:
        if self.overview is None or not self.overview.factors:
            return
        names = [f.name for f in self.overview.factors]
        i = names.index(self.view.factor) if self.view.factor in names else -step
        self.choose(factor=names[(i + step) % len(names)])

    def cycle_alpha(self) -> None:
        i = ALPHAS.index(self.view.alpha) if self.view.alpha in ALPHAS else -1
        self.view.alpha = ALPHAS[(i + 1) % len(ALPHAS)]
        self.notify(f"Significance level alpha = {self.view.alpha:g}", markup=False, timeout=2)
        self.choose()

    def cycle_window(self) -> None:
        """Next window kind: trailing days, last N lots per group, ISO calendar week."""
        kinds = list(WINDOW_NAMES)
        current = self.window_kind()
        i = kinds.index(current) if current in kinds else -1
        self.view.window = kinds[(i + 1) % len(kinds)]
        self.notify(f"Window: {WINDOW_NAMES[self.view.window]}. [ and ] move a week back and "
                    "forth.", markup=False, timeout=3)
        self.choose()

    def shift_week(self, step: int) -> None:
        """Move the windows' end a week back or forth; forth from this week returns to today."""
        this_week = iso_week(utc_today())
        base = self.view.week or this_week
        target = shift_week(base, step)
        if parse_week(target) >= parse_week(this_week):  # type: ignore[operator]
            self.view.week = None
        else:
            self.view.week = target
        self.choose()

    def shift_review_week(self, step: int) -> None:
        """The review of a week earlier or later; later than this week means up to today."""
        this_week = iso_week(utc_today())
        target = shift_week(self.review_week or this_week, step)
        self.review_week = None if parse_week(target) >= parse_week(this_week) else target  # type: ignore[operator]
        self.request_review()

    def drill_into(self, characteristic: str, factor: str, week: str | None) -> None:
        self.view.characteristic = characteristic
        self.view.factor = factor
        self.view.week = week
        self.switch_mode("main")
        self.request_detail()

    # --- actions ---------------------------------------------------------------------------

    def refuse_read_only(self, what: str) -> None:
        self.notify(f"Read-only: this store was opened with --read-only, so {what} is "
                    "disabled. Quit (q) and run lotwatch watch without --read-only to make "
                    "changes.", title="Read-only", severity="warning", markup=False, timeout=8)

    def action_new_lot(self) -> None:
        if self.read_only:
            self.refuse_read_only("logging lots")
            return
        if self.overview is None:
            self.notify("Still reading the store; try again in a moment.", markup=False)
            return
        if not self.overview.characteristics:
            self.notify("No characteristics yet: add one with lotwatch characteristic add.",
                        markup=False, severity="warning")
            return
        self.push_screen(LotEntryScreen(self.overview, self.view.characteristic))

    def open_acknowledge(self, alert_id: int) -> None:
        if self.read_only:
            self.refuse_read_only("acknowledging alerts")
            return
        alert = self._find_alert(alert_id)
        if alert is None:
            self.notify(f"Alert #{alert_id} is not loaded yet; try again.", markup=False)
            self.request_alerts()
            return
        self.push_screen(AcknowledgeScreen(alert))

    def _find_alert(self, alert_id: int) -> AlertRow | None:
        pools: list[list[AlertRow]] = []
        if self.alerts is not None:
            pools.append(self.alerts.alerts)
        if self.overview is not None:
            pools.append(self.overview.open_alerts)
        for pool in pools:
            for a in pool:
                if a.id == alert_id:
                    return a
        return None

    def action_help_quit(self) -> None:
        """ctrl+c does not quit; say which key does (never ctrl+q: flow control over SSH)."""
        where = " (Esc closes this first)" if isinstance(self.screen, ModalScreen) else ""
        self.notify(f"Press q to quit lotwatch{where}.", title="Quit?", markup=False)

    def action_review(self) -> None:
        self.switch_mode("review")

    def action_alerts(self) -> None:
        self.switch_mode("alerts")

    def action_main(self) -> None:
        self.switch_mode("main")

    def action_help(self) -> None:
        self.push_screen(HelpScreen())

    def get_system_commands(self, screen: Screen) -> Iterable[SystemCommand]:
        yield SystemCommand("Log a lot", "Open the lot entry form (n)", self.action_new_lot)
        yield SystemCommand("Weekly review", "Every comparison of a week sorted by q (r)",
                            self.action_review)
        yield SystemCommand("Alerts", "Open and past alerts, acknowledge (a)",
                            self.action_alerts)
        yield SystemCommand("Main view", "Characteristics and the selected comparison (m)",
                            self.action_main)
        yield SystemCommand("Next factor", "Group by the next factor (f)",
                            lambda: self.cycle_factor(+1))
        yield SystemCommand("Next window kind", "Latest window or a chosen ISO week (w)",
                            self.cycle_window)
        yield SystemCommand("Next significance level", "alpha 0.05 / 0.01 / 0.10 (s)",
                            self.cycle_alpha)
        yield SystemCommand("Record the review", "Open, hold or clear alerts as the weekly "
                            "review decides (p on the review screen)", self.record_review)
        yield SystemCommand("Help", "Keys and what every number means (?)", self.action_help)
        yield from super().get_system_commands(screen)
