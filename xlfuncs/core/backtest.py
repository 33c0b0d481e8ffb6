"""Walk-forward evaluation of one-step variance and VaR forecasts.

From observation ``window`` on, the model is estimated on a rolling window of the last
``window`` returns (``scheme="rolling"``) or on all returns so far (``"expanding"``), every
``refit`` periods; between refits the last estimate is kept and only the recursions move on.
Each step forecasts the next period's mean, variance and VaR at ``level`` and compares them
with what happened.  Given parameters (a fit table) are never re-estimated.

Losses of the variance forecast h against the squared forecast error e^2 (common practice):
QLIKE = ln h + e^2 / h and MSE = (e^2 - h)^2, both averaged over the forecasts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .coverage import Coverage, coverage
from .errors import InputError
from .estimate import evaluate, fit
from .forecast import forecast
from .mean import check_regressors, layout

__all__ = ["Backtest", "backtest"]


@dataclass
class Backtest:
    index: np.ndarray  # 0-based position of each forecast return
    mean: np.ndarray
    variance: np.ndarray
    var: np.ndarray  # VaR, a positive loss
    actual: np.ndarray
    exception: np.ndarray
    coverage: Coverage
    qlike: float
    mse: float
    fits: int  # estimations made


def backtest(r, spec, dist, options, window: int, level: float = 0.99, scheme: str = "rolling",
             refit: int = 1, params=None, progress=None, X=None) -> Backtest:
    """Walk forward over ``r`` (module docstring).  ``X``: the regressors, one row per return; each
    forecast reads the regressors' row of the return it forecasts."""
    r = np.asarray(r, dtype=float)
    T = len(r)
    spec = layout(spec, X, options.xvar)
    X = check_regressors(X, T, spec)
    if scheme not in ("rolling", "expanding"):
        raise InputError(f"scheme must be rolling or expanding, got {scheme}")
    if not (isinstance(window, int) and spec.min_obs <= window < T):
        raise InputError(f"window must be a whole number from {spec.min_obs} (the least {spec.canonical} can be "
                         f"estimated on) to {T - 1} (one less than the returns), got {window}")
    if not (isinstance(refit, int) and refit >= 1):
        raise InputError(f"refit must be a whole number of periods, 1 or more, got {refit}")
    if not (0.5 <= level < 1):
        raise InputError(f"level must be between 0.5 and 1, e.g. 0.99, got {level}")
    names = tuple(spec.param_names) + tuple(dist.param_names)
    if params is not None and len(params) != len(names):
        raise InputError(f"{spec.canonical} with {dist.name} shocks takes {len(names)} parameters, got {len(params)}")
    nd = len(dist.param_names)
    steps = T - window
    mean, var_, vr = np.empty(steps), np.empty(steps), np.empty(steps)
    theta = None if params is None else np.asarray(params, dtype=float)
    fits = 0
    for i, t in enumerate(range(window, T)):
        start = t - window if scheme == "rolling" else 0
        sample = r[start:t]
        xs, xf = (None, None) if X is None else (X[start:t], X[t:t + 1])
        if params is None and (theta is None or i % refit == 0):
            theta = fit(sample, spec, dist, options, xs).params
            fits += 1
        state = evaluate(sample, spec, dist, names, theta, options, xs)
        fc = forecast(state, sample, 1, seed=options.seed, paths=options.paths, X=xs, Xf=xf)
        eta = theta[len(theta) - nd:]
        mean[i], var_[i] = fc.mean[0], fc.variance[0]
        vr[i] = -(fc.mean[0] + math.sqrt(fc.variance[0]) * float(dist.ppf(1 - level, eta)))
        if progress is not None:
            progress(i + 1, steps)
    actual = r[window:]
    cov = coverage(actual, vr, level)
    e2 = (actual - mean) ** 2
    return Backtest(index=np.arange(window, T), mean=mean, variance=var_, var=vr, actual=actual,
                    exception=actual < -vr, coverage=cov, qlike=float(np.mean(np.log(var_) + e2 / var_)),
                    mse=float(np.mean((e2 - var_) ** 2)), fits=fits)
