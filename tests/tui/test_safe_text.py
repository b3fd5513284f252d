"""tui.safe_text: user text is shown literally, without terminal control sequences."""

from __future__ import annotations

from lotwatch.tui.render.safe_text import ELLIPSIS, clean, literal, markup_safe, truncate
from rich.cells import cell_len
from rich.console import Console
from textual.widgets import Static


def test_csi_osc_and_c1_sequences_are_removed():
    # Sequence forms from ECMA-48 (5th ed.) §5.4 (CSI), §8.3.89 (OSC, ended by BEL or ST).
    assert clean("a\x1b[31mred\x1b[0m b") == "ared b"
    assert clean("x\x1b]0;new title\x07y") == "xy"
    assert clean("x\x1b]8;;http://example.invalid\x1b\\link\x1b]8;;\x1b\\y") == "xlinky"
    assert clean("x\x9b2Jy") == "xy"  # 8-bit CSI
    assert clean("bell\x07 nul\x00 del\x7f") == "bell nul del"


def test_bidi_controls_are_removed():
    # The code points listed by Unicode UAX #9 and CVE-2021-42574 ("Trojan Source").
    for cp in (0x202A, 0x202B, 0x202C, 0x202D, 0x202E, 0x2066, 0x2067, 0x2068, 0x2069,
               0x200E, 0x200F, 0x061C):
        assert clean(f"a{chr(cp)}b") == "ab"


def test_line_breaks_and_tabs_become_spaces_and_text_is_kept():
    assert clean("two\nlines\tand\r\nmore") == "two lines and  more"
    assert clean("Müller 東京 [b]x[/b]") == "Müller 東京 [b]x[/b]"
    assert clean(None) == ""


def test_truncation_by_cell_width_with_ellipsis():
    assert truncate("abcdef", 6) == "abcdef"
    assert truncate("abcdefg", 6) == "abcde" + ELLIPSIS
    cut = truncate("東京東京東京", 7)  # wide characters take two cells each
    assert cut.endswith(ELLIPSIS) and cell_len(cut) <= 7
    assert clean("x" * 50, 10) == "x" * 9 + ELLIPSIS


def test_literal_is_never_parsed_as_markup():
    console = Console(width=60, color_system=None, record=True)
    console.print(literal("[bold red]boom[/] [link=x]y[/link]"))
    assert console.export_text().strip() == "[bold red]boom[/] [link=x]y[/link]"


def test_markup_safe_survives_textual_markup():
    s = Static(markup_safe("[b]kept[/b]"))
    assert s.visual.plain == "[b]kept[/b]"  # Textual's own markup parser leaves it as text
