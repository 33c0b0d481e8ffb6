"""Simulation of return paths (seeded, reproducible).

* :func:`simulate` -- fresh paths from a model with given parameters, after a burn-in.
* :func:`simulate_forward` -- paths that continue a fit from the end of its sample (the
  future returns r[T+1..T+h]), for risk figures over several periods.
"""

from __future__ import annotations


import numpy as np

from .distributions import Distribution
from .errors import InputError, describe_value
from .families import History
from .forecast import future_regressors, future_shift, in_sample
from .mean import regressor_list
from .spec import ModelSpec

__all__ = ["simulate", "simulate_forward", "forward_steps"]


def simulate(spec: ModelSpec, dist: Distribution, params, n: int, paths: int = 1,
             rng: np.random.Generator | None = None, burn: int = 500):
    """Simulate ``paths`` independent paths of ``n`` returns; array of shape (n, paths).

    ``params`` is the full vector in ``spec.param_names + dist.param_names`` order.  Each
    path starts ``burn`` periods before the first kept observation from the level its variance
    family starts fresh paths at (the unconditional variance where it is defined; see the
    family's ``_sim_start``); a family with no level to forget starts at the first kept one.
    An in-mean model adds lambda_m sigma[t] to each return.  A model with regressors cannot be
    simulated from scratch: their values are unknown.
    """
    if spec.n_regressors:
        raise InputError(f"a fit with regressors ({regressor_list(spec)}) cannot be simulated from scratch: their "
                         "values over the simulated periods are unknown")
    rng = rng or np.random.default_rng()
    fam = spec.family
    names = tuple(spec.param_names) + tuple(dist.param_names)
    params = np.asarray(params, dtype=float)
    d = dict(zip(names, params))
    eta = np.array([d[k] for k in dist.param_names])
    mu = d.get("mu", 0.0)
    lam = d.get("lambda_m", 0.0)
    phi = np.array([d[f"phi[{i}]"] for i in range(1, spec.ar + 1)])
    tht = np.array([d[f"theta[{j}]"] for j in range(1, spec.ma + 1)])
    vp = np.array([d[k] for k in fam.param_names])
    if not fam.burn_in:
        burn = 0
    total = n + burn
    z = dist.rvs((total, paths), eta, rng).reshape(total, paths)
    e = np.empty((total, paths))
    s2 = np.empty((total, paths)) if spec.in_mean else None
    state = fam.sim_start(vp, eta, dist, paths)
    for t in range(total):
        v, e[t] = fam.sim_step(state, vp, eta, dist, z[t])
        if s2 is not None:
            s2[t] = v
    # the mean: ARMA, and the in-mean term
    r = np.empty((total, paths))
    for t in range(total):
        val = np.full(paths, mu) + e[t]
        if s2 is not None:
            val += lam * np.sqrt(s2[t])
        for i in range(1, spec.ar + 1):
            if t - i >= 0:
                val += phi[i - 1] * r[t - i]
            else:
                val += phi[i - 1] * (mu / (1.0 - phi.sum()) if spec.ar else 0.0)
        for j in range(1, spec.ma + 1):
            if t - j >= 0:
                val += tht[j - 1] * e[t - j]
        r[t] = val
    return r[burn:]


