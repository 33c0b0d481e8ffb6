"""Walk-forward evaluation of one-step variance and VaR forecasts.

From observation ``window`` on, the model is estimated on a rolling window of the last
``window`` returns (``scheme="rolling"``) or on all returns so far (``"expanding"``), every
``refit`` periods; between refits the last estimate is kept and only the recursions move on.
Each step forecasts the next period's mean, variance and VaR at ``level`` and compares them
with what happened.  Given parameters (a fit table) are never re-estimated.

Between refits the parameters are fixed, so where the model allows it (the family's
``window_forecasts`` and residuals that do not depend on where a window starts) the forecasts of
all the steps that share one estimate come from one pass over the series, each the number
re-filtering its window gives (the window's own presample included); elsewhere each window is
re-filtered.

Losses of the variance forecast h against the squared forecast error e^2 (common practice):
QLIKE = ln h + e^2 / h and MSE = (e^2 - h)^2, both averaged over the forecasts.

Each step also forecasts the expected shortfall at ``level`` from the fitted distribution,
ES = -mean + vol * ES_z(level), and the ES series is backtested by the tests of
:mod:`xlfuncs.core.esbacktest` (residuals standardised by the forecast volatility, Z2's
p-value simulated under the fitted distribution with each step's shape parameters).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .coverage import Coverage, coverage
from .errors import InputError, value_words
from .esbacktest import ESTests, es_tests
from .estimate import check_params, evaluate, fit
from .forecast import forecast
from .likelihood import Likelihood
from .mean import check_regressors, layout

__all__ = ["Backtest", "backtest", "check_length"]


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
    es: np.ndarray | None = None  # expected shortfall, a positive loss
    es_tests: ESTests | None = None
    es_reason: str = ""  # why the ES tests were not computed (es_tests None), e.g. an ES forecast <= 0

    @property
    def qlike_series(self) -> np.ndarray:
        """QLIKE loss of each forecast, ln h + e^2 / h."""
        return np.log(self.variance) + (self.actual - self.mean) ** 2 / self.variance


def check_length(T: int, spec) -> None:
    """Refuse a series too short for any walk-forward backtest of ``spec``: the smallest window
    (the fewest returns the model is estimated on) plus one return to forecast."""
    need = spec.min_obs + 1
    if T < need:
        raise InputError(f"returns: {T} number{'s are' if T != 1 else ' is'} too few for a backtest of "
                         f"{spec.canonical}; it needs at least {need} (a window of {spec.min_obs}, the fewest "
                         f"{spec.canonical} is estimated on, and one return to forecast)")


def backtest(r, spec, dist, options, window: int, level: float = 0.99, scheme: str = "rolling",
             refit: int = 1, params=None, progress=None, X=None, refilter: bool = False) -> Backtest:
    """Walk forward over ``r`` (module docstring).  ``X``: the regressors, one row per return; each
    forecast reads the regressors' row of the return it forecasts.  ``refilter``: re-filter every
    window even where one pass over the series gives the same forecasts (for comparisons)."""
    r = np.asarray(r, dtype=float)
    T = len(r)
    spec = layout(spec, X, options.xvar)
    X = check_regressors(X, T, spec)
    if scheme not in ("rolling", "expanding"):
        raise InputError(f"scheme must be rolling or expanding, got {value_words(scheme)}")
    check_length(T, spec)
    if not (isinstance(window, int) and spec.min_obs <= window < T):
        raise InputError(f"window must be a whole number from {spec.min_obs} (the least {spec.canonical} can be "
                         f"estimated on) to {T - 1} (one less than the returns), got {value_words(window)}")
    if not (isinstance(refit, int) and refit >= 1):
        raise InputError(f"refit must be a whole number of periods, 1 or more, got {value_words(refit)}")
    if not (0.5 <= level < 1):
        raise InputError(f"level must be between 0.5 and 1, e.g. 0.99, got {value_words(level)}")
    names = tuple(spec.param_names) + tuple(dist.param_names)
    if params is not None and len(params) != len(names):
        raise InputError(f"{spec.canonical} with {dist.name} shocks takes {len(names)} parameters, got {len(params)}")
    nd = len(dist.param_names)
    steps = T - window
    mean, var_, vr = np.empty(steps), np.empty(steps), np.empty(steps)
    etas = np.empty((steps, nd))
    theta = None if params is None else np.asarray(params, dtype=float)
    if theta is not None:
        check_params(spec, dist, names, theta)
    fits = 0
    one = None if refilter else _one_pass(r, X, spec, dist, options)
    blocks = []  # (first step, returns rows estimated on, converged) of each parameter vector
    i = 0
    while i < steps:  # blocks of steps that share one parameter vector
        i1 = steps if params is not None else min(steps, i + refit)
        t = window + i
        start = t - window if scheme == "rolling" else 0
        if params is None:
            xs = None if X is None else X[start:t]
            est = fit(r[start:t], spec, dist, options, xs)
            theta = est.params
            fits += 1
            blocks.append((i, (start + 1, t), bool(est.converged)))
        eta = theta[len(theta) - nd:]
        etas[i:i1] = eta
        if one is not None:
            _one_filter(one, spec, options, theta, window, scheme, i, i1, mean, var_)
            if progress is not None:
                progress(i1, steps)
        else:
            for k in range(i, i1):
                t = window + k
                start = t - window if scheme == "rolling" else 0
                sample = r[start:t]
                xs, xf = (None, None) if X is None else (X[start:t], X[t:t + 1])
                state = evaluate(sample, spec, dist, names, theta, options, xs)
                fc = forecast(state, sample, 1, seed=options.seed, paths=options.paths, X=xs, Xf=xf)
                mean[k], var_[k] = fc.mean[0], fc.variance[0]
                if progress is not None:
                    progress(k + 1, steps)
        vr[i:i1] = -(mean[i:i1] + np.sqrt(var_[i:i1]) * float(dist.ppf(1 - level, eta)))
        i = i1
    bad = ~(np.isfinite(var_) & np.isfinite(vr) & np.isfinite(mean))
    if bad.any():
        # a forecast that is not a number is no forecast: coverage tests over it would count it
        # as a day without an exception.  Say where, and from which estimate
        k = int(np.flatnonzero(bad)[0])
        row = window + k + 1
        if params is not None:
            raise InputError(f"the one-step forecast of returns row {row} is not a number ({int(bad.sum())} of {steps} "
                             "forecasts): the parameters given make the variance explode on that window; check them")
        first, (lo, hi), converged = max((b for b in blocks if b[0] <= k), key=lambda b: b[0])
        how = "" if converged else " (that fit did not converge)"
        raise InputError(f"the one-step forecast of returns row {row} is not a number ({int(bad.sum())} of {steps} "
                         f"forecasts): the parameters estimated on returns rows {lo}-{hi}{how} make the variance "
                         f"explode on the windows that follow; use a smaller refit (refit=1 re-estimates every "
                         "window), a longer window, or another model")
    actual = r[window:]
    cov = coverage(actual, vr, level)
    e2 = (actual - mean) ** 2
    es = _es_forecasts(dist, etas, level, mean, var_)
    tests, reason = None, ""
    try:
        tests = es_tests(actual, vr, es, level, mean=mean, sd=np.sqrt(var_), dist=dist, eta=etas)
    except InputError as exc:  # e.g. an ES forecast that is a gain: the coverage tests still stand
        reason = str(exc)
    return Backtest(index=np.arange(window, T), mean=mean, variance=var_, var=vr, actual=actual,
                    exception=actual < -vr, coverage=cov, qlike=float(np.mean(np.log(var_) + e2 / var_)),
                    mse=float(np.mean((e2 - var_) ** 2)), fits=fits, es=es, es_tests=tests,
                    es_reason=reason)


def _one_pass(r, X, spec, dist, options):
    """The likelihood over the whole series when one pass over it gives every window's one-step
    forecasts: the mean's residuals do not depend on where a window starts
    (:attr:`MeanModel.window_free`) and the family gives the one-step variance after many windows
    at once (``window_forecasts``), each the number re-filtering that window gives.  None where
    each window must be re-filtered."""
    if not spec.family.window_forecasts or spec.in_mean:
        return None
    lik = Likelihood(r, spec, dist, options.presample, X)
    return lik if lik.mean.window_free else None


def _one_filter(lik, spec, options, theta, window, scheme, i0, i1, mean, variance) -> None:
    """Fill ``mean`` and ``variance`` of steps i0..i1-1 (one parameter vector) from one pass over
    the series' likelihood ``lik`` (:func:`_one_pass`)."""
    e, _ = lik.residuals(theta)
    a = lik.a
    ts = np.arange(window + i0, window + i1)  # the forecast returns
    starts = ts - window if scheme == "rolling" else np.zeros(len(ts), dtype=int)
    _, _, _, vp, _ = lik.split(theta)
    shift = None
    if spec.xvar:  # the variance regressors' term on every residual position
        shift = lik.X[a:, [k - 1 for k in spec.xvar]] @ theta[lik._ss]
        # the positions these windows and forecasts read must keep the intercept in its domain
        lo = int(starts[0]) + lik.s0
        bad = spec.family.bad_shift(vp, shift[lo: int(ts[-1]) - a + 1])
        if bad.any():
            row = lo + int(np.flatnonzero(bad)[0]) + a + 1
            raise InputError(f"the variance intercept omega + {' + '.join(spec.shift_names)} x (regressor) is not "
                             f"above zero at returns row {row}; the variance would not stay positive. Keep "
                             "omega + sum v[k] Z[t,k] above zero at every row (e.g. regressors of one sign with "
                             "v[k] >= 0)")
    # residual index k is return k + a: a window of returns [start, t) has residuals [start, t - a).
    # Only the residuals from the first window's start to the last forecast are read: the family
    # filters that stretch alone (each window's forecast depends on its own residuals only)
    ends = ts - a
    lo, hi = int(starts[0]), int(ends[-1]) + 1
    part = None if shift is None else shift[lo:hi]
    variance[i0:i1] = spec.family.window_forecast(vp, e[lo:hi], starts - lo, ends - lo, options.presample,
                                                  shift=part)
    mean[i0:i1] = lik.mean.fitted(theta[:lik.n_mean], ts - a)


def _es_forecasts(dist, etas, level, mean, variance) -> np.ndarray:
    """-mean + vol * ES_z(level) per step, ES_z once per distinct set of shape parameters."""
    cache = {}
    es_z = np.empty(len(mean))
    for i, row in enumerate(map(tuple, etas)):
        if row not in cache:
            cache[row] = float(dist.expected_shortfall(level, np.array(row)))
        es_z[i] = cache[row]
    return -mean + np.sqrt(variance) * es_z
