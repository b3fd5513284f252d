"""The list of characteristics with their state this window (alerting / watching / not enough)."""

from __future__ import annotations

from lotwatch.tui.render.safe_text import clean
from lotwatch.tui.services.data import ALERTING, NOT_ENOUGH, CharacteristicInfo
from rich.text import Text
from textual.widgets import OptionList
from textual.widgets.option_list import Option

# Symbols keep the state readable without colour (NO_COLOR); words say it outright.
MARKS = {ALERTING: "!", NOT_ENOUGH: "·"}


def state_prompt(name: str, state: str, width: int) -> Text:
    """Two lines: a mark and the name, then the state in words."""
    mark = MARKS.get(state, " ")
    style = "bold" if state == ALERTING else ""
    text = Text(no_wrap=True, overflow="ellipsis")
    text.append(f"{mark} ", style=style)
    text.append(clean(name, max(1, width - 2)), style=style)
    text.append("\n  ")
    text.append(state, style="italic" if state != ALERTING else "bold reverse")
    return text


class CharacteristicList(OptionList):
    """Characteristics, one option each (the option id is the characteristic's name)."""

    DEFAULT_CSS = """
    CharacteristicList, CharacteristicList:focus {
        width: 20; height: 1fr; border: none; border-right: solid $primary; padding: 0;
    }
    """

    def show(self, characteristics: list[CharacteristicInfo], states: dict[str, str],
             selected: str | None) -> None:
        """Replace the options, keeping the highlight on ``selected`` when it still exists."""
        width = 18
        options = [Option(state_prompt(c.name, states.get(c.name, NOT_ENOUGH), width), id=c.name)
                   for c in characteristics]
        self.clear_options()
        self.add_options(options)
        names = [c.name for c in characteristics]
        if selected in names:
            self.highlighted = names.index(selected)
        elif names:
            self.highlighted = 0

    @property
    def selected_name(self) -> str | None:
        if self.highlighted is None:
            return None
        return self.get_option_at_index(self.highlighted).id
