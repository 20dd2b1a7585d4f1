"""Text from files made safe to print: no terminal control sequences, bounded length.

    clean_text("Larch\\x1b[2J Basin")        # 'Larch Basin': the escape sequence is gone
    clean_text("line 1\\nline 2", keep_newlines=True)
    shorten("/very/long/path/...", 120)     # middle elided with '…'

Site names, rule messages, notes and file names come from files and arguments that anyone
could have written; printed raw, an escape sequence could clear a terminal, retitle a window,
hide text or inject a fake line into cron mail.  Everything that reaches a terminal or mail
from such a source goes through :func:`clean_text` first.  This module is part of the base
layer: it imports nothing from the advisor.
"""

from __future__ import annotations

import re

# ESC-introduced sequences: CSI (ESC [ ... final byte), OSC/DCS/SOS/PM/APC strings (ended by BEL
# or ESC \), and two-byte escapes.  Their 8-bit C1 forms (CSI = U+009B, OSC = U+009D, ...) too.
_ESCAPE_SEQUENCE = re.compile(
    r"""
      (?:\x1b\[|\x9b) [\x30-\x3f]* [\x20-\x2f]* [\x40-\x7e]?        # CSI ... final
    | (?:\x1b[\]PX^_]|[\x90\x98\x9d\x9e\x9f]) .*? (?:\x07|\x1b\\|\x9c|$)  # OSC, DCS, SOS, PM, APC
    | \x1b [\x20-\x2f]* [\x30-\x7e]?                                  # other ESC sequences
    """,
    re.VERBOSE | re.DOTALL,
)
# C0 controls except TAB and LF, DEL, C1 controls, and the Unicode bidirectional overrides and
# isolates that reorder what a reader sees (U+202A..U+202E, U+2066..U+2069).
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def clean_text(text: object, keep_newlines: bool = False, keep_tabs: bool = False) -> str:
    """``text`` without terminal control characters or escape sequences.

    Parameters
    ----------
    text : object
        Anything; it is converted with ``str`` first.
    keep_newlines : bool
        Keep line feeds (a carriage return is always removed, so a line cannot be overwritten).
        Otherwise every line feed becomes a space.
    keep_tabs : bool
        Keep horizontal tabs; otherwise each becomes a space.

    Returns
    -------
    str
        The text with ANSI/ECMA-48 escape sequences removed, C0 controls (except the kept
        ones), DEL, C1 controls and bidirectional overrides removed.
    """
    s = str(text)
    if s.isascii() and s.isprintable():
        return s
    s = _ESCAPE_SEQUENCE.sub("", s)
    if not keep_newlines:
        s = s.replace("\r\n", " ").replace("\n", " ")
    if not keep_tabs:
        s = s.replace("\t", " ")
    s = s.replace("\r", "")
    return _CONTROL.sub("", s)


def shorten(text: str, limit: int = 160) -> str:
    """``text`` cut to at most ``limit`` characters by eliding its middle with ``…``.

    Paths keep their start and their file name, which is what a reader needs.
    """
    if len(text) <= limit:
        return text
    keep = max(limit - 1, 2)
    head = keep // 3
    tail = keep - head
    return f"{text[:head]}…{text[-tail:]}"