def forward_steps(fit, r, horizon: int, paths: int, rng: np.random.Generator, X=None, Xf=None, draw=None):
    """Yield ``(returns, variances)``, each of shape (paths,), for steps T+1, ..., T+horizon.

    ``draw(h)``, if given, returns the standardised shocks of step h (0-based) in place of
    ``paths`` draws from the fit's distribution (for importance sampling).

    The generator behind :func:`simulate_forward`; a caller that needs only a running total
    (the cumulative return) consumes it step by step and never holds the whole array.
    ``X`` are the sample's regressors and ``Xf`` their future values (one row per step).
    """
    spec = fit.spec
    dist = fit.dist
    fam = spec.family
    Xf = future_regressors(spec, Xf, int(horizon), "simulation") if spec.n_regressors else None
    resid, var, lik = in_sample(fit, r, X)
    r = np.asarray(r, dtype=float)
    theta = np.asarray(fit.params, dtype=float)
    mu, phi, tht, vp, eta = lik.split(theta)
    mu = float(mu) if spec.has_mu else 0.0
    mean = lik.mean
    lam = mean.lam(theta[: lik.n_mean])
    xc = mean.xcoef(theta[: lik.n_mean])
    shift = future_shift(lik, theta, Xf) if Xf is not None else None

    # the end of the sample, newest last; every list holds scalars, then arrays as paths grow
    r_hist = list(r[len(r) - spec.ar:]) if spec.ar else []
    e_ma = list(np.nan_to_num(resid)[len(resid) - spec.ma:]) if spec.ma else []
    state = fam.sim_continue(vp, eta, dist, History(resid[lik.a:], var[lik.a + lik.s0:], lik.s0))

    for h in range(int(horizon)):
        # ---- the variance of the next shock from the newest lags, the shock and the return
        z = dist.rvs(paths, eta, rng) if draw is None else draw(h)
        s2, e = fam.sim_step(state, vp, eta, dist, z, shift=None if shift is None else shift[h])
        if np.ndim(s2) == 0:
            s2 = np.full(paths, float(s2))
        ret = np.full(paths, mu)
        for i in range(1, spec.ar + 1):
            ret = ret + phi[i - 1] * r_hist[-i]
        for j in range(1, spec.ma + 1):
            ret = ret + tht[j - 1] * e_ma[-j]
        if mean.regression is not None:
            ret = ret + float(xc @ mean.regression.future(None, Xf, h))
        if spec.in_mean:
            ret = ret + lam * np.sqrt(s2)
        ret = ret + e
        # ---- roll the mean's lags
        if spec.ar:
            r_hist = r_hist[1:] + [ret]
        if spec.ma:
            e_ma = e_ma[1:] + [e]
        yield ret, s2


def simulate_forward(fit, r, horizon: int, paths: int, rng: np.random.Generator | None = None,
                     return_variance: bool = False, X=None, Xf=None):
    """Simulated future returns r[T+1..T+horizon] continuing the fit from the end of ``r``.

    Array of shape (horizon, paths); with ``return_variance=True`` also the conditional
    variances of the simulated shocks, ``(returns, variances)``.

    Each path continues the fitted mean and variance recursions from the last in-sample
    residuals, variances and returns (the values :func:`xlfuncs.core.forecast.in_sample`
    gives), with standardised shocks drawn from the fit's distribution: the mean
    r = mu + sum phi_i r[t-i] + sum theta_j e[t-j] + sum x_k X[t,k] + lambda_m sigma[t] + e (the
    regressors at their future values ``Xf``), and the variance family's recursion one
    step at a time (``sim_step``): for ARCH, GARCH, GJR-GARCH and IGARCH
    sigma2 = omega + sum (alpha_i + gamma_i 1(e[t-i] < 0)) e[t-i]^2 + sum beta_j sigma2[t-j];
    for EGARCH (Nelson 1991) ln sigma2 = omega + sum alpha_i (|z[t-i]| - E|z|) + gamma_i z[t-i]
    + sum beta_j ln sigma2[t-j].  The first step's variance is therefore the exact one-step
    forecast.  Shocks are drawn one step at a time, ``paths`` at once, so a given ``rng`` state
    gives the same paths whatever is done with them.
    """
    if not (isinstance(horizon, (int, np.integer)) and not isinstance(horizon, bool) and horizon >= 1):
        raise InputError(f"horizon must be a whole number of 1 or more, got {describe_value(horizon)}")
    if not (isinstance(paths, (int, np.integer)) and not isinstance(paths, bool) and paths >= 1):
        raise InputError(f"paths must be a whole number of 1 or more, got {describe_value(paths)}")
    rng = rng or np.random.default_rng()
    rets = np.empty((int(horizon), int(paths)))
    vars_ = np.empty((int(horizon), int(paths))) if return_variance else None
    for h, (ret, s2) in enumerate(forward_steps(fit, r, int(horizon), int(paths), rng, X, Xf)):
        rets[h] = ret
        if return_variance:
            vars_[h] = s2
    return (rets, vars_) if return_variance else rets
