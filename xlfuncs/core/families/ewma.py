"""EWMA, the exponentially weighted moving average of common practice:

    sigma2[t] = decay * sigma2[t-1] + (1 - decay) * e2[t-1],   0 < decay < 1, no omega.

It is the recursion of an IGARCH(1,1) with omega = 0, alpha = 1 - decay and beta = decay, so it
runs through the shared linear machinery (:mod:`._linear`) with the coefficients an affine map
of ``decay``.  Its persistence is 1; it has no unconditional variance and no half-life, and its
forecast is flat: every future period's variance equals the next period's.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ._linear import LinearFamily

# d(omega, alpha[1], beta[1]) / d decay
_JACOBIAN = np.array([[0.0], [-1.0], [1.0]])
_JACOBIAN.setflags(write=False)


class Ewma(LinearFamily):
    key = "ewma"
    words = ("EWMA",)
    n_orders = 0
    default_orders = (1, 1)  # one lagged square and one lagged variance
    stems = ("decay",)
    burn_in = False  # no level to forget: fresh paths start where they are put
    takes_shift = False  # no omega for variance regressors to add to

    def _names(self):
        return ("decay",)

    def _coefficients(self, vp):
        d = vp[0]
        return 0.0, np.array([1.0 - d]), np.zeros(0), np.array([d])

    def _jacobian(self, vp):
        return _JACOBIAN

    @property
    def diagnostic_order(self) -> int:
        return 1  # one estimated variance parameter

    # ------------------------------------------------------------------ domain
    def _check(self, d, eta, dist):
        v = d["decay"]
        if not 0.0 < v < 1.0:
            raise InputError(f"decay must be between 0 and 1 (0.94 is the usual daily value), got {v:g}")

    def _check_fixed(self, name, value):
        if not 0.0 < value < 1.0:
            raise InputError(f"options: decay must be between 0 and 1 (0.94 is the usual daily value), got {value:g}")

    def _admissible(self, vp, eta, dist, held):
        return 0.0 < vp[0] < 1.0

    def _box(self, var):
        return [(0.05, (1e-6, 1.0 - 1e-6))]

    # ------------------------------------------------------------------ summary figures
    def _persistence(self, vp, eta, dist):
        return 1.0

    def _uncond_variance(self, vp, eta, dist):
        return None

    def _half_life(self, vp, eta, dist):
        return None

    # ------------------------------------------------------------------ forecast, simulation, news
    def _forecast(self, vp, eta, dist, history, H, rng, paths):
        d = vp[0]
        e = history.e[-1]
        nxt = d * history.s2[-1] + (1.0 - d) * e * e
        return np.full(H, nxt), False  # E[e2] = sigma2 keeps every later period at the next one

    def _sim_level(self, vp, eta, dist):
        """Fresh paths start from a unit variance: an EWMA fixes no level of its own."""
        return 1.0

    def _news_impact(self, vp, eta, dist, e):
        """The news term alone, (1 - decay) e^2: an EWMA fixes no level for the lagged
        variance, so the curve leaves out decay * sigma2[t-1] (add it for the level you have)."""
        return (1.0 - vp[0]) * e ** 2

    # ------------------------------------------------------------------ estimator's needs
    def _starts(self, v):
        return [[d] for d in (0.94, 0.97, 0.9, 0.8, 0.99)]

    def _sum_rule(self, eta, dist):
        return None
