"""A tag field: type a value (known ones are suggested; → accepts) or step through known ones."""

from __future__ import annotations

from textual.binding import Binding
from textual.suggester import SuggestFromList
from textual.widgets import Input


class TagInput(Input):
    """An Input over a factor's known values (``store.tag_values``); new values are allowed
    (the form asks to confirm them before saving)."""

    BINDINGS = [
        Binding("down", "step(1)", "Next known value", show=False),
        Binding("up", "step(-1)", "Previous known value", show=False),
    ]

    def __init__(self, known: list[str], **kwargs) -> None:
        super().__init__(suggester=SuggestFromList(known), **kwargs)
        self.known = list(known)

    def action_step(self, step: int) -> None:
        if not self.known:
            return
        if self.value in self.known:
            i = self.known.index(self.value) + step
        else:
            i = 0 if step > 0 else -1
        self.value = self.known[i % len(self.known)]
        self.cursor_position = len(self.value)
