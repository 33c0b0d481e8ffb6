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

from .distributions import DISTRIBUTIONS, get_distribution
from .errors import ConvergenceError, InputError, VolcastError
from .estimate import FitResult, evaluate, fit
from .forecast import Forecast, forecast, in_sample
from .spec import ModelSpec, Options, parse_model, parse_options

__all__ = [
    "DISTRIBUTIONS", "get_distribution", "ConvergenceError", "InputError", "VolcastError",
    "FitResult", "evaluate", "fit", "Forecast", "forecast", "in_sample",
    "ModelSpec", "Options", "parse_model", "parse_options",
]
