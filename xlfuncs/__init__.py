"""Volcast: ARCH/GARCH-family conditional-variance models as worksheet functions.

The worksheet functions are importable with no Excel and no xlwings::

    from xlfuncs import VOLFIT, VOLFORECAST

Layers (imports run one way): ``xlfuncs.core`` (estimation, NumPy/SciPy only) <-
``xlfuncs.sheet`` (worksheet functions) <- ``xlfuncs.udfs`` (xlwings wrappers) and
``xlfuncs.cli`` (the ``volcast`` command).
"""

__all__ = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK", "VOLTESTS", "VOLRISK", "VOLCOMPARE", "VOLCOVERAGE", "VOLSIM",
           "VOLNEWS", "VOLBACKTEST", "VOLSTABILITY", "VOLDM"]
__version__ = "0.1.0"


def __getattr__(name):
    """The worksheet functions, imported on first use (PEP 562): ``volcast --help`` and the
    command's start-up do not pay for NumPy and SciPy."""
    if name in __all__:
        from . import sheet

        return getattr(sheet, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + __all__)
