"""Shared mathematics of the variance recursions linear in lagged squares.

    sigma2[t] = omega + sum_i (alpha_i e2[t-i] + gamma_i N[t-i]) + sum_j beta_j sigma2[t-j],

with e2 = e^2 and N = 1(e < 0) e^2 (the GJR news term; no gamma in the symmetric families).  The
recursion runs through ``scipy.signal.lfilter``; its derivatives (forward) run through the same
filter, and the gradient of sum_t w_t sigma2_t runs the filter once backwards (the adjoint).  With
one lag of each and no news term (GARCH(1,1), IGARCH(1,1)) the variance and its forward
derivatives run side by side in one compiled loop where numba is already loaded in the process
(:func:`_one_lag_forward`: the filters' numbers to the last bit, so a fit gives the same estimate,
bit for bit, whichever route ran; the Hessian's second-derivative sums stay with the filters, whose
pairwise sums a compiled loop would not repeat to the last bit).

A family of this kind says how its own parameters give the *linear coefficients*
(omega, alpha[1..p], gamma[1..p], beta[1..q]): :meth:`LinearFamily._coefficients` and its
Jacobian at the parameters, :meth:`LinearFamily._jacobian` (None where the parameters are the
coefficients themselves; constant where the map is affine, as for EWMA; it varies with the
parameters where the map is not, as for the component model).  Derivatives in the coefficients
are carried back to the parameters through that Jacobian (the chain rule).

Presample (``presample=mean``): lagged squares and variances before the first observation equal
the mean squared residual at the trial parameters (the GJR term the mean of N); ``drop``: the
first p residuals are lags only and variance lags before the start take the mean squared residual.

Variance regressors: an intercept series ``shift`` adds to omega observation by observation,
sigma2[t] = omega + shift[t] + ...; its parameters' derivatives run through the same filter as
omega's.  The variance stays positive where omega + shift[t] > 0 at every observation
(:meth:`LinearFamily._bad_shift`), the alphas and betas being non-negative.
"""

from __future__ import annotations

import math
import operator

import numpy as np

from .._lazy import lfilter
# SciPy's C filter without lfilter's argument checks (the recursions call it thousands of times),
# loaded without importing scipy.signal; None in a SciPy without it
from .._lazy import raw_linear_filter as _raw_filter
from ..errors import InputError
from ._compiled import compiled_loaded, kernel
from .base import UNIT_TOL, VarianceFamily

_ONE = np.array([1.0])
_NO_ROWS = np.zeros((0, 0))
_NO_VALUES = np.zeros(0)


def linear_filter(den, x, zi=None):
    """lfilter([1], den, x[, zi]) along the last axis; den[0] == 1."""
    if _raw_filter is not None:
        try:
            if zi is None:
                return _raw_filter(_ONE, den, x, -1)
            return _raw_filter(_ONE, den, x, -1, zi)[0]
        except (TypeError, ValueError):  # pragma: no cover - a changed private signature
            pass
    return lfilter([1.0], den, x) if zi is None else lfilter([1.0], den, x, zi=zi)[0]


# ---------------------------------------------------------------------------------- kernels
# The commonest recursion, one lag of each (GARCH(1,1) and its kin with no news term), in one
# compiled loop where numba is loaded (:mod:`._compiled`; else the filters below).  A filter is a
# chain of dependent multiply-adds, so SciPy's loop and a compiled one cost about the same per row;
# the gain is in running the variance and its derivatives' rows side by side in one loop.
# Each filter step is SciPy's transposed direct form II with its numerator [1, 0] (the output is
# the delay plus the input; the delay the input times zero less the output times -beta), so
# the variances and the forward derivatives are the filters' numbers to the last bit.


@kernel
def _one_lag_forward(P, dE2, dsbar, omega, alpha, beta, sbar, sig2, D):
    """sigma2 and the forward derivatives D (rows: mean parameters, omega, alpha, beta) of
    sigma2[t] = omega + alpha P[t] + beta sigma2[t-1] (P[t] the square before t, P[0] its
    presample), the lagged variance before the start sbar; ``dE2`` the squares' derivatives in
    the mean parameters (dE2[:, t] that of P[t + 1]), ``dsbar`` the presample's.  ``D`` may have
    no rows (the variances alone).  The estimator's passes only: the
    variances alone (a log-likelihood, a forecast's filter) stay with SciPy's filter, so that
    what never estimates never loads numba."""
    m = sig2.shape[0]
    nm = dE2.shape[0]
    rows = D.shape[0]
    den1 = -beta
    zs = sbar * beta
    zm = np.empty(nm)
    for r in range(nm):
        zm[r] = dsbar[r] * beta
    zo = 0.0
    za = 0.0
    zb = 0.0
    prev = sbar
    for t in range(m):
        pt = P[t]
        xt = alpha * pt + omega
        yt = zs + xt
        zs = xt * 0.0 - yt * den1
        sig2[t] = yt
        if rows:
            for r in range(nm):
                xr = alpha * dsbar[r] if t == 0 else dE2[r, t - 1] * alpha
                yr = zm[r] + xr
                zm[r] = xr * 0.0 - yr * den1
                D[r, t] = yr
            yo = zo + 1.0
            zo = 1.0 * 0.0 - yo * den1
            D[nm, t] = yo
            ya = za + pt
            za = pt * 0.0 - ya * den1
            D[nm + 1, t] = ya
            yb = zb + prev
            zb = prev * 0.0 - yb * den1
            D[nm + 2, t] = yb
        prev = yt
    return sig2


def _one_lag(family, shift) -> bool:
    """The recursion runs through the one-lag kernels: one lag of each, no news term, no
    intercept series, and numba already loaded in this process (:func:`compiled_loaded`: the
    kernels save ~1.5 ms a fit, less than numba's import costs a process that fits only GARCH)."""
    return family.p == 1 and family.q == 1 and not family.asymmetric and shift is None and compiled_loaded()


def _mean(x):
    """np.mean of a 1-D array (its sum over its length, as np.mean computes it) without np.mean's
    Python-level dispatch, which costs as much as the sum on the recursions' short series."""
    return x.sum() / len(x)


