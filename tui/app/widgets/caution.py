"""The standing caution shown on the help, review and alert screens."""

from __future__ import annotations

from textual.widgets import Static

CAUTION = (
    "A statistical signal is a reason to investigate, not a disposition of product: "
    "follow your site's quality procedures and qualified people."
)


class Caution(Static):
    """One or two lines of caution, never parsed as markup."""

    def __init__(self, **kwargs) -> None:
        super().__init__(CAUTION, markup=False, **kwargs)
