"""Simulation of return paths from a model with given parameters (seeded, reproducible)."""

from __future__ import annotations


import numpy as np

from .distributions import Distribution
from .spec import ModelSpec

__all__ = ["simulate"]


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
