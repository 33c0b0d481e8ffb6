"""Value-at-Risk and expected shortfall of the cumulative return over the next periods.

Both measures are *losses*, positive numbers in the units of the returns.  For the sum
R = r[T+1] + ... + r[T+h] of the next ``h`` returns and a confidence ``level`` (e.g. 0.99):

* VaR = -(the 1 - level quantile of R): the loss exceeded with probability 1 - level;
* ES = -E[R | R <= -VaR]: the mean loss on the days beyond the VaR.

=============  ====================================================================
horizon        how
=============  ====================================================================
1              exact: R = m + s z with the one-step mean forecast m, the one-step
               volatility forecast s and z from the fitted distribution, so
               VaR = -(m + s ppf(1 - level)) and ES = -m + s ES_z(level)
2 and more     seeded simulation of ``paths`` future paths that continue the fitted
               recursions from the end of the sample (:func:`simulate_forward`);
               VaR and ES are the empirical quantile and tail mean of the simulated
               cumulative returns
=============  ====================================================================

The ``mean`` and ``sd`` reported with them are those of R from the analytic forecast (the
sum of the mean forecasts and the square root of the cumulative variance), not from the
simulated paths.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .forecast import DEFAULT_PATHS, DEFAULT_SEED, MAX_HORIZON, forecast
from .simulate import forward_steps

__all__ = ["Risk", "risk", "DEFAULT_PATHS", "MIN_PATHS", "MAX_PATHS"]

MIN_PATHS = 1000
MAX_PATHS = 1_000_000
_MAX_SEED = 2**31 - 1


@dataclass
class Risk:
    """Risk figures of the cumulative return over ``horizon`` periods (losses positive)."""

    var: float  # Value-at-Risk
    es: float  # expected shortfall
    mean: float  # mean of the cumulative return (analytic forecast)
    sd: float  # its standard deviation (analytic forecast)
    level: float
    horizon: int
    method: str


def _real(x) -> float | None:
    """``x`` as a float if it is a real number (not a bool), else None."""
    if isinstance(x, bool) or not isinstance(x, numbers.Real):
        return None
    return float(x)


def _whole(x, name: str, lo: int, hi: int) -> int:
    v = _real(x)
    if v is None or not (math.isfinite(v) and v.is_integer() and lo <= v <= hi):
        raise InputError(f"{name} must be a whole number from {lo} to {hi}, got {x!r}")
    return int(v)


def _check_level(level) -> float:
    v = _real(level)
    if v is None or not (0.5 <= v < 1.0):  # also rejects nan
        raise InputError(f"level must be between 0.5 and 1, e.g. 0.99, got {level!r}")
    return v


def risk(fit, r, level=0.99, horizon=1, paths=None, seed=None) -> Risk:
    """VaR and expected shortfall of the sum of the next ``horizon`` returns after ``r``.

    ``fit`` is a :class:`~xlfuncs.core.estimate.FitResult` and ``r`` the returns it describes
    (most recent last).  ``level`` is the confidence, 0.5 <= level < 1.  At horizon 1 the
    figures are exact under the fitted distribution; beyond, they come from ``paths``
    simulated paths (default :data:`DEFAULT_PATHS`) drawn with ``seed`` (default
    :data:`~xlfuncs.core.forecast.DEFAULT_SEED`), so the same inputs give the same numbers.
    ``mean`` and ``sd`` are always the analytic forecast's (exact for every family but
    EGARCH, whose variance forecast is itself the seeded simulation average).
    """
    level = _check_level(level)
    horizon = _whole(horizon, "horizon", 1, MAX_HORIZON)
    paths = DEFAULT_PATHS if paths is None else _whole(paths, "paths", MIN_PATHS, MAX_PATHS)
    seed = DEFAULT_SEED if seed is None else _whole(seed, "seed", 0, _MAX_SEED)

    nd = len(fit.dist.param_names)
    params = np.asarray(fit.params, dtype=float)
    eta = params[len(params) - nd:]

    fc = forecast(fit, r, horizon, seed=seed, paths=paths)
    mean = float(np.sum(fc.mean))
    sd = math.sqrt(float(fc.cumvar[-1]))

    if horizon == 1:
        q = float(fit.dist.ppf(1.0 - level, eta))
        var = -(mean + sd * q)
        es = -mean + sd * float(fit.dist.expected_shortfall(level, eta))
        method = f"exact (fitted {fit.dist.name} distribution)"
    else:
        rng = np.random.default_rng(seed)
        cum = np.zeros(paths)
        with np.errstate(over="ignore", invalid="ignore"):
            for ret, _ in forward_steps(fit, r, horizon, paths, rng):
                cum += ret
        cut = float(np.quantile(cum, 1.0 - level))
        var = -cut
        es = -float(np.mean(cum[cum <= cut]))
        method = f"simulation ({paths} paths, seed {seed})"
    return Risk(var=float(var), es=float(es), mean=mean, sd=sd, level=level, horizon=horizon, method=method)
