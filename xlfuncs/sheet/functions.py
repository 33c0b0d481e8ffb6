"""The worksheet functions: Excel-shaped values in, lists of rows out, never an exception.

| function | returns |
| --- | --- |
| ``VOLFIT(returns, [model], [dist], [options])`` | the fit table |
| ``VOLSERIES(returns, fit, [what])`` | one value per return row: variance, vol, resid or stdresid |
| ``VOLFORECAST(returns, fit, horizon, [what])`` | ``horizon`` rows: variance, vol, cumvar, cumvol, mean or table |
| ``VOLLOGLIK(returns, fit)`` | the log-likelihood of the returns at the fit's parameters |

>>> table = VOLFIT([[0.5], [-1.2], [0.3], [0.9], [-0.4], [1.5], [-2.1], [0.2], [0.1], [-0.6],
...                 [0.8], [-0.3], [1.1], [-0.9], [0.4], [0.0], [-1.4], [0.7], [0.2], [-0.2]], "CONST")
>>> table[1]
['model', 'CONST', None, None, None]
>>> VOLFORECAST([[1], [2]], "not a table", 3)
[['ERROR: fit is not a fit table; pass the range VOLFIT returns, or a table with rows model, dist and the parameters']]
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..core.distributions import get_distribution
from ..core.estimate import evaluate, fit as core_fit
from ..core.forecast import MAX_HORIZON, forecast as core_forecast, in_sample
from ..core.spec import parse_model, parse_options
from .cache import FIT_CACHE
from .cells import SheetError, returns_column, sheet_function, text_arg
from .cells import int_arg
from .fittable import decode, encode

__all__ = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK", "fit_from_cells"]

_SERIES_WHAT = ("variance", "vol", "resid", "stdresid")
_FORECAST_WHAT = ("variance", "vol", "cumvar", "cumvol", "mean", "table")


def _choice(value, arg, choices, default):
    s = text_arg(value, arg, default)
    s = s.lower()
    if s not in choices:
        raise SheetError(f'{arg} must be one of {", ".join(choices)}; got "{s}"')
    return s


def fit_from_cells(returns, model=None, dist=None, options=None):
    """Clean the arguments of VOLFIT and return (FitResult, Returns), using the fit cache."""
    spec = parse_model(text_arg(model, "model"))
    dname = text_arg(dist, "dist", "normal")
    d = get_distribution(dname)
    opts = parse_options(text_arg(options, "options"))
    data = returns_column(returns, "returns", opts.missing)
    key = FIT_CACHE.key(data.values, spec.canonical, d.name, opts.estimation_key)
    result = FIT_CACHE.get_or_fit(key, lambda: core_fit(data.values, spec, d, opts))
    if result.options != opts:
        result = dataclasses.replace(result, options=opts)
    return result, data


@sheet_function
def VOLFIT(returns, model=None, dist=None, options=None):
    """Estimate an ARCH/GARCH-family model by maximum likelihood; returns the fit table."""
    result, _ = fit_from_cells(returns, model, dist, options)
    return encode(result)


def _table_and_returns(returns, fit):
    table = decode(fit, "fit")
    data = returns_column(returns, "returns", table.options.missing)
    spec = table.spec
    if len(data.values) < spec.ar + spec.arch_lags + 2:
        raise SheetError(f"returns: {spec.canonical} needs at least {spec.ar + spec.arch_lags + 2} numbers, got {len(data.values)}")
    if np.ptp(data.values) == 0 and spec.variance != "constant":
        raise SheetError("returns are all the same number; a constant series has no variance to model")
    result = evaluate(data.values, table.spec, table.dist, table.names, table.params, table.options)
    return table, data, result


@sheet_function
def VOLSERIES(returns, fit, what=None):
    """In-sample conditional variance (or vol, resid, stdresid), one value per return row."""
    w = _choice(what, "what", _SERIES_WHAT, "variance")
    _, data, result = _table_and_returns(returns, fit)
    resid, var, _ = in_sample(result, data.values)
    with np.errstate(all="ignore"):
        series = {
            "variance": var,
            "vol": np.sqrt(var),
            "resid": resid,
            "stdresid": resid / np.sqrt(var),
        }[w]
    return data.spread(series)


@sheet_function
def VOLFORECAST(returns, fit, horizon=None, what=None):
    """Forecast h = 1..horizon steps ahead: variance (default), vol, cumvar, cumvol, mean or table."""
    h = int_arg(horizon, "horizon", 1, MAX_HORIZON)
    w = _choice(what, "what", _FORECAST_WHAT, "variance")
    table, data, result = _table_and_returns(returns, fit)
    fc = core_forecast(result, data.values, h, seed=table.options.seed, paths=table.options.paths)
    if not (np.all(np.isfinite(fc.variance)) and np.all(np.isfinite(fc.cumvar)) and np.all(np.isfinite(fc.mean))):
        bad = int(np.flatnonzero(~np.isfinite(fc.cumvar))[0]) + 1 if not np.all(np.isfinite(fc.cumvar)) else 1
        raise SheetError(
            f"the forecast overflows at step {bad}: the fit's parameters make the variance explode "
            "(check persistence and omega)"
        )
    if w == "table":
        rows = [["step", "mean", "variance", "vol", "cumvar"]]
        for i in range(h):
            rows.append([i + 1, float(fc.mean[i]), float(fc.variance[i]), float(fc.vol[i]), float(fc.cumvar[i])])
        return rows
    col = {"variance": fc.variance, "vol": fc.vol, "cumvar": fc.cumvar, "cumvol": fc.cumvol, "mean": fc.mean}[w]
    return [[float(v)] for v in col]


@sheet_function
def VOLLOGLIK(returns, fit):
    """Log-likelihood of the returns at the fit table's parameters, under its options."""
    _, _, result = _table_and_returns(returns, fit)
    ll = result.loglik
    if not np.isfinite(ll):
        raise SheetError("the log-likelihood is not finite at these parameters (a variance reached zero)")
    return [[float(ll)]]
