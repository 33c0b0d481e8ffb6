"""Compiled loops for the recursions that no linear filter runs.

A *kernel* is a plain Python function over NumPy arrays and numbers, written in the subset of
Python that numba compiles (loops, scalar arithmetic, array indexing; no Python objects).  The
family module that owns it marks it with :func:`kernel`; nothing happens until its first call,
which imports numba and compiles the function with ``njit(cache=True)``, so later processes load
the machine code from numba's cache (``__pycache__`` beside the module, else numba's user-wide
cache directory) instead of compiling again.  Importing a family module therefore costs nothing:
the command line and the worksheet functions that never run such a recursion never load numba.

Where numba cannot be imported, or ``VOLCAST_NO_JIT`` is set to anything but ``0`` or an empty
string (so that tests can compare both), the same function runs as ordinary Python: the same
numbers, about 80 times slower.  Where no cache directory is writable, numba
compiles in memory on each process's first call.
"""

from __future__ import annotations

import os

__all__ = ["kernel", "Kernel", "jit_enabled", "jit_state", "compiled_loaded"]

_ENV = "VOLCAST_NO_JIT"
_numba = None  # the numba module once imported; False when it cannot be


def jit_enabled() -> bool:
    """True unless ``VOLCAST_NO_JIT`` asks for the plain-Python kernels."""
    return os.environ.get(_ENV, "") in ("", "0")


def compiled_loaded() -> bool:
    """True where kernels run compiled at no further start-up cost: the JIT not switched off and
    numba already imported in this process (by a kernel's first call: an EGARCH fit, a
    multi-period VaR).  For a caller whose own fallback is nearly as fast as the kernel, so that it
    never pays numba's import (~0.6-0.9 s CPU) for its small gain."""
    return bool(_numba) and jit_enabled()


def _load_numba():
    global _numba
    if _numba is None:
        try:
            import numba
        except Exception:  # noqa: BLE001 - absent, or broken against this NumPy: run plain Python
            numba = False
        _numba = numba
    return _numba


def _compile(fn):
    numba = _load_numba()
    if not numba:
        return fn
    try:
        return numba.njit(cache=True)(fn)
    except RuntimeError:  # numba found no writable cache directory: compile in memory
        return numba.njit(cache=False)(fn)


class Kernel:
    """A function compiled by numba on its first call (see the module docstring)."""

    def __init__(self, fn):
        self.py = fn  # the plain-Python function itself
        self._jit = None
        self.__name__ = fn.__name__
        self.__doc__ = fn.__doc__
        self.__wrapped__ = fn

    def __call__(self, *args):
        if not jit_enabled():
            return self.py(*args)
        f = self._jit
        if f is None:
            f = self._jit = _compile(self.py)
        return f(*args)

    @property
    def compiled(self) -> bool:
        """True once the kernel runs as machine code."""
        return self._jit is not None and self._jit is not self.py


def kernel(fn) -> Kernel:
    """Decorator: ``fn`` runs compiled by numba from its first call, plain Python without it."""
    return Kernel(fn)


def jit_state() -> str:
    """How kernels run in this process, for benchmarks and reports."""
    if not jit_enabled():
        return f"plain Python ({_ENV} is set)"
    numba = _load_numba()
    return f"numba {numba.__version__}" if numba else "plain Python (numba is not importable)"
