"""IGARCH(p,q) (Engle & Bollerslev 1986): GARCH(p,q) with the alphas and betas summing to one.

The estimator implies the last beta (the last alpha when there is no beta) from the others;
the unconditional variance and the half-life are undefined.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ._linear import LinearFamily


class Igarch(LinearFamily):
    key = "igarch"
    words = ("IGARCH",)
    stems = ("omega", "alpha", "beta")
    indexed = ("alpha", "beta")
    integrated = True

    min_arch_terms = 1

    def _check(self, d, eta, dist):
        super()._check(d, eta, dist)
        total = sum(v for n, v in d.items() if n.startswith("alpha") or n.startswith("beta"))
        if abs(total - 1.0) > 1e-6:
            raise InputError(f"IGARCH alphas and betas must sum to 1, got {total:.6g}")

    def _admissible(self, vp, eta, dist, held):
        return super()._admissible(vp, eta, dist, True)  # the sum rule holds by construction

    def _grid(self):
        return [(a, 0.0, 1.0 - a) for a in (0.05, 0.1, 0.2)]

    def _start_persistence(self, a_tot, g_tot, b_tot):
        return 0.9

    def _news_impact(self, vp, eta, dist, e):
        """omega plus the news term: an IGARCH has no long-run variance to hold the lagged
        variances at, so (as for EWMA) the curve leaves out sum beta_j sigma2[t-j] and the later
        lags' news; add them for the level you have."""
        omega, alpha, _, _ = self._coefficients(vp)
        return omega + alpha[0] * e ** 2

    def _starts(self, v):
        out = super()._starts(v)
        if not self.q:  # the alphas alone carry the unit sum
            for vp in out:
                vp[1: 1 + self.p] = 1.0 / self.p
        return [np.asarray(vp) for vp in out]
