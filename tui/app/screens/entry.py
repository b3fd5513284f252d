"""The lot entry form: tags, one or more characteristics' values, lot ID, time and note, checked
as typed.

The form starts from the tags of the last lot saved here; a line seen under only one site (any
tag value seen with only one value of another factor) fills that factor in when it is blank. A
value beyond LSL/USL is flagged "outside specification" (stored all the same). A new tag value
needs an explicit y. Enter saves every characteristic with values in one transaction (posted to
the app, answered here); Escape cancels. An invalid form saves nothing and says why in words;
when a save fails the form stays open with its contents.
"""

from __future__ import annotations

from typing import cast

from lotwatch.tui.app import messages as msg
from lotwatch.tui.app.entry_checks import (
    TimeCheck,
    ValuesCheck,
    one_line,
    required,
    spec_notes,
    split_values,
)
from lotwatch.tui.app.screens.confirm import ConfirmScreen
from lotwatch.tui.app.screens.size_guard import SizeGuard
from lotwatch.tui.app.state import AppState
from lotwatch.tui.app.widgets.tag_input import TagInput
from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.view_models import CharacteristicInfo, EntryDraft, Overview
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, Vertical
from textual.events import DescendantFocus
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static


class ValuesInput(Input):
    """The values of one characteristic of the lot (blank: not measured on this lot)."""

    def __init__(self, characteristic: CharacteristicInfo, **kwargs) -> None:
        unit = clean(characteristic.unit, 8)
        super().__init__(placeholder=f"{unit}: e.g. values separated by spaces",
                         validators=[ValuesCheck(lambda: characteristic,
                                                 prefix=clean(characteristic.name, 20))],
                         valid_empty=True, compact=True, **kwargs)
        self.characteristic = characteristic


