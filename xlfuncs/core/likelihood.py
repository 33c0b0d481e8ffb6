"""The log-likelihood of a model on a return series: the mean's residuals, the variance family's
recursion, the distribution's density.

Notation.  ``r`` are the returns (length T).  The full parameter vector ``theta`` is laid out
as ``spec.param_names + dist.param_names``: the mean's parameters (:mod:`xlfuncs.core.mean`), the
variance family's, the variance regressors' ``v[k]``, then the distribution's.  The residuals
come from the mean model; the conditional variances, and for the families with analytic
derivatives the derivatives through their recursion (forward) and the gradient by its adjoint,
come from the model's variance family (:mod:`xlfuncs.core.families`), which adds the variance
regressors' term sum v[k] Z[t,k] to its intercept.  Families without analytic derivatives, and
every in-mean model, are scored by numerical differences in the estimator.

In-mean models (``-M``): the mean reads sigma[t], which reads the residuals before t, so the
residuals and variances are computed together one observation at a time by the family's
:meth:`~xlfuncs.core.families.VarianceFamily.filter`.  Their presample is fixed by the residuals
without the in-mean term (lagged squares and variances at their mean square, and so on), so
that lambda_m = 0 gives exactly the model without it.

Presample conventions (DESIGN.md, option ``presample``):

* ``mean`` -- every observation enters the likelihood.  Lagged squared residuals and lagged
  variances before the first observation equal the mean squared residual at the trial
  parameters (each family says how it reads this; see its module).  AR lags before the first
  observation take the sample mean of the returns.  MA presample residuals are zero.
* ``drop`` -- the conditional likelihood: the first ``ar`` observations serve only as AR lags
  and the next ``arch_lags`` (the family's) only as lags of the variance recursion; variance
  lags before the start take the mean squared residual.  Under ``-M`` the in-mean term of those
  lag-only observations uses the presample volatility, the root of that mean square.
"""

from __future__ import annotations

import math

import numpy as np
from ._lazy import lfilter

from .distributions import Distribution
from .mean import MeanModel, check_regressors
from .spec import ModelSpec

__all__ = ["Likelihood"]

_LOG2PI = math.log(2.0 * math.pi)


