"""Text from files made safe to print on a terminal.

A title, a description, a CSV header cell, a run id or a path comes from a file someone else
wrote. Printed raw, an escape sequence in it moves the cursor, clears the screen or (OSC) sets
the window title, and a line break forges a line of tunnelred's own output. Every such string
goes through :func:`printable` at the point where it is printed.
"""

from __future__ import annotations

import re

__all__ = ["printable"]

# C0 controls (line breaks, ESC, BEL ...), DEL and the C1 controls (CSI U+009B, OSC U+009D ...);
# the Unicode line and paragraph separators and the bidirectional controls (which reorder
# what follows them on screen); lone surrogates (undecodable bytes of a file name), which a
# UTF-8 terminal stream cannot encode at all.
_UNSAFE = re.compile(
    "[\x00-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028-\u202e\u2066-\u2069\ud800-\udfff]"
)


_NAMED = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


def _escape(match: re.Match) -> str:
    char = match.group()
    if char in _NAMED:
        return _NAMED[char]
    code = ord(char)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def printable(text: object) -> str:
    """``text`` as a one-line string with every control character written as an escape.

    Parameters
    ----------
    text : object
        Any value; it is converted with ``str`` first.

    Returns
    -------
    str
        The text with control characters, separators and bidirectional controls replaced by
        ``\\xNN`` or ``\\uNNNN`` (a backslash and the code point in hexadecimal, as Python writes
        them); everything else, accented letters and symbols included, unchanged.

    Examples
    --------
    >>> printable("RS-12 \\x1b]0;owned\\x07 sweep")
    'RS-12 \\\\x1b]0;owned\\\\x07 sweep'
    >>> printable("α = 2, CL ± u")
    'α = 2, CL ± u'
    >>> printable("two\\nlines")
    'two\\\\nlines'
    """
    text = str(text)
    if not _UNSAFE.search(text):
        return text
    return _UNSAFE.sub(_escape, text)
