"""Multi-step forecasts of the mean and the conditional variance.

* ``variance[h]`` is the forecast made at the end of the sample of the conditional variance
  sigma^2 of the shock h steps ahead, as the model's variance family computes it: the
  families linear in lagged squares by the analytic recursion with E[e^2] = sigma^2 and
  E[1(e<0) e^2] = kappa sigma^2, where kappa = E[z^2 1(z<0)] of the fitted distribution (1/2
  for the symmetric ones); EGARCH by Nelson's (1991) product of moment generating values; a
  family with no closed form by averaging seeded simulated paths.  Where E[sigma^2] does not
  exist beyond some step (EGARCH with Student-t shocks: beyond the first), the forecast is +inf
  there and ``why`` says so (the family's ``moment_horizon``).
* ``longrun[h]`` is the forecast of the variance's long-run component h steps ahead, for a
  family that has one (the component model); None for the others.
* ``mean[h]`` is the mean forecast of the mean model (:mod:`xlfuncs.core.mean`): the ARMA part
  with future shocks at zero, the mean regressors at their given future values, and for an
  in-mean model lambda_m times the volatility forecast -- exact at h = 1 (sigma[T+1] is known at
  T), and beyond it the usual plug-in sqrt(variance[h]) for E[sigma[T+h]] (+inf, or -inf for
  lambda_m < 0, where the variance forecast is +inf).
* Variance regressors enter the variance forecast at their given future values.
* ``cumvar[h]`` is the variance of the sum of the next h returns, the ARMA propagation of each
  shock included: with psi_j the MA(infinity) weights and Psi_n = psi_0 + ... + psi_n,
  cumvar[h] = sum_{m=1..h} variance[m] * Psi_{h-m}^2.  (For an in-mean model it leaves out the
  variability of the future in-mean terms lambda_m sigma[T+m], m >= 2; the simulated risk
  figures beyond one period include it.)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError, value_words
from .families import FAMILIES, History
from .likelihood import Likelihood
from .mean import regressor_list

__all__ = ["Forecast", "forecast", "in_sample", "long_run_in_sample", "require_long_run", "psi_weights",
           "future_regressors", "future_shift", "DEFAULT_SEED", "DEFAULT_PATHS", "MAX_HORIZON"]

DEFAULT_SEED = 20240531
DEFAULT_PATHS = 20000
MAX_HORIZON = 600


@dataclass
class Forecast:
    mean: np.ndarray
    variance: np.ndarray
    cumvar: np.ndarray
    method: str
    longrun: np.ndarray | None = None  # the long-run component's forecasts (component models only)
    #: E[sigma^2] exists for steps 1..finite_steps only (None: for every step); ``variance`` and
    #: ``cumvar`` are +inf beyond, and ``why`` says why in a user's words
    finite_steps: int | None = None
    why: str | None = None

    @property
    def vol(self):
        return np.sqrt(self.variance)

    @property
    def cumvol(self):
        return np.sqrt(self.cumvar)


def in_sample(fit, r, X=None):
    """Residuals and conditional variances aligned with the returns (nan where undefined).

    ``X``: the regressors, one row per return, for a fit with regressors."""
    r = np.asarray(r, dtype=float)
    lik = Likelihood(r, fit.spec, fit.dist, fit.options.presample, X)
    e, sig2 = lik.series(fit.params)
    T = len(r)
    resid = np.full(T, np.nan)
    resid[lik.a:] = e
    var = np.full(T, np.nan)
    var[lik.a + lik.s0:] = sig2
    return resid, var, lik


def _no_long_run(spec) -> InputError:
    have = [cls(*cls.default_orders).canonical for cls in FAMILIES.values() if cls.has_long_run]
    example = f"a component model such as {have[0]}" if have else "a component model"
    return InputError(f"what=longrun needs {example}; {spec.canonical} has no long-run component")


def long_run_in_sample(fit, r, X=None):
    """The long-run component of the conditional variance aligned with the returns (nan where
    undefined); InputError for a model without one.  ``X``: the regressors, as for :func:`in_sample`."""
    spec = fit.spec
    require_long_run(spec)
    r = np.asarray(r, dtype=float)
    lik = Likelihood(r, spec, fit.dist, fit.options.presample, X)
    theta = np.asarray(fit.params, dtype=float)
    e, _ = lik.residuals(theta)
    _, _, _, vp, eta = lik.split(theta)
    q = spec.family.long_run(vp, e, fit.options.presample, eta, fit.dist)
    out = np.full(len(r), np.nan)
    out[lik.a + lik.s0:] = q
    return out


def psi_weights(phi, theta, n: int) -> np.ndarray:
    """MA(infinity) weights psi_0..psi_{n-1} of an ARMA(p,q) with AR phi and MA theta."""
    psi = np.zeros(n)
    psi[0] = 1.0
    for j in range(1, n):
        v = theta[j - 1] if j - 1 < len(theta) else 0.0
        for i in range(1, min(j, len(phi)) + 1):
            v += phi[i - 1] * psi[j - i]
        psi[j] = v
    return psi


def future_regressors(spec, Xf, horizon: int, need: str = "forecast"):
    """The regressors' future values as an (horizon x K) array, or None for a model without
    regressors; InputError saying what is missing."""
    K = spec.n_regressors
    if not K:
        if Xf is not None:
            raise InputError("future regressor values are given but the fit has no regressors; leave them out")
        return None
    s = "s" if K > 1 else ""
    if Xf is None:
        raise InputError(f"this fit has {K} regressor{s} ({regressor_list(spec)}); the {need} needs their future values: "
                         f"{horizon} row{'s' if horizon > 1 else ''} (one per step) and {K} column{s}")
    Xf = np.asarray(Xf, dtype=float)
    if Xf.ndim == 1:
        Xf = Xf[:, None] if K == 1 else Xf[None, :]
    if Xf.shape[1] != K:
        raise InputError(f"the future regressor values have {Xf.shape[1]} column{'s' if Xf.shape[1] != 1 else ''} but the fit "
                         f"has {K} regressor{s} ({regressor_list(spec)}); give one column per regressor")
    if Xf.shape[0] < horizon:
        raise InputError(f"the {need} needs future regressor values for {horizon} step{'s' if horizon > 1 else ''}, "
                         f"got {Xf.shape[0]} row{'s' if Xf.shape[0] != 1 else ''}; give one row per step")
    Xf = Xf[:horizon]
    bad = ~np.isfinite(Xf)
    if bad.any():
        i, k = map(int, np.argwhere(bad)[0])
        raise InputError(f"future regressor values: row {i + 1}, column {k + 1} is not a finite number")
    return Xf


def future_shift(lik, theta, Xf):
    """The variance regressors' term at the future steps (None without variance regressors);
    InputError where it leaves the family's intercept out of its domain."""
    spec = lik.spec
    if not spec.xvar:
        return None
    shift = Xf[:, [k - 1 for k in spec.xvar]] @ theta[lik._ss]
    bad = lik.family.bad_shift(theta[lik._vs], shift)
    if bad.any():
        h = int(np.flatnonzero(bad)[0]) + 1
        raise InputError(f"the variance intercept omega + {' + '.join(spec.shift_names)} x (regressor) is not above zero "
                         f"at future step {h}; the variance would not stay positive")
    return shift


