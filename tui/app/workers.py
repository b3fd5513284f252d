"""The app's thread workers: every store read, statistic and write runs here, off the event loop.

Each worker opens its own Store (a SQLite connection belongs to one thread) through the headless
services. Reads post a typed result carrying the generation of their request, so an old, slow
result never repaints over a newer one; writes answer the screen that asked (``reply_to``). A
long-lived poller watches ``PRAGMA data_version`` (and the file's identity) and posts
``StoreChanged``: the single trigger for reloading after any write, the app's own included.
"""

from __future__ import annotations

import sqlite3
import threading
from collections.abc import Callable
from pathlib import Path

from lotwatch.tui.app.errors import describe_error
from lotwatch.tui.app.messages import (
    AlertsLoaded,
    ComparisonComputed,
    HistoryLoaded,
    LotLogged,
    LotsLoaded,
    OverviewLoaded,
    ReviewComputed,
    StoreChanged,
    StoreTrouble,
    WriteDone,
    WriteFailed,
)
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services import loaders, lots, storefile, writers
from lotwatch.tui.services.view_models import DetailRequest, EntryDraft, LotsRequest
from textual import work
from textual.message import Message
from textual.message_pump import MessagePump
from textual.worker import get_current_worker


class StoreWorkers:
    """Mixed into the App: ``db_path``, ``read_only``, ``user``, ``post_message``, ``run_worker``
    come from there."""

    db_path: Path
    read_only: bool
    user: str
    poll_seconds: float
    _stop_polling: threading.Event
    post_message: Callable[[Message], bool]

    # --- reads ---------------------------------------------------------------------------

    @work(thread=True, exclusive=True, group="overview", exit_on_error=False,
          description="loading the board")
    def load_overview(self, generation: int, first: bool) -> None:
        worker = get_current_worker()

        def frame(partial: loaders.Overview) -> None:
            if not worker.is_cancelled:
                self.post_message(OverviewLoaded(partial, generation))

        ov = loaders.load_overview(self.db_path, self.read_only,
                                   on_frame=frame if first else None)
        if not worker.is_cancelled:
            self.post_message(OverviewLoaded(ov, generation))

    @work(thread=True, exclusive=True, group="detail", exit_on_error=False,
          description="computing the comparison")
    def load_detail(self, request: DetailRequest, generation: int) -> None:
        detail = loaders.load_detail(self.db_path, self.read_only, request)
        if not get_current_worker().is_cancelled:
            self.post_message(ComparisonComputed(detail, generation))

    @work(thread=True, exclusive=True, group="review", exit_on_error=False,
          description="computing the weekly review")
    def load_review(self, week: str | None, generation: int) -> None:
        review = loaders.load_review(self.db_path, self.read_only, week)
        if not get_current_worker().is_cancelled:
            self.post_message(ReviewComputed(review, generation))

    @work(thread=True, exclusive=True, group="alerts", exit_on_error=False,
          description="loading the alerts")
    def load_alerts(self, generation: int) -> None:
        alerts = loaders.load_alerts(self.db_path, self.read_only)
        if not get_current_worker().is_cancelled:
            self.post_message(AlertsLoaded(alerts, generation))

    @work(thread=True, exclusive=True, group="lots", exit_on_error=False,
          description="reading the lots")
    def load_lots(self, request: LotsRequest, reply_to: MessagePump) -> None:
        view = lots.load_lots(self.db_path, self.read_only, request)
        if not get_current_worker().is_cancelled:
            reply_to.post_message(LotsLoaded(view))

    @work(thread=True, exclusive=True, group="history", exit_on_error=False,
          description="reading the value's history")
    def load_history(self, measurement_id: int, reply_to: MessagePump) -> None:
        trail = lots.value_history(self.db_path, self.read_only, measurement_id)
        reply_to.post_message(HistoryLoaded(measurement_id, trail))

    # --- writes: the answer goes to the form that asked ---------------------------------

    def _write(self, kind: str, task: str, reply_to: MessagePump,
               do: Callable[[], Message]) -> None:
        try:
            answer = do()
        except Exception as exc:  # noqa: BLE001  (every failure becomes words in the form)
            reply_to.post_message(WriteFailed(kind, describe_error(exc, task)))
        else:
            reply_to.post_message(answer)

    @work(thread=True, group="write", exit_on_error=False, description="saving the lot")
    def save_lot(self, draft: EntryDraft, reply_to: MessagePump) -> None:
        self._write("lot", "saving the lot", reply_to, lambda: LotLogged(
            writers.log_draft(self.db_path, draft, self.user)))

    @work(thread=True, group="write", exit_on_error=False,
          description="recording the acknowledgement")
    def acknowledge(self, alert_id: int, note: str, reply_to: MessagePump) -> None:
        def do() -> Message:
            writers.acknowledge_alert(self.db_path, alert_id, self.user, note)
            return WriteDone("acknowledge", f"Alert #{alert_id} acknowledged by "
                                            f"{clean(self.user, 24)}.")
        self._write("acknowledge", "recording the acknowledgement", reply_to, do)

    @work(thread=True, group="write", exit_on_error=False, description="correcting the value")
    def correct(self, measurement_id: int, new_value: str, reason: str,
                reply_to: MessagePump) -> None:
        def do() -> Message:
            writers.correct_value(self.db_path, measurement_id, new_value, reason, self.user)
            return WriteDone("correct", f"Value #{measurement_id} corrected to "
                                        f"{clean(new_value, 20)}.")
        self._write("correct", "correcting the value", reply_to, do)

    @work(thread=True, group="write", exit_on_error=False, description="voiding the value")
    def void(self, measurement_id: int, reason: str, reply_to: MessagePump) -> None:
        def do() -> Message:
            writers.void_value(self.db_path, measurement_id, reason, self.user)
            return WriteDone("void", f"Value #{measurement_id} voided.")
        self._write("void", "voiding the value", reply_to, do)

    @work(thread=True, exclusive=True, group="write-review", exit_on_error=False,
          description="recording the review")
    def record_review(self, week: str | None, reply_to: MessagePump) -> None:
        def do() -> Message:
            opened, cleared, notes = writers.record_review(self.db_path, week, self.user)
            text = f"Review recorded: {opened} alert(s) opened, {cleared} cleared."
            if notes:
                text += " " + " ".join(clean(n, 200) for n in notes)
            return WriteDone("review", text)
        self._write("review", "recording the review", reply_to, do)

    @work(thread=True, exclusive=True, group="catch-up", exit_on_error=False,
          description="bringing the detectors current")
    def catch_up_detectors(self) -> None:
        """Advance the detectors over what other terminals stored (and the days since the last
        review); the poller then sees the write and the board reloads. Not when read-only."""
        if not self.read_only:
            writers.catch_up(self.db_path, self.user)

    # --- the store poller --------------------------------------------------------------------

    @work(thread=True, group="poll", exit_on_error=False, description="watching the store")
    def poll_store(self) -> None:
        """Watch the store from one long-lived connection (``data_version`` is per connection).

        Posts StoreChanged when any other connection committed (the app's own writers use
        their own connections), StoreTrouble when the file disappears, is replaced by another
        file, or cannot be opened; reopens when it is back.
        """
        from lotwatch.store import Store, StoreError

        worker = get_current_worker()
        path = self.db_path
        store = None
        identity = None
        last_version: int | None = None
        trouble: str | None = None

        def report(what: str, advice: str, recovered: bool = False) -> None:
            nonlocal trouble
            if trouble != what:
                trouble = None if recovered else what
                self.post_message(StoreTrouble(what, advice, recovered=recovered))

        def version_of(s: Store) -> int:
            v = s.data_version()
            if getattr(s, "immutable", False):
                v = hash((v, storefile.file_stamp(path)))
            return v

        try:
            while not worker.is_cancelled and not self._stop_polling.is_set():
                current = storefile.file_identity(path)
                if current is None:
                    if store is not None:
                        store.close()
                        store = None
                    report(f"The store file {path} was deleted or moved.",
                           "Restore it (the view shows the last data read); nothing can be "
                           "saved until it is back.")
                elif store is None or current != identity:
                    replaced = store is not None
                    if store is not None:
                        store.close()
                        store = None
                    try:
                        store = Store.open(path, read_only=self.read_only)
                        identity = current
                        last_version = version_of(store)
                        if replaced or trouble is not None:
                            report("The store file was replaced or restored; showing its "
                                   "current contents.", "", recovered=True)
                            self.post_message(StoreChanged(last_version))
                    except StoreError as exc:
                        report(f"The store cannot be opened: {clean(str(exc), 300)}",
                               "Fix or restore the file; lotwatch retries every second.")
                else:
                    try:
                        version = version_of(store)
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
