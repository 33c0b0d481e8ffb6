"""Volcast: ARCH/GARCH-family conditional-variance models as worksheet functions.

The worksheet functions are importable with no Excel and no xlwings::

    from xlfuncs import VOLFIT, VOLFORECAST

Layers (imports run one way): ``xlfuncs.core`` (estimation, NumPy/SciPy only) <-
``xlfuncs.sheet`` (worksheet functions) <- ``xlfuncs.udfs`` (xlwings wrappers) and
``xlfuncs.cli`` (the ``volcast`` command).
"""

from .sheet import VOLBACKTEST, VOLCOMPARE, VOLCOVERAGE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLNEWS, VOLRISK, VOLSERIES, VOLSIM, VOLTESTS

__all__ = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK", "VOLTESTS", "VOLRISK", "VOLCOMPARE", "VOLCOVERAGE", "VOLSIM",
           "VOLNEWS", "VOLBACKTEST"]
__version__ = "0.1.0"
