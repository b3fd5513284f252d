"""Show text that came from people (notes, tags, lot IDs, group names) literally and safely.

Two hazards: Rich/Textual markup (``[red]``, ``[@click=...]``) would be interpreted by widgets that
parse strings, and terminal control sequences (ANSI CSI/OSC, C0/C1 controls, Unicode bidi overrides)
could move the cursor, retitle the window or reorder what the reader sees. Every user string goes
through :func:`clean` (a plain ``str`` with controls removed, truncated by terminal cell width) and
is handed to widgets as a :class:`rich.text.Text` via :func:`literal`, which is never parsed as
markup.
"""

from __future__ import annotations

import re

from rich.cells import cell_len
from rich.text import Text

ELLIPSIS = "…"

# ESC-introduced sequences: CSI (ESC [ ... final), OSC/DCS/SOS/PM/APC (ESC ] ... BEL or ST),
# and two-character escapes (ESC + one byte). The 8-bit C1 forms (0x9b CSI, 0x9d OSC ...) too.
_ESCAPE_SEQ = re.compile(
    r"""
    (?:\x1b\[|\x9b)[0-?]*[ -/]*[@-~]                    # CSI ... final byte
  | (?:\x1b[\]PX^_]|[\x90\x98\x9d\x9e\x9f]).*?(?:\x07|\x1b\\|\x9c|$)  # OSC/DCS/SOS/PM/APC ... BEL/ST
  | \x1b[ -/]*[0-~]                                     # other two-byte escapes (ESC c, ESC 7 ...)
    """,
    re.VERBOSE | re.DOTALL,
)

# Unicode bidirectional controls: embeddings/overrides (U+202A-202E), isolates (U+2066-2069),
# marks (U+200E, U+200F, U+061C). Source: Unicode UAX #9 and the "Trojan Source" advisory
# (CVE-2021-42574), which lists exactly these code points.
_BIDI = dict.fromkeys([0x061C, 0x200E, 0x200F, *range(0x202A, 0x202F), *range(0x2066, 0x206A)])

# C0 controls (except tab/newline, handled below), DEL, and C1 controls.
_CONTROLS = dict.fromkeys([*range(0x00, 0x09), 0x0B, 0x0C, *range(0x0E, 0x20), 0x7F,
                           *range(0x80, 0xA0)])

_TRANSLATE = {**_BIDI, **_CONTROLS, 0x09: " ", 0x0A: " ", 0x0D: " "}


def clean(value: object, width: int | None = None) -> str:
    """``str(value)`` with escape sequences, control and bidi characters removed.

    Tabs and line breaks become single spaces (a table cell or list row stays one line). When
    ``width`` is given the result fits in ``width`` terminal cells, ending in an ellipsis if cut.
    ``None`` becomes the empty string.
    """
    if value is None:
        return ""
    text = _ESCAPE_SEQ.sub("", str(value))
    text = text.translate(_TRANSLATE)
    if width is not None:
        text = truncate(text, width)
    return text


def truncate(text: str, width: int) -> str:
    """Cut ``text`` to at most ``width`` terminal cells, ending in an ellipsis when shortened."""
    if width <= 0:
        return ""
    if cell_len(text) <= width:
        return text
    out: list[str] = []
    used = 0
    for ch in text:
        w = cell_len(ch)
        if used + w > width - 1:
            break
        out.append(ch)
        used += w
    return "".join(out).rstrip() + ELLIPSIS


def literal(value: object, width: int | None = None, style: str = "") -> Text:
    """A :class:`Text` showing ``value`` exactly as typed (cleaned), never parsed as markup."""
    return Text(clean(value, width), style=style, no_wrap=True, overflow="ellipsis")


def markup_safe(value: object, width: int | None = None) -> str:
    """``clean`` then escape square brackets, for the few places that only accept markup strings."""
    from rich.markup import escape

    return escape(clean(value, width))
