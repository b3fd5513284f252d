"""The lotwatch Textual app: state in reactive attributes, requests in, results out.

The app holds what the screens show in reactive attributes (``overview``, ``detail``,
``review``, ``alerts``, ``view`` ...). Screens watch the attributes they show and post request
messages up (``ChooseView``, ``OpenComparison``, ``SaveLot`` ...); the app answers by starting a
thread worker (``workers.StoreWorkers``) whose typed result lands back in a reactive attribute or,
for a form's write, in the form that asked. The store poller is the single trigger for reloading
after any write. Worker failures are turned into words in one place: ``on_worker_state_changed``.
"""

from __future__ import annotations

import threading
from collections.abc import Iterable
from pathlib import Path

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.errors import describe_error
from lotwatch.tui.app.screens.alerts import AlertsScreen
from lotwatch.tui.app.screens.board import BoardScreen
from lotwatch.tui.app.screens.comparison import ComparisonScreen
from lotwatch.tui.app.screens.review import ReviewScreen
from lotwatch.tui.app.state import WINDOW_NAMES, ViewState
from lotwatch.tui.app.workers import StoreWorkers
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.storefile import login_name
from lotwatch.tui.services.view_models import (
    AlertsView,
    DetailRequest,
    DetailView,
    Overview,
    ReviewView,
)
from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.reactive import var
from textual.screen import ModalScreen, Screen
from textual.timer import Timer
from textual.worker import Worker, WorkerState

POLL_SECONDS = 0.5
DETAIL_DEBOUNCE = 0.12

# Actions that switch screens: refused while a modal (form, question) is on top, so a letter
# typed in the wrong place never throws away a half-filled form.
_SCREEN_ACTIONS = {"review", "alerts", "board", "quit"}


