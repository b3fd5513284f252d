"""Which characters a stored identifier (lot ID, tag, characteristic or factor name) may hold.

Identifiers are shown on terminals and in reports, compared for duplicates and used as group
names, so characters that change how text is displayed are refused at input rather than only
cleaned at output: C0 and C1 control characters and DEL (terminal escape sequences start with
them), and the Unicode bidirectional formatting characters (U+061C, U+200E, U+200F,
U+202A–U+202E, U+2066–U+2069), which can make one lot ID look like another. Free-text notes and
reasons are kept as typed and cleaned when shown.
"""

from __future__ import annotations

import re

_UNSAFE = re.compile("[\x00-\x1f\x7f-\x9f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]")


def unsafe_character(text: str) -> str | None:
    """A description of the first character an identifier may not hold, or None."""
    m = _UNSAFE.search(text)
    if m is None:
        return None
    ch = m.group()
    kind = "a bidirectional formatting character" if ord(ch) > 0x9F else "a control character"
    return f"{kind} (U+{ord(ch):04X})"
