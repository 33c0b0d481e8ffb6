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
* ``mean[h]`` is the ARMA mean forecast (future shocks at zero).
* ``cumvar[h]`` is the variance of the sum of the next h returns, the ARMA propagation of each
  shock included: with psi_j the MA(infinity) weights and Psi_n = psi_0 + ... + psi_n,
  cumvar[h] = sum_{m=1..h} variance[m] * Psi_{h-m}^2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .families import FAMILIES, History
from .likelihood import Likelihood

__all__ = ["Forecast", "forecast", "in_sample", "long_run_in_sample", "require_long_run", "psi_weights", "DEFAULT_SEED", "DEFAULT_PATHS",
           "MAX_HORIZON"]

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


def in_sample(fit, r):
    """Residuals and conditional variances aligned with the returns (nan where undefined)."""
    r = np.asarray(r, dtype=float)
    lik = Likelihood(r, fit.spec, fit.dist, fit.options.presample)
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


def long_run_in_sample(fit, r):
    """The long-run component of the conditional variance aligned with the returns (nan where
    undefined); InputError for a model without one."""
    spec = fit.spec
    require_long_run(spec)
    r = np.asarray(r, dtype=float)
    lik = Likelihood(r, spec, fit.dist, fit.options.presample)
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


def forecast(fit, r, horizon: int, seed: int | None = None, paths: int | None = None) -> Forecast:
    if not (isinstance(horizon, (int, np.integer)) and 1 <= horizon <= MAX_HORIZON):
        raise InputError(f"horizon must be a whole number from 1 to {MAX_HORIZON}, got {horizon}")
    spec = fit.spec
    resid, var, lik = in_sample(fit, r)
    r = np.asarray(r, dtype=float)
    mu, phi, tht, vp, eta = lik.split(np.asarray(fit.params, dtype=float))
    T = len(r)
    H = int(horizon)

    # ---- mean
    mean = np.zeros(H)
    rr = list(r)
    ee = list(np.nan_to_num(resid))
    for h in range(H):
        v = mu if spec.has_mu else 0.0
        for i in range(1, spec.ar + 1):
            v += phi[i - 1] * rr[T + h - i]
        for j in range(1, spec.ma + 1):
            if h + 1 - j <= 0:
                v += tht[j - 1] * ee[T + h - j]
        rr.append(v)
        mean[h] = v

    # ---- variance: the family's h-step forecasts from the end of the sample
    history = History(resid[lik.a:], var[lik.a + lik.s0:], lik.s0)
    n_paths = paths or DEFAULT_PATHS
    the_seed = DEFAULT_SEED if seed is None else seed
    fvar, simulated = spec.family.forecast(vp, eta, fit.dist, history, H, np.random.default_rng(the_seed), n_paths)
    method = f"simulation ({n_paths} paths, seed {the_seed})" if simulated else "analytic"
    longrun = spec.family.long_run_forecast(vp, eta, fit.dist, history, H)
    steps, why = spec.family.moment_horizon(vp, eta, fit.dist, H)
    if why is not None:  # the expectation does not exist beyond ``steps``: say so, never a number
        fvar = np.array(fvar, dtype=float)
        fvar[steps:] = np.inf

    # ---- cumulative variance with ARMA propagation
    psi = psi_weights(phi, tht, H)
    Psi = np.cumsum(psi)
    with np.errstate(invalid="ignore"):
        cum = np.array([np.sum(fvar[:h] * Psi[h - 1::-1][:h] ** 2) for h in range(1, H + 1)])
    if why is not None:
        cum[steps:] = np.inf
    return Forecast(mean=mean, variance=fvar, cumvar=cum, method=method, longrun=longrun,
                    finite_steps=steps if why is not None else None, why=why)


def require_long_run(spec) -> None:
    """InputError unless the model's variance has a long-run component (``what=longrun``)."""
    if not spec.family.has_long_run:
        raise _no_long_run(spec)
