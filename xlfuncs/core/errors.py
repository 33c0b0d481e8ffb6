"""Exceptions raised by the estimation core.

The core never speaks of cells.  It raises :class:`InputError` for anything a
caller passed that it cannot accept (a malformed model string, a parameter out
of its domain, too few observations) and :class:`ConvergenceError` when the
optimiser cannot produce an estimate at all.  Both subclass ``ValueError`` so
ordinary handlers still catch them; the worksheet layer turns them into
``ERROR:`` cells with one shared helper.
"""

__all__ = ["VolcastError", "InputError", "ConvergenceError"]


class VolcastError(ValueError):
    """Base class of every error the core raises on purpose."""


class InputError(VolcastError):
    """An argument the core cannot accept; the message says what and how to fix it."""


class ConvergenceError(VolcastError):
    """The optimiser found no admissible estimate from any starting point."""
