"""Variance families: one module per family behind one protocol (:class:`.base.VarianceFamily`).

The registry below maps each family's key (what :attr:`ModelSpec.variance` holds) to its class;
the model-string words come from the classes.  The estimator, the forecaster, the simulator,
the news-impact curve and the worksheet functions reach a family only through this registry
and the protocol, never by its name.  A new family is a new module here and one line below.
"""

from __future__ import annotations

from functools import lru_cache
from importlib import import_module

from .base import History, VarianceFamily, stationary

__all__ = ["FAMILIES", "WORDS", "VarianceFamily", "History", "family_for", "stationary"]

# The registry: one line per family, "module:Class", in the order messages list them.
_REGISTRY = (
    "constant:Constant",
    "arch:Arch",
    "garch:Garch",
    "gjr:Gjr",
    "egarch:Egarch",
    "igarch:Igarch",
    "ewma:Ewma",
    "figarch:Figarch",
    "cgarch:Cgarch",
    "aparch:Aparch",
)


def _load(entry: str):
    module, _, name = entry.partition(":")
    return getattr(import_module(f".{module}", __name__), name)


#: family key -> family class
FAMILIES = {cls.key: cls for cls in map(_load, _REGISTRY)}
#: model-string word (upper case) -> family class
WORDS = {word: cls for cls in FAMILIES.values() for word in cls.words}


@lru_cache(maxsize=256)
def family_for(key: str, p: int = 0, q: int = 0) -> VarianceFamily:
    """The family ``key`` at orders (p, q); one shared instance per (key, p, q)."""
    try:
        cls = FAMILIES[key]
    except KeyError:
        raise ValueError(f"no variance family {key!r}; known: {', '.join(FAMILIES)}") from None
    return cls(p, q)
