"""EGARCH(p,q) (Nelson 1991): the log-variance responds to the standardised shocks z,

    ln sigma2[t] = omega + sum_i (alpha_i (|z[t-i]| - E|z|) + gamma_i z[t-i]) + sum_j beta_j ln sigma2[t-j].

The recursion is not linear in lagged squares: it runs in a tight loop, its derivatives are
numerical, and its forecasts average seeded simulated paths.  Variance regressors (an intercept
series ``shift``) add to omega, the log-variance's intercept, so they need no sign restriction.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from .base import VarianceFamily, stationary


class _SimState:
    """News terms |z| - E|z|, shocks z and log-variances of simulated paths, newest last."""

    __slots__ = ("g", "z", "lv", "kappa", "clip", "v")

    def __init__(self, g, z, lv, kappa, clip):
        self.g, self.z, self.lv, self.kappa, self.clip, self.v = g, z, lv, kappa, clip, None


class Egarch(VarianceFamily):
    key = "egarch"
    cost_weight = 25  # EGARCH estimations cost about 25 times a linear family's (bounds_timing.py)
    max_fit_params = 6
    simulated_forecast = True
    log_variance = True
    takes_shift = True
    words = ("EGARCH",)
    stems = ("omega", "alpha", "gamma", "beta")
    indexed = ("alpha", "gamma", "beta")

    min_arch_terms = 1

    def _names(self):
        return (["omega"] + [f"alpha[{i}]" for i in range(1, self.p + 1)]
                + [f"gamma[{i}]" for i in range(1, self.p + 1)] + [f"beta[{j}]" for j in range(1, self.q + 1)])

    def _split(self, vp):
        p = self.p
        return vp[0], vp[1: 1 + p], vp[1 + p: 1 + 2 * p], vp[1 + 2 * p:]

    # ------------------------------------------------------------------ domain
    def _check(self, d, eta, dist):
        beta = [d[f"beta[{j}]"] for j in range(1, self.q + 1)]
        if not stationary(beta):
            raise InputError(f"EGARCH betas must keep the log-variance stationary (|beta| < 1), got {', '.join(f'{b:g}' for b in beta)}")

    def _admissible(self, vp, eta, dist, held):
        return stationary(self._split(vp)[3])

    def _box(self, var):
        return ([(0.1, (None, None))] + [(0.05, (None, None))] * (2 * self.p)
                + [(0.05, (-0.9999, 0.9999))] * self.q)

    # ------------------------------------------------------------------ recursion
    def _variance(self, vp, e, presample, eta, dist, shift=None):
        """The log-variance recursion as a tight loop; presample news is zero (its expectation)
        and the presample log-variance the log mean square."""
        omega, alpha, gamma, beta = self._split(vp)
        p, q = self.p, self.q
        kappa = float(dist.abs_moment(eta))
        sbar = float(np.mean(e * e))
        lsbar = math.log(sbar) if sbar > 0 else -700.0
        ev = e.tolist()
        n = len(ev)
        al = [float(a) for a in alpha]
        ga = [float(g) for g in gamma]
        be = [float(b) for b in beta]
        om = float(omega)
        # news terms g_t = |z_t| - kappa and z_t; presample news is zero (its expectation)
        absz = [0.0] * (n + p)
        zz = [0.0] * (n + p)
        lv = [lsbar] * (n + q)
        start = 0
        if presample == "drop":
            # first p residuals are lags only; standardise them by the mean square
            sd = math.sqrt(sbar) if sbar > 0 else 1.0
            for t in range(p):
                z = ev[t] / sd
                absz[p + t] = abs(z) - kappa
                zz[p + t] = z
            start = p
        out = []
        append = out.append
        exp = math.exp
        oms = None if shift is None else (om + shift).tolist()
        for t in range(start, n):
            v = om if oms is None else oms[t - start]
            for i in range(1, p + 1):
                v += al[i - 1] * absz[p + t - i] + ga[i - 1] * zz[p + t - i]
            pos = q + t - start
            for j in range(1, q + 1):
                v += be[j - 1] * lv[pos - j]
            if v > 700.0 or v < -700.0:
                return np.full(n - start, np.nan)
            lv[pos] = v
            sig = exp(0.5 * v)
            z = ev[t] / sig
            absz[p + t] = abs(z) - kappa
            zz[p + t] = z
            append(sig * sig)
        return np.asarray(out)

    # ------------------------------------------------------------------ summary figures
    def _persistence(self, vp, eta, dist):
        return float(self._split(vp)[3].sum())

    def _uncond_variance(self, vp, eta, dist):
        """E[sigma^2] of an EGARCH(1,1): exp(omega/(1-beta)) prod_i E exp(beta^i g(z)) (Nelson 1991).

        Defined only where the shock has exponential moments (normal, GED with nu >= 1); blank
        otherwise and for higher orders.
        """
        omega, alpha, gamma, beta = self._split(vp)
        if self.p != 1 or self.q != 1 or not abs(beta[0]) < 1:
            return None
        if dist.name in ("t", "skewt") or (dist.name == "ged" and eta[0] < 1.0):
            return None
        from scipy import integrate

        a, g, b = float(alpha[0]), float(gamma[0]), float(beta[0])
        kappa = dist.abs_moment(eta)
        logval = omega / (1.0 - b)
        c = 1.0
        for _ in range(200):
            def integrand(z, c=c):
                return math.exp(c * (a * (abs(z) - kappa) + g * z) + float(dist.logpdf(np.array([z]), eta)[0]))
            val = integrate.quad(integrand, -np.inf, 0, limit=200)[0] + integrate.quad(integrand, 0, np.inf, limit=200)[0]
            if not (val > 0 and math.isfinite(val)):
                return None
            logval += math.log(val)
            c *= b
            if abs(c) < 1e-12:
                break
        out = math.exp(logval)
        return out if math.isfinite(out) else None

    # ------------------------------------------------------------------ forecast and simulation
    def _forecast(self, vp, eta, dist, history, H, rng, paths, shift=None):
        return self._simulated_forecast(vp, eta, dist, history, H, rng, paths, shift), True

    def _sim_start(self, vp, eta, dist, paths):
        omega, _, _, beta = self._split(vp)
        lv0 = omega / (1.0 - beta.sum()) if self.q else omega
        # news before the start is at its expectation, zero; no clipping: an exploding path says so
        return _SimState([0.0] * self.p, [0.0] * self.p, [lv0] * self.q, dist.abs_moment(eta), clip=False)

    def _sim_continue(self, vp, eta, dist, history):
        kappa = dist.abs_moment(eta)
        s_obs = history.s2
        z_obs = history.e[history.s0:] / np.sqrt(s_obs)
        z = list(z_obs[len(z_obs) - self.p:])
        lv = list(np.log(s_obs[len(s_obs) - self.q:])) if self.q else []
        return _SimState([abs(x) - kappa for x in z], z, lv, kappa, clip=True)

    def _sim_variance(self, state, vp, eta, dist, shift=None):
        omega, alpha, gamma, beta = self._split(vp)
        v = omega if shift is None else omega + shift
        for i in range(1, self.p + 1):
            v = v + alpha[i - 1] * state.g[-i] + gamma[i - 1] * state.z[-i]
        for j in range(1, self.q + 1):
            v = v + beta[j - 1] * state.lv[-j]
        if state.clip:
            v = np.clip(v, -700.0, 700.0)  # the forecast's simulation stays finite
        state.v = v
        return np.exp(v)

    def _sim_push(self, state, e, z, s2):
        if self.p:
            state.g = state.g[1:] + [np.abs(z) - state.kappa]
            state.z = state.z[1:] + [z]
        if self.q:
            state.lv = state.lv[1:] + [state.v]

    # ------------------------------------------------------------------ one observation at a time
    def _filter_start(self, vp, eta, dist, u, e_lags, presample):
        """News at zero (its expectation) and log-variances at the log mean of u^2, as
        :meth:`_variance` starts; under ``drop`` the lag residuals standardised by that level."""
        kappa = float(dist.abs_moment(eta))
        sbar = float(np.mean(u * u))
        lsbar = math.log(sbar) if sbar > 0 else -700.0
        sd = math.sqrt(sbar) if sbar > 0 else 1.0
        if presample == "mean":
            g, z = [0.0] * self.p, [0.0] * self.p
        else:
            z = [x / sd for x in e_lags]
            g = [abs(x) - kappa for x in z]
        return _SimState(g, z, [lsbar] * self.q, kappa, clip=False)

    def _filter(self, vp, u, step, presample, eta, dist, shift=None):
        """The log-variance recursion in plain floats, one observation at a time."""
        omega, alpha, gamma, beta = self._split(vp)
        p, q = self.p, self.q
        al = [float(a) for a in alpha]
        ga = [float(g) for g in gamma]
        be = [float(b) for b in beta]
        n = len(u)
        s0 = p if presample == "drop" else 0
        level = float(np.mean(u * u))
        e = [0.0] * n
        for t in range(s0):
            e[t] = float(step(t, level))
        st = self._filter_start(vp, eta, dist, u, e[:s0], presample)
        kappa = st.kappa
        g, zz, lv = list(st.g), list(st.z), list(st.lv)  # newest last
        om = [float(omega)] * (n - s0) if shift is None else (float(omega) + shift).tolist()
        out = [0.0] * (n - s0)
        exp = math.exp
        for t in range(s0, n):
            v = om[t - s0]
            for i in range(1, p + 1):
                v += al[i - 1] * g[-i] + ga[i - 1] * zz[-i]
            for j in range(1, q + 1):
                v += be[j - 1] * lv[-j]
            if v > 700.0 or v < -700.0:
                return np.full(n, np.nan), np.full(n - s0, np.nan)
            sig = exp(0.5 * v)
            s2 = sig * sig
            et = step(t, s2)
            e[t] = et
            out[t - s0] = s2
            z = et / sig
            if p:
                g.append(abs(z) - kappa)
                zz.append(z)
                del g[0], zz[0]
            if q:
                lv.append(v)
                del lv[0]
        return np.array(e), np.array(out)

    # ------------------------------------------------------------------ news impact
    def _news_impact(self, vp, eta, dist, e):
        omega, alpha, gamma, beta = self._split(vp)
        level = omega / (1.0 - beta.sum())  # unconditional mean of the log-variance
        z = e / math.exp(0.5 * level)
        lv = omega + alpha[0] * (np.abs(z) - dist.abs_moment(eta)) + gamma[0] * z + beta.sum() * level
        return np.exp(lv)

    # ------------------------------------------------------------------ estimator's needs
    def _starts(self, v):
        p, q = self.p, self.q
        out = []
        for a_tot, g_tot, b_tot in [(a, g, b) for a in (0.1, 0.25) for g in (0.0, -0.05) for b in (0.9, 0.97)]:
            vp = np.zeros(self.n_params)
            vp[1: 1 + p] = a_tot / p
            vp[1 + p: 1 + 2 * p] = g_tot / p
            if q:
                vp[1 + 2 * p:] = b_tot / q
            vp[0] = math.log(v) * (1.0 - b_tot)
            out.append(vp)
        return out