def _head_sum(x, k: int) -> float:
    """x[:k].sum() for the few presample positions (k <= the orders): the same sequential sum
    in plain floats, without a NumPy reduction's call overhead."""
    total = 0.0
    for v in x[:k].tolist():
        total += v
    return total


def _window_means(x, starts, ends) -> np.ndarray:
    """The mean of x[starts[k]:ends[k]] for each k (one reduction when the windows are all as long)."""
    lengths = ends - starts
    if len(lengths) and np.all(lengths == lengths[0]):
        # the windows as rows of a read-only strided view (sliding_window_view's own checks cost
        # several times the sums on a backtest's blocks); the sum over the length is np.mean's
        L = int(lengths[0])
        x = np.ascontiguousarray(x, dtype=float)
        view = np.lib.stride_tricks.as_strided(x, shape=(len(x) - L + 1, L), strides=(x.strides[0],) * 2,
                                               writeable=False)
        return view[starts].sum(axis=1) / L
    return np.array([x[a:b].mean() for a, b in zip(starts, ends)])


class _State:
    """What the forward recursion leaves for the adjoint."""

    __slots__ = ("e", "sig2", "P", "N", "neg", "sbar", "den", "tail", "omega", "alpha", "gamma", "beta", "mean_mode", "m",
                 "lam", "vp", "dE2", "dsbar")


class _SimState:
    """Lagged squares, negative-part squares and variances of simulated paths, newest last."""

    __slots__ = ("e2", "n2", "s2")

    def __init__(self, e2, n2, s2):
        self.e2, self.n2, self.s2 = e2, n2, s2