def forecast(fit, r, horizon: int, seed: int | None = None, paths: int | None = None, X=None, Xf=None,
             mean: bool = True) -> Forecast:
    """Forecasts for steps 1..horizon after the returns ``r``.

    ``X`` are the regressors of the sample (one row per return) and ``Xf`` their future values
    (one row per step) for a fit with regressors.  With ``mean=False`` the mean forecast is left
    out (zeros), and a model whose only regressors enter the mean needs no future values.
    """
    if not (isinstance(horizon, (int, np.integer)) and 1 <= horizon <= MAX_HORIZON):
        raise InputError(f"horizon must be a whole number from 1 to {MAX_HORIZON}, got {value_words(horizon)}")
    spec = fit.spec
    H = int(horizon)
    needed = spec.n_regressors and (mean or spec.xvar)
    Xf = future_regressors(spec, Xf, H, "mean forecast" if mean else "variance forecast") if needed else None
    resid, var, lik = in_sample(fit, r, X)
    r = np.asarray(r, dtype=float)
    theta = np.asarray(fit.params, dtype=float)
    mu, phi, tht, vp, eta = lik.split(theta)

    # ---- variance: the family's h-step forecasts from the end of the sample
    history = History(resid[lik.a:], var[lik.a + lik.s0:], lik.s0)
    n_paths = paths or DEFAULT_PATHS
    the_seed = DEFAULT_SEED if seed is None else seed
    shift = future_shift(lik, theta, Xf)
    fvar, simulated = spec.family.forecast(vp, eta, fit.dist, history, H, np.random.default_rng(the_seed), n_paths,
                                           shift=shift)
    method = f"simulation ({n_paths} paths, seed {the_seed})" if simulated else "analytic"
    longrun = None if (spec.in_mean or spec.xvar) else spec.family.long_run_forecast(vp, eta, fit.dist, history, H)
    steps, why = spec.family.moment_horizon(vp, eta, fit.dist, H)
    if why is not None:  # the expectation does not exist beyond ``steps``: say so, never a number
        fvar = np.array(fvar, dtype=float)
        fvar[steps:] = np.inf

    # ---- mean: the mean model's forecasts (the in-mean term at the volatility forecast; beyond
    # ``steps`` an in-mean term with lambda_m != 0 makes the mean infinite too)
    with np.errstate(invalid="ignore"):
        fmean = lik.mean.forecast(theta[: lik.n_mean], r, resid, H, np.sqrt(fvar), Xf) if mean else np.zeros(H)

    # ---- cumulative variance with ARMA propagation
    psi = psi_weights(phi, tht, H)
    Psi = np.cumsum(psi)
    with np.errstate(invalid="ignore"):
        cum = np.array([np.sum(fvar[:h] * Psi[h - 1::-1][:h] ** 2) for h in range(1, H + 1)])
    if why is not None:
        cum[steps:] = np.inf
    return Forecast(mean=fmean, variance=fvar, cumvar=cum, method=method, longrun=longrun,
                    finite_steps=steps if why is not None else None, why=why)


def require_long_run(spec) -> None:
    """InputError unless the model's variance has a long-run component (``what=longrun``)."""
    if not spec.family.has_long_run:
        raise _no_long_run(spec)
    if spec.in_mean or spec.xvar:
        # the component recursion runs on the residuals alone: an in-mean term or a variance
        # regressor would move the components in ways it does not follow
        raise InputError(f"what=longrun is not available for {spec.canonical} with "
                         f"{'an in-mean term (-M)' if spec.in_mean else 'variance regressors (xvar=)'}; "
                         "fit the component model without it to see its long-run component")