class Likelihood:
    """The log-likelihood of one model on one return series, at any full parameter vector.

    ``X`` holds the model's regressor columns (T x K; :attr:`ModelSpec.xmean` of them enter
    the mean, :attr:`ModelSpec.xvar` the variance), None for a model without regressors.
    """

    def __init__(self, r, spec: ModelSpec, dist: Distribution, presample: str = "mean", X=None):
        self.r = np.ascontiguousarray(r, dtype=float)
        self.spec = spec
        self.dist = dist
        self.presample = presample
        T = len(self.r)
        self.X = check_regressors(X, T, spec)
        self.mean = mean = MeanModel(spec, self.r, self.X, presample)
        self.names = tuple(spec.param_names) + tuple(dist.param_names)
        self.k = len(self.names)
        self.n_mean = len(spec.mean_names)
        self.n_var = len(spec.variance_names)
        self.n_shift = len(spec.shift_names)
        self.idx = {name: i for i, name in enumerate(self.names)}
        drop = presample == "drop"
        # residuals are computed on [a, T); the likelihood uses residual positions [s0, n)
        self.a = mean.a
        self.n = mean.n
        self.family = fam = spec.family
        self.p = fam.arch_lags
        self.q = fam.garch_lags
        self.s0 = self.p if drop else 0
        self.nobs = self.n - self.s0
        self.y = mean.y
        self.in_mean = spec.in_mean
        # analytic scores through the family's recursion (the in-mean filter is differentiated numerically)
        self.linear = fam.analytic and not self.in_mean
        self._vs = slice(self.n_mean, self.n_mean + self.n_var)
        self._ss = slice(self.n_mean + self.n_var, self.n_mean + self.n_var + self.n_shift)
        self._nd = len(dist.param_names)
        # the variance regressors on the likelihood positions (one row per parameter v[k])
        if self.n_shift:
            Z = self.X[self.a + self.s0:, [k - 1 for k in spec.xvar]].T
            self.Z = np.ascontiguousarray(Z)
            self.Z.setflags(write=False)
        else:
            self.Z = None

    # ------------------------------------------------------------------ parameter pieces
    def split(self, theta):
        """(mu, phi, theta_ma, variance parameters, distribution parameters) of a full vector."""
        mu, phi, tht = self.mean.mu_phi_theta(theta[: self.n_mean])
        return mu, phi, tht, theta[self._vs], theta[self.k - self._nd:]

    def shift(self, theta):
        """The variance regressors' term sum v[k] Z[t,k] on the likelihood positions (None without)."""
        if self.Z is None:
            return None
        return theta[self._ss] @ self.Z

    def intercept_ok(self, theta) -> bool:
        """The variance regressors keep the family's intercept in its domain at every observation."""
        if self.Z is None:
            return True
        return not self.family.bad_shift(theta[self._vs], self.shift(theta)).any()

    # ------------------------------------------------------------------ mean
    def residuals(self, theta, derivs: bool = False):
        """Residuals on [a, T) of the mean without its in-mean term and, if asked, their
        derivatives (n_mean x n)."""
        return self.mean.residuals(theta[: self.n_mean], derivs)

    # ------------------------------------------------------------------ variance
    def variance(self, theta, e, de=None):
        """Conditional variances on the likelihood positions [s0, n) from the residuals ``e``.

        Returns ``(sigma2, D)`` where D (k x nobs) holds d sigma2 / d theta when ``de`` is given
        (families with analytic derivatives only), else None.  The distribution's rows are the
        family's where its recursion reads them (EGARCH's E|z|), else zero.
        """
        vp = theta[self._vs]
        eta = theta[self.k - self._nd:]
        shift = self.shift(theta)
        if de is None or not self.linear:
            return self.family.variance(vp, e, self.presample, eta, self.dist, shift=shift), None
        sig2, Dfam = self.family.derivatives(vp, e, de, self.presample, eta, self.dist, shift=shift,
                                             dshift=self.Z if shift is not None else None)
        if len(Dfam) < self.k:  # the family's recursion does not read the distribution's parameters
            D = np.zeros((self.k, len(sig2)))
            D[: len(Dfam)] = Dfam
        else:
            D = Dfam
        return sig2, D

    def joint(self, theta):
        """Residuals on [a, T) and variances on the likelihood positions, the in-mean term
        included (one observation at a time for an in-mean model)."""
        u, _ = self.residuals(theta)
        if not self.in_mean:
            sig2, _ = self.variance(theta, u)
            return u, sig2
        tm = theta[: self.n_mean]
        step = self.mean.in_mean_step(tm, u)
        eta = theta[self.k - self._nd:]
        return self.family.filter(theta[self._vs], u, step, self.presample, eta, self.dist, shift=self.shift(theta))

    # ------------------------------------------------------------------ likelihood
    def terms(self, theta):
        """Per-observation log-likelihood contributions (length nobs); nan where undefined."""
        if not self.intercept_ok(theta):
            return np.full(self.nobs, np.nan)
        e, sig2 = self.joint(theta)
        return self._terms(theta, e[self.s0:], sig2)

    def _terms(self, theta, es, sig2):
        eta = theta[self.k - len(self.dist.param_names):]
        with np.errstate(all="ignore"):
            if not sig2.min() > 0:  # a variance at or below zero, or nan
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
        if not self.intercept_ok(theta):
            sig2 = np.full(len(sig2), np.nan)
        es = e[self.s0:]
        eta = theta[self.k - len(self.dist.param_names):]
        with np.errstate(all="ignore"):
            if not sig2.min() > 0:  # a variance at or below zero, or nan
                if fisher:
                    return math.nan, np.full(self.k, np.nan), np.full((self.k, self.k), np.nan)
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
        shift = self.shift(theta)
        state = fam.forward(theta[self._vs], e, self.presample, shift=shift, eta=eta, dist=self.dist)
        sig2 = state.sig2
        if not sig2.min() > 0 or not self.intercept_ok(theta):
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
        if shift is None:
            gf = fam.adjoint(state, w, de, gm)
            stop = self._vs.stop
        else:
            gf = fam.adjoint(state, w, de, gm, dshift=self.Z)
            stop = self._ss.stop
        g[self._vs.start: stop] = gf[: stop - self._vs.start]
        if nm:
            g[:nm] = gm
        nd = self._nd
        if nd:
            g[k - nd:] = self.dist.dlogpdf_dparams(z, eta).sum(axis=1)
            if len(gf) > stop - self._vs.start:  # the recursion reads the shape (EGARCH's E|z|)
                g[k - nd:] += gf[stop - self._vs.start:]
        return val, g

    # ------------------------------------------------------------------ second derivatives
    @property
    def has_hessian(self) -> bool:
        """The analytic Hessian applies: a family with second derivatives through its recursion
        (no in-mean term)."""
        return self.linear and self.family.has_second

    def hessian(self, theta):
        """(terms l, scores G nobs x k, Hessian k x k) of the log-likelihood, analytic.

        With z = e / sigma, l_t = psi(z_t, eta) - log(sigma2_t) / 2 (psi the log density):

            d2 l = psi_zz dz dz' + psi_z d2z + psi_zeta (dz deta' + deta dz') + psi_etaeta deta deta'
                   + D D' / (2 sigma2^2) - d2 sigma2 / (2 sigma2)
            dz   = de / sigma - z D / (2 sigma2)
            d2z  = -(de D' + D de') / (2 sigma^3) + 3 z D D' / (4 sigma2^2) - z d2 sigma2 / (2 sigma2)

        (de, D: the residuals' and the variances' first derivatives; the residuals are linear in
        the mean parameters).  The terms in d2 sigma2 add up to sum_t w_t d2 sigma2_t with the
        gradient's weights w_t = -(psi_z z + 1) / (2 sigma2), which the family gives by the
        adjoint of its recursion (:meth:`VarianceFamily.second`): one backward filter, not k^2.
        """
        k = self.k
        nd = self._nd
        fam = self.family
        eta = theta[k - nd:]
        e, de = self.residuals(theta, derivs=True)
        if de is None:
            de = np.zeros((0, self.n))
        shift = self.shift(theta)
        state, D = fam.second_pass(theta[self._vs], e, de, self.presample, shift=shift,
                                   dshift=self.Z if shift is not None else None, eta=eta, dist=self.dist)
        sig2 = state.sig2
        if not sig2.min() > 0 or not self.intercept_ok(theta):
            return self._bad_hessian()
        es = e[self.s0:]
        nm = self.n_mean
        kv = k - nd  # mean, variance and shift rows
        kd = D.shape[0]  # D's rows: kv, or every row where the recursion reads the shape (EGARCH)
        dist = self.dist
        with np.errstate(all="ignore"):
            sd = np.sqrt(sig2)
            isig2 = 1.0 / sig2
            z = es / sd
            l = dist.logpdf(z, eta) - np.log(sd)
            fz = dist.dlogpdf_dz(z, eta)
            fzz, fzp, fpp = dist.d2logpdf(z, eta)
        fzz_z = fz * z
        w = -0.5 * (fzz_z + 1.0) * isig2
        des = de[:, self.s0:]  # the residuals' derivatives (mean rows only)
        ma = nm and self.mean.ma is not None
        S, ce = fam.second(state, D, de, w, residual_weights=bool(ma))
        if ma:
            # the residuals' second derivatives (an MA part): sum_s c_s d2 e_s with c the
            # family's weights plus psi_z / sigma on the likelihood positions
            ce[self.s0:] += fz / sd
            S[:nm, :nm] += self._ma_second(theta, de, ce)
        # scores
        G = np.empty((k, self.nobs))
        np.multiply(w, D, out=G[:kd])
        if nm:
            G[:nm] += (fz / sd) * des
        if nd:
            if kd == k:
                G[kv:] += dist.dlogpdf_dparams(z, eta)
            else:
                G[kv:] = dist.dlogpdf_dparams(z, eta)
        # Hessian, with a = z / (2 sigma2) so that dz = de / sigma - a D: the D D' terms
        # psi_zz a^2 + (3/4 psi_z z + 1/2) / sigma2^2 gathered in one weight.  Where D has the
        # shape parameters' rows too (kd = k), their block gathers the same terms, and the
        # density's own cross terms psi_zeta (dz deta' + deta dz') and psi_etaeta add to it
        a = 0.5 * z * isig2
        H = np.zeros((k, k)) if kd < k else np.empty((k, k))
        H[:kd, :kd] = ((fzz * a * a + (0.75 * fzz_z + 0.5) * isig2 * isig2) * D) @ D.T + S
        if nm:
            isd = 1.0 / sd
            cross = des @ ((-(fzz * a + 0.5 * fz * isig2) * isd) * D).T  # nm x kd
            H[:nm, :kd] += cross
            H[:kd, :nm] += cross.T
            H[:nm, :nm] += (fzz * isig2 * des) @ des.T
        if nd:
            dz = -a * D
            if nm:
                dz[:nm] += des * isd
            C = fzp @ dz.T  # nd x kd
            H[kv:, :kd] += C
            H[:kd, kv:] += C.T
            H[kv:, kv:] += fpp.sum(axis=-1)
        H = 0.5 * (H + H.T)
        # every entry finite: their sums are (a nan or an infinity carries into a sum)
        if not (math.isfinite(H.sum()) and math.isfinite(l.sum())):
            return self._bad_hessian()
        return l, G.T, H

    def _ma_second(self, theta, de, c):
        """sum_s c_s d2 e_s / d(mean)^2 for residuals through the MA filter e_s = w_s - sum_j
        theta_j e_{s-j}: d2 e = filter(RHS2) with RHS2_s[a, theta_j] = -de_{s-j}[a] (and its
        transpose), so the sum is sum_s mu_s RHS2_s with mu the filter run backwards over c."""
        mean = self.mean
        nm = self.n_mean
        den = mean.ma.den(theta[mean.ma_idx])
        mu = lfilter([1.0], den, c[::-1])[::-1]
        R = np.zeros((nm, nm))
        n = len(c)
        for j, idx in enumerate(mean.ma_idx, start=1):
            v = -(de[:, : n - j] @ mu[j:])
            R[:, idx] += v
            R[idx, :] += v
        return R

    def _bad_hessian(self):
        k = self.k
        return np.full(self.nobs, np.nan), np.full((self.nobs, k), np.nan), np.full((k, k), np.nan)

    # ------------------------------------------------------------------ series
    def series(self, theta):
        """Residuals on [a, T) and conditional variances on the likelihood positions."""
        return self.joint(theta)
