"""The estimation core: NumPy/SciPy only, knows nothing of cells or workbooks.

| module | holds |
| --- | --- |
| ``spec`` | model-string and options-string parsing |
| ``distributions`` | standardised normal, Student t, Hansen skewed t, GED |
| ``mean`` | the conditional mean's parts (intercept, ARMA, regressors, in-mean), residuals, mean forecasts |
| ``likelihood`` | mean and variance recursions, log-likelihood and analytic scores |
| ``estimate`` | maximum likelihood, standard errors, fit statistics |
| ``forecast`` | multi-step mean and variance forecasts |
"""

import sys
import types
from importlib import import_module

# name -> module that defines it; imported on first use (PEP 562), so that a light import such as
# ``xlfuncs.core.errors`` does not load the estimator and SciPy
_WHERE = {
    "DISTRIBUTIONS": "distributions", "get_distribution": "distributions",
    "ConvergenceError": "errors", "InputError": "errors", "VolcastError": "errors",
    "FitResult": "estimate", "evaluate": "estimate", "fit": "estimate",
    "Forecast": "forecast", "forecast": "forecast", "in_sample": "forecast",
    "ModelSpec": "spec", "Options": "spec", "parse_model": "spec", "parse_options": "spec",
}

__all__ = [
    "DISTRIBUTIONS", "get_distribution", "ConvergenceError", "InputError", "VolcastError",
    "FitResult", "evaluate", "fit", "Forecast", "forecast", "in_sample",
    "ModelSpec", "Options", "parse_model", "parse_options",
]


def __getattr__(name):
    if name in _WHERE:
        return getattr(import_module(f".{_WHERE[name]}", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + __all__)


class _Package(types.ModuleType):
    """Keeps ``xlfuncs.core.forecast`` the function, as an eager ``from .forecast import
    forecast`` would: the import system binds a submodule on its package when it first loads
    it, and the submodule ``forecast`` shares the function's name."""

    def __setattr__(self, name, value):
        if isinstance(value, types.ModuleType) and _WHERE.get(name) == name:
            value = getattr(value, name)
        super().__setattr__(name, value)


sys.modules[__name__].__class__ = _Package
