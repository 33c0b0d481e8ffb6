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
  ordinary import where loading it so fails.
"""

from __future__ import annotations

import importlib
import sys

__all__ = ["lazy_module", "lfilter", "raw_linear_filter"]


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
    """The module ``name`` if it is already imported, else a stand-in importing it on first use."""
    mod = sys.modules.get(name)
    return mod if mod is not None else _LazyModule(name)


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
