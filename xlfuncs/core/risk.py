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

Where the model's moments run out (EGARCH with Student-t or skewed-t shocks: E exp(c|z|) is
infinite, so E[sigma^2_{T+h}] and E[sigma_{T+h}] are infinite for h >= 2), ``sd`` and ``es``
are +inf with ``sd_note`` and ``es_note`` saying why: the tail mean of R does not exist, and a
simulated one would show a finite number.  VaR, a quantile, exists and is simulated as usual,
and so are ``var_value`` and ``es_value``: the value loss is bounded by the position's value.
An in-mean model's ``mean`` (lambda_m times the volatility forecasts) is then infinite too, with
``mean_note``.

Loss as a percentage of the position's value
--------------------------------------------
When the fit's options say how the returns are defined (``returns=log100``, ``log``,
``simple100`` or ``simple``), ``var_value`` and ``es_value`` give the same two measures for
the change in the position's value over the horizon, V = (value at T+h) / (value at T) - 1,
as positive percentages of the value:

* log returns (c = 1/100 for ``log100``, 1 for ``log``): V = exp(c R) - 1.  VaR_value =
  100 (1 - exp(-c VaR)), exact because the map is monotone.  ES_value = 100 E[1 - exp(c R) |
  R <= -VaR], the mean of the value loss over the tail -- smaller than the transform of ES
  (Jensen).  At horizon 1, R = m + s z and the tail mean is a one-dimensional integral over
  the fitted density of z, computed by adaptive quadrature; beyond, it is the mean over the
  simulated tail paths.
* simple returns: V = prod_t (1 + c r[T+t]) - 1.  At horizon 1 that is c R, so VaR_value and
  ES_value are VaR and ES times 100 c.  Beyond, VaR_value and ES_value are the empirical
  quantile and tail mean of V over the simulated paths (a factor 1 + c r below zero, a loss
  beyond the whole value, counts as 0: the position is gone).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np
from scipy import integrate

from .errors import InputError
from .forecast import DEFAULT_PATHS, DEFAULT_SEED, MAX_HORIZON, forecast
from .simulate import forward_steps
from .spec import RETURN_DEFINITIONS

__all__ = ["Risk", "risk", "DEFAULT_PATHS", "MIN_PATHS", "MAX_PATHS", "RETURN_DEFINITIONS"]

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
    # the same measures as a percentage of the position's value (None when ``returns`` is None)
    var_value: float | None = None
    es_value: float | None = None
    returns: str | None = None  # how the returns are defined: log100, log, simple100, simple
    # why ``sd`` (E[sigma^2] beyond some step) or ``es`` (E[sigma]) is infinite; None where finite
    sd_note: str | None = None
    es_note: str | None = None
    # why ``mean`` is infinite (an in-mean term at a volatility forecast that does not exist)
    mean_note: str | None = None


#: c in V = exp(c R) - 1 (log) or V = c R (simple, one period): the returns' unit as a fraction
_UNIT = {"log100": 0.01, "log": 1.0, "simple100": 0.01, "simple": 1.0}


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


def _check_returns(returns) -> str:
    if not (isinstance(returns, str) and returns.strip().lower() in RETURN_DEFINITIONS):
        raise InputError(f"returns must be one of {', '.join(RETURN_DEFINITIONS)}, got {returns!r}")
    return returns.strip().lower()


def _log_tail_value_loss(dist, eta, m: float, s: float, c: float, zq: float, a: float) -> float:
    """E[1 - exp(c (m + s z)) | z <= zq] * P(z <= zq) / a for z with the fitted density.

    The integrand -expm1(c (m + s z)) f(z) is bounded by max(1, exp(c (m + s zq))) times the
    density on the lower tail, so the integral is finite for every family, Student t included.
    """
    def integrand(z: float) -> float:
        return -math.expm1(c * (m + s * z)) * math.exp(float(dist.logpdf(np.array(z), eta)))

    val, _ = integrate.quad(integrand, -math.inf, zq, epsabs=0.0, epsrel=1e-12, limit=200)
    return val / a


