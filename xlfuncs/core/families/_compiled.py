"""Compiled loops for the recursions that no linear filter runs.

A *kernel* is a plain Python function over NumPy arrays and numbers, written in the subset of
Python that numba compiles (loops, scalar arithmetic, array indexing; no Python objects).  The
family module that owns it marks it with :func:`kernel`; nothing happens until its first call,
which imports numba and compiles the function with ``njit(cache=True)``, so later processes load
the machine code from numba's cache (``__pycache__`` beside the module, else numba's user-wide
cache directory) instead of compiling again.  Importing a family module therefore costs nothing:
the command line and the worksheet functions that never run such a recursion never load numba.

A *device* function (:func:`device`) is a small helper that kernels call, such as one cell of an
interpolant: compiled with ``njit(cache=True)`` when a kernel that calls it is compiled (numba
then inlines it into the caller), the plain function in plain Python and when called outside a
kernel.  A kernel sees it compiled because :func:`_compile` compiles the kernel over a copy of its
module's globals in which each device function is replaced by its compiled form.  numba's cache
keys a kernel by its own source file: after editing a device function in another file, clear the
``__pycache__`` entries (``*.nbi``, ``*.nbc``) of the kernels that call it.

Where numba cannot be imported, or ``VOLCAST_NO_JIT`` is set to anything but ``0`` or an empty
string (so that tests can compare both), the same function runs as ordinary Python: the same
numbers, about 80 times slower.  Where no cache directory is writable, numba
compiles in memory on each process's first call.
"""

from __future__ import annotations

import os
import types

__all__ = ["kernel", "Kernel", "device", "Device", "ring_start", "hermite_cell", "hermite_row", "jit_enabled",
           "jit_state", "compiled_loaded"]

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


def _njit(numba, fn):
    try:
        return numba.njit(cache=True)(fn)
    except RuntimeError:  # numba found no writable cache directory: compile in memory
        return numba.njit(cache=False)(fn)


def _with_devices(fn):
    """``fn`` itself, or where its module's globals hold device functions, the same code over a
    copy of those globals with each device function replaced by its compiled form (so that numba,
    which reads a kernel's globals when it compiles it, calls the compiled helper)."""
    g = fn.__globals__
    names = [k for k in fn.__code__.co_names if isinstance(g.get(k), Device)]
    if not names:
        return fn
    glob = dict(g)
    for k in names:
        glob[k] = g[k].jit
    out = types.FunctionType(fn.__code__, glob, fn.__name__, fn.__defaults__, fn.__closure__)
    out.__qualname__, out.__module__, out.__doc__ = fn.__qualname__, fn.__module__, fn.__doc__
    return out


def _compile(fn):
    numba = _load_numba()
    if not numba:
        return fn
    return _njit(numba, _with_devices(fn))


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


class Device:
    """A helper that kernels call (see the module docstring): called from Python, the plain
    function; inside a compiled kernel, its compiled form (:attr:`jit`)."""

    def __init__(self, fn):
        self.py = fn
        self._jit = None
        self.__name__ = fn.__name__
        self.__doc__ = fn.__doc__
        self.__wrapped__ = fn

    def __call__(self, *args):
        return self.py(*args)

    @property
    def jit(self):
        """The compiled helper (compiled on first use; the plain function where numba is absent)."""
        if self._jit is None:
            numba = _load_numba()
            self._jit = _njit(numba, _with_devices(self.py)) if numba else self.py
        return self._jit


def device(fn) -> Device:
    """Decorator: ``fn`` is a helper that kernels call, compiled into them (module docstring)."""
    return Device(fn)


def kernel(fn) -> Kernel:
    """Decorator: ``fn`` runs compiled by numba from its first call, plain Python without it."""
    return Kernel(fn)


@device
def ring_start(out, last, m):
    """The ring of ``m`` lags that a path kernel steps through, at step 0 and the same in every
    path (a column of ``out`` each): lag k, the k-th value from the end of ``last``, at ring
    position (-k) mod m."""
    for k in range(1, m + 1):
        pos = (m - k) % m
        v = last[m - k]
        for i in range(out.shape[1]):
            out[pos, i] = v


@device
def hermite_cell(t, v0, d0, v1, d1):
    """One cell of a cubic Hermite interpolant on a uniform grid: the values v0, v1 and slopes per
    grid step d0, d1 at its two nodes, evaluated at the fraction ``t`` of the step (the form of
    the cell that the kernels share; NumPy's form: ``distributions.hermite``, the same arithmetic)."""
    t1 = 1.0 - t
    return t1 * t1 * ((1.0 + 2.0 * t) * v0 + t * d0) + t * t * ((3.0 - 2.0 * t) * v1 - t1 * d1)


@device
def hermite_row(y, g, d, half, step, out) -> bool:
    """The cubic Hermite interpolant with nodes ``g`` and slopes per grid step ``d`` on the uniform
    grid of ``step`` over [-half, half], at each point of ``y``, into ``out``; False as soon as a
    point lies beyond the nodes.  With a step that is a power of two, the numbers of
    ``distributions._ScoreMap`` (the kernels' map of normal scores to the law's shocks)."""
    last = g.shape[0] - 2
    inv_step = 1.0 / step
    top = last + 1.0
    for i in range(y.shape[0]):
        u = (y[i] + half) * inv_step
        if not (0.0 <= u <= top):
            return False
        j = int(u)
        if j > last:
            j = last
        out[i] = hermite_cell(u - j, g[j], d[j], g[j + 1], d[j + 1])
    return True


def jit_state() -> str:
    """How kernels run in this process, for benchmarks and reports."""
    if not jit_enabled():
        return f"plain Python ({_ENV} is set)"
    numba = _load_numba()
    return f"numba {numba.__version__}" if numba else "plain Python (numba is not importable)"
