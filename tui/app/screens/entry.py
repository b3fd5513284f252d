"""The lot entry form: characteristic, tags, values, lot ID, time and note, checked as typed.

Enter saves (one transaction, in a thread worker run by the app); Escape cancels. An invalid form
saves nothing and says why in words; when a save fails the form stays open with its contents.
"""

from __future__ import annotations

from typing import cast

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.entry_checks import TimeCheck, ValuesCheck, one_line, required, split_values
from lotwatch.tui.app.screens.base import AppState
from lotwatch.tui.app.screens.confirm import ConfirmScreen
from lotwatch.tui.app.widgets.tag_input import TagInput
from lotwatch.tui.render.safe_text import clean, literal
from lotwatch.tui.services.view_models import CharacteristicInfo, EntryDraft, Overview
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, Vertical
from textual.css.query import NoMatches
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Select, Static


class LotEntryScreen(ModalScreen[None]):
    """Log one lot of one characteristic."""

    BINDINGS = [
        Binding("escape", "cancel", "Cancel", tooltip="Close the form without saving"),
        Binding("enter", "save", "Save", show=True, tooltip="Save the lot (one transaction)"),
    ]

    def __init__(self, overview: Overview, characteristic: str | None,
                 remembered: dict[str, str] | None = None) -> None:
        super().__init__()
        self.remembered = dict(remembered or {})
        self.overview = overview
        self._chars = {c.name: c for c in overview.characteristics}
        self._initial = characteristic if characteristic in self._chars else (
            overview.characteristics[0].name if overview.characteristics else None)
        self._saving = False
        self._tag_inputs: dict[str, TagInput] = {}

    @property
    def state(self) -> AppState:
        return cast("AppState", self.app)

    # --- layout ----------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        with Vertical(id="form"):
            yield Static(Text("Log a lot", style="bold"))
            with Grid():
                yield Label("Characteristic")
                yield Select([(literal(c.name, 40), c.name) for c in self.overview.characteristics],
                             value=self._initial if self._initial else Select.NULL,
                             allow_blank=self._initial is None, compact=True,
                             id="characteristic")
                for i, f in enumerate(self.overview.factors):
                    known = self.overview.tag_values.get(f.name, [])
                    label = clean(f.name, 11) + (" *" if f.required else "")
                    validators = [one_line(f.name)]
                    if f.required:
                        validators.insert(0, required(f.name))
                    hint = ("known: " + ", ".join(clean(v, 12) for v in known[:6])
                            + (" …" if len(known) > 6 else "")) if known else "type a value"
                    inp = TagInput(known, placeholder=hint, validators=validators,
                                   compact=True, id=f"tag-{i}",
                                   value=self.remembered.get(f.name, ""))
                    inp.tooltip = Text(f"{clean(f.name, 20)}: → accepts the suggestion, "
                                       "↑/↓ step through known values")
                    self._tag_inputs[f.name] = inp
                    yield Label(Text(label))
                    yield inp
                yield Label("Values *")
                yield Input(placeholder="e.g. 10.2 10.3 (several values: spaces)",
                            validators=[ValuesCheck(self.current_characteristic)],
                            compact=True, id="values")
                yield Label("Lot ID")
                yield Input(placeholder="blank: the store assigns one", compact=True,
                            validators=[one_line("lot ID")], valid_empty=True, id="lot",
                            max_length=80)
                yield Label("Time")
                yield Input(placeholder="now (or 2026-11-30 14:05, local time)", compact=True,
                            validators=[TimeCheck()], valid_empty=True, id="time")
                yield Label("Note")
                yield Input(placeholder="optional", compact=True, id="note", max_length=500)
            yield Static("", id="info")
            yield Static("", id="problems")
            yield Static("Enter save · Esc cancel · Tab next · → or ↑↓ known value · "
                         "* required", id="keys", markup=False)

    def on_mount(self) -> None:
        self._show_info()
        if self.state.read_only:
            self._show_problems(["this store is open read-only; nothing can be saved"])
        first = self.query_one("#values", Input)
        for f in self.overview.factors:
            inp = self._tag_inputs[f.name]
            if not inp.value:
                first = inp
                break
        first.focus()

    # --- state -----------------------------------------------------------------------------

    def current_characteristic(self) -> CharacteristicInfo | None:
        try:
            value = self.query_one("#characteristic", Select).value
        except NoMatches:  # validators run before the Select is mounted
            value = self._initial
        if value is Select.NULL or value is None:
            return None
        return self._chars.get(str(value))

    def _show_info(self) -> None:
        ch = self.current_characteristic()
        if ch is None:
            self.query_one("#info", Static).update("")
            return
        parts = [f"unit {clean(ch.unit, 10)}", f"resolution {ch.resolution}"]
        if ch.plausible_low is not None or ch.plausible_high is not None:
            lo = "-inf" if ch.plausible_low is None else f"{ch.plausible_low:g}"
            hi = "inf" if ch.plausible_high is None else f"{ch.plausible_high:g}"
            parts.append(f"plausible {lo}..{hi}")
        for name, v in (("LSL", ch.lsl), ("target", ch.target), ("USL", ch.usl)):
            if v is not None:
                parts.append(f"{name} {v:g}")
        self.query_one("#info", Static).update(Text(" · ".join(parts)))

    def problems(self) -> list[str]:
        """Every reason the form cannot be saved now, in words (validates every field)."""
        out: list[str] = []
        if self.current_characteristic() is None:
            out.append("choose a characteristic")
        for inp in self.query(Input):
            result = inp.validate(inp.value)
            if result is not None and not result.is_valid:
                out.extend(result.failure_descriptions)
        return out

    def _show_problems(self, problems: list[str], *, error: bool = True) -> None:
        text = Text()
        for i, p in enumerate(problems[:5]):
            if i:
                text.append("\n")
            text.append("✗ " if error else "", style="bold")
            text.append(clean(p, 300))
        if len(problems) > 5:
            text.append(f"\n… and {len(problems) - 5} more")
        self.query_one("#problems", Static).update(text)

    def draft(self) -> EntryDraft:
        ch = self.current_characteristic()
        tags = {f: inp.value.strip() for f, inp in self._tag_inputs.items() if inp.value.strip()}
        lot = self.query_one("#lot", Input).value.strip() or None
        time = self.query_one("#time", Input).value.strip()
        note = self.query_one("#note", Input).value.strip() or None
        return EntryDraft(
            values={ch.name if ch else "": split_values(self.query_one("#values", Input).value)},
            tags=tags, lot=lot,
            measured_at=None if not time or time.lower() == "now" else time,
            note=note,
        )

    def new_tag_values(self, draft: EntryDraft) -> dict[str, str]:
        return {k: v for k, v in draft.tags.items()
                if v not in self.overview.tag_values.get(k, [])}

    # --- events ----------------------------------------------------------------------------

    @on(Select.Changed, "#characteristic")
    def _characteristic_changed(self) -> None:
        self._show_info()
        values = self.query_one("#values", Input)
        if values.value:
            values.validate(values.value)
            self._live_problems()

    @on(Input.Changed)
    def _changed(self, event: Input.Changed) -> None:
        self._live_problems()

    def _live_problems(self) -> None:
        """Problems of the fields typed into so far (blank untouched fields are not nagged)."""
        out: list[str] = []
        for inp in self.query(Input):
            if not inp.value:
                continue
            result = inp.validate(inp.value)
            if result is not None and not result.is_valid:
                out.extend(result.failure_descriptions)
        self._show_problems(out)

    @on(Input.Submitted)
    def _submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.action_save()

    def action_cancel(self) -> None:
        if not self._saving:
            self.dismiss(None)

    def action_save(self) -> None:
        if self._saving:
            return
        if self.state.read_only:
            self.state.refuse_read_only("logging lots")
            return
        problems = self.problems()
        if problems:
            self._show_problems(problems)
            for inp in self.query(Input):
                if inp.has_class("-invalid"):
                    inp.focus()
                    break
            return
        draft = self.draft()
        new = self.new_tag_values(draft)
        if new:
            listing = ", ".join(f"{clean(k, 12)} = {clean(v, 20)!r}" for k, v in new.items())
            self.app.push_screen(
                ConfirmScreen(f"New tag value(s): {listing}. No lot has used them before. "
                              "Store them as typed?"),
                callback=lambda ok: self._submit(draft) if ok else None,
            )
            return
        self._submit(draft)

    def _submit(self, draft: EntryDraft) -> None:
        self._saving = True
        self._show_problems(["saving…"], error=False)
        self.post_message(msg.SaveLot(self, draft))

    def on_lot_logged(self, message: msg.LotLogged) -> None:
        """Stored: close the form; the app says what was stored and remembers the tags."""
        message.stop()
        self.dismiss(None)
        self.app.post_message(msg.LotLogged(message.logged))

    def on_write_failed(self, message: msg.WriteFailed) -> None:
        """The save failed: keep everything typed, say what happened."""
        self._saving = False
        self._show_problems([message.message])
