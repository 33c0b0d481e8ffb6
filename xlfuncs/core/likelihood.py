"""Mean and variance recursions and the Gaussian/non-Gaussian log-likelihood.

Notation.  ``r`` are the returns (length T).  The full parameter vector ``theta`` is laid out
as ``spec.param_names + dist.param_names`` (mean, variance, distribution).  For a model linear
in lagged squares (constant, ARCH, GARCH, GJR, IGARCH) the recursions run through
``scipy.signal.lfilter`` and the per-observation scores are computed analytically by
propagating derivatives through the same filters; EGARCH, whose recursion is not linear in
lagged squares, runs in a tight loop with numerical derivatives.

Presample conventions (DESIGN.md, option ``presample``):

* ``mean`` -- every observation enters the likelihood.  Lagged squared residuals and lagged
  variances before the first observation equal the mean squared residual at the trial
  parameters (for GJR the asymmetric term takes the mean of 1(e<0) e^2; for EGARCH the
  presample news terms are zero and the log-variance is the log mean square).  AR lags before
  the first observation take the sample mean of the returns.  MA presample residuals are zero.
* ``drop`` -- the conditional likelihood: the first ``ar`` observations serve only as AR lags
  and the next ``p`` only as ARCH lags; GARCH variance lags before the start take the mean
  squared residual.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.signal import lfilter

from .distributions import Distribution
from .spec import ModelSpec

__all__ = ["Likelihood", "LINEAR_VARIANCES"]

try:  # SciPy's C filter without lfilter's argument checks: the recursions call it thousands of times
    from scipy.signal._sigtools import _linear_filter as _raw_filter
except ImportError:  # pragma: no cover - a SciPy without it
    _raw_filter = None
_ONE = np.array([1.0])


def _filter(den, x, zi=None):
    """lfilter([1], den, x[, zi]) along the last axis; den[0] == 1."""
    if _raw_filter is not None:
        try:
            if zi is None:
                return _raw_filter(_ONE, den, x, -1)
            return _raw_filter(_ONE, den, x, -1, zi)[0]
        except (TypeError, ValueError):  # pragma: no cover - a changed private signature
            pass
    return lfilter([1.0], den, x) if zi is None else lfilter([1.0], den, x, zi=zi)[0]

LINEAR_VARIANCES = ("constant", "arch", "garch", "gjr", "igarch")
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
        self.p = spec.arch_lags
        self.q = spec.q if spec.variance != "constant" else 0
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
        self.linear = spec.variance in LINEAR_VARIANCES
        self._inv_n = 1.0 / self.n if self.n else math.nan
        rows = ([-np.ones(self.n)] if spec.has_mu else []) + [-self.rlag[i] for i in range(spec.ar)]
        self._de_const = np.array(rows) if rows else np.zeros((0, self.n))
        self._de_const.setflags(write=False)

    # ------------------------------------------------------------------ parameter pieces
    def split(self, theta):
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
        omega = theta[i]
        i += 1
        alpha = gamma = beta = np.zeros(0)
        if s.variance != "constant":
            alpha = theta[i: i + s.p]
            i += s.p
            if s.asymmetric:
                gamma = theta[i: i + s.p]
                i += s.p
            beta = theta[i: i + s.q]
            i += s.q
        eta = theta[i:]
        return mu, phi, tht, omega, alpha, gamma, beta, eta

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
        (linear families only), else None.
        """
        s = self.spec
        _, _, _, omega, alpha, gamma, beta, _ = self.split(theta)
        nobs = self.nobs
        e2 = e * e
        want = de is not None
        if s.variance == "constant":
            sig2 = np.full(nobs, omega)
            if not want:
                return sig2, None
            D = np.zeros((self.k, nobs))
            D[self.idx["omega"]] = 1.0
            return sig2, D
        if not self.linear:
            return self._egarch(theta, e), None
        p, q = self.p, self.q
        sbar = e2.mean()
        if s.asymmetric:
            neg = e < 0
            n2 = np.where(neg, e2, 0.0)
            nbar = n2.mean()
        if self.presample == "mean":
            P = np.concatenate([np.full(p, sbar), e2])
            if s.asymmetric:
                N = np.concatenate([np.full(p, nbar), n2])
        else:
            P = e2
            if s.asymmetric:
                N = n2
        m = len(P) - p  # == nobs
        x = np.full(m, omega)
        for i in range(1, p + 1):
            x += alpha[i - 1] * P[p - i: p - i + m]
            if s.asymmetric:
                x += gamma[i - 1] * N[p - i: p - i + m]
        if q:
            den = np.concatenate([[1.0], -beta])
            zi = sbar * np.cumsum(beta[::-1])[::-1]
            sig2 = _filter(den, x, zi)
        else:
            sig2 = x
        if not want:
            return sig2, None

        # ---- derivatives: D_t = RHS_t + sum_j beta_j D_{t-j}
        k = self.k
        RHS = np.zeros((k, m))
        ZI = np.zeros((k, q)) if q else None
        nm = self.n_mean
        if nm:
            dE2 = 2.0 * e * de  # (nm x n)
            dsbar = dE2.mean(axis=1)
            if s.asymmetric:
                dN2 = np.where(neg, dE2, 0.0)
                dnbar = dN2.mean(axis=1)
            if self.presample == "mean":
                dP = np.concatenate([np.repeat(dsbar[:, None], p, axis=1), dE2], axis=1)
                if s.asymmetric:
                    dN = np.concatenate([np.repeat(dnbar[:, None], p, axis=1), dN2], axis=1)
            else:
                dP = dE2
                if s.asymmetric:
                    dN = dN2
            for i in range(1, p + 1):
                RHS[:nm] += alpha[i - 1] * dP[:, p - i: p - i + m]
                if s.asymmetric:
                    RHS[:nm] += gamma[i - 1] * dN[:, p - i: p - i + m]
            if q:
                ZI[:nm] = dsbar[:, None] * np.cumsum(beta[::-1])[::-1][None, :]
        base = self.idx["omega"]
        RHS[base] = 1.0
        for i in range(1, p + 1):
            RHS[base + i] = P[p - i: p - i + m]
        off = base + p + 1
        if s.asymmetric:
            for i in range(1, p + 1):
                RHS[base + p + i] = N[p - i: p - i + m]
            off += p
        for j in range(1, q + 1):
            lag = np.empty(m)
            lag[:j] = sbar
            lag[j:] = sig2[:-j]
            RHS[off + j - 1] = lag
        if q:
            D, _ = lfilter([1.0], den, RHS, axis=1, zi=ZI)
        else:
            D = RHS
        return sig2, D

    def _egarch(self, theta, e):
        """EGARCH(p,q) (Nelson 1991) log-variance recursion, as a tight loop."""
        _, _, _, omega, alpha, gamma, beta, eta = self.split(theta)
        p, q = self.p, self.q
        kappa = float(self.dist.abs_moment(eta))
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
        if self.presample == "drop":
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
        for t in range(start, n):
            v = om
            for i in range(1, p + 1):
                v += al[i - 1] * absz[p + t - i] + ga[i - 1] * zz[p + t - i]
            pos = q + t - start
            for j in range(1, q + 1):
                v += be[j - 1] * lv[pos - j]
            if v > 700.0 or v < -700.0:
                return np.full(self.nobs, np.nan)
            lv[pos] = v
            sig = exp(0.5 * v)
            z = ev[t] / sig
            absz[p + t] = abs(z) - kappa
            zz[p + t] = z
            append(sig * sig)
        return np.asarray(out)

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
        """(log-likelihood, gradient) by the adjoint of the variance filter; linear families.

        The forward derivatives D = d sigma^2/d theta satisfy D = filter(RHS, ZI), so for the
        weights w_t = d l / d sigma^2_t,  sum_t w_t D_t = sum_t lam_t RHS_t + sum_k lam_k ZI_k
        with lam the same filter run backwards over w: one filter instead of k.
        """
        s = self.spec
        if s.variance == "constant":
            val, g = self.scores(theta, total=True)
            return val, g
        _, _, _, omega, alpha, gamma, beta, eta = self.split(theta)
        p, q, k = self.p, self.q, self.k
        e, de = self.residuals(theta, derivs=True)
        e2 = e * e
        sbar = e2.sum() * self._inv_n
        asym = s.asymmetric
        if asym:
            neg = e < 0
            n2 = np.where(neg, e2, 0.0)
            nbar = n2.mean()
        mean_mode = self.presample == "mean"
        P = np.concatenate([np.full(p, sbar), e2]) if mean_mode else e2
        if asym:
            N = np.concatenate([np.full(p, nbar), n2]) if mean_mode else n2
        m = len(P) - p
        x = np.full(m, omega)
        for i in range(1, p + 1):
            x += alpha[i - 1] * P[p - i: p - i + m]
            if asym:
                x += gamma[i - 1] * N[p - i: p - i + m]
        if q:
            den = np.concatenate([[1.0], -beta])
            tail = np.cumsum(beta[::-1])[::-1]
            sig2 = _filter(den, x, sbar * tail)
        else:
            sig2 = x
        if not sig2.min() > 0:
            return math.nan, np.full(k, np.nan)
        es = e[self.s0:]
        with np.errstate(all="ignore"):
            sd = np.sqrt(sig2)
            z = es / sd
            val = float(np.sum(self.dist.logpdf(z, eta) - np.log(sd)))
            fz = self.dist.dlogpdf_dz(z, eta)
        w = -0.5 * (fz * z + 1.0) / sig2
        lam = _filter(den, np.ascontiguousarray(w[::-1]))[::-1] if q else w
        g = np.zeros(k)
        base = self.idx["omega"]
        g[base] = lam.sum()
        for i in range(1, p + 1):
            g[base + i] = P[p - i: p - i + m] @ lam
            if asym:
                g[base + p + i] = N[p - i: p - i + m] @ lam
        off = base + p + 1 + (p if asym else 0)
        for j in range(1, q + 1):
            lag = np.empty(m)
            lag[:j] = sbar
            lag[j:] = sig2[:-j]
            g[off + j - 1] = lag @ lam
        nm = self.n_mean
        if nm:
            dE2 = 2.0 * e * de
            dsbar = dE2.sum(axis=1) * self._inv_n
            if asym:
                dN2 = np.where(neg, dE2, 0.0)
                dnbar = dN2.mean(axis=1)
            gm = de[:, self.s0:] @ (fz / sd)
            for i in range(1, p + 1):
                lo, hi = p - i, p - i + m  # window in padded coordinates
                if mean_mode:
                    pre = max(0, p - lo)  # how many presample entries the window covers
                    part = dE2[:, max(lo - p, 0): hi - p] @ lam[pre:]
                    gm += alpha[i - 1] * (dsbar * lam[:pre].sum() + part)
                    if asym:
                        gm += gamma[i - 1] * (dnbar * lam[:pre].sum() + dN2[:, max(lo - p, 0): hi - p] @ lam[pre:])
                else:
                    gm += alpha[i - 1] * (dE2[:, lo:hi] @ lam)
                    if asym:
                        gm += gamma[i - 1] * (dN2[:, lo:hi] @ lam)
            if q:
                gm += dsbar * (lam[:q] @ tail)
            g[:nm] = gm
        nd = len(self.dist.param_names)
        if nd:
            g[k - nd:] = self.dist.dlogpdf_dparams(z, eta).sum(axis=1)
        return val, g

    # ------------------------------------------------------------------ series
    def series(self, theta):
        """Residuals on [a, T) and conditional variances on the likelihood positions."""
        e, _ = self.residuals(theta)
        sig2, _ = self.variance(theta, e)
        return e, sig2
