"""Fresh processes that import Volcast as an installed copy does: with its bytecode.

pip writes every module's bytecode (.pyc) at install, so an installed `volcast` never compiles its
sources.  A source checkout run with PYTHONDONTWRITEBYTECODE set (as some machines and containers
set it) compiles every module it imports in every fresh process, about 0.3 s CPU for the worksheet
functions and the command line here, which a measurement of start-up or a recalculation would
then count as Volcast's own.  :func:`child_env` therefore writes the bytecode of the source tree
once (``compileall``, into the ordinary ``__pycache__`` folders, which git ignores) and gives an
environment without PYTHONDONTWRITEBYTECODE, so that child processes load it.
"""

from __future__ import annotations

import compileall
import os
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
_DONE: set = set()


def child_env(tree: Path | str | None = None, **extra) -> dict:
    """os.environ for a fresh process that runs ``tree`` (default: this checkout) from its bytecode;
    ``extra`` variables added (PYTHONPATH, VOLCAST_NO_JIT...)."""
    tree = Path(tree) if tree is not None else ROOT
    pkg = tree / "xlfuncs"
    if pkg.is_dir() and pkg not in _DONE:
        compileall.compile_dir(str(pkg), quiet=1)
        _DONE.add(pkg)
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env.update(extra)
    return env
