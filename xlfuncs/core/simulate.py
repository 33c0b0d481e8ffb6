"""Simulation of return paths (seeded, reproducible).

* :func:`simulate` -- fresh paths from a model with given parameters, after a burn-in.
* :func:`simulate_forward` -- paths that continue a fit from the end of its sample (the
  future returns r[T+1..T+h]), for risk figures over several periods.
"""

from __future__ import annotations


import numpy as np

from .distributions import Distribution
from .errors import InputError
from .forecast import in_sample
from .spec import ModelSpec

__all__ = ["simulate", "simulate_forward", "forward_steps"]


def simulate(spec: ModelSpec, dist: Distribution, params, n: int, paths: int = 1,
             rng: np.random.Generator | None = None, burn: int = 500):
    """Simulate ``paths`` independent paths of ``n`` returns; array of shape (n, paths).

    ``params`` is the full vector in ``spec.param_names + dist.param_names`` order.  Each
    path starts ``burn`` periods before the first kept observation from the unconditional
    variance (or the residual variance for EGARCH and IGARCH, from omega).
    """
    rng = rng or np.random.default_rng()
    names = tuple(spec.param_names) + tuple(dist.param_names)
    d = dict(zip(names, params))
    eta = np.array([d[k] for k in dist.param_names])
    mu = d.get("mu", 0.0)
    phi = np.array([d[f"phi[{i}]"] for i in range(1, spec.ar + 1)])
    tht = np.array([d[f"theta[{j}]"] for j in range(1, spec.ma + 1)])
    p, q = (spec.p, spec.q) if spec.variance != "constant" else (0, 0)
    alpha = np.array([d[f"alpha[{i}]"] for i in range(1, p + 1)])
    gamma = np.array([d[f"gamma[{i}]"] for i in range(1, p + 1)]) if spec.asymmetric else np.zeros(p)
    beta = np.array([d[f"beta[{j}]"] for j in range(1, q + 1)])
    omega = d["omega"]
    total = n + burn
    z = dist.rvs((total, paths), eta, rng).reshape(total, paths)
    sig2 = np.empty((total, paths))
    e = np.empty((total, paths))
    v = spec.variance
    if v == "constant":
        sig2[:] = omega
        e[:] = np.sqrt(omega) * z
    elif v == "egarch":
        kappa = dist.abs_moment(eta)
        lv0 = omega / (1.0 - beta.sum()) if q else omega
        lv = np.full((total, paths), lv0)
        for t in range(total):
            x = np.full(paths, omega)
            for i in range(1, p + 1):
                if t - i >= 0:
                    x += alpha[i - 1] * (np.abs(z[t - i]) - kappa) + gamma[i - 1] * z[t - i]
            for j in range(1, q + 1):
                x += beta[j - 1] * (lv[t - j] if t - j >= 0 else lv0)
            lv[t] = x
        sig2 = np.exp(lv)
        e = np.sqrt(sig2) * z
    else:
        kappa = dist.neg_sq_moment(eta) if spec.asymmetric else 0.5
        pers = alpha.sum() + kappa * gamma.sum() + beta.sum()
        s0 = omega / (1.0 - pers) if pers < 1 else omega * 100.0
        for t in range(total):
            x = np.full(paths, omega)
            for i in range(1, p + 1):
                if t - i >= 0:
                    e2 = e[t - i] ** 2
                    x += alpha[i - 1] * e2 + gamma[i - 1] * np.where(e[t - i] < 0, e2, 0.0)
                else:
                    x += (alpha[i - 1] + kappa * gamma[i - 1]) * s0
            for j in range(1, q + 1):
                x += beta[j - 1] * (sig2[t - j] if t - j >= 0 else s0)
            sig2[t] = x
            e[t] = np.sqrt(x) * z[t]
    # ARMA mean
    r = np.empty((total, paths))
    for t in range(total):
        val = np.full(paths, mu) + e[t]
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


