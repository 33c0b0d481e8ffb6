"""Exceptions raised by the estimation core.

The core never speaks of cells.  It raises :class:`InputError` for anything a
caller passed that it cannot accept (a malformed model string, a parameter out
of its domain, too few observations) and :class:`ConvergenceError` when the
optimiser cannot produce an estimate at all.  Both subclass ``ValueError`` so
ordinary handlers still catch them; the worksheet layer turns them into
``ERROR:`` cells with one shared helper.
"""

import unicodedata

__all__ = ["VolcastError", "InputError", "ConvergenceError", "excerpt", "EXCERPT_CHARS"]

#: the most characters of a user's input that a message quotes
EXCERPT_CHARS = 40


class VolcastError(ValueError):
    """Base class of every error the core raises on purpose."""


class InputError(VolcastError):
    """An argument the core cannot accept; the message says what and how to fix it."""


class ConvergenceError(VolcastError):
    """The optimiser found no admissible estimate from any starting point."""


def excerpt(text, limit: int = EXCERPT_CHARS) -> str:
    """``text`` as a message may quote it: one printable line of at most ``limit`` characters.

    Control characters (line breaks, tabs, NUL, ...) are written as escapes such as ``\\n`` and
    ``\\x00``; a longer text is cut and ends with ``...``.  Every message that echoes what a user
    typed or a file held goes through here, so a huge or binary input never makes a huge message.
    """
    text = str(text)
    out, size = [], 0
    for ch in text:
        if ch in "\n\r\t":
            piece = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}[ch]
        elif unicodedata.category(ch) in ("Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"):
            piece = f"\\x{ord(ch):02x}" if ord(ch) < 256 else f"\\u{ord(ch):04x}"
        else:
            piece = ch
        if size + len(piece) > limit:
            while out and size > limit - 3:
                size -= len(out.pop())
            return "".join(out) + "..."
        out.append(piece)
        size += len(piece)
    return "".join(out)
