"""A small modal that sends one write request up and waits for its answer: the acknowledge and
the correct/void forms. It closes itself when the write is done (the app announces it) and shows
the refusal in its own problem line when it fails; Esc cancels unless a write is under way."""

from __future__ import annotations

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.screens.size_guard import SizeGuard
from textual.screen import ModalScreen


class WriteModal(SizeGuard, ModalScreen[None]):
    """Subclasses set ``self._saving`` when they post their request and implement
    ``show_problem``."""

    _saving = False

    def show_problem(self, message: str) -> None:
        raise NotImplementedError

    def on_write_done(self, message: msg.WriteDone) -> None:
        message.stop()
        self.dismiss(None)
        self.app.post_message(msg.WriteDone(message.kind, message.text))  # the app says it

    def on_write_failed(self, message: msg.WriteFailed) -> None:
        self._saving = False
        self.show_problem(message.message)

    def action_cancel(self) -> None:
        if not self._saving:
            self.dismiss(None)