def forward_steps(fit, r, horizon: int, paths: int, rng: np.random.Generator):
    """Yield ``(returns, variances)``, each of shape (paths,), for steps T+1, ..., T+horizon.

    The generator behind :func:`simulate_forward`; a caller that needs only a running total
    (the cumulative return) consumes it step by step and never holds the whole array.
    """
    spec = fit.spec
    dist = fit.dist
    resid, var, lik = in_sample(fit, r)
    r = np.asarray(r, dtype=float)
    mu, phi, tht, omega, alpha, gamma, beta, eta = lik.split(np.asarray(fit.params, dtype=float))
    mu = float(mu) if spec.has_mu else 0.0
    omega = float(omega)
    kind = spec.variance
    p, q = (spec.p, spec.q) if kind != "constant" else (0, 0)
    asym = spec.asymmetric

    # the end of the sample, newest last; every list holds scalars, then arrays as paths grow
    e_obs = resid[lik.a:]  # residuals the variance recursion saw
    s_obs = var[lik.a + lik.s0:]  # its conditional variances
    r_hist = list(r[len(r) - spec.ar:]) if spec.ar else []
    e_ma = list(np.nan_to_num(resid)[len(resid) - spec.ma:]) if spec.ma else []
    if kind == "egarch":
        kappa = dist.abs_moment(eta)
        z_obs = e_obs[lik.s0:] / np.sqrt(s_obs)
        z_hist = list(z_obs[len(z_obs) - p:])
        lv_hist = list(np.log(s_obs[len(s_obs) - q:])) if q else []
    else:
        e_hist = list(e_obs[len(e_obs) - p:]) if p else []
        s_hist = list(s_obs[len(s_obs) - q:]) if q else []

    for _ in range(int(horizon)):
        # ---- variance of the next shock, from the newest lags
        if kind == "constant":
            s2 = np.full(paths, omega)
        elif kind == "egarch":
            v = np.full(paths, omega)
            for i in range(1, p + 1):
                z = z_hist[-i]
                v = v + alpha[i - 1] * (np.abs(z) - kappa) + gamma[i - 1] * z
            for j in range(1, q + 1):
                v = v + beta[j - 1] * lv_hist[-j]
            v = np.clip(v, -700.0, 700.0)  # as the forecast's simulation does
            s2 = np.exp(v)
        else:
            v = np.full(paths, omega)
            for i in range(1, p + 1):
                e = e_hist[-i]
                e2 = e * e
                v = v + alpha[i - 1] * e2
                if asym:
                    v = v + gamma[i - 1] * np.where(e < 0, e2, 0.0)
            for j in range(1, q + 1):
                v = v + beta[j - 1] * s_hist[-j]
            s2 = v
        # ---- the shock and the return
        z = dist.rvs(paths, eta, rng)
        e = np.sqrt(s2) * z
        ret = np.full(paths, mu)
        for i in range(1, spec.ar + 1):
            ret = ret + phi[i - 1] * r_hist[-i]
        for j in range(1, spec.ma + 1):
            ret = ret + tht[j - 1] * e_ma[-j]
        ret = ret + e
        # ---- roll the lags
        if spec.ar:
            r_hist = r_hist[1:] + [ret]
        if spec.ma:
            e_ma = e_ma[1:] + [e]
        if kind == "egarch":
            if p:
                z_hist = z_hist[1:] + [z]
            if q:
                lv_hist = lv_hist[1:] + [v]
        elif kind != "constant":
            if p:
                e_hist = e_hist[1:] + [e]
            if q:
                s_hist = s_hist[1:] + [s2]
        yield ret, s2


def simulate_forward(fit, r, horizon: int, paths: int, rng: np.random.Generator | None = None,
                     return_variance: bool = False):
    """Simulated future returns r[T+1..T+horizon] continuing the fit from the end of ``r``.

    Array of shape (horizon, paths); with ``return_variance=True`` also the conditional
    variances of the simulated shocks, ``(returns, variances)``.

    Each path continues the fitted mean and variance recursions from the last in-sample
    residuals, variances and returns (the values :func:`xlfuncs.core.forecast.in_sample`
    gives), with standardised shocks drawn from the fit's distribution: the ARMA mean
    r = mu + sum phi_i r[t-i] + sum theta_j e[t-j] + e; for ARCH, GARCH, GJR-GARCH and IGARCH
    sigma2 = omega + sum (alpha_i + gamma_i 1(e[t-i] < 0)) e[t-i]^2 + sum beta_j sigma2[t-j];
    for EGARCH (Nelson 1991) ln sigma2 = omega + sum alpha_i (|z[t-i]| - E|z|) + gamma_i z[t-i]
    + sum beta_j ln sigma2[t-j].  The first step's variance is therefore the exact one-step
    forecast.  Shocks are drawn one step at a time, ``paths`` at once, so a given ``rng`` state
    gives the same paths whatever is done with them.
    """
    if not (isinstance(horizon, (int, np.integer)) and not isinstance(horizon, bool) and horizon >= 1):
        raise InputError(f"horizon must be a whole number of 1 or more, got {horizon!r}")
    if not (isinstance(paths, (int, np.integer)) and not isinstance(paths, bool) and paths >= 1):
        raise InputError(f"paths must be a whole number of 1 or more, got {paths!r}")
    rng = rng or np.random.default_rng()
    rets = np.empty((int(horizon), int(paths)))
    vars_ = np.empty((int(horizon), int(paths))) if return_variance else None
    for h, (ret, s2) in enumerate(forward_steps(fit, r, int(horizon), int(paths), rng)):
        rets[h] = ret
        if return_variance:
            vars_[h] = s2
    return (rets, vars_) if return_variance else rets