class LotEntryScreen(SizeGuard, ModalScreen[None]):
    """Log one lot: its tags and the values of one or more characteristics."""

    BINDINGS = [
        Binding("escape", "cancel", "Cancel", tooltip="Close the form without saving"),
        Binding("enter", "save", "Save", show=True, tooltip="Save the lot (one transaction)"),
    ]

    def __init__(self, overview: Overview, characteristic: str | None,
                 remembered: dict[str, str] | None = None) -> None:
        super().__init__()
        self.remembered = dict(remembered or {})
        self.overview = overview
        chars = list(overview.characteristics)
        first = next((c for c in chars if c.name == characteristic), chars[0] if chars else None)
        # The characteristic shown first (the one on screen), then the others.
        self.ordered = ([first] if first else []) + [c for c in chars if c is not first]
        self._saving = False
        self._tag_inputs: dict[str, TagInput] = {}
        self._values: list[ValuesInput] = []
        self._suggested: list[str] = []

    @property
    def state(self) -> AppState:
        return cast("AppState", self.app)

    # --- layout ----------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        with Vertical(id="form"):
            yield Static(Text("Log a lot", style="bold")
                         + Text(": tags, then the values of one or more characteristics"))
            with Grid():
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
                for i, ch in enumerate(self.ordered):
                    vals = ValuesInput(ch, id="values" if i == 0 else f"values-{i}")
                    self._values.append(vals)
                    if i == 0:
                        yield Label(Text(clean(ch.name, 12) + " *"))
                        yield vals
                        yield from self._lot_fields()
                    else:
                        yield Label(Text(clean(ch.name, 14)))
                        yield vals
                if not self.ordered:
                    yield from self._lot_fields()
            yield Static("", id="info")
            yield Static("", id="problems")
            yield Static("Enter save · Esc cancel · Tab next · → or ↑↓ known value · "
                         "* required", id="keys", markup=False)

    def _lot_fields(self) -> ComposeResult:
        yield Label("Lot ID")
        yield Input(placeholder="blank: the store assigns one", compact=True,
                    validators=[one_line("lot ID")], valid_empty=True, id="lot", max_length=80)
        yield Label("Time")
        yield Input(placeholder="now (or 2026-11-30 14:05, plant time)", compact=True,
                    validators=[TimeCheck(self.overview.plant_zone)], valid_empty=True,
                    id="time")
        yield Label("Note")
        yield Input(placeholder="optional", compact=True, id="note", max_length=500)

    def on_mount(self) -> None:
        self._show_info(self.ordered[0] if self.ordered else None)
        if self.state.read_only:
            self._show_problems(["this store is open read-only; nothing can be saved"])
        first: Input = self._values[0] if self._values else self.query_one("#lot", Input)
        for f in self.overview.factors:
            inp = self._tag_inputs[f.name]
            if not inp.value:
                first = inp
                break
        first.focus()

    # --- state -----------------------------------------------------------------------------

    def current_characteristic(self) -> CharacteristicInfo | None:
        """The characteristic listed first (the one shown when the form was opened)."""
        return self.ordered[0] if self.ordered else None

    def _show_info(self, ch: CharacteristicInfo | None) -> None:
        if ch is None:
            self.query_one("#info", Static).update("")
            return
        parts = [clean(ch.name, 20), f"unit {clean(ch.unit, 10)}", f"resolution {ch.resolution}"]
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
        if not self.ordered:
            out.append("no characteristic to log")
        elif not any(v.value.strip() for v in self._values):
            out.append("type at least one value (several values of one lot: separate with "
                       "spaces)")
        for inp in self.query(Input):
            result = inp.validate(inp.value)
            if result is not None and not result.is_valid:
                out.extend(result.failure_descriptions)
        return out

    def notes(self) -> list[str]:
        """What will be stored but deserves a look: values outside specification, tags filled
        in from what the store has seen."""
        out = list(self._suggested)
        for v in self._values:
            out.extend(spec_notes(v.value, v.characteristic))
        return out

    def _show_problems(self, problems: list[str], *, error: bool = True,
                       notes: list[str] | None = None) -> None:
        text = Text()
        lines = [("✗ " if error else "", p) for p in problems[:5]]
        lines += [("! ", n) for n in (notes or [])[:3]]
        for i, (mark, p) in enumerate(lines):
            if i:
                text.append("\n")
            text.append(mark, style="bold")
            text.append(clean(p, 300))
        if len(problems) > 5:
            text.append(f"\n… and {len(problems) - 5} more")
        self.query_one("#problems", Static).update(text)

    def draft(self) -> EntryDraft:
        tags = {f: inp.value.strip() for f, inp in self._tag_inputs.items() if inp.value.strip()}
        lot = self.query_one("#lot", Input).value.strip() or None
        time = self.query_one("#time", Input).value.strip()
        note = self.query_one("#note", Input).value.strip() or None
        values = {v.characteristic.name: split_values(v.value) for v in self._values
                  if v.value.strip()}
        return EntryDraft(values=values, tags=tags, lot=lot,
                          measured_at=None if not time or time.lower() == "now" else time,
                          note=note)

    def new_tag_values(self, draft: EntryDraft) -> dict[str, str]:
        return {k: v for k, v in draft.tags.items()
                if v not in self.overview.tag_values.get(k, [])}

    # --- events ----------------------------------------------------------------------------

    def on_descendant_focus(self, event: DescendantFocus) -> None:
        if isinstance(event.widget, ValuesInput):
            self._show_info(event.widget.characteristic)

    @on(Input.Changed)
    def _changed(self, event: Input.Changed) -> None:
        if isinstance(event.input, TagInput):
            self._suggest(event.input)
        self._live_problems()

    def _suggest(self, changed: TagInput) -> None:
        """Fill a blank tag that the store has only ever seen with this value's lots."""
        factor = next((f for f, inp in self._tag_inputs.items() if inp is changed), None)
        links = self.overview.tag_links.get((factor or "", changed.value.strip()), {})
        for other, value in links.items():
            inp = self._tag_inputs.get(other)
            if inp is not None and not inp.value.strip():
                inp.value = value
                self._suggested.append(
                    f"{clean(other, 12)} {clean(value, 20)} filled in: {clean(factor, 12)} "
                    f"{clean(changed.value, 20)} has only been seen there (change it if this "
                    "lot differs)")

    def _live_problems(self) -> None:
        """Problems of the fields typed into so far (blank untouched fields are not nagged)."""
        out: list[str] = []
        for inp in self.query(Input):
            if not inp.value:
                continue
            result = inp.validate(inp.value)
            if result is not None and not result.is_valid:
                out.extend(result.failure_descriptions)
        self._show_problems(out, notes=self.notes())

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
            self._show_problems(problems, notes=self.notes())
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
                              "Store them as typed? Press y to store, n to go back."),
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
