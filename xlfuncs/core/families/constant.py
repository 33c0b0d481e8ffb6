"""The constant variance: sigma2[t] = omega (a model string with only a mean part)."""

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

    def _variance(self, vp, e, presample, eta, dist):
        return np.full(len(e), vp[0])

    def _derivatives(self, vp, e, de, presample, eta=(), dist=None):
        n = len(e)
        D = np.zeros((de.shape[0] + 1, n))
        D[-1] = 1.0
        return np.full(n, vp[0]), D

    def _uncond_variance(self, vp, eta, dist):
        return float(vp[0])

    def _forecast(self, vp, eta, dist, history, H, rng, paths):
        return np.full(H, float(vp[0])), False

    def _sim_start(self, vp, eta, dist, paths):
        return None

    def _sim_continue(self, vp, eta, dist, history):
        return None

    def _sim_variance(self, state, vp, eta, dist):
        return vp[0]

    def _sim_push(self, state, e, z, s2):
        pass

    def _news_impact(self, vp, eta, dist, e):
        return np.full(e.shape, vp[0])

    def _starts(self, v):
        return [[v]]

    def _target(self, vp, vbar, eta, dist):
        vp[0] = vbar
