"""Fill a DataTable compactly: no cell padding, each column as wide as its widest cell plus one.

At 80 columns the default padding (two spaces per column) costs a whole column of data; here
one space separates columns, numbers are right-aligned, text left-aligned.
"""

from __future__ import annotations

from collections.abc import Sequence

from rich.cells import cell_len
from rich.text import Text
from textual.widgets import DataTable


def cell(value: str, right: bool, *, first: bool = False, style: str = "") -> Text:
    """One cell: a space before it (the first column: after it), never wrapped or parsed."""
    text = f"{value} " if first else f" {value}"
    return Text(text, justify="right" if right else "left", style=style, no_wrap=True)


def fill(table: DataTable, headers: Sequence[str], right: Sequence[bool],
         rows: Sequence[Sequence[str]], *, keys: Sequence[str] | None = None,
         styles: Sequence[Sequence[str]] | None = None) -> None:
    """Replace the table's columns and rows. ``rows`` hold plain (already cleaned) strings."""
    table.cell_padding = 0
    widths = [max([cell_len(h)] + [cell_len(r[i]) for r in rows]) + 1
              for i, h in enumerate(headers)]
    table.clear(columns=True)
    for i, h in enumerate(headers):
        table.add_column(cell(h, right[i], first=i == 0), key=f"c{i}", width=widths[i])
    for n, row in enumerate(rows):
        st = styles[n] if styles is not None else [""] * len(row)
        table.add_row(*[cell(v, right[i], first=i == 0, style=st[i]) for i, v in enumerate(row)],
                      key=keys[n] if keys is not None else None)
