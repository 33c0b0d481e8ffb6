"""The mean recursion and the log-likelihood; the variance recursion is the family's.

Notation.  ``r`` are the returns (length T).  The full parameter vector ``theta`` is laid out
as ``spec.param_names + dist.param_names`` (mean, variance, distribution).  The residuals come
from the ARMA mean here; the conditional variances, and for the families with analytic
derivatives the derivatives through their recursion (forward) and the gradient by its adjoint,
come from the model's variance family (:mod:`xlfuncs.core.families`).  Families without
analytic derivatives are scored by numerical differences in the estimator.

Presample conventions (DESIGN.md, option ``presample``):

* ``mean`` -- every observation enters the likelihood.  Lagged squared residuals and lagged
  variances before the first observation equal the mean squared residual at the trial
  parameters (each family says how it reads this; see its module).  AR lags before the first
  observation take the sample mean of the returns.  MA presample residuals are zero.
* ``drop`` -- the conditional likelihood: the first ``ar`` observations serve only as AR lags
  and the next ``arch_lags`` (the family's) only as lags of the variance recursion; variance
  lags before the start take the mean squared residual.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.signal import lfilter

from .distributions import Distribution
from .spec import ModelSpec

__all__ = ["Likelihood"]

_LOG2PI = math.log(2.0 * math.pi)


class Likelihood:
    """The log-likelihood of one model on one return series, at any full parameter vector."""

    def __init__(self, r, spec: ModelSpec, dist: Distribution, presample: str = "mean"):
        self.r = np.ascontiguousarray(r, dtype=float)
        self.spec = spec
        self.dist = dist
        self.presample = presample
        self.names = tuple(spec.param_names) + tuple(dist.param_names)
        self.k = len(self.names)
        self.n_mean = len(spec.mean_names)
        self.n_var = len(spec.variance_names)
        self.idx = {name: i for i, name in enumerate(self.names)}
        T = len(self.r)
        drop = presample == "drop"
        # residuals are computed on [a, T); the likelihood uses residual positions [s0, n)
        self.a = spec.ar if drop else 0
        self.n = T - self.a
        self.family = fam = spec.family
        self.p = fam.arch_lags
        self.q = fam.garch_lags
        self.s0 = self.p if drop else 0
        self.nobs = self.n - self.s0
        # AR lag matrix (ar x n): row i-1 holds r[t-i] for t in [a, T)
        if spec.ar:
            rbar = float(self.r.mean())
            padded = np.concatenate([np.full(spec.ar, rbar), self.r])
            off = spec.ar  # padded index of r[0]
            self.rlag = np.vstack(
                [padded[off + self.a - i: off + T - i] for i in range(1, spec.ar + 1)]
            )
        else:
            self.rlag = np.zeros((0, self.n))
        self.y = self.r[self.a:]
        self.linear = fam.analytic  # analytic scores through the family's recursion
        self._vs = slice(self.n_mean, self.n_mean + self.n_var)
        self._nd = len(dist.param_names)
        rows = ([-np.ones(self.n)] if spec.has_mu else []) + [-self.rlag[i] for i in range(spec.ar)]
        self._de_const = np.array(rows) if rows else np.zeros((0, self.n))
        self._de_const.setflags(write=False)

    # ------------------------------------------------------------------ parameter pieces
    def split(self, theta):
        """(mu, phi, theta_ma, variance parameters, distribution parameters) of a full vector."""
        s = self.spec
        i = 0
        mu = 0.0
        if s.has_mu:
            mu = theta[0]
            i = 1
        phi = theta[i: i + s.ar]
        i += s.ar
        tht = theta[i: i + s.ma]
        i += s.ma
        return mu, phi, tht, theta[self._vs], theta[self.k - self._nd:]

    # ------------------------------------------------------------------ mean
    def residuals(self, theta, derivs: bool = False):
        """Residuals e on [a, T) and, if asked, their derivatives (n_mean x n)."""
        s = self.spec
        mu, phi, tht, *_ = self.split(theta)
        y = self.y - mu if s.has_mu else self.y
        if s.ar:
            y = y - phi @ self.rlag
        if s.ma:
            den = np.concatenate([[1.0], tht])
            e = lfilter([1.0], den, y)
        else:
            e = y
        if not derivs:
            return e, None
        if not s.ma:
            return e, self._de_const  # the AR mean is linear in its parameters
        rows = []
        if s.has_mu:
            rows.append(-np.ones(self.n))
        for i in range(s.ar):
            rows.append(-self.rlag[i])
        for j in range(1, s.ma + 1):
            lagged = np.zeros(self.n)
            lagged[j:] = e[:-j]
            rows.append(-lagged)
        de = np.array(rows) if rows else np.zeros((0, self.n))
        if s.ma and len(rows):
            de = lfilter([1.0], den, de, axis=1)
        return e, de

    # ------------------------------------------------------------------ variance
    def variance(self, theta, e, de=None):
        """Conditional variances on the likelihood positions [s0, n).

        Returns ``(sigma2, D)`` where D (k x nobs) holds d sigma2 / d theta when ``de`` is given
        (families with analytic derivatives only), else None.  The distribution's rows are the
        family's where its recursion reads them (EGARCH's E|z|), else zero.
        """
        vp = theta[self._vs]
        eta = theta[self.k - self._nd:]
        if de is None or not self.linear:
            return self.family.variance(vp, e, self.presample, eta, self.dist), None
        sig2, Dfam = self.family.derivatives(vp, e, de, self.presample, eta, self.dist)
        if len(Dfam) < self.k:  # the family's recursion does not read the distribution's parameters
            D = np.zeros((self.k, len(sig2)))
            D[: len(Dfam)] = Dfam
        else:
            D = Dfam
        return sig2, D

    # ------------------------------------------------------------------ likelihood
    def terms(self, theta):
        """Per-observation log-likelihood contributions (length nobs); nan where undefined."""
        e, _ = self.residuals(theta)
        sig2, _ = self.variance(theta, e)
        return self._terms(theta, e[self.s0:], sig2)

    def _terms(self, theta, es, sig2):
        eta = theta[self.k - len(self.dist.param_names):]
        with np.errstate(all="ignore"):
            if np.any(~(sig2 > 0)):
                return np.full(self.nobs, np.nan)
            sd = np.sqrt(sig2)
            z = es / sd
            return self.dist.logpdf(z, eta) - np.log(sd)

    def loglik(self, theta) -> float:
        val = float(np.sum(self.terms(theta)))
        return val if math.isfinite(val) else -math.inf

    def scores(self, theta, total: bool = False, fisher: bool = False):
        """Per-observation terms l (nobs) and analytic scores G (nobs x k); linear families only.

        With ``total=True`` returns (sum of l, gradient) without forming G.  With ``fisher=True``
        (normal shocks only) returns (sum of l, gradient, expected information
        sum_t [de de' / sigma^2 + D D' / (2 sigma^4)]), the matrix of Fisher scoring.
        """
        e, de = self.residuals(theta, derivs=True)
        sig2, D = self.variance(theta, e, de if de is not None else np.zeros((0, self.n)))
        es = e[self.s0:]
        eta = theta[self.k - len(self.dist.param_names):]
        with np.errstate(all="ignore"):
            if np.any(~(sig2 > 0)):
                if total:
                    return math.nan, np.full(self.k, np.nan)
                return np.full(self.nobs, np.nan), np.full((self.nobs, self.k), np.nan)
            sd = np.sqrt(sig2)
            z = es / sd
            l = self.dist.logpdf(z, eta) - np.log(sd)
            fz = self.dist.dlogpdf_dz(z, eta)
            w = -0.5 * (fz * z + 1.0) / sig2
            nm = self.n_mean
            nd = len(self.dist.param_names)
            if fisher:
                g = D @ w
                Ds = D / sig2
                info = 0.5 * (Ds @ Ds.T)
                if nm:
                    des = de[:, self.s0:] / sd
                    g[:nm] += de[:, self.s0:] @ (fz / sd)
                    info[:nm, :nm] += des @ des.T
                return float(l.sum()), g, info
            if total:
                g = D @ w
                if nm:
                    g[:nm] += de[:, self.s0:] @ (fz / sd)
                if nd:
                    g[self.k - nd:] += self.dist.dlogpdf_dparams(z, eta).sum(axis=1)
                return float(l.sum()), g
            G = w * D
            if nm:
                G[:nm] += (fz / sd) * de[:, self.s0:]
            if nd:
                G[self.k - nd:] += self.dist.dlogpdf_dparams(z, eta)
        return l, G.T

    def gradient(self, theta):
        """(log-likelihood, gradient) by the adjoint of the variance filter; analytic families.

        The forward derivatives D = d sigma^2/d theta satisfy D = filter(RHS, ZI), so for the
        weights w_t = d l / d sigma^2_t,  sum_t w_t D_t = sum_t lam_t RHS_t + sum_k lam_k ZI_k
        with lam the same filter run backwards over w: one filter instead of k.
        """
        fam = self.family
        if not fam.has_adjoint:
            val, g = self.scores(theta, total=True)
            return val, g
        k = self.k
        eta = theta[k - self._nd:]
        e, de = self.residuals(theta, derivs=True)
        state = fam.forward(theta[self._vs], e, self.presample)
        sig2 = state.sig2
        if not sig2.min() > 0:
            return math.nan, np.full(k, np.nan)
        es = e[self.s0:]
        with np.errstate(all="ignore"):
            sd = np.sqrt(sig2)
            z = es / sd
            val = float(np.sum(self.dist.logpdf(z, eta) - np.log(sd)))
            fz = self.dist.dlogpdf_dz(z, eta)
        w = -0.5 * (fz * z + 1.0) / sig2
        g = np.zeros(k)
        nm = self.n_mean
        gm = de[:, self.s0:] @ (fz / sd) if nm else None
        g[self._vs] = fam.adjoint(state, w, de, gm)
        if nm:
            g[:nm] = gm
        nd = self._nd
        if nd:
            g[k - nd:] = self.dist.dlogpdf_dparams(z, eta).sum(axis=1)
        return val, g

    # ------------------------------------------------------------------ series
    def series(self, theta):
        """Residuals on [a, T) and conditional variances on the likelihood positions."""
        e, _ = self.residuals(theta)
        sig2, _ = self.variance(theta, e)
        return e, sig2
