"""GJR-GARCH(p,q) (Glosten, Jagannathan & Runkle 1993): one asymmetry term per ARCH lag,

    sigma2[t] = omega + sum_i (alpha_i + gamma_i 1(e[t-i] < 0)) e2[t-i] + sum_j beta_j sigma2[t-j].

Its persistence weighs gamma by kappa = E[z^2 1(z<0)] of the shocks (1/2 for symmetric ones).
"""

from __future__ import annotations

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