class LinearFamily(VarianceFamily):
    """Base of the families whose recursion is linear in lagged squares."""

    analytic = True
    has_adjoint = True
    takes_shift = True
    window_forecasts = True
    compiled_paths = True  # sim_sums: risk_sums below
    smooth_in_residuals = True
    #: the recursion carries the GJR news term gamma_i 1(e<0) e^2
    asymmetric = False

    # ------------------------------------------------------------------ coefficients
    def _coefficients(self, vp):
        """(omega, alpha, gamma, beta) from the family's parameters (default: they are the same)."""
        p, q = self.p, self.q
        omega = vp[0]
        alpha = vp[1: 1 + p]
        i = 1 + p
        gamma = np.zeros(0)
        if self.asymmetric:
            gamma = vp[i: i + p]
            i += p
        beta = vp[i: i + q]
        return omega, alpha, gamma, beta

    def _jacobian(self, vp):
        """d(omega, alpha, gamma, beta) / d(parameters) at ``vp``; None for the identity."""
        return None

    def _linear_names(self):
        names = ["omega"] + [f"alpha[{i}]" for i in range(1, self.p + 1)]
        if self.asymmetric:
            names += [f"gamma[{i}]" for i in range(1, self.p + 1)]
        return names + [f"beta[{j}]" for j in range(1, self.q + 1)]

    def _names(self):
        return self._linear_names()

    def _kappa(self, eta, dist):
        """E[z^2 1(z<0)] of the shocks, the weight of gamma in the persistence."""
        return dist.neg_sq_moment(eta) if self.asymmetric else 0.5

    # ------------------------------------------------------------------ recursion
    def _inputs(self, e, presample, mean_of):
        """Lagged squares P and negative-part squares N with their presample, and sbar."""
        p = self.p
        mean_mode = presample == "mean"
        if mean_mode:  # the squares written once, behind their presample (no concatenation)
            P = np.empty(p + len(e))
            e2 = np.multiply(e, e, out=P[p:])
        else:
            P = e2 = e * e
        sbar = mean_of(e2)
        neg = n2 = N = None
        if self.asymmetric:
            neg = e < 0
            n2 = np.where(neg, e2, 0.0)
            nbar = n2.mean()
        if mean_mode:
            P[:p] = sbar
            if self.asymmetric:
                N = np.concatenate([np.full(p, nbar), n2])
        elif self.asymmetric:
            N = n2
        return e2, sbar, neg, P, N

    def _run(self, omega, alpha, gamma, beta, P, N, sbar, shift=None):
        p, q = self.p, self.q
        m = len(P) - p
        if shift is None and p:
            # omega + alpha_1 P_{t-1} as alpha_1 P_{t-1} + omega (the same sum: addition commutes)
            x = np.multiply(alpha[0], P[p - 1: p - 1 + m])
            x += omega
            first = 2
            if self.asymmetric:
                x += gamma[0] * N[p - 1: p - 1 + m]
        else:
            x = np.full(m, omega) if shift is None else omega + shift
            first = 1
        for i in range(first, p + 1):
            x += alpha[i - 1] * P[p - i: p - i + m]
            if self.asymmetric:
                x += gamma[i - 1] * N[p - i: p - i + m]
        if q:
            den = np.empty(q + 1)
            den[0] = 1.0
            np.negative(beta, out=den[1:])
            tail = np.cumsum(beta[::-1])[::-1] if q > 1 else beta.copy()
            return linear_filter(den, x, sbar * tail), den, tail, m
        return x, None, None, m

    def _variance(self, vp, e, presample, eta, dist, shift=None):
        omega, alpha, gamma, beta = self._coefficients(vp)
        _, sbar, _, P, N = self._inputs(e, presample, _mean)
        return self._run(omega, alpha, gamma, beta, P, N, sbar, shift)[0]

    def _derivatives(self, vp, e, de, presample, eta=(), dist=None, shift=None, dshift=None):
        return self._derivatives_state(vp, e, de, presample, shift, dshift)[:2]

    def _second_pass(self, vp, e, de, presample, shift=None, dshift=None):
        _, D, st = self._derivatives_state(vp, e, de, presample, shift, dshift)
        return st, D

    def _derivatives_state(self, vp, e, de, presample, shift=None, dshift=None):
        """(sigma2, D, the state :meth:`_adjoint` and :meth:`_second` read)."""
        omega, alpha, gamma, beta = self._coefficients(vp)
        p, q = self.p, self.q
        asym = self.asymmetric
        e2, sbar, neg, P, N = self._inputs(e, presample, _mean)
        if presample == "mean" and dshift is None and _one_lag(self, shift):
            return self._one_lag_state(vp, e, de, omega, alpha, gamma, beta, sbar, neg, P, N)
        sig2, den, tail, m = self._run(omega, alpha, gamma, beta, P, N, sbar, shift)
        st = _State()
        st.e, st.vp = e, vp
        st.omega, st.alpha, st.gamma, st.beta = omega, alpha, gamma, beta
        st.mean_mode = presample == "mean"
        st.sbar, st.neg, st.P, st.N = sbar, neg, P, N
        st.sig2, st.den, st.tail, st.m = sig2, den, tail, m
        # D_t = RHS_t + sum_j beta_j D_{t-j}; rows: mean parameters, the linear coefficients,
        # then the shift's parameters (their RHS is the shift's derivative, as omega's is 1)
        nm = de.shape[0]
        n_lin = 1 + p * (2 if asym else 1) + q
        ns = 0 if dshift is None else dshift.shape[0]
        RHS = np.empty((nm + n_lin + ns, m))
        ZI = np.zeros((nm + n_lin + ns, q)) if q else None
        if ns:
            RHS[nm + n_lin:] = dshift
        st.dE2 = st.dsbar = None
        if nm:
            dE2 = 2.0 * e * de  # (nm x n)
            dsbar = dE2.sum(axis=1) / dE2.shape[1]  # the mean over the columns, as np.mean has it
            st.dE2, st.dsbar = dE2, dsbar  # the second derivatives read them again
            if asym:
                dN2 = np.where(neg, dE2, 0.0)
                dnbar = dN2.mean(axis=1)
            Rm = RHS[:nm]
            if presample == "mean":
                # sum_i alpha_i dP[t-i] with dP the squares' derivatives behind their presample
                # (dsbar): written window by window into RHS, the first term set, not added to zero
                for i in range(1, p + 1):
                    if i == 1:
                        Rm[:, :1] = alpha[0] * dsbar[:, None]
                        np.multiply(dE2[:, : m - 1], alpha[0], out=Rm[:, 1:])
                    else:
                        Rm[:, :i] += alpha[i - 1] * dsbar[:, None]
                        Rm[:, i:] += alpha[i - 1] * dE2[:, : m - i]
                    if asym:
                        Rm[:, :i] += gamma[i - 1] * dnbar[:, None]
                        Rm[:, i:] += gamma[i - 1] * dN2[:, : m - i]
                if not p:
                    Rm[:] = 0.0
            else:
                Rm[:] = 0.0
                for i in range(1, p + 1):
                    Rm += alpha[i - 1] * dE2[:, p - i: p - i + m]
                    if asym:
                        Rm += gamma[i - 1] * dN2[:, p - i: p - i + m]
            if q:
                ZI[:nm] = dsbar[:, None] * tail[None, :]
        base = nm
        RHS[base] = 1.0
        for i in range(1, p + 1):
            RHS[base + i] = P[p - i: p - i + m]
        off = base + p + 1
        if asym:
            for i in range(1, p + 1):
                RHS[base + p + i] = N[p - i: p - i + m]
            off += p
        for j in range(1, q + 1):
            lag = RHS[off + j - 1]  # the variances j steps back, the presample's before the start
            lag[:j] = sbar
            lag[j:] = sig2[:-j]
        D = linear_filter(den, RHS, ZI) if q else RHS
        J = self._jacobian(vp)
        if J is not None:
            D = np.concatenate([D[:nm], J.T @ D[nm: nm + n_lin], D[nm + n_lin:]])
        return sig2, D, st

    def _one_lag_state(self, vp, e, de, omega, alpha, gamma, beta, sbar, neg, P, N):
        """:meth:`_derivatives_state` for one lag of each under ``presample=mean`` by
        :func:`_one_lag_forward` (the same numbers as the filters)."""
        m = len(e)
        nm = de.shape[0]
        st = _State()
        st.e, st.vp = e, vp
        st.omega, st.alpha, st.gamma, st.beta = omega, alpha, gamma, beta
        st.mean_mode = True
        st.sbar, st.neg, st.P, st.N = sbar, neg, P, N
        st.dE2 = st.dsbar = None
        if nm:
            dE2 = 2.0 * e * de  # (nm x n)
            dsbar = dE2.sum(axis=1) / dE2.shape[1]  # the mean over the columns, as np.mean has it
            st.dE2, st.dsbar = dE2, dsbar
        else:
            dE2, dsbar = _NO_ROWS, _NO_VALUES
        b = float(beta[0])
        sig2 = np.empty(m)
        D = np.empty((nm + 3, m))
        _one_lag_forward(P, dE2, dsbar, float(omega), float(alpha[0]), b, float(sbar), sig2, D)
        st.sig2, st.den, st.tail, st.m = sig2, np.array([1.0, -b]), beta.copy(), m
        J = self._jacobian(vp)
        if J is not None:
            D = np.concatenate([D[:nm], J.T @ D[nm: nm + 3]])
        return sig2, D, st

    # ------------------------------------------------------------------ adjoint
    def _forward(self, vp, e, presample, shift=None):
        st = _State()
        omega, alpha, gamma, beta = self._coefficients(vp)
        st.e = e
        st.vp = vp
        st.omega, st.alpha, st.gamma, st.beta = omega, alpha, gamma, beta
        st.mean_mode = presample == "mean"
        e2, sbar, neg, P, N = self._inputs(e, presample, lambda a: a.sum() * (1.0 / len(a)))
        st.sbar, st.neg, st.P, st.N = sbar, neg, P, N
        st.sig2, st.den, st.tail, st.m = self._run(omega, alpha, gamma, beta, P, N, sbar, shift)
        return st

    def _adjoint(self, st, w, de, gm, dshift=None):
        p, q = self.p, self.q
        asym = self.asymmetric
        alpha, gamma = st.alpha, st.gamma
        P, N, m, sbar = st.P, st.N, st.m, st.sbar
        lam = linear_filter(st.den, np.ascontiguousarray(w[::-1]))[::-1] if q else w
        g = np.zeros(1 + p * (2 if asym else 1) + q)
        g[0] = lam.sum()
        for i in range(1, p + 1):
            g[i] = P[p - i: p - i + m] @ lam
            if asym:
                g[p + i] = N[p - i: p - i + m] @ lam
        off = p + 1 + (p if asym else 0)
        for j in range(1, q + 1):
            lag = np.empty(m)
            lag[:j] = sbar
            lag[j:] = st.sig2[:-j]
            g[off + j - 1] = lag @ lam
        if gm is not None and len(gm):
            e = st.e
            dE2 = 2.0 * e * de
            dsbar = dE2.sum(axis=1) * (1.0 / len(e))
            if asym:
                dN2 = np.where(st.neg, dE2, 0.0)
                dnbar = dN2.mean(axis=1)
            for i in range(1, p + 1):
                lo, hi = p - i, p - i + m  # window in padded coordinates
                if st.mean_mode:
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
                gm += dsbar * (lam[:q] @ st.tail)
        J = self._jacobian(st.vp)
        g = g if J is None else J.T @ g
        return g if dshift is None else np.concatenate([g, dshift @ lam])

    # ------------------------------------------------------------------ second derivatives
    @property
    def has_second(self):
        """The second derivatives by :meth:`_second` (families whose parameters are the linear
        coefficients themselves; a map with a Jacobian of its own goes by differences)."""
        return type(self)._jacobian is LinearFamily._jacobian

    def _second(self, st, D, de, w, residual_weights=True):
        """(S, ce): S = sum_t w_t d2 sigma2_t / d(mean, coefficients, shift)^2 for the weights w
        on the state of :meth:`_second_pass`, less the residuals' own second derivatives, which it
        gives as weights ce on the residuals: the whole is S + sum_s ce_s d2 e_s (the mean model
        contracts that; it is zero where the residuals are linear in the mean parameters).

        Differentiating the recursion twice, d2 sigma2_t = RHS2_t + sum_j beta_j d2 sigma2_{t-j},
        with RHS2_t = sum_i [alpha_i d2 P_{t-i} + gamma_i d2 N_{t-i}] + sym(e_alpha_i dP_{t-i}' +
        e_gamma_i dN_{t-i}') + sum_j sym(e_beta_j D_{t-j}'); so, as for the gradient, sum_t w_t
        d2 sigma2_t = sum_t lam_t RHS2_t plus the presample's share, lam the adjoint variables.
        d2 e2 = 2 de de' + 2 e d2e.  ``D``: the forward derivatives (rows: mean parameters,
        coefficients, shift's parameters), ``de``: the residuals'.  ``residual_weights=False``: ce is
        not wanted (residuals linear in the mean parameters) and comes back as None."""
        p, q = self.p, self.q
        asym = self.asymmetric
        m = st.m
        nm = de.shape[0]
        kk = D.shape[0]
        # the adjoint variables: the recursion's filter run backwards over the weights
        lam = linear_filter(st.den, np.ascontiguousarray(w[::-1]))[::-1] if q else w
        S = np.zeros((kk, kk))
        ce = None
        if nm:
            e = st.e
            want = residual_weights
            ce = np.zeros(len(e)) if want else None
            k_sbar = 0.0  # the weights of d2 sbar and d2 nbar (presample)
            k_nbar = 0.0
            mean_mode = st.mean_mode
            inv_n = 1.0 / len(e)
            dE2 = st.dE2 if getattr(st, "dE2", None) is not None else 2.0 * e * de  # the forward pass's
            dsbar = dE2.sum(axis=1) * inv_n
            d2sbar = 2.0 * (de @ de.T) * inv_n
            if asym:
                neg = st.neg
                dN2 = np.where(neg, dE2, 0.0)
                dnbar = dN2.sum(axis=1) * inv_n
                den_ = de[:, neg]
                d2nbar = 2.0 * (den_ @ den_.T) * inv_n
            for i in range(1, p + 1):
                lo, hi = p - i, p - i + m  # window in padded coordinates
                if mean_mode:
                    pre = max(0, p - lo)
                    x0, x1 = max(lo - p, 0), hi - p
                    lpre = _head_sum(lam, pre)
                else:
                    pre, x0, x1, lpre = 0, lo, hi, 0.0
                lw = lam[pre:]
                dew = de[:, x0:x1]
                first = dE2[:, x0:x1] @ lw + dsbar * lpre
                S[:nm, nm + i] += first
                S[nm + i, :nm] += first
                S[:nm, :nm] += st.alpha[i - 1] * (2.0 * (dew * lw) @ dew.T + d2sbar * lpre)
                if want:
                    ce[x0:x1] += (2.0 * st.alpha[i - 1]) * e[x0:x1] * lw
                k_sbar += st.alpha[i - 1] * lpre
                if asym:
                    firstn = dN2[:, x0:x1] @ lw + dnbar * lpre
                    S[:nm, nm + p + i] += firstn
                    S[nm + p + i, :nm] += firstn
                    lwn = np.where(neg[x0:x1], lw, 0.0)
                    S[:nm, :nm] += st.gamma[i - 1] * (2.0 * (dew * lwn) @ dew.T + d2nbar * lpre)
                    if want:
                        ce[x0:x1] += (2.0 * st.gamma[i - 1]) * e[x0:x1] * lwn
                    k_nbar += st.gamma[i - 1] * lpre
            if q:
                ltail = lam[:q] @ st.tail
                S[:nm, :nm] += d2sbar * ltail
                k_sbar += ltail
            if want:
                ce += (2.0 * inv_n * k_sbar) * e
                if asym and k_nbar:
                    ce += np.where(neg, (2.0 * inv_n * k_nbar) * e, 0.0)
        off = nm + 1 + p * (2 if asym else 1)
        for j in range(1, q + 1):
            v = D[:, : m - j] @ lam[j:]
            if nm:
                v[:nm] += dsbar * _head_sum(lam, j)  # the presample variance's derivatives
            S[off + j - 1] += v
            S[:, off + j - 1] += v
        return S, ce

    # ------------------------------------------------------------------ many windows at once
    def _window_forecasts(self, vp, e, starts, ends, presample, shift=None):
        """The one-step variance after each window, by superposition (the recursion is linear).

        F is the recursion run once over the whole series from zero lags.  On a window
        [s, t) with likelihood positions from L0 = s + s0 the window's own recursion reads the
        same inputs as F except its presample (lagged squares sbar, negative parts nbar and
        lagged variances sbar, the window's means, where F read the series' values or zero), so
        the difference D = sigma2_window - F obeys D[L0+k] = u[k] + sum_j beta_j D[L0+k-j] with
        a right-hand side u that is non-zero only for k < max(p, q):

            u[k] = sum_{i>k} (alpha_i (sbar - e2[L0+k-i]) + gamma_i (nbar - N[L0+k-i]))   [mean only]
                 + sum_{j>k} beta_j (sbar - F[L0+k-j]),

        hence D[t] = sum_k g[t-L0-k] u[k] with g the impulse response of 1 / (1 - sum beta_j L^j).
        The window's forecast at t is F[t] + D[t]: O(p + q) work per window after one filter.
        """
        omega, alpha, gamma, beta = self._coefficients(vp)
        p, q = self.p, self.q
        asym = self.asymmetric
        s0 = p if presample == "drop" else 0
        e2 = e * e
        n2 = np.where(e < 0, e2, 0.0) if asym else None
        M = max(p, q)
        zeros = np.zeros(M)
        P = np.concatenate([zeros[:p], e2])
        N = np.concatenate([zeros[:p], n2]) if asym else None
        F = self._run(omega, alpha, gamma, beta, P, N, 0.0, shift)[0]
        E2p = np.concatenate([zeros, e2])  # index x of the series at x + M (zero before it)
        N2p = np.concatenate([zeros, n2]) if asym else None
        Fp = np.concatenate([zeros, F])
        L0 = starts + s0
        span = ends - L0  # steps from the first likelihood position to the forecast
        if q:
            imp = np.zeros(int(span.max()) + 1)
            imp[0] = 1.0
            g = linear_filter(np.concatenate([[1.0], -beta]), imp)
        else:
            g = np.zeros(int(span.max()) + 1)
            g[0] = 1.0
        sbar = _window_means(e2, starts, ends)
        nbar = _window_means(n2, starts, ends) if asym else None
        out = F[ends].copy()
        for k in range(M):
            u = np.zeros(len(starts))
            if presample == "mean":
                for i in range(k + 1, p + 1):
                    u += alpha[i - 1] * (sbar - E2p[L0 + k - i + M])
                    if asym:
                        u += gamma[i - 1] * (nbar - N2p[L0 + k - i + M])
            for j in range(k + 1, q + 1):
                u += beta[j - 1] * (sbar - Fp[L0 + k - j + M])
            ok = span >= k  # the window reaches this step
            out[ok] += g[span[ok] - k] * u[ok]
        return out

    # ------------------------------------------------------------------ summary figures
    def _persistence(self, vp, eta, dist):
        _, alpha, gamma, beta = self._coefficients(vp)
        pers = float(alpha.sum() + beta.sum())
        if self.asymmetric:
            pers += float(gamma.sum()) * dist.neg_sq_moment(eta)
        return pers

    def _uncond_variance(self, vp, eta, dist):
        pers = self._persistence(vp, eta, dist)
        if pers is None or pers >= 1.0 - UNIT_TOL:  # one, to the rounding of the weights' sum
            return None
        return float(self._coefficients(vp)[0] / (1.0 - pers))

    # ------------------------------------------------------------------ checks
    def _check_fixed(self, name, value):
        if name == "omega" and value <= 0:
            raise InputError(f"options: omega must be greater than 0, got {value:g}")
        if (name.startswith("alpha[") or name.startswith("beta[")) and value < 0:
            raise InputError(f"options: {name} must be 0 or more, got {value:g}")

    def _check_fixed_set(self, fixed):
        if self.integrated or type(self)._coefficients is not LinearFamily._coefficients:
            return  # integrated by design (IGARCH), or weights that are not the parameters themselves
        # the persistence over the free parameters is at least the fixed weights' sum: a free
        # weight is 0 or more, and a GJR lag adds alpha_i + k gamma_i with k = E[z^2; z < 0] in
        # [0, 1] and alpha_i + gamma_i >= 0, so at least alpha_i + min(0, gamma_i) (both fixed)
        terms, total = [], 0.0
        for i in range(1, self.p + 1):
            a = fixed.get(f"alpha[{i}]")
            if a is None:
                continue
            if self.asymmetric:
                g = fixed.get(f"gamma[{i}]")
                if g is None:
                    continue
                if a + g < 0:
                    raise InputError(f"options: alpha[{i}] + gamma[{i}] must be 0 or more (the weight of a negative "
                                     f"shock), got {a:g} + {g:g}")
                a += min(0.0, g)
                terms.append(f"alpha[{i}] + gamma[{i}]" if g < 0 else f"alpha[{i}]")
            else:
                terms.append(f"alpha[{i}]")
            total += a
        for j in range(1, self.q + 1):
            b = fixed.get(f"beta[{j}]")
            if b is not None:
                terms.append(f"beta[{j}]")
                total += b
        if terms and total >= 1.0:
            what = "alphas and betas" if self.q else "alphas"
            if self.asymmetric:
                what = "alphas, betas and the gammas' share"
            fixed_words = (f"the fixed weight {terms[0]} alone brings the sum" if len(terms) == 1 else
                           f"the fixed weights {' + '.join(terms)} sum")
            raise InputError(f"options: {fixed_words} to {total:g}, and the other weights "
                             f"cannot be below 0; a stationary {self.canonical} needs its {what} to sum below 1. "
                             f"Fix smaller weights, or for a sum of 1 use an integrated (IGARCH) model")

    def _check(self, d, eta, dist):
        if not d["omega"] > 0:
            raise InputError(f"omega must be greater than 0, got {d['omega']:g}")
        for n, v in d.items():
            if (n.startswith("alpha") or n.startswith("beta")) and v < 0:
                raise InputError(f"{n} must be 0 or more, got {v:g}")

    def _admissible(self, vp, eta, dist, held):
        if not self.asymmetric and type(self)._coefficients is LinearFamily._coefficients:
            # the parameters are (omega, alpha, beta) themselves: the same tests in plain floats
            # (the optimiser asks at every trial point; NumPy's reductions over four numbers cost
            # more than the tests), the persistence summed alphas first, then betas, as below
            v = vp.tolist()
            if not v[0] > 0:
                return False
            for x in v[1:]:
                if x < 0:
                    return False
            if held:
                return True
            sa = sb = 0.0
            for x in v[1: 1 + self.p]:
                sa += x
            for x in v[1 + self.p:]:
                sb += x
            return sa + sb < 1.0
        omega, alpha, gamma, beta = self._coefficients(vp)
        if not omega > 0 or (alpha < 0).any() or (beta < 0).any():
            return False
        if self.asymmetric and (alpha + gamma < 0).any():
            return False
        if held:
            return True  # held on the bound by construction
        pers = float(alpha.sum() + beta.sum())
        if self.asymmetric:
            pers += float(gamma.sum()) * dist.neg_sq_moment(eta)
        return pers < 1.0

    def _box(self, var):
        out = [(0.05 * var, (var * 1e-9, None))]
        out += [(0.05, (0.0, 1.0))] * self.p
        if self.asymmetric:
            out += [(0.05, (-1.0, 1.0))] * self.p
        return out + [(0.05, (0.0, 1.0))] * self.q

    # ------------------------------------------------------------------ estimator's needs
    def _grid(self):
        """(alpha total, gamma total, beta total) of the starting points."""
        return [(a, 0.0, b) for a, b in ((0.05, 0.9), (0.1, 0.8), (0.2, 0.6), (0.3, 0.3))]

    def _start_persistence(self, a_tot, g_tot, b_tot):
        return a_tot + 0.5 * g_tot + (b_tot if self.q else 0.0)

    def _starts(self, v):
        p, q = self.p, self.q
        out = []
        for a_tot, g_tot, b_tot in self._grid():
            vp = np.zeros(self.n_params)
            for i in range(1, p + 1):
                vp[i] = a_tot / p
                if self.asymmetric:
                    vp[p + i] = g_tot / p
            off = 1 + p * (2 if self.asymmetric else 1)
            for j in range(1, q + 1):
                vp[off + j - 1] = b_tot / q
            pers = self._start_persistence(a_tot, g_tot, b_tot)
            vp[0] = v * max(1.0 - pers, 0.02)
            out.append(vp)
        return out

    def _target(self, vp, vbar, eta, dist):
        vp[0] = 0.0
        pers = self._persistence(vp, eta, dist)
        vp[0] = vbar * (1.0 - pers)

    def _sum_rule(self, eta, dist):
        implied = f"beta[{self.q}]" if self.q else f"alpha[{self.p}]"
        weights = {n: 1.0 for n in self.param_names if n.startswith("alpha") or n.startswith("beta")}
        if self.asymmetric:
            kappa = dist.neg_sq_moment(eta)
            weights.update({n: kappa for n in self.param_names if n.startswith("gamma")})
        return implied, weights

    # ------------------------------------------------------------------ forecast
    def _forecast(self, vp, eta, dist, history, H, rng, paths, shift=None):
        omega, alpha, gamma, beta = self._coefficients(vp)
        p, q = self.p, self.q
        asym = self.asymmetric
        kappa = self._kappa(eta, dist)
        e_obs = history.e
        e2 = list(e_obs ** 2)
        n2 = list(np.where(e_obs < 0, e_obs ** 2, 0.0))
        s2 = list(history.s2)
        n_e = len(e2)
        n_s = len(s2)
        out = []
        for h in range(H):
            v = omega if shift is None else omega + shift[h]
            for i in range(1, p + 1):
                k = h + 1 - i  # steps ahead of the lagged shock (<= 0: observed)
                if k <= 0:
                    v += alpha[i - 1] * e2[n_e - 1 + k]
                    if asym:
                        v += gamma[i - 1] * n2[n_e - 1 + k]
                else:
                    v += (alpha[i - 1] + (kappa * gamma[i - 1] if asym else 0.0)) * out[k - 1]
            for j in range(1, q + 1):
                k = h + 1 - j
                v += beta[j - 1] * (s2[n_s - 1 + k] if k <= 0 else out[k - 1])
            out.append(v)
        return np.array(out), False

    # ------------------------------------------------------------------ simulation
    def _sim_level(self, vp, eta, dist):
        """Starting variance of fresh paths: the unconditional one (100 omega where undefined)."""
        omega, alpha, gamma, beta = self._coefficients(vp)
        pers = alpha.sum() + self._kappa(eta, dist) * gamma.sum() + beta.sum()
        return omega / (1.0 - pers) if pers < 1 else omega * 100.0

    def _sim_start(self, vp, eta, dist, paths):
        s0 = self._sim_level(vp, eta, dist)
        kappa = self._kappa(eta, dist)
        # before the start each lagged square is at its expectation s0, its negative part at kappa s0
        return _SimState([s0] * self.p, [kappa * s0] * self.p, [s0] * self.q)

    def _sim_continue(self, vp, eta, dist, history):
        e = history.e[len(history.e) - self.p:] if self.p else []
        e2 = [x * x for x in e]
        n2 = [x * x if x < 0 else 0.0 for x in e]
        s2 = list(history.s2[len(history.s2) - self.q:]) if self.q else []
        return _SimState(e2, n2, s2)

    def _sim_variance(self, state, vp, eta, dist, shift=None):
        omega, alpha, gamma, beta = self._coefficients(vp)
        v = omega if shift is None else omega + shift
        for i in range(1, self.p + 1):
            v = v + alpha[i - 1] * state.e2[-i]
            if self.asymmetric:
                v = v + gamma[i - 1] * state.n2[-i]
        for j in range(1, self.q + 1):
            v = v + beta[j - 1] * state.s2[-j]
        return v

    def _sim_push(self, state, e, z, s2):
        if self.p:
            e2 = e * e
            state.e2 = state.e2[1:] + [e2]
            if self.asymmetric:
                state.n2 = state.n2[1:] + [np.where(e < 0, e2, 0.0)]
        if self.q:
            state.s2 = state.s2[1:] + [s2]

    def sim_sums(self, state, vp, Y, score_map, mu, phi=None, theta=None, r_lags=None, e_lags=None):
        return risk_sums(self, state, vp, Y, score_map, mu, phi, theta, r_lags, e_lags)

    # ------------------------------------------------------------------ one observation at a time
    def _bad_shift(self, vp, shift):
        return ~(self._coefficients(vp)[0] + shift > 0)

    def _filter_start(self, vp, eta, dist, u, e_lags, presample):
        """Lagged squares (and negative-part squares) at their presample values from ``u`` --
        the mean of u^2 (of 1(u<0) u^2) -- or the lag residuals under ``drop``; lagged
        variances at the mean of u^2, as :meth:`_variance` starts."""
        _, sbar, _, _, _ = self._inputs(u, presample, np.mean)
        nbar = float(np.mean(np.where(u < 0, u * u, 0.0))) if self.asymmetric else 0.0
        if presample == "mean":
            e2, n2 = [sbar] * self.p, [nbar] * self.p
        else:
            e2 = [x * x for x in e_lags]
            n2 = [x * x if x < 0 else 0.0 for x in e_lags]
        return _SimState(e2, n2, [sbar] * self.q)

    def _filter(self, vp, u, step, presample, eta, dist, shift=None):
        """The recursion in plain floats, one observation at a time (the generic loop of the
        base class, about twenty times faster)."""
        omega, alpha, gamma, beta = self._coefficients(vp)
        p, q = self.p, self.q
        asym = self.asymmetric
        al = [float(a) for a in alpha]
        ga = [float(g) for g in gamma] if asym else [0.0] * p
        be = [float(b) for b in beta]
        n = len(u)
        e, s0, st = self._filter_begin(vp, u, step, presample, eta, dist)
        e2 = [float(x) for x in st.e2][::-1]  # newest first
        n2 = [float(x) for x in st.n2][::-1]
        s2 = [float(x) for x in st.s2][::-1]
        mul = operator.mul
        om = [float(omega)] * (n - s0) if shift is None else (float(omega) + shift).tolist()
        out = [0.0] * (n - s0)
        one = p == 1 and q == 1
        if one:
            a1, g1, b1 = al[0], ga[0], be[0]
            le2, ln2, ls2 = e2[0], n2[0], s2[0]
        for t in range(s0, n):
            if one:
                v = om[t - s0] + a1 * le2 + g1 * ln2 + b1 * ls2
            else:
                v = om[t - s0] + sum(map(mul, al, e2)) + sum(map(mul, ga, n2)) + sum(map(mul, be, s2))
            if not (v > 0.0 and v < math.inf):
                return np.full(n, np.nan), np.full(n - s0, np.nan)
            et = step(t, v)
            e[t] = et
            out[t - s0] = v
            sq = et * et
            if one:
                le2, ln2, ls2 = sq, (sq if et < 0 else 0.0), v
            else:
                if p:
                    e2.insert(0, sq)
                    n2.insert(0, sq if et < 0 else 0.0)
                    del e2[-1], n2[-1]
                if q:
                    s2.insert(0, v)
                    del s2[-1]
        return np.array(e), np.array(out)

    # ------------------------------------------------------------------ news impact
    def _news_level(self, vp, eta, dist):
        """The lagged variance the news-impact curve holds fixed: the unconditional one; at
        persistence one (a fit held on the stationarity bound) there is none, and the curve leaves
        the lagged terms out, as IGARCH's does."""
        s2 = self._uncond_variance(vp, eta, dist)
        if s2 is None:
            pers = self._persistence(vp, eta, dist)
            if pers is not None and abs(pers - 1.0) < UNIT_TOL:
                return 0.0
            raise InputError("the news-impact curve needs a stationary model (persistence below 1)")
        return s2

    def _news_impact(self, vp, eta, dist, e):
        omega, alpha, gamma, beta = self._coefficients(vp)
        s2 = self._news_level(vp, eta, dist)
        if not self.asymmetric:
            gamma = np.zeros(self.p)
        kappa = self._kappa(eta, dist)
        rest = float(np.sum(alpha[1:] + kappa * gamma[1:])) * s2  # later lags at their expectation
        return omega + (alpha[0] + gamma[0] * (e < 0)) * e ** 2 + rest + beta.sum() * s2



