"""SciPy subpackages imported on first use, so that importing the estimation core stays light.

``scipy.stats`` and ``scipy.signal`` each cost a large share of a cold start (``scipy.signal``
imports ``scipy.stats``, and both parse their docstrings at import), yet a fit of the families
linear in lagged squares needs neither: it needs one C routine, the linear filter behind
``scipy.signal.lfilter``.  Here:

* :func:`lazy_module` is a stand-in for a subpackage (``stats = lazy_module("scipy.stats")``)
  that imports it on the first attribute read;
* :func:`lfilter` is ``scipy.signal.lfilter``, importing ``scipy.signal`` on its first call;
* :data:`raw_linear_filter` is SciPy's C filter (``scipy.signal._sigtools._linear_filter``),
  loaded from its extension file without running ``scipy.signal``'s package initialisation
  (which would import the whole subpackage); None where that file is not found, and the
  ordinary import where loading it so fails;
* ``lazy_module("scipy.special")`` and ``lazy_module("scipy.linalg.lapack")`` go one step further:
  the functions a fit calls (``gammaln``, ``digamma``, ``ndtr``... ; ``dpotrf``, ``dpotrs``,
  ``dgesv``) are the very objects of one compiled module inside each subpackage
  (``scipy.special._special_ufuncs``, ``scipy.linalg._flapack``), which is loaded from its
  extension file alone (a few milliseconds) instead of through the subpackage's initialisation
  (about 0.3 s CPU each here: both build SciPy's array-API layer).  Any other name, or any name
  once the subpackage itself is imported, is read from the subpackage.  ``polygamma`` is SciPy's
  own three lines over those ufuncs.  ``tests/test_lazy_special.py`` checks that every function
  served this way is the subpackage's own object, or gives its numbers bit for bit.
"""

from __future__ import annotations

import importlib
import sys

__all__ = ["lazy_module", "lfilter", "quad", "raw_linear_filter", "special"]


class _LazyModule:
    """A module imported on the first attribute read (then every read goes to it)."""

    def __init__(self, name: str):
        self.__dict__["_lazy_name"] = name

    def _load(self):
        mod = importlib.import_module(self.__dict__["_lazy_name"])
        self.__dict__["_lazy_module"] = mod
        return mod

    def __getattr__(self, attr):
        mod = self.__dict__.get("_lazy_module") or self._load()
        return getattr(mod, attr)

    def __repr__(self):
        return f"<lazy module {self.__dict__['_lazy_name']}>"


def lazy_module(name: str):
    """The module ``name`` if it is already imported, else a stand-in importing it on first use
    (for ``scipy.special`` and ``scipy.linalg.lapack``, one that serves the functions of their
    compiled core without importing them: :class:`_CompiledFirst`)."""
    mod = sys.modules.get(name)
    if mod is not None:
        return mod
    if name in _COMPILED_FIRST:
        return _CompiledFirst(name, *_COMPILED_FIRST[name])
    return _LazyModule(name)


def _load_extension(full: str):
    """The compiled module ``full`` (such as ``scipy.special._special_ufuncs``) loaded from its
    extension file without running its package's initialisation, and registered under its name
    (so that the package, once imported, uses this very module); None where it is not found or
    cannot be so loaded."""
    mod = sys.modules.get(full)
    if mod is not None:
        return mod
    try:
        import importlib.machinery
        import importlib.util
        import os

        import scipy

        *package, name = full.split(".")
        folder = os.path.join(os.path.dirname(scipy.__file__), *package[1:])
        for suffix in importlib.machinery.EXTENSION_SUFFIXES:
            path = os.path.join(folder, name + suffix)
            if os.path.exists(path):
                spec = importlib.util.spec_from_file_location(full, path)
                mod = importlib.util.module_from_spec(spec)
                spec.loader.exec_module(mod)
                sys.modules.setdefault(full, mod)
                return sys.modules[full]
    except Exception:  # noqa: BLE001 - any failure: the subpackage's ordinary import
        return None
    return None


class _CompiledFirst:
    """A stand-in for a SciPy subpackage whose functions named in ``names`` ({public name: name
    in the compiled module}) are taken from its compiled module ``core`` (a full module name) loaded alone
    (:func:`_load_extension`); every other name, and every name once the subpackage is imported,
    from the subpackage, imported on that first read."""

    def __init__(self, name: str, core: str, names: dict):
        self.__dict__.update(_lazy_name=name, _core=core, _names=names)

    def __getattr__(self, attr):
        d = self.__dict__
        name = d["_lazy_name"]
        full = sys.modules.get(name)
        if full is None:
            if attr == "polygamma" and name == "scipy.special":
                core = _load_extension(d["_core"])
                if core is not None and all(hasattr(core, f) for f in ("gamma", "_zeta", "psi")):
                    return _polygamma
            inner = d["_names"].get(attr)
            if inner is not None:
                core = _load_extension(d["_core"])
                fn = getattr(core, inner, None) if core is not None else None
                if fn is not None:
                    d[attr] = fn  # later reads skip __getattr__
                    return fn
            full = importlib.import_module(name)
        return getattr(full, attr)

    def __repr__(self):
        return f"<lazy module {self.__dict__['_lazy_name']} (compiled core first)>"