def risk(fit, r, level=0.99, horizon=1, paths=None, seed=None, returns=None, X=None, Xf=None) -> Risk:
    """VaR and expected shortfall of the sum of the next ``horizon`` returns after ``r``.

    ``fit`` is a :class:`~xlfuncs.core.estimate.FitResult` and ``r`` the returns it describes
    (most recent last).  ``level`` is the confidence, 0.5 <= level < 1.  At horizon 1 the
    figures are exact under the fitted distribution; beyond, they come from ``paths``
    simulated paths (default :data:`DEFAULT_PATHS`) drawn with ``seed`` (default
    :data:`~xlfuncs.core.forecast.DEFAULT_SEED`), so the same inputs give the same numbers.
    ``mean`` and ``sd`` are always the analytic forecast's (exact for every family with a
    closed-form variance forecast, EGARCH's included).

    ``returns`` (``log100``, ``log``, ``simple100`` or ``simple``; default: the fit's
    ``options.returns``) says how the returns are defined; when it is known, ``var_value`` and
    ``es_value`` carry the loss as a percentage of the position's value (module docstring).

    ``X`` are the regressors of the sample and ``Xf`` their values over the next ``horizon``
    periods (one row each), for a fit with regressors.  An in-mean fit's one-period figures are
    exact too: sigma[T+1] is known at T.
    """
    level = _check_level(level)
    horizon = _whole(horizon, "horizon", 1, MAX_HORIZON)
    paths = DEFAULT_PATHS if paths is None else _whole(paths, "paths", MIN_PATHS, MAX_PATHS)
    seed = DEFAULT_SEED if seed is None else _whole(seed, "seed", 0, _MAX_SEED)
    if returns is None:
        returns = getattr(getattr(fit, "options", None), "returns", None)
    defn = None if returns is None else _check_returns(returns)
    c = _UNIT.get(defn)
    is_log = defn in ("log100", "log")

    nd = len(fit.dist.param_names)
    params = np.asarray(fit.params, dtype=float)
    eta = params[len(params) - nd:]

    fc = forecast(fit, r, horizon, seed=seed, paths=paths, X=X, Xf=Xf)
    mean = float(np.sum(fc.mean))
    sd = math.sqrt(float(fc.cumvar[-1]))
    sd_note = fc.why if fc.finite_steps is not None and fc.finite_steps < horizon else None
    mean_note = fc.why if sd_note is not None and not math.isfinite(mean) else None
    # ES is the mean of the tail: it exists only where every E[sigma_{T+h}] does
    vp = np.array([params[list(fit.names).index(n)] for n in fit.spec.variance_names], dtype=float)
    _, es_note = fit.spec.family.moment_horizon(vp, eta, fit.dist, horizon, power=0.5)

    var_value = es_value = None
    if horizon == 1:
        q = float(fit.dist.ppf(1.0 - level, eta))
        var = -(mean + sd * q)
        es = -mean + sd * float(fit.dist.expected_shortfall(level, eta))
        method = f"exact (fitted {fit.dist.name} distribution)"
        if is_log:
            var_value = -100.0 * math.expm1(-c * var)
            es_value = 100.0 * _log_tail_value_loss(fit.dist, eta, mean, sd, c, q, 1.0 - level)
        elif defn == "simple100":  # already percent of value
            var_value, es_value = var, es
        elif defn == "simple":
            var_value, es_value = 100.0 * var, 100.0 * es
    else:
        rng = np.random.default_rng(seed)
        cum = np.zeros(paths)
        # log of the value factor prod (1 + c r), for simple returns only
        log_factor = np.zeros(paths) if defn in ("simple100", "simple") else None
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            for ret, _ in forward_steps(fit, r, horizon, paths, rng, X, Xf):
                cum += ret
                if log_factor is not None:
                    log_factor += np.log1p(np.maximum(c * ret, -1.0))  # a factor below 0 is the value gone
        cut = float(np.quantile(cum, 1.0 - level))
        var = -cut
        es = -float(np.mean(cum[cum <= cut]))
        method = f"simulation ({paths} paths, seed {seed})"
        if is_log:
            var_value = -100.0 * math.expm1(-c * var)
            with np.errstate(over="ignore"):
                es_value = -100.0 * float(np.mean(np.expm1(c * cum[cum <= cut])))
        elif log_factor is not None:
            with np.errstate(invalid="ignore"):
                change = np.expm1(log_factor)  # V = value(T+h)/value(T) - 1
            vcut = float(np.quantile(change, 1.0 - level))
            var_value = -100.0 * vcut
            es_value = -100.0 * float(np.mean(change[change <= vcut]))
    if es_note is not None:
        es = math.inf  # a simulated tail mean would show a finite number for an infinite one
    return Risk(var=float(var), es=float(es), mean=mean, sd=sd, level=level, horizon=horizon, method=method,
                var_value=None if var_value is None else float(var_value),
                es_value=None if es_value is None else float(es_value), returns=defn,
                sd_note=sd_note, es_note=es_note, mean_note=mean_note)