# ------------------------------------------------------------------ the risk figures' paths, compiled
from ..distributions import score_map_arrays  # noqa: E402
from ._compiled import hermite_row, jit_enabled, kernel, ring_start  # noqa: E402  (the section's own; no numba until first call)
from .base import arma_lags  # noqa: E402


@kernel
def _risk_sum_loop(Y, gt, dt, half, step, ident, mu, omega, alpha, gamma, beta, e2, n2, s2, phi, theta, r0, u0,
                   cum, a_last, s_last):
    """Paths of sigma2 = omega + sum (alpha_i + gamma_i 1(e < 0)) e^2 + sum beta_j sigma2 that start
    from the lags e2, n2 (negative parts), s2 (newest last) and take the normal scores Y (a row per
    step) through the cubic Hermite map of the law's quantiles (nodes gt, slopes dt per step, over
    [-half, half]; ``ident``: the scores are the shocks).  The return is
    mu + sum phi_i r[t-i] + sum theta_j e[t-j] + e, the terms added in that order (as the
    step-by-step route adds them), its lags starting from the returns r0 and the shocks u0 (newest
    last; ``phi`` and ``theta`` empty for a constant mean); ``cum`` gets the sum of the returns,
    ``a_last`` the sum up to the last step plus its mean and ``s_last`` its volatility.  Returns 1,
    or 0 at once if a score lies beyond the map's nodes (the caller then takes the NumPy route,
    which maps those exactly).

    A step at a time over all paths: first the step's shocks (``hermite_row``), then the
    recursion, a loop without branches or indirect indices that the compiler can vectorise; one lag
    of each kind (GARCH(1,1), GJR-GARCH(1,1), at most one AR and one MA term) keeps its lags in one
    row each, more in ring buffers."""
    h, n = Y.shape
    p = alpha.shape[0]
    q = beta.shape[0]
    pr = phi.shape[0]
    qu = theta.shape[0]
    E2 = np.empty((max(p, 1), n))
    N2 = np.empty((max(p, 1), n))
    S2 = np.empty((max(q, 1), n))
    R = np.empty((max(pr, 1), n))
    U = np.empty((max(qu, 1), n))
    Z = np.empty(n)
    ring_start(E2, e2, p)  # lag k sits at ring position (-k) mod p at step 0
    ring_start(N2, n2, p)
    ring_start(S2, s2, q)
    ring_start(R, r0, pr)
    ring_start(U, u0, qu)
    pa = np.empty(max(p, 1), dtype=np.int64)
    pb = np.empty(max(q, 1), dtype=np.int64)
    pc = np.empty(max(pr, 1), dtype=np.int64)
    pd = np.empty(max(qu, 1), dtype=np.int64)
    one = p == 1 and q == 1 and pr <= 1 and qu <= 1
    ph = phi[0] if pr else 0.0
    th = theta[0] if qu else 0.0
    for i in range(n):
        cum[i] = 0.0
    for t in range(h):
        if ident:
            for i in range(n):
                Z[i] = Y[t, i]
        elif not hermite_row(Y[t], gt, dt, half, step, Z):
            return 0
        if one and t < h - 1:  # the sums in the order of the step-by-step route's
            a1, g1, b1 = alpha[0], gamma[0], beta[0]
            le2, ln2, ls2, lr, lu = E2[0], N2[0], S2[0], R[0], U[0]
            if pr == 0 and qu == 0:
                for i in range(n):
                    v = omega + a1 * le2[i]
                    v += g1 * ln2[i]
                    v += b1 * ls2[i]
                    e = math.sqrt(v) * Z[i]
                    cum[i] += mu + e
                    le2[i] = e * e
                    ln2[i] = e * e if e < 0 else 0.0
                    ls2[i] = v
            else:
                for i in range(n):
                    v = omega + a1 * le2[i]
                    v += g1 * ln2[i]
                    v += b1 * ls2[i]
                    e = math.sqrt(v) * Z[i]
                    ret = mu
                    if pr:
                        ret += ph * lr[i]
                    if qu:
                        ret += th * lu[i]
                    ret += e
                    cum[i] += ret
                    le2[i] = e * e
                    ln2[i] = e * e if e < 0 else 0.0
                    ls2[i] = v
                    lr[i] = ret
                    lu[i] = e
            continue
        for k in range(1, p + 1):  # the ring positions of the lags at this step
            pa[k - 1] = (t - k) % p
        for k in range(1, q + 1):
            pb[k - 1] = (t - k) % q
        for k in range(1, pr + 1):
            pc[k - 1] = (t - k) % pr
        for k in range(1, qu + 1):
            pd[k - 1] = (t - k) % qu
        for i in range(n):
            v = omega
            for k in range(p):
                v += alpha[k] * E2[pa[k], i]
                v += gamma[k] * N2[pa[k], i]
            for k in range(q):
                v += beta[k] * S2[pb[k], i]
            z = Z[i]
            sig = math.sqrt(v)
            e = sig * z
            ret = mu
            for k in range(pr):
                ret += phi[k] * R[pc[k], i]
            for k in range(qu):
                ret += theta[k] * U[pd[k], i]
            ret += e
            if t == h - 1:
                a_last[i] = cum[i] + (ret - sig * z)  # as the step-by-step route rounds it
                s_last[i] = sig
            cum[i] += ret
            if p:
                pos = t % p
                E2[pos, i] = e * e
                N2[pos, i] = e * e if e < 0 else 0.0
            if q:
                S2[t % q, i] = v
            if pr:
                R[t % pr, i] = ret
            if qu:
                U[t % qu, i] = e
    return 1


