"""Text bound for the terminal, with control characters shown escaped.

Star ids, file names and notes come from other people's files; an ANSI
escape or a carriage return in one must not move the cursor, recolour the
terminal or hide the line before it.  Printable text (any script) is kept.
"""

from __future__ import annotations

import unicodedata
from typing import Any

__all__ = ["terminal_text"]


def terminal_text(value: Any, *, keep_newlines: bool = False) -> str:
    """``str(value)`` with control and format characters escaped (``\\x1b``, ``\\n``...).

    ``keep_newlines`` keeps line breaks of a message that has several lines.
    """
    text = str(value)
    if text.isprintable():
        return text
    out = []
    for char in text:
        if char.isprintable() or (keep_newlines and char == "\n"):
            out.append(char)
        elif unicodedata.category(char) == "Zs":
            out.append(" ")
        else:
            out.append(char.encode("unicode_escape").decode("ascii"))
    return "".join(out)
