"""Text from model files made safe for reports that people and CI logs read.

Model names, labels, state names, file names and the values quoted in messages come from
files in a pull request. Written raw into a terminal or a CI log they could carry escape
sequences (recolouring, retitling, hiding lines) or a line break followed by ``::``, which CI
services read as a workflow command. :func:`printable` is applied to every such string where
the text, Markdown, JUnit and annotation reports interpolate it (the JUnit report reuses the
text report's line builders); JSON, SARIF and HTML keep the strings and escape them by their
own syntax.
"""

from __future__ import annotations

import re

__all__ = ["printable"]

# C0 and C1 controls (line breaks and tabs included: every field is one line), DEL, the
# Unicode line and paragraph separators, and the bidirectional controls that can make text
# display in another order than it reads.
_UNSAFE = re.compile("[\x00-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028\u2029\u202a-\u202e"
                     "\u2066-\u2069]")


_SHORT = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


def _escape(found: re.Match) -> str:
    char = found.group()
    code = ord(char)
    return _SHORT.get(char) or (f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}")


def printable(text: object, *, lines: bool = False) -> str:
    """``text`` on one line with every control character written as an escape (``\\n``,
    ``\\x1b``, ``\\u202e``); ordinary text (accents, Greek letters, CJK) is kept. With
    ``lines``, line feeds are kept, for a writer whose syntax escapes them itself (the
    annotations' ``%0A``)."""
    s = str(text)
    if s.isprintable():
        return s
    if lines:
        return "\n".join(_UNSAFE.sub(_escape, part) for part in s.split("\n"))
    return _UNSAFE.sub(_escape, s)