def risk_sums(family, state, vp, Y, score_map, mu, phi=None, theta=None, r_lags=None, e_lags=None):
    """(cum, a_last, s_last) of the paths that continue ``state`` (from ``sim_continue``) with the
    normal scores ``Y`` (a row per step) mapped to shocks by ``score_map`` (``Distribution.normal_scores``)
    and the mean mu + sum phi_i r[t-i] + sum theta_j e[t-j] (lags from ``r_lags`` and ``e_lags``,
    newest last; none for a constant mean): the sum of the returns, the sum before the last step plus
    the last step's mean, and the last step's volatility, as the NumPy route of the simulation gives
    them (``sim_step``), in one compiled pass.  None where the family keeps its own simulation
    steps, the kernels run as plain Python, or a score lies beyond the map's nodes: the caller then
    simulates step by step."""
    if not (jit_enabled() and isinstance(family, LinearFamily)
            and type(family)._sim_variance is LinearFamily._sim_variance
            and type(family)._sim_push is LinearFamily._sim_push
            and type(family)._sim_continue is LinearFamily._sim_continue):
        return None
    phi, theta, r0, u0 = arma_lags(phi, theta, r_lags, e_lags)
    omega, alpha, gamma, beta = family._coefficients(family._vp(vp))
    alpha = np.asarray(alpha, dtype=float)
    gamma = np.asarray(gamma, dtype=float) if family.asymmetric else np.zeros(len(alpha))
    beta = np.asarray(beta, dtype=float)
    e2 = np.array([float(x) for x in state.e2], dtype=float)
    n2 = np.array([float(x) for x in state.n2], dtype=float) if family.asymmetric else np.zeros(len(e2))
    s2 = np.array([float(x) for x in state.s2], dtype=float)
    ident, gt, dt, half, step = score_map_arrays(score_map)
    n = Y.shape[1]
    cum, a_last, s_last = np.empty(n), np.empty(n), np.empty(n)
    ok = _risk_sum_loop(np.ascontiguousarray(Y, dtype=float), gt, dt, half, step, ident, float(mu), float(omega),
                        alpha, gamma, beta, e2, n2, s2, phi, theta, r0, u0, cum, a_last, s_last)
    return (cum, a_last, s_last) if ok else None