class LotwatchApp(StoreWorkers, App[None]):
    """lotwatch's terminal interface on one store file."""

    CSS_PATH = "app.tcss"
    TITLE = "lotwatch"
    MODES = {"board": BoardScreen, "comparison": ComparisonScreen, "review": ReviewScreen,
             "alerts": AlertsScreen}
    DEFAULT_MODE = "board"

    BINDINGS = [
        Binding("q", "quit", "Quit", tooltip="Leave lotwatch"),
        Binding("b", "board", "Board", tooltip="Every comparison by urgency"),
        Binding("r", "review", "Review", tooltip="Weekly review of every comparison"),
        Binding("a", "alerts", "Alerts", tooltip="Open and past alerts"),
        Binding("ctrl+c", "help_quit", show=False, system=True),
    ]

    overview: var[Overview | None] = var(None, init=False)
    detail: var[DetailView | None] = var(None, init=False)
    detail_problem: var[str] = var("", init=False)
    review: var[ReviewView | None] = var(None, init=False)
    review_problem: var[str] = var("", init=False)
    alerts: var[AlertsView | None] = var(None, init=False)
    view: var[ViewState] = var(ViewState, init=False)
    review_week: var[str | None] = var(None, init=False)
    computing: var[bool] = var(False, init=False)  # the shown comparison is being recomputed
    store_note: var[str] = var("", init=False)
    last_tags: var[dict[str, str]] = var(dict, init=False)  # the entry form starts from these

    def __init__(self, db_path: Path | str, *, read_only: bool = False,
                 poll_seconds: float = POLL_SECONDS) -> None:
        super().__init__()
        self.db_path = Path(db_path)
        self.read_only = read_only
        self.poll_seconds = poll_seconds
        self.user = login_name()
        self._generation: dict[str, int] = {}
        self._detail_timer: Timer | None = None
        self._stop_polling = threading.Event()
        self._detectors_checked = False  # brought current once the first board is up
        if read_only:
            self.sub_title = "read-only"

    # --- lifecycle -------------------------------------------------------------------------

    def on_mount(self) -> None:
        self.title = f"lotwatch: {clean(self.db_path.name, 40)}"
        # Start the store work once the first frame is out: the workers' first job imports
        # polars/scipy, which would otherwise compete with the first paint for the GIL.
        self.call_after_refresh(self._start_work)

    def _start_work(self) -> None:
        self.load_overview(self._next("overview"), True)
        self.poll_store()

    def on_unmount(self) -> None:
        self._stop_polling.set()

    def _next(self, group: str) -> int:
        self._generation[group] = self._generation.get(group, 0) + 1
        return self._generation[group]

    def _current(self, group: str, generation: int) -> bool:
        return self._generation.get(group) == generation

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action in _SCREEN_ACTIONS and isinstance(self.screen, ModalScreen):
            return False
        # The key that opens the screen already shown is hidden there (room in the footer).
        if action in ("review", "alerts", "board") and action == self.current_mode:
            return False
        return True

    # --- state changes start the work ---------------------------------------------------------

    def watch_view(self, old: ViewState, new: ViewState) -> None:
        """A new comparison, window or alpha: recompute after a short pause (arrowing down the
        board stays cheap)."""
        if not new.characteristic or not new.factor:
            return
        self.computing = True
        if self._detail_timer is not None:
            self._detail_timer.stop()
        if self.detail is None:  # the first comparison: nothing to debounce
            self.request_detail()
            return
        self._detail_timer = self.set_timer(DETAIL_DEBOUNCE, self.request_detail)

    def watch_review_week(self) -> None:
        self.request_review()

    def request_detail(self) -> None:
        v = self.view
        if not v.characteristic or not v.factor:
            return
        self.computing = True
        self.load_detail(DetailRequest(characteristic=v.characteristic, factor=v.factor,
                                       week=v.week, alpha=v.alpha, window=v.window,
                                       reference=v.reference), self._next("detail"))

    def request_review(self) -> None:
        self.load_review(self.review_week, self._next("review"))

    def request_alerts(self) -> None:
        self.load_alerts(self._next("alerts"))

    # --- requests from screens ----------------------------------------------------------------

    def on_choose_view(self, message: msg.ChooseView) -> None:
        self.view = message.view

    def on_open_comparison(self, message: msg.OpenComparison) -> None:
        self.view = self.view.but(characteristic=message.characteristic,
                                  factor=message.factor, week=message.week)
        self.switch_mode("comparison")

    def on_show_review_week(self, message: msg.ShowReviewWeek) -> None:
        self.review_week = message.week

    def on_reload(self, message: msg.Reload) -> None:
        if message.what == "review":
            self.request_review()
        elif message.what == "alerts":
            self.request_alerts()

    def on_record_review(self, message: msg.RecordReview) -> None:
        if self.read_only:
            self.refuse_read_only("recording reviews")
            return
        self.record_review(self.review_week, self)

    def on_save_lot(self, message: msg.SaveLot) -> None:
        self.save_lot(message.draft, message.reply_to)

    def on_acknowledge(self, message: msg.Acknowledge) -> None:
        self.acknowledge(message.alert_id, message.note, message.reply_to)

    def on_correct_value(self, message: msg.CorrectValue) -> None:
        self.correct(message.measurement_id, message.new_value, message.reason,
                     message.reply_to)

    def on_void_value(self, message: msg.VoidValue) -> None:
        self.void(message.measurement_id, message.reason, message.reply_to)

    def on_load_lots(self, message: msg.LoadLots) -> None:
        self.load_lots(message.request, message.reply_to)

    def on_load_history(self, message: msg.LoadHistory) -> None:
        self.load_history(message.measurement_id, message.reply_to)

    # --- results ---------------------------------------------------------------------------

    def on_overview_loaded(self, message: msg.OverviewLoaded) -> None:
        if not self._current("overview", message.generation):
            return
        ov = message.overview
        self.overview = ov
        if not ov.partial and not self._detectors_checked:
            # once the first numbers are up: the days since the detectors last ran (the
            # computation's imports would otherwise compete with the first paint)
            self._detectors_checked = True
            self.catch_up_detectors()
        if ov.partial and (not ov.board or self.view.characteristic):
            return
        # The early board (alerts and detector evidence) already names the most urgent
        # comparison: its detail starts while the review runs.
        pairs = {(r.characteristic, r.factor) for r in ov.board}
        v = self.view
        if (v.characteristic, v.factor) not in pairs and ov.board:
            top = ov.board[0]  # the most urgent comparison
            self.view = v.but(characteristic=top.characteristic, factor=top.factor)
        elif "detail" not in self._generation:
            self.request_detail()

    def on_comparison_computed(self, message: msg.ComparisonComputed) -> None:
        if not self._current("detail", message.generation):
            return
        self.detail_problem = ""
        self.detail = message.detail
        self.computing = False

    def on_comparison_failed(self, message: msg.ComparisonFailed) -> None:
        self.computing = False
        self.detail_problem = message.message

    def on_review_computed(self, message: msg.ReviewComputed) -> None:
        if self._current("review", message.generation):
            self.review_problem = ""
            self.review = message.review

    def on_alerts_loaded(self, message: msg.AlertsLoaded) -> None:
        if self._current("alerts", message.generation):
            self.alerts = message.alerts

    def on_store_changed(self, message: msg.StoreChanged) -> None:
        """The one reload after any write (ours or another terminal's); lots another terminal
        stored reach the detectors here (a no-op when they are current)."""
        self.catch_up_detectors()
        self.load_overview(self._next("overview"), False)
        self.request_detail()
        if self.current_mode == "review":
            self.request_review()
        if self.current_mode == "alerts":
            self.request_alerts()

    def on_store_trouble(self, message: msg.StoreTrouble) -> None:
        text = message.what + (f" {message.advice}" if message.advice else "")
        self.notify(text, title="Store", severity="information" if message.recovered else "error",
                    markup=False, timeout=8 if message.recovered else 30)
        self.store_note = "store recovered" if message.recovered else "store unavailable"

    def on_lot_logged(self, message: msg.LotLogged) -> None:
        logged = message.logged
        self.last_tags = dict(logged.tags)
        lot = clean(logged.lot or "", 30)
        if logged.stored:
            names = ", ".join(clean(c, 20) for c in logged.characteristics)
            text = f"Stored lot {lot} of {names}."
            if logged.rounded:
                text += f" {logged.rounded} value(s) were rounded to the resolution."
            if logged.outside_spec:
                text += (f" {logged.outside_spec} value(s) outside specification (stored as "
                         "measured).")
            self.notify(text, markup=False)
        else:
            self.notify(f"Lot {lot} was already stored with these values; nothing new was "
                        "saved.", severity="warning", markup=False)

    def on_write_done(self, message: msg.WriteDone) -> None:
        self.notify(message.text, markup=False, timeout=8)

    def on_write_failed(self, message: msg.WriteFailed) -> None:
        """Reaches the app only when no form handled it (the review's record)."""
        self.notify(message.message, title="Problem", severity="error", markup=False,
                    timeout=12)

    # --- failures: the one place ------------------------------------------------------------

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        if event.state != WorkerState.ERROR:
            return
        worker = event.worker
        message = describe_error(worker.error, worker.description or worker.name)
        group = worker.group
        if group == "detail":
            self.post_message(msg.ComparisonFailed(message))
        elif group == "overview":
            self.store_note = "store not read"
        elif group == "review":
            self.review_problem = message
        elif group == "poll":  # the poller died: keep watching with a fresh one
            self.set_timer(1.0, self.poll_store)
        self.notify(message, title="Problem", severity="error", markup=False, timeout=12)

    # --- words ------------------------------------------------------------------------------

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

    def refuse_read_only(self, what: str) -> None:
        self.notify(f"Read-only: this store was opened with --read-only, so {what} is "
                    "disabled. Quit (q) and run lotwatch watch without --read-only to make "
                    "changes.", title="Read-only", severity="warning", markup=False, timeout=8)

    # --- actions ---------------------------------------------------------------------------

    def action_help_quit(self) -> None:
        """ctrl+c does not quit; say which key does (never ctrl+q: flow control over SSH)."""
        where = " (Esc closes this first)" if isinstance(self.screen, ModalScreen) else ""
        self.notify(f"Press q to quit lotwatch{where}.", title="Quit?", markup=False)

    def action_review(self) -> None:
        self.switch_mode("review")

    def action_alerts(self) -> None:
        self.switch_mode("alerts")

    def action_board(self) -> None:
        self.switch_mode("board")

    def get_system_commands(self, screen: Screen) -> Iterable[SystemCommand]:
        """Only commands that work here: the screen's own (``palette_commands``), the
        switches to other screens, theme and quit (no screenshot: it needs a writable
        folder and a browser to be useful, and the keys panel squeezes the tables)."""
        own = getattr(screen, "palette_commands", None)
        if callable(own):
            yield from own()
        for mode, title, helptext in (("board", "Board", "Every comparison by urgency (b)"),
                                      ("review", "Weekly review",
                                       "Every comparison of a week sorted by q (r)"),
                                      ("alerts", "Alerts", "Open and past alerts (a)")):
            if mode != self.current_mode and not isinstance(screen, ModalScreen):
                yield SystemCommand(title, helptext, lambda m=mode: self.switch_mode(m))
        yield SystemCommand("Theme", "Change the colours", self.action_change_theme)
        yield SystemCommand("Quit", "Leave lotwatch (q)", self.action_quit)
