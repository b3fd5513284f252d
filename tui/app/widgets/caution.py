"""The standing caution shown on the help, review and alert screens."""

from __future__ import annotations

from lotwatch.tui.caution import CAUTION as CAUTION  # the one sentence, re-exported
from textual.widgets import Static


class Caution(Static):
    """One or two lines of caution, never parsed as markup."""

    def __init__(self, **kwargs) -> None:
        super().__init__(CAUTION, markup=False, **kwargs)
