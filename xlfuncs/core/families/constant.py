"""The constant variance: sigma2[t] = omega (a model string with only a mean part).

With variance regressors (an intercept series ``shift``) sigma2[t] = omega + shift[t], kept
positive at every observation.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .base import VarianceFamily


class Constant(VarianceFamily):
    key = "constant"
    words = ()
    n_orders = 0
    default_orders = ()
    stems = ("omega",)
    varies = False
    analytic = True
    targeted = "omega"
    takes_shift = True
    smooth_in_residuals = True  # no recursion at all

    def __init__(self, p: int = 0, q: int = 0):
        super().__init__(0, 0)

    def _names(self):
        return ("omega",)

    def _check(self, d, eta, dist):
        if not d["omega"] > 0:
            raise InputError(f"omega must be greater than 0, got {d['omega']:g}")

    def _check_fixed(self, name, value):
        if value <= 0:
            raise InputError(f"options: omega must be greater than 0, got {value:g}")

    def _admissible(self, vp, eta, dist, held):
        return vp[0] > 0

    def _box(self, var):
        return [(0.05 * var, (var * 1e-9, None))]

    def _variance(self, vp, e, presample, eta, dist, shift=None):
        return np.full(len(e), vp[0]) if shift is None else vp[0] + shift

    def _derivatives(self, vp, e, de, presample, eta=(), dist=None, shift=None, dshift=None):
        n = len(e)
        ns = 0 if dshift is None else dshift.shape[0]
        nm = de.shape[0]
        D = np.zeros((nm + 1 + ns, n))
        D[nm] = 1.0
        if ns:
            D[nm + 1:] = dshift
        return self._variance(vp, e, presample, None, None, shift), D

    def _bad_shift(self, vp, shift):
        return ~(vp[0] + shift > 0)

    def _uncond_variance(self, vp, eta, dist):
        return float(vp[0])

    def _forecast(self, vp, eta, dist, history, H, rng, paths, shift=None):
        return (np.full(H, float(vp[0])) if shift is None else float(vp[0]) + shift), False

    def _sim_start(self, vp, eta, dist, paths):
        return None

    def _sim_continue(self, vp, eta, dist, history):
        return None

    def _sim_variance(self, state, vp, eta, dist, shift=None):
        return vp[0] if shift is None else vp[0] + shift

    def _sim_push(self, state, e, z, s2):
        pass

    def _news_impact(self, vp, eta, dist, e):
        return np.full(e.shape, vp[0])

    def _starts(self, v):
        return [[v]]

    def _target(self, vp, vbar, eta, dist):
        vp[0] = vbar
