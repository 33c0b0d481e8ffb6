"""Exceptions raised by the estimation core.

The core never speaks of cells.  It raises :class:`InputError` for anything a
caller passed that it cannot accept (a malformed model string, a parameter out
of its domain, too few observations) and :class:`ConvergenceError` when the
optimiser cannot produce an estimate at all.  Both subclass ``ValueError`` so
ordinary handlers still catch them; the worksheet layer turns them into
``ERROR:`` cells with one shared helper.
"""

import datetime as _dt
import math
import numbers

__all__ = ["VolcastError", "InputError", "ConvergenceError", "excerpt", "EXCERPT_CHARS", "value_words",
           "describe_value", "number_words", "typed_number"]

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

    Characters that do not print (line breaks, tabs, NUL, a no-break space, ...) are written as
    escapes such as ``\\n``, ``\\x00`` and ``\\xa0``; a longer text is cut and ends with ``...``.
    Every message that echoes what a user typed or a file held goes through here, so a huge or
    binary input never makes a huge message.  A value that is not text (a date, TRUE, a number
    that is not finite) is said in spreadsheet words (:func:`value_words`).
    """
    if not isinstance(text, str):
        text = value_words(text, limit) if _is_value(text) else str(text)
    out, size = [], 0
    for ch in text:
        if ch in "\n\r\t":
            piece = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}[ch]
        elif not ch.isprintable():  # control, format, unassigned, separators other than the space (NBSP)
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


def _is_logical(v) -> bool:
    """Python's or NumPy's TRUE/FALSE (NumPy's type is numpy.bool_, called numpy.bool in NumPy 2)."""
    return isinstance(v, bool) or (type(v).__module__ == "numpy" and type(v).__name__ in ("bool_", "bool"))


def _is_value(v) -> bool:
    """A value a cell or an argument may hold (not an exception or other object whose str is its text)."""
    return v is None or isinstance(v, (numbers.Number, _dt.date, _dt.time)) or _is_logical(v)


def number_words(x) -> str:
    """A number as a spreadsheet shows it: 2 (not 2.0), 0.99, "not a number", "infinity"."""
    x = float(x)
    if math.isnan(x):
        return "not a number"
    if math.isinf(x):
        return "infinity" if x > 0 else "minus infinity"
    if x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    return f"{x:.15g}"


def typed_number(x) -> str:
    """A number the user typed on a command line, as typed, with its meaning where it is not finite:
    0.5, "nan (not a number)", "inf (infinity)"."""
    x = float(x)
    return f"{x:g}" if math.isfinite(x) else f"{x:g} ({number_words(x)})"


def value_words(value, limit: int = EXCERPT_CHARS) -> str:
    """A value in a spreadsheet user's words, short enough for a message: TRUE/FALSE for logical
    values, a date as 2020-01-31 (the time only when it is not midnight), "not a number" and
    "infinity" for the numbers that are not finite, "blank" for nothing, text in double quotes
    cut to ``limit`` characters; never a Python spelling such as True, nan or datetime.datetime(...)."""
    if value is None:
        return "blank"
    if _is_logical(value):
        return "TRUE" if value else "FALSE"
    if isinstance(value, _dt.datetime):
        if value.time() == _dt.time(0, 0) and value.tzinfo is None:
            return value.date().isoformat()
        return excerpt(value.replace(microsecond=0).isoformat(sep=" "), limit)
    if isinstance(value, (_dt.date, _dt.time)):
        return value.isoformat()
    if isinstance(value, numbers.Integral):
        return excerpt(str(int(value)), limit)
    if isinstance(value, numbers.Real):
        return number_words(value)
    if isinstance(value, str):
        return f'"{excerpt(value, limit)}"'
    return excerpt(f"a {type(value).__name__}", limit)


def describe_value(value, limit: int = EXCERPT_CHARS) -> str:
    """What a value is, for "got ...": "the date 2020-01-31", "the logical value TRUE", "text "abc"",
    "the number 3", "a blank", "a value that is not a number"."""
    if value is None:
        return "a blank"
    if _is_logical(value):
        return f"the logical value {value_words(value)}"
    if isinstance(value, str):
        return f"text {value_words(value, limit)}"
    if isinstance(value, (_dt.date, _dt.datetime)):
        return f"the date {value_words(value, limit)}"
    if isinstance(value, _dt.time):
        return f"the time {value_words(value, limit)}"
    if isinstance(value, numbers.Real):
        if math.isnan(float(value)):
            return "a value that is not a number"
        return f"the number {value_words(value, limit)}" if math.isfinite(float(value)) else value_words(value)
    return value_words(value, limit)