def _polygamma(n, x):
    """``scipy.special.polygamma`` as SciPy writes it (``scipy/special/_basic.py``: the n-th
    derivative of digamma as (-1)^(n+1) n! zeta(n+1, x), digamma itself for n = 0), over the same
    ufuncs, so the same numbers bit for bit."""
    from numpy import asarray, where

    core = sys.modules["scipy.special._special_ufuncs"]  # loaded before this function is handed out
    n, x = asarray(n), asarray(x)
    fac2 = (-1.0) ** (n + 1) * core.gamma(n + 1.0) * core._zeta(n + 1, x)
    return where(n == 0, core.psi(x), fac2)


# the functions of scipy.special and scipy.linalg.lapack that SciPy (1.17 checked, see
# tests/test_lazy_special.py) defines as the objects of one compiled module inside the subpackage
_SPECIAL_UFUNCS = {n: n for n in ("gammaln", "psi", "ndtr", "log_ndtr", "gammaincc", "gammainccinv",
                                  "gammainc", "xlogy", "gamma", "erf", "erfc", "expit")}
_SPECIAL_UFUNCS["digamma"] = "psi"
_COMPILED_FIRST = {
    "scipy.special": ("scipy.special._special_ufuncs", _SPECIAL_UFUNCS),
    "scipy.linalg.lapack": ("scipy.linalg._flapack", {n: n for n in ("dpotrf", "dpotrs", "dgesv", "dposv", "dsysv",
                                                       "dgetrf", "dgetrs", "dtrtrs")}),
}

#: scipy.special as the core reads it (``from ._lazy import special``)
special = lazy_module("scipy.special")


def quad(func, a: float, b: float, epsabs: float = 1.49e-8, epsrel: float = 1.49e-8, limit: int = 50) -> tuple:
    """(integral, error estimate) of ``scipy.integrate.quad(func, a, b, epsabs=, epsrel=, limit=)``
    for a <= b, finite or infinite, by QUADPACK's compiled routines as quad calls them
    (``scipy.integrate._quadpack``: qagse on a finite interval, qagie on an infinite one), loaded
    alone without importing scipy.integrate, whose package imports scipy.optimize (about 0.3 s CPU
    at the first one-period ES in value terms of a process).  The same numbers bit for bit
    (``tests/test_lazy_special.py``).  Where those routines cannot be had, once scipy.integrate is
    imported anyway, or where QUADPACK reports a difficulty (quad then warns as it does), quad
    itself answers."""
    import math

    core = None if "scipy.integrate" in sys.modules or not a <= b else _load_extension("scipy.integrate._quadpack")
    if core is not None:
        try:
            if math.isinf(a) and math.isinf(b):
                out = core._qagie(func, 0, 2, (), 0, epsabs, epsrel, limit)
            elif math.isinf(a):
                out = core._qagie(func, b, -1, (), 0, epsabs, epsrel, limit)
            elif math.isinf(b):
                out = core._qagie(func, a, 1, (), 0, epsabs, epsrel, limit)
            else:
                out = core._qagse(func, a, b, (), 0, epsabs, epsrel, limit)
            if len(out) == 3 and out[2] == 0:
                return out[0], out[1]
        except (AttributeError, TypeError, ValueError):  # pragma: no cover - a changed private signature
            pass
    from scipy import integrate

    return tuple(integrate.quad(func, a, b, epsabs=epsabs, epsrel=epsrel, limit=limit)[:2])


def lfilter(b, a, x, axis=-1, zi=None):
    """``scipy.signal.lfilter(b, a, x, axis, zi)``, importing ``scipy.signal`` on the first call."""
    from scipy.signal import lfilter as _lfilter

    return _lfilter(b, a, x, axis=axis, zi=zi)


def _load_raw_filter():
    name = "scipy.signal._sigtools"
    mod = sys.modules.get(name)
    if mod is None:
        try:
            import importlib.machinery
            import importlib.util
            import os

            import scipy

            folder = os.path.join(os.path.dirname(scipy.__file__), "signal")
            for suffix in importlib.machinery.EXTENSION_SUFFIXES:
                path = os.path.join(folder, "_sigtools" + suffix)
                if os.path.exists(path):
                    spec = importlib.util.spec_from_file_location(name, path)
                    mod = importlib.util.module_from_spec(spec)
                    spec.loader.exec_module(mod)
                    break
        except Exception:  # noqa: BLE001 - any failure: the ordinary import below
            mod = None
    if mod is None:
        try:
            from scipy.signal import _sigtools as mod
        except ImportError:  # pragma: no cover - a SciPy without it
            return None
    return getattr(mod, "_linear_filter", None)


raw_linear_filter = _load_raw_filter()
