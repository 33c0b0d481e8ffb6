"""GJR-GARCH(p,q) (Glosten, Jagannathan & Runkle 1993): one asymmetry term per ARCH lag,

    sigma2[t] = omega + sum_i (alpha_i + gamma_i 1(e[t-i] < 0)) e2[t-i] + sum_j beta_j sigma2[t-j].

Its persistence weighs gamma by kappa = E[z^2 1(z<0)] of the shocks (1/2 for symmetric ones).
"""

from __future__ import annotations

import numpy as np

from ..distributions import Distribution
from ..errors import InputError
from ._linear import LinearFamily


class Gjr(LinearFamily):
    key = "gjr"
    words = ("GJR-GARCH", "GJRGARCH", "GJR")
    stems = ("omega", "alpha", "gamma", "beta")
    indexed = ("alpha", "gamma", "beta")
    asymmetric = True
    holds_at_bound = True
    targeted = "omega"

    min_arch_terms = 1

    def _check(self, d, eta, dist):
        super()._check(d, eta, dist)
        for i in range(1, self.p + 1):
            if d[f"alpha[{i}]"] + d[f"gamma[{i}]"] < 0:
                raise InputError(f"alpha[{i}] + gamma[{i}] must be 0 or more, got {d[f'alpha[{i}]'] + d[f'gamma[{i}]']:g}")

    def _grid(self):
        return [(0.5 * a, a, b) for a, _, b in super()._grid()]

    def _edges(self):
        """alpha_i + gamma_i >= 0 (a negative shock never lowers the variance): on the edge gamma_i
        is implied, -alpha_i."""
        return [(f"gamma[{i}]", {f"alpha[{i}]": 1.0, f"gamma[{i}]": 1.0}, 0.0, f"alpha[{i}] + gamma[{i}] >= 0")
                for i in range(1, self.p + 1)]

    # ------------------------------------------------------------------ held on the bound
    @staticmethod
    def _shape_moves_kappa(dist):
        """True where E[z^2 1(z<0)] depends on the shape (skewed shocks); 1/2 for symmetric ones."""
        return dist is not None and type(dist).neg_sq_moment is not Distribution.neg_sq_moment

    def _sum_rule(self, eta, dist):
        """With skewed shocks the persistence sum alpha + kappa(shape) sum gamma + sum beta is not
        linear in the parameters (kappa = E[z^2 1(z<0)] moves with nu and lambda): the last beta
        (the last alpha without betas) is implied and :meth:`_hold` sets it at every trial point,
        so a fit held on the bound is the maximum on the bound itself, never on a bound frozen at
        one shape.  With symmetric shocks kappa is 1/2 and the affine rule of the base holds."""
        if self._shape_moves_kappa(dist):
            return (f"beta[{self.q}]" if self.q else f"alpha[{self.p}]"), None
        return super()._sum_rule(eta, dist)

    def _hold(self, vp, total, eta, dist):
        """Set the implied weight x so that sum alpha + kappa sum gamma + sum beta = ``total`` with
        kappa at the shape ``eta``; return dx/d(variance parameters, shape)."""
        p, q = self.p, self.q
        x = 2 * p + q if q else p  # index of the implied weight in vp
        kap = float(dist.neg_sq_moment(eta))
        dk = np.zeros(len(eta))
        for j in range(len(eta)):  # kappa is smooth in the shape (closed form): central differences
            h = 1e-5 * max(1.0, abs(float(eta[j])))
            up, dn = np.array(eta, dtype=float), np.array(eta, dtype=float)
            up[j] += h
            dn[j] -= h
            dk[j] = (dist.neg_sq_moment(up) - dist.neg_sq_moment(dn)) / (2 * h)
        grad = np.zeros(self.n_params + len(eta))
        if not (np.isfinite(kap) and np.all(np.isfinite(dk))):
            vp[x] = np.nan  # no persistence to hold: inadmissible
            return grad
        alpha = vp[1: 1 + p]
        gamma = vp[1 + p: 1 + 2 * p]
        beta = vp[1 + 2 * p: 1 + 2 * p + q]
        vp[x] = 0.0
        vp[x] = total - float(alpha.sum() + kap * gamma.sum() + beta.sum())
        # d persistence / d (omega, alpha, gamma, beta, shape); the implied weight's own is 1
        dp = np.concatenate([[0.0], np.ones(p), np.full(p, kap), np.ones(q), float(gamma.sum()) * dk])
        grad = -dp / dp[x]
        grad[x] = 0.0
        return grad
