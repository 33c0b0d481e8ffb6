"""EGARCH(p,q) (Nelson 1991): the log-variance responds to the standardised shocks z,

    ln sigma2[t] = omega + sum_i (alpha_i (|z[t-i]| - E|z|) + gamma_i z[t-i]) + sum_j beta_j ln sigma2[t-j].

The recursion feeds on its own past through z = e / sigma, so no linear filter runs it: it is a
loop compiled by numba on first use (:mod:`._compiled`; plain Python where numba is absent), and
the same forward pass carries its derivatives in every parameter (the mean's through the
residuals, the variance regressors' through the intercept, the distribution's through E|z|), so
the estimator gets analytic scores.  Variance regressors (an intercept series ``shift``) add to
omega, the log-variance's intercept, so they need no sign restriction.

Forecasts are exact (Nelson 1991): with future news at zero the log-variance follows its own
recursion, and each future shock adds a term a_k (|z| - E|z|) + c_k z whose weights are the
recursion's impulse responses, so E_T[sigma2_{T+h}] is a deterministic factor times a product of
moment generating values E exp(a|z| + c z) (:meth:`Egarch._forecast`).  They are finite for normal
shocks and GED shocks of shape above 1; with Student-t and skewed-t shocks E exp(c|z|) is infinite
for every c > 0, so E[sigma2_{T+h}] does not exist beyond one step (:meth:`Egarch._moment_horizon`).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from .._lazy import special

from ..errors import InputError
from ._compiled import kernel
from .base import VarianceFamily, stationary

# ---------------------------------------------------------------------------------- kernels
# The log-variance recursion feeds on its own past through z = e / sigma, so it cannot run
# through a linear filter; these loops run compiled (numba) from their first call and as plain
# Python where numba is absent (:mod:`._compiled`).  ``om`` is the intercept of each position's
# log-variance (omega everywhere; a time-varying intercept changes only the array passed in).


@kernel
def _log_variance_loop(e, om, alpha, gamma, beta, kappa, lsbar, sd0, start):
    """sigma2 on positions start..n-1 (all nan if the log-variance leaves [-700, 700]).

    Positions before ``start`` (``presample=drop``) are lags only, standardised by ``sd0``;
    news before the first position is zero (its expectation) and log-variance lags are ``lsbar``.
    """
    n = e.shape[0]
    p = alpha.shape[0]
    q = beta.shape[0]
    m = n - start
    out = np.empty(m)
    g = np.zeros(n + p)  # news |z| - kappa, position t at p + t
    z = np.zeros(n + p)
    lv = np.empty(m + q)  # log-variances, position t at q + t - start
    for j in range(q):
        lv[j] = lsbar
    for t in range(start):
        zt = e[t] / sd0
        z[p + t] = zt
        g[p + t] = abs(zt) - kappa
    for t in range(start, n):
        v = om[t]
        for i in range(1, p + 1):
            v += alpha[i - 1] * g[p + t - i] + gamma[i - 1] * z[p + t - i]
        pos = q + t - start
        for j in range(1, q + 1):
            v += beta[j - 1] * lv[pos - j]
        if not (-700.0 <= v <= 700.0):
            for k in range(m):
                out[k] = np.nan
            return out
        lv[pos] = v
        sig = math.exp(0.5 * v)
        zt = e[t] / sig
        z[p + t] = zt
        g[p + t] = abs(zt) - kappa
        out[t - start] = sig * sig
    return out


@kernel
def _log_variance_derivatives(e, de, om, dom, alpha, gamma, beta, kappa, dkappa, sbar, dsbar, start):
    """(sigma2, D') with D'[s, k] = d sigma2 / d theta_k at position start + s, in one forward pass.

    Columns of D': the mean parameters (through the residuals' derivatives ``de``, nm x n),
    omega, alpha[1..p], gamma[1..p], beta[1..q], the intercept series' parameters (``dom``,
    ns x n: d om_t / d v_k, each entering as omega's 1 does), then the distribution's
    parameters (through d E|z| / d eta = ``dkappa``).  With v the log-variance and
    z = e exp(-v/2):
        dv_t = direct_t + sum_i alpha_i dg_{t-i} + gamma_i dz_{t-i} + sum_j beta_j dv_{t-j},
        dz_t = de_t exp(-v_t/2) - z_t dv_t / 2,   dg_t = sign(z_t) dz_t - dkappa,
    where direct_t is 1 for omega, dom[k, t] for v_k, g_{t-i} for alpha_i, z_{t-i} for gamma_i
    and v_{t-j} for beta_j; the presample log-variance ln(sbar) moves with the mean parameters
    through sbar.
    The lagged derivatives live in ring buffers of p and q rows.
    """
    n = e.shape[0]
    nm = de.shape[0]
    p = alpha.shape[0]
    q = beta.shape[0]
    nd = dkappa.shape[0]
    ns = dom.shape[0]
    K = nm + 1 + 2 * p + q + ns + nd
    io = nm  # omega's column; alpha, gamma, beta, the intercept series' and the distribution's follow
    ia = io + 1
    ig = ia + p
    ib = ig + p
    iv = ib + q
    ie = iv + ns
    m = n - start
    P = max(p, 1)
    Q = max(q, 1)
    sig2 = np.empty(m)
    D = np.empty((m, K))
    g = np.zeros(n + p)
    z = np.zeros(n + p)
    dg = np.zeros((P, K))  # row t % P holds position t's derivatives
    dz = np.zeros((P, K))
    lv = np.empty(m + q)
    dlv = np.zeros((Q, K))  # row (q + t - start) % Q
    lsbar = math.log(sbar) if sbar > 0 else -700.0
    for j in range(q):
        lv[j] = lsbar
        if sbar > 0:
            for k in range(nm):
                dlv[j % Q, k] = dsbar[k] / sbar
    if start > 0:
        sd0 = math.sqrt(sbar) if sbar > 0 else 1.0
        for t in range(start):
            zt = e[t] / sd0
            z[p + t] = zt
            g[p + t] = abs(zt) - kappa
            sg = 1.0 if zt > 0 else (-1.0 if zt < 0 else 0.0)
            row = t % P
            for k in range(nm):
                d = de[k, t] / sd0
                if sbar > 0:
                    d -= 0.5 * zt * dsbar[k] / sbar
                dz[row, k] = d
                dg[row, k] = sg * d
            for k in range(nd):
                dg[row, ie + k] = -dkappa[k]
    dv = np.empty(K)
    prow = np.zeros(P, dtype=np.int64)  # ring rows of the lags, found once a step
    qrows = np.zeros(Q, dtype=np.int64)
    for t in range(start, n):
        pos = q + t - start
        v = om[t]
        for i in range(1, p + 1):
            v += alpha[i - 1] * g[p + t - i] + gamma[i - 1] * z[p + t - i]
        for j in range(1, q + 1):
            v += beta[j - 1] * lv[pos - j]
        # the lags' derivatives carried through the recursion (news before the first residual
        # is a constant zero), then the direct terms
        np_ = min(p, t)
        for i in range(1, np_ + 1):
            prow[i - 1] = (t - i) % P
        for j in range(1, q + 1):
            qrows[j - 1] = (pos - j) % Q
        for k in range(K):
            acc = 0.0
            for i in range(np_):
                acc += alpha[i] * dg[prow[i], k] + gamma[i] * dz[prow[i], k]
            for j in range(q):
                acc += beta[j] * dlv[qrows[j], k]
            dv[k] = acc
        dv[io] += 1.0
        for k in range(ns):
            dv[iv + k] += dom[k, t]
        for i in range(1, p + 1):
            dv[ia + i - 1] += g[p + t - i]
            dv[ig + i - 1] += z[p + t - i]
        for j in range(1, q + 1):
            dv[ib + j - 1] += lv[pos - j]
        if not (-700.0 <= v <= 700.0):
            for s in range(m):
                sig2[s] = np.nan
                for k in range(K):
                    D[s, k] = np.nan
            return sig2, D
        lv[pos] = v
        sig = math.exp(0.5 * v)
        s2 = sig * sig
        zt = e[t] / sig
        z[p + t] = zt
        g[p + t] = abs(zt) - kappa
        sg = 1.0 if zt > 0 else (-1.0 if zt < 0 else 0.0)
        row = t % P
        qrow = pos % Q
        for k in range(K):
            dlv[qrow, k] = dv[k]
            d = -0.5 * zt * dv[k]
            if k < nm:
                d += de[k, t] / sig
            dz[row, k] = d
            dg[row, k] = sg * d
            D[t - start, k] = s2 * dv[k]
        for k in range(nd):
            dg[row, ie + k] -= dkappa[k]
        sig2[t - start] = s2
    return sig2, D


@kernel
def _log_variance_second(e, de, om, dom, alpha, gamma, beta, kappa, dkappa, d2kappa, sbar, dsbar, d2sbar, start, w):
    """S = sum_s w[s] d2 sigma2 / d theta d theta' at position start + s (K x K, the columns of
    :func:`_log_variance_derivatives`), in one forward pass carrying the second derivatives of
    the log-variance v, of z = e exp(-v/2) and of the news g = |z| - E|z|.  With the residuals
    linear in the mean parameters here (their own second derivatives enter through
    :func:`_log_variance_adjoint`):

        d2v_t = sum_i alpha_i d2g_{t-i} + gamma_i d2z_{t-i} + sum_j beta_j d2v_{t-j}
                + sym(e_alpha_i dg_{t-i}' + e_gamma_i dz_{t-i}' + e_beta_j dv_{t-j}'),
        d2z_t = -(de_t dv_t' + dv_t de_t') exp(-v_t/2) / 2 + z_t dv_t dv_t' / 4 - z_t d2v_t / 2,
        d2g_t = sign(z_t) d2z_t - d2 E|z| (distribution rows),
        d2 sigma2_t = sigma2_t (dv_t dv_t' + d2v_t)

    (e_x: the unit vector of parameter x).  The presample log-variance ln(sbar) and, under
    ``presample=drop``, the lag-only z = e / sqrt(sbar) move with the mean parameters through
    sbar = mean(e^2) (``dsbar``, ``d2sbar``).  The news' derivatives are not stored: with s the
    sign of z, dg = s dz and d2g = s d2z less E|z|'s own derivatives, which the lags' weights
    alpha_i carry.  Second derivatives are kept on and above the diagonal only, flattened (pair
    u = (pk[u], pl[u])), so that the inner loops run over one contiguous row.
    """
    n = e.shape[0]
    nm = de.shape[0]
    p = alpha.shape[0]
    q = beta.shape[0]
    nd = dkappa.shape[0]
    ns = dom.shape[0]
    K = nm + 1 + 2 * p + q + ns + nd
    io = nm
    ia = io + 1
    ig = ia + p
    ib = ig + p
    iv = ib + q
    ie = iv + ns
    m = n - start
    P = max(p, 1)
    Q = max(q, 1)
    L = K * (K + 1) // 2
    pk = np.empty(L, dtype=np.int64)
    pl = np.empty(L, dtype=np.int64)
    at = np.empty((K, K), dtype=np.int64)  # the pair's place, either way round
    u = 0
    for k in range(K):
        for l in range(k, K):
            pk[u] = k
            pl[u] = l
            at[k, l] = u
            at[l, k] = u
            u += 1
    Sf = np.zeros(L)
    g = np.zeros(n + p)
    z = np.zeros(n + p)
    sz = np.zeros(P)  # sign of z at each ring row
    dz = np.zeros((P, K))
    d2z = np.zeros((P, L))
    lv = np.empty(m + q)
    dlv = np.zeros((Q, K))
    d2lv = np.zeros((Q, L))
    dls = np.zeros(K)  # the presample log-variance's derivatives
    d2ls = np.zeros(L)
    dek = np.zeros(K)  # the residual's derivatives over sigma at this position
    if sbar > 0:
        lsbar = math.log(sbar)
        for k in range(nm):
            dls[k] = dsbar[k] / sbar
        for u in range(L):
            k, l = pk[u], pl[u]
            if l < nm:
                d2ls[u] = d2sbar[k, l] / sbar - dsbar[k] * dsbar[l] / (sbar * sbar)
    else:
        lsbar = -700.0
    for j in range(q):
        for k in range(K):
            dlv[j % Q, k] = dls[k]
        for u in range(L):
            d2lv[j % Q, u] = d2ls[u]
        lv[j] = lsbar
    if start > 0:
        isd = 1.0 / math.sqrt(sbar) if sbar > 0 else 1.0
        for t in range(start):
            zt = e[t] * isd
            z[p + t] = zt
            g[p + t] = abs(zt) - kappa
            row = t % P
            sz[row] = 1.0 if zt > 0 else (-1.0 if zt < 0 else 0.0)
            for k in range(K):
                dek[k] = de[k, t] * isd if k < nm else 0.0
            for k in range(K):
                dz[row, k] = dek[k] - 0.5 * zt * dls[k]
            for u in range(L):
                k, l = pk[u], pl[u]
                d2z[row, u] = (-0.5 * (dek[k] * dls[l] + dek[l] * dls[k]) + 0.25 * zt * dls[k] * dls[l]
                               - 0.5 * zt * d2ls[u])
    dv = np.empty(K)
    d2v = np.empty(L)
    cz = np.zeros(P)  # weight of the lag's dz and d2z: alpha_i sign(z) + gamma_i
    rows = np.zeros(P, dtype=np.int64)
    qrows = np.zeros(Q, dtype=np.int64)
    for t in range(start, n):
        pos = q + t - start
        v = om[t]
        for i in range(1, p + 1):
            v += alpha[i - 1] * g[p + t - i] + gamma[i - 1] * z[p + t - i]
        for j in range(1, q + 1):
            v += beta[j - 1] * lv[pos - j]
        if not (-700.0 <= v <= 700.0):
            S = np.empty((K, K))
            S[:] = np.nan
            return S
        np_ = min(p, t)  # news before the first residual is a constant zero
        asum = 0.0  # the weight of E|z|'s derivatives
        for i in range(np_):
            r = (t - i - 1) % P
            rows[i] = r
            cz[i] = alpha[i] * sz[r] + gamma[i]
            asum += alpha[i]
        for j in range(q):
            qrows[j] = (pos - j - 1) % Q
        for k in range(K):
            dv[k] = 0.0
        for u in range(L):
            d2v[u] = 0.0
        for i in range(np_):
            c = cz[i]
            r = rows[i]
            for k in range(K):
                dv[k] += c * dz[r, k]
            for u in range(L):
                d2v[u] += c * d2z[r, u]
        for j in range(q):
            b = beta[j]
            r = qrows[j]
            for k in range(K):
                dv[k] += b * dlv[r, k]
            for u in range(L):
                d2v[u] += b * d2lv[r, u]
        for k in range(nd):
            dv[ie + k] -= asum * dkappa[k]
            for l in range(k, nd):
                d2v[at[ie + k, ie + l]] -= asum * d2kappa[k, l]
        # the direct terms: omega's 1, the intercept series' values (no second derivatives),
        # then the coefficients' lagged news, shocks and log-variances; sym(e_a x') adds x to
        # row a and to column a, so twice x_a on the diagonal
        dv[io] += 1.0
        for k in range(ns):
            dv[iv + k] += dom[k, t]
        for i in range(1, p + 1):
            dv[ia + i - 1] += g[p + t - i]
            dv[ig + i - 1] += z[p + t - i]
        for j in range(1, q + 1):
            dv[ib + j - 1] += lv[pos - j]
        for i in range(np_):
            r = rows[i]
            sg = sz[r]
            a = ia + i
            c = ig + i
            for l in range(K):
                x = dz[r, l]
                y = sg * x
                if l >= ie:
                    y -= dkappa[l - ie]
                d2v[at[a, l]] += y
                d2v[at[c, l]] += x
            d2v[at[a, a]] += sg * dz[r, a]
            d2v[at[c, c]] += dz[r, c]
        for j in range(q):
            r = qrows[j]
            b = ib + j
            for l in range(K):
                d2v[at[b, l]] += dlv[r, l]
            d2v[at[b, b]] += dlv[r, b]
        lv[pos] = v
        sig = math.exp(0.5 * v)
        s2 = sig * sig
        isg = 1.0 / sig
        zt = e[t] * isg
        z[p + t] = zt
        g[p + t] = abs(zt) - kappa
        ws = w[t - start] * s2
        row = t % P
        qrow = pos % Q
        sz[row] = 1.0 if zt > 0 else (-1.0 if zt < 0 else 0.0)
        hz = 0.5 * zt
        for k in range(K):
            dek[k] = de[k, t] * isg if k < nm else 0.0
            dlv[qrow, k] = dv[k]
            dz[row, k] = dek[k] - hz * dv[k]
        for u in range(L):
            k = pk[u]
            l = pl[u]
            pr = dv[k] * dv[l]
            d2l = d2v[u]
            Sf[u] += ws * (pr + d2l)
            d2lv[qrow, u] = d2l
            d2z[row, u] = -0.5 * (dek[k] * dv[l] + dek[l] * dv[k]) + hz * (0.5 * pr - d2l)
    S = np.empty((K, K))
    for u in range(L):
        S[pk[u], pl[u]] = Sf[u]
        S[pl[u], pk[u]] = Sf[u]
    return S


@kernel
def _log_variance_adjoint(e, sig2, alpha, gamma, beta, kappa, sbar, start, w):
    """The gradient of J = sum_s w[s] sigma2 at position start + s by the adjoint of the
    log-variance recursion: one backward pass over the forward pass's variances ``sig2``.  With
    vbar, zbar the adjoint variables of the log-variance v and of z = e exp(-v/2),

        zbar_t = sum_i vbar_{t+i} (alpha_i sign(z_t) + gamma_i),
        vbar_t = w_t sigma2_t + sum_j beta_j vbar_{t+j} - zbar_t z_t / 2,

    and dJ/d omega = sum vbar, dJ/d alpha_i = sum_t vbar_t g_{t-i}, dJ/d gamma_i = sum_t vbar_t
    z_{t-i}, dJ/d beta_j = sum_t vbar_t v_{t-j}, dJ/d E|z| = -sum_t vbar_t sum_i alpha_i (over the
    news that are residuals').  Returns (those in the family's order, vbar, ebar, dJ/d E|z|) with
    ebar = dJ/de on every residual position: zbar_t / sigma_t, plus every residual's share
    through sbar = mean(e^2), which sets the presample log-variance (and, under
    ``presample=drop``, scales the lag-only z = e / sqrt(sbar)): 2 e_s / n times dJ/d sbar.
    ebar also weighs the residuals' own second derivatives (an MA part) in the Hessian."""
    n = e.shape[0]
    p = alpha.shape[0]
    q = beta.shape[0]
    m = n - start
    lsbar = math.log(sbar) if sbar > 0 else -700.0
    isd = 1.0 / math.sqrt(sbar) if sbar > 0 else 1.0
    z = np.empty(n)
    lv = np.empty(m)
    for t in range(start):
        z[t] = e[t] * isd
    for s in range(m):
        lv[s] = math.log(sig2[s])
        z[start + s] = e[start + s] / math.sqrt(sig2[s])
    ebar = np.zeros(n)
    vbar = np.zeros(m)
    gv = np.zeros(1 + 2 * p + q)
    dk = 0.0
    sbarbar = 0.0
    for t in range(n - 1, -1, -1):
        zt = z[t]
        sg = 1.0 if zt > 0 else (-1.0 if zt < 0 else 0.0)
        zbar = 0.0
        for i in range(1, p + 1):
            if start <= t + i < n:
                zbar += vbar[t + i - start] * (alpha[i - 1] * sg + gamma[i - 1])
        if t >= start:
            s = t - start
            vb = w[s] * sig2[s] - 0.5 * zbar * zt
            for j in range(1, q + 1):
                if s + j < m:
                    vb += beta[j - 1] * vbar[s + j]
            vbar[s] = vb
            ebar[t] = zbar / math.sqrt(sig2[s])
            gv[0] += vb
            for i in range(1, p + 1):
                if t - i >= 0:
                    zl = z[t - i]
                    gv[i] += vb * (abs(zl) - kappa)
                    gv[p + i] += vb * zl
                    dk -= vb * alpha[i - 1]
            for j in range(1, q + 1):
                gv[2 * p + j] += vb * (lv[s - j] if s - j >= 0 else lsbar)
        else:
            ebar[t] = zbar * isd
            if sbar > 0:
                sbarbar -= 0.5 * zbar * zt / sbar
    if sbar > 0:
        for s in range(min(q, m)):
            for j in range(s + 1, q + 1):
                sbarbar += beta[j - 1] * vbar[s] / sbar
        for t in range(n):
            ebar[t] += 2.0 * e[t] * sbarbar / n
    return gv, vbar, ebar, dk


def _plain(x) -> np.ndarray:
    """``x`` as a writable C-ordered float array: the one layout the kernels are compiled for
    (numba compiles, and caches, a separate version for each layout and for read-only arrays)."""
    x = np.ascontiguousarray(x, dtype=float)
    return x if x.flags.writeable else x.copy()


# ---------------------------------------------------------------------------------- shock moments
def _abs_moment_gradient(dist, eta) -> np.ndarray:
    """d E|z| / d eta by central differences of the scalar E|z| (step 1e-5 relative: about ten
    correct digits, far below the optimiser's tolerance)."""
    eta = np.asarray(eta, dtype=float)
    out = np.zeros(len(eta))
    for i in range(len(eta)):
        h = 1e-5 * max(1.0, abs(eta[i]))
        up, dn = eta.copy(), eta.copy()
        up[i] += h
        dn[i] -= h
        out[i] = (dist.abs_moment(up) - dist.abs_moment(dn)) / (2.0 * h)
    return out


def _abs_moment_curvature(dist, eta) -> np.ndarray:
    """d2 E|z| / d eta^2 by central differences of the scalar E|z|: five points on the diagonal
    (error of order h^4), four across at steps h and h/2 combined by Richardson's rule; h is
    1e-3 of the parameter (at least 1e-3), so about ten digits (common practice)."""
    eta = np.asarray(eta, dtype=float)
    k = len(eta)
    out = np.zeros((k, k))
    f = dist.abs_moment
    hs = [1e-3 * max(1.0, abs(x)) for x in eta]

    def at(*moves):
        x = eta.copy()
        for i, s in moves:
            x[i] += s
        return f(x)

    f0 = f(eta)
    for i in range(k):
        h = hs[i]
        out[i, i] = (-at((i, 2 * h)) + 16.0 * at((i, h)) - 30.0 * f0 + 16.0 * at((i, -h)) - at((i, -2 * h))) / (12.0 * h * h)
        for j in range(i):
            def cross(a, b):
                return (at((i, a), (j, b)) - at((i, a), (j, -b)) - at((i, -a), (j, b)) + at((i, -a), (j, -b))) / (4.0 * a * b)
            out[i, j] = out[j, i] = (4.0 * cross(0.5 * h, 0.5 * hs[j]) - cross(h, hs[j])) / 3.0
    return out


def _impulse_responses(alpha, gamma, beta, K: int):
    """(a_k, c_k) for k = 1..K: how far ln sigma2 moves k steps after a shock, per unit of its
    news |z| - E|z| and of z: a_k = alpha_k + sum_j beta_j a_{k-j} (alpha_k = 0 beyond p)."""
    # SciPy's C filter without importing scipy.signal (whose package imports scipy.stats: about
    # 1 s CPU at an EGARCH fit's first unconditional variance)
    from ._linear import linear_filter

    den = np.concatenate([[1.0], -np.asarray(beta, dtype=float)])
    x = np.zeros((2, K))
    p = min(len(alpha), K)
    x[0, :p] = np.asarray(alpha, dtype=float)[:p]
    x[1, :p] = np.asarray(gamma, dtype=float)[:p]
    y = linear_filter(den, x) if len(beta) else x
    return y[0], y[1]


def _ged_scale(nu: float) -> float:
    """s in the GED density nu / (2 s Gamma(1/nu)) exp(-|z/s|^nu) of unit variance."""
    return math.exp(0.5 * (special.gammaln(1.0 / nu) - special.gammaln(3.0 / nu)))


def _mgf_finite(a, c, eta, dist) -> np.ndarray:
    """Where E exp(a|z| + c z) is finite.  On z > 0 the exponent is (a + c) z, on z < 0 it is
    (a - c)|z|: a positive one is integrable only against a tail lighter than exponential
    (normal; GED of shape above 1, or shape 1 with the exponent times the scale below 1); the
    polynomial tails of the t and skewed t, and the GED of shape below 1, take none."""
    u = np.asarray(a, dtype=float) + np.asarray(c, dtype=float)
    w = np.asarray(a, dtype=float) - np.asarray(c, dtype=float)
    if dist.name == "normal":
        return np.ones(u.shape, dtype=bool)
    if dist.name == "ged":
        nu = float(eta[0])
        if nu > 1.0:
            return np.ones(u.shape, dtype=bool)
        if nu == 1.0:
            s = _ged_scale(nu)
            return (u * s < 1.0) & (w * s < 1.0)
    return (u <= 0.0) & (w <= 0.0)


def _abs_moments_closed(eta, dist):
    """E|z|^r for r = 1..4 where the law is symmetric with a closed form (normal, GED); else None.
    For the GED, E|z|^r = s^r Gamma((r+1)/nu) / Gamma(1/nu); the normal is the GED of shape 2."""
    if dist.name == "normal":
        nu = 2.0
    elif dist.name == "ged":
        nu = float(eta[0])
    else:
        return None
    s = _ged_scale(nu)
    g1 = special.gammaln(1.0 / nu)
    return [s ** r * math.exp(special.gammaln((r + 1.0) / nu) - g1) for r in range(5)]


def _log_mgf_series(a, c, eta, dist):
    """log E exp(a (|z| - E|z|) + c z) by its cumulant expansion to the fourth order, for small
    |a|, |c| (error of order max(|a|, |c|)^5); None for a law without closed-form moments.

    For a symmetric z, E[|z|^i z^j] = E|z|^(i+j) for even j and 0 for odd j, so the raw moments
    of x = a|z| + c z are E x^r = E|z|^r ((a + c)^r + (a - c)^r) / 2 (common practice)."""
    mom = _abs_moments_closed(eta, dist)
    if mom is None:
        return None
    a = np.asarray(a, dtype=float)
    c = np.asarray(c, dtype=float)
    u, w = a + c, a - c
    r1, r2, r3, r4 = (mom[r] * (u ** r + w ** r) / 2.0 for r in range(1, 5))
    k2 = r2 - r1 ** 2
    k3 = r3 - 3.0 * r1 * r2 + 2.0 * r1 ** 3
    k4 = r4 - 4.0 * r1 * r3 + 6.0 * r1 ** 2 * r2 - 3.0 * r1 ** 4 - 3.0 * k2 ** 2
    return k2 / 2.0 + k3 / 6.0 + k4 / 24.0


def _log_mgf(a, c, eta, dist) -> np.ndarray:
    """log E exp(a|z| + c z) for arrays a, c where it is finite (:func:`_mgf_finite`).

    Normal (Nelson 1991, appendix; common practice): with u = a + c and w = a - c,
    E exp(a|z| + cz) = exp(u^2/2) Phi(u) + exp(w^2/2) Phi(w).  GED of shape nu: with x = |z|/s,
    each half is (nu / (2 Gamma(1/nu))) int_0^inf exp(b s x - x^nu) dx for b = u, w, by adaptive
    quadrature (all the factors in one vector integral), 1 / (2 (1 - b s)) at nu = 1.  Any other
    law (nonpositive exponents only): the same quadrature over its density.
    """
    a = np.asarray(a, dtype=float)
    c = np.asarray(c, dtype=float)
    u, w = a + c, a - c
    if len(u) == 0:
        return np.zeros(0)
    if dist.name == "normal":
        return np.logaddexp(0.5 * u * u + special.log_ndtr(u), 0.5 * w * w + special.log_ndtr(w))
    b = np.concatenate([u, w])
    if dist.name == "ged":
        nu = float(eta[0])
        s = _ged_scale(nu)
        cs = b * s
        if nu == 1.0:
            half = -np.log1p(-cs)
        else:
            half = _ged_log_half(cs, nu)
    else:
        half = _density_log_half(b, eta, dist)
    return np.logaddexp(half[: len(u)], half[len(u):]) - math.log(2.0)


def _ged_log_half(cs, nu: float) -> np.ndarray:
    """log of (nu / Gamma(1/nu)) int_0^inf exp(c x - x^nu) dx for each c in ``cs`` (= 1 at c = 0).

    Each integrand is scaled by its maximum exp(M) (at x* = (c/nu)^(1/(nu-1)) for c > 0 and
    nu > 1) so that none overflows, and integrated up to where every one is below exp(-700).
    The same factors recur in every forecast of one fit (each VOLRISK horizon, VOLFORECAST), so
    the last few are kept (a copy is returned: the same numbers, without the quadrature again)."""
    cs = np.ascontiguousarray(cs, dtype=float)
    return _ged_log_half_kept(cs.tobytes(), float(nu)).copy()


@lru_cache(maxsize=32)
def _ged_log_half_kept(key: bytes, nu: float) -> np.ndarray:
    from scipy import integrate

    cs = np.frombuffer(key, dtype=float)
    M = np.zeros(len(cs))
    if nu > 1.0:
        pos = cs > 0
        xs = np.where(pos, (np.maximum(cs, 0.0) / nu) ** (1.0 / (nu - 1.0)), 0.0)
        M = np.where(pos, cs * xs - xs ** nu, 0.0)
        cmax = float(max(cs.max(), 0.0))
        X = max(1.0, float(xs.max()))
        while X ** nu - cmax * X < 750.0 + float(M.max()):
            X *= 2.0
        val, _ = integrate.quad_vec(lambda x: np.exp(cs * x - x ** nu - M), 0.0, X, epsabs=0.0, epsrel=1e-13,
                                    norm="max", limit=2000)
    else:  # exponents <= 0 here (_mgf_finite)
        val, _ = integrate.quad_vec(lambda x: np.exp(cs * x - x ** nu), 0.0, math.inf, epsabs=0.0, epsrel=1e-13,
                                    norm="max", limit=2000)
    return math.log(nu) - special.gammaln(1.0 / nu) + M + np.log(val)


def _density_log_half(b, eta, dist) -> np.ndarray:
    """log of 2 int_0^inf exp(b z) f(+-z) dz for the first and second halves of ``b`` (z > 0 and
    z < 0 of a law with density f; exponents <= 0 only), by adaptive quadrature."""
    from scipy import integrate

    n = len(b) // 2
    sign = np.concatenate([np.ones(n), -np.ones(n)])

    def f(x):
        return np.exp(b * x + dist.logpdf(sign * x, eta))

    val, _ = integrate.quad_vec(f, 0.0, math.inf, epsabs=0.0, epsrel=1e-13, norm="max", limit=2000)
    return np.log(2.0 * val)


class _SimState:
    """News terms |z| - E|z|, shocks z and log-variances of simulated paths, newest last."""

    __slots__ = ("g", "z", "lv", "kappa", "clip", "v")

    def __init__(self, g, z, lv, kappa, clip):
        self.g, self.z, self.lv, self.kappa, self.clip, self.v = g, z, lv, kappa, clip, None


class _SecondState:
    """What :meth:`Egarch._second` reads from :meth:`Egarch._second_pass`: the variances and the
    forward pass's inputs."""

    __slots__ = ("sig2", "args", "start")


class Egarch(VarianceFamily):
    key = "egarch"
    # the worksheet bounds (sheet/bounds.py; measured by benchmarks/bounds_timing.py): with the
    # compiled gradient and Hessian a fit costs 1-3 times a GARCH fit with as many parameters
    cost_weight = 3
    in_mean_cost_weight = 25  # an in-mean EGARCH: one observation at a time, by differences (as before)
    analytic = True  # scores from the compiled forward pass (_derivatives)
    compiled_paths = True  # sim_sums: risk_sums below
    has_second = True  # the Hessian from a compiled second-order forward pass (_second)
    has_adjoint = True  # the gradient by a compiled backward pass (_adjoint)
    second_between_kinks = True  # |z| kinks the likelihood along the mean parameters
    second_reads_shape = True  # E|z| moves with the shape parameters: _second_pass reads them
    max_fit_params = 10
    max_in_mean_fit_params = 6  # an in-mean EGARCH still goes one observation at a time, by differences
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
    def _presample(self, e):
        """(mean square of the residuals, its log, the lags' scale): the presample log-variance
        is the log mean square, and ``presample=drop`` standardises its lag-only residuals by
        the root mean square."""
        sbar = float(np.mean(e * e))
        if sbar > 0:
            return sbar, math.log(sbar), math.sqrt(sbar)
        return sbar, -700.0, 1.0

    def _parts(self, vp):
        omega, alpha, gamma, beta = self._split(vp)
        return float(omega), _plain(alpha), _plain(gamma), _plain(beta)

    @staticmethod
    def _intercepts(omega, n, start, shift):
        """The log-variance's intercept at each residual position: omega, plus the intercept
        series ``shift`` (one value per likelihood position start..n-1) where there is one."""
        om = np.full(n, omega)
        if shift is not None:
            om[start:] += shift
        return om

    def _variance(self, vp, e, presample, eta, dist, shift=None):
        """The log-variance recursion (a compiled loop); presample news is zero (its expectation)
        and the presample log-variance the log mean square."""
        omega, alpha, gamma, beta = self._parts(vp)
        e = _plain(e)
        kappa = float(dist.abs_moment(eta))
        _, lsbar, sd0 = self._presample(e)
        start = self.p if presample == "drop" else 0
        om = self._intercepts(omega, len(e), start, shift)
        return _log_variance_loop(e, om, alpha, gamma, beta, kappa, lsbar, sd0, start)

    def _derivative_pass(self, vp, e, de, presample, eta, dist, shift, dshift):
        """The compiled forward pass of the derivatives (:func:`_log_variance_derivatives`) and its
        inputs: (sig2, D with a row per time, inputs as a tuple, start)."""
        omega, alpha, gamma, beta = self._parts(vp)
        e = _plain(e)
        n = len(e)
        de = _plain(np.reshape(de, (-1, n)))
        eta = np.asarray(eta, dtype=float)
        kappa, dkappa = self._kappa_and_gradient(eta, dist)
        sbar, _, _ = self._presample(e)
        dsbar = (2.0 / n) * (de @ e)
        start = self.p if presample == "drop" else 0
        om = self._intercepts(omega, n, start, shift)
        dom = np.zeros((0 if dshift is None else len(dshift), n))
        if dshift is not None:
            dom[:, start:] = dshift
        sig2, D = _log_variance_derivatives(e, de, om, dom, alpha, gamma, beta, kappa, dkappa, sbar, dsbar, start)
        return sig2, D, (e, de, om, dom, alpha, gamma, beta, kappa, dkappa, sbar, dsbar), start

    def _derivatives(self, vp, e, de, presample, eta=(), dist=None, shift=None, dshift=None):
        """(sigma2, D) from one compiled forward pass: D's rows are the mean parameters, the
        variance parameters, the intercept series' parameters (``dshift``: d shift / d v[k], one
        row per parameter on the likelihood positions), then the distribution's (E|z| moves
        with them)."""
        sig2, D, _, _ = self._derivative_pass(vp, e, de, presample, eta, dist, shift, dshift)
        return sig2, D.T

    def _forward(self, vp, e, presample, shift=None, eta=(), dist=None):
        """The state :meth:`_adjoint` reads: the variances of the compiled loop and its inputs."""
        omega, alpha, gamma, beta = self._parts(vp)
        e = _plain(e)
        eta = np.asarray(eta, dtype=float)
        kappa, dkappa = self._kappa_and_gradient(eta, dist)
        sbar, lsbar, sd0 = self._presample(e)
        start = self.p if presample == "drop" else 0
        om = self._intercepts(omega, len(e), start, shift)
        st = _SecondState()
        st.sig2 = _log_variance_loop(e, om, alpha, gamma, beta, kappa, lsbar, sd0, start)
        st.args = (e, alpha, gamma, beta, kappa, dkappa, sbar)
        st.start = start
        return st

    def _adjoint(self, st, w, de, gm, dshift=None):
        """Gradient of sum_t w_t sigma2_t by one backward pass (:func:`_log_variance_adjoint`):
        the variance parameters, the intercept series' (``dshift``), then the distribution's
        (through E|z|); the mean parameters' part is added to ``gm`` in place."""
        e, alpha, gamma, beta, kappa, dkappa, sbar = st.args
        gv, vbar, ebar, dk = _log_variance_adjoint(e, st.sig2, alpha, gamma, beta, kappa, sbar, st.start, _plain(w))
        if gm is not None and len(gm):
            gm += np.reshape(de, (-1, len(e))) @ ebar
        parts = [gv]
        if dshift is not None:
            parts.append(dshift @ vbar)
        parts.append(dk * dkappa)
        return np.concatenate(parts)

    def _second_pass(self, vp, e, de, presample, shift=None, dshift=None, eta=(), dist=None):
        """(state, D): the forward derivatives of :meth:`_derivatives` (the distribution's rows
        included) and what :meth:`_second` reads."""
        sig2, D, args, start = self._derivative_pass(vp, e, de, presample, eta, dist, shift, dshift)
        e, de, om, dom, alpha, gamma, beta, kappa, dkappa, sbar, dsbar = args
        st = _SecondState()
        st.sig2 = sig2
        st.args = (e, de, om, dom, alpha, gamma, beta, kappa, dkappa,
                   self._kappa_curvature(np.asarray(eta, dtype=float), dist), sbar, dsbar)
        st.start = start
        return st, D.T

    def _second(self, st, D, de, w, residual_weights=True):
        """(S, ce): S = sum_t w_t d2 sigma2_t / d theta^2 over every row of D (mean, variance,
        intercept series' and the distribution's parameters) by the compiled forward pass
        :func:`_log_variance_second`, with the residuals taken as linear in the mean parameters;
        ce = d (sum_t w_t sigma2_t) / d e, the weights of the residuals' own second derivatives
        (an MA part), by the adjoint pass :func:`_log_variance_adjoint` (None when
        ``residual_weights`` is False or there are no mean parameters)."""
        e, de, om, dom, alpha, gamma, beta, kappa, dkappa, d2kappa, sbar, dsbar = st.args
        n = len(e)
        w = _plain(w)
        d2sbar = (2.0 / n) * (de @ de.T)
        S = _log_variance_second(e, de, om, dom, alpha, gamma, beta, kappa, dkappa, d2kappa, sbar, dsbar,
                                 _plain(d2sbar), st.start, w)
        ce = None
        if residual_weights and de.shape[0]:
            ce = _log_variance_adjoint(e, _plain(st.sig2), alpha, gamma, beta, kappa, sbar, st.start, w)[2]
        return S, ce

    def _kappa_curvature(self, eta, dist):
        """d2 E|z| / d eta^2 (shape parameters x shape parameters), kept for the last shape asked:
        five-point central differences of the scalar E|z| on the diagonal, and Richardson-
        extrapolated four-point ones across (steps 1e-3 relative; about ten correct digits)."""
        key = (dist.name, eta.tobytes())
        memo = getattr(self, "_curv_memo", None)
        if memo is None or memo[0] != key:
            memo = self._curv_memo = (key, _abs_moment_curvature(dist, eta))
        return memo[1]

    def _kappa_and_gradient(self, eta, dist):
        """E|z| and its gradient in the shape parameters, kept for the last shape asked (the
        estimator asks for the same one many times in a row)."""
        key = (dist.name, eta.tobytes())
        memo = getattr(self, "_kappa_memo", None)
        if memo is None or memo[0] != key:
            memo = self._kappa_memo = (key, float(dist.abs_moment(eta)), _abs_moment_gradient(dist, eta))
        return memo[1], memo[2]

    # ------------------------------------------------------------------ summary figures
    def _persistence(self, vp, eta, dist):
        return float(self._split(vp)[3].sum())

    def _uncond_variance(self, vp, eta, dist):
        """E[sigma^2] = exp(omega / (1 - sum beta)) prod_{k>=1} E exp(a_k (|z| - E|z|) + c_k z)
        (Nelson 1991), with (a_k, c_k) the log-variance's responses k steps after a shock
        (:func:`_impulse_responses`): the limit of the forecast.  Blank where a factor is
        infinite (Student-t and skewed-t shocks, GED of shape below 1).  The factors with
        max(|a_k|, |c_k|) below 1e-3 enter by their cumulant expansion to the fourth order
        (error below 1e-12 relative)."""
        omega, alpha, gamma, beta = self._split(vp)
        if not stationary(beta):
            return None
        a, c = _impulse_responses(alpha, gamma, beta, 20000)
        if not np.all(_mgf_finite(a, c, eta, dist)):
            return None
        small = np.maximum(np.abs(a), np.abs(c)) < 1e-3
        cut = int(np.flatnonzero(~small)[-1]) + 1 if np.any(~small) else 0
        kappa = dist.abs_moment(eta)
        logval = omega / (1.0 - float(np.sum(beta)))
        logval += float(np.sum(_log_mgf(a[:cut], c[:cut], eta, dist) - a[:cut] * kappa))
        tail = _log_mgf_series(a[cut:], c[cut:], eta, dist)
        if tail is None:  # a shock law without the moments the expansion needs (not reached)
            tail = _log_mgf(a[cut:], c[cut:], eta, dist) - a[cut:] * kappa
        logval += float(np.sum(tail))
        out = math.exp(logval) if logval < 709.0 else math.inf
        return out if math.isfinite(out) else None

    # ------------------------------------------------------------------ forecast and simulation
    def _forecast(self, vp, eta, dist, history, H, rng, paths, shift=None):
        """Exact h-step forecasts E_T[sigma2_{T+h}] (Nelson 1991, section 3; written out here).

        Write g(z) = |z| - E|z| and let m_{T+h} be the log-variance the recursion gives with
        every future news term at its mean, zero (m_{T+1} = ln sigma2_{T+1} is known at T).
        The recursion is linear in the news, so a shock z_{T+h-k} moves ln sigma2_{T+h} by
        a_k g(z_{T+h-k}) + c_k z_{T+h-k}, where (a_k, c_k) are the impulse responses
            a_k = alpha_k + sum_j beta_j a_{k-j},  c_k = gamma_k + sum_j beta_j c_{k-j}
        (alpha_k = gamma_k = 0 for k > p, a_k = c_k = 0 for k <= 0).  Hence
            ln sigma2_{T+h} = m_{T+h} + sum_{k=1}^{h-1} (a_k g(z_{T+h-k}) + c_k z_{T+h-k}),
        and since the future z are independent with the fitted law,
            E_T[sigma2_{T+h}] = exp(m_{T+h}) prod_{k=1}^{h-1} exp(-a_k E|z|) E exp(a_k |z| + c_k z).
        For EGARCH(1,1), a_k = alpha beta^(k-1), c_k = gamma beta^(k-1) and
        m_{T+h} = omega sum_{i<h-1} beta^i + beta^(h-1) ln sigma2_{T+1}, which is Nelson's form
        sigma2_{T+1}^(beta^(h-1)) exp(omega sum_{i<h-1} beta^i) prod_{i=1}^{h-1}
        E exp(beta^(i-1) (alpha (|z| - E|z|) + gamma z)) (recalled from memory and re-derived
        above).  E exp(a|z| + cz) is closed-form for the normal, a one-dimensional quadrature
        otherwise (:func:`_log_mgf`); a factor that is infinite makes that step and every later
        one infinite (+inf here; :meth:`_moment_horizon` says why).  Future variance regressors
        (``shift``, one value per step) are known at T: they add to m's intercepts only.
        """
        omega, alpha, gamma, beta = self._split(vp)
        kappa = dist.abs_moment(eta)
        m = self._log_path(vp, kappa, history, H, shift)
        if H == 1:
            return np.exp(m), False
        a, c = _impulse_responses(alpha, gamma, beta, H - 1)
        logf = np.full(H - 1, math.inf)
        ok = _mgf_finite(a, c, eta, dist)
        bad = np.flatnonzero(~ok)
        n_ok = int(bad[0]) if len(bad) else H - 1  # factors before the first infinite one
        if n_ok:
            logf[:n_ok] = _log_mgf(a[:n_ok], c[:n_ok], eta, dist) - a[:n_ok] * kappa
        with np.errstate(over="ignore", invalid="ignore"):
            out = np.exp(m + np.concatenate([[0.0], np.cumsum(logf)]))
        return out, False

    def _log_path(self, vp, kappa, history, H, shift=None):
        """m_{T+1..T+H}: the log-variance recursion from the end of the sample with every
        future news term at zero (its expectation); ``shift`` adds to each step's intercept."""
        omega, alpha, gamma, beta = self._split(vp)
        p, q = self.p, self.q
        s2 = history.s2
        z = history.e[history.s0:] / np.sqrt(s2)
        news = [0.0] * max(p - len(z), 0) + [float(abs(x) - kappa) for x in z[len(z) - p:]] if p else []
        zs = [0.0] * max(p - len(z), 0) + [float(x) for x in z[len(z) - p:]] if p else []
        lv = list(np.log(s2[len(s2) - q:])) if q else []
        lv = [lv[0]] * max(q - len(lv), 0) + lv if q else []
        out = np.empty(H)
        for h in range(H):
            v = omega if shift is None else omega + shift[h]
            for i in range(1, p + 1):
                v += alpha[i - 1] * news[-i] + gamma[i - 1] * zs[-i]
            for j in range(1, q + 1):
                v += beta[j - 1] * lv[-j]
            out[h] = v
            if p:
                news = news[1:] + [0.0]
                zs = zs[1:] + [0.0]
            if q:
                lv = lv[1:] + [v]
        return out

    def _moment_horizon(self, vp, eta, dist, H, power):
        omega, alpha, gamma, beta = self._split(vp)
        if H < 2:
            return H, None
        a, c = _impulse_responses(alpha, gamma, beta, H - 1)
        ok = _mgf_finite(power * a, power * c, eta, dist)
        if np.all(ok):
            return H, None
        steps = int(np.flatnonzero(~ok)[0]) + 1
        what = "E[sigma^2]" if power == 1.0 else ("E[sigma]" if power == 0.5 else f"E[sigma^{2 * power:g}]")
        beyond = "one step" if steps == 1 else f"{steps} steps"
        return steps, (f"{what} does not exist beyond {beyond} with {dist.name} shocks "
                       f"(EGARCH's log-variance moves with |z|, and E exp(c|z|) is infinite for them)")

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

    def sim_sums(self, state, vp, Y, score_map, mu, phi=None, theta=None, r_lags=None, e_lags=None):
        return risk_sums(self, state, vp, Y, score_map, mu, phi, theta, r_lags, e_lags)

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
        e, s0, st = self._filter_begin(vp, u, step, presample, eta, dist)
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


# ------------------------------------------------------------------ the risk figures' paths, compiled
from ..distributions import score_map_arrays  # noqa: E402
from ._compiled import hermite_row, jit_enabled, ring_start  # noqa: E402  (the section's own)
from .base import arma_lags  # noqa: E402


@kernel
def _risk_log_variance_loop(Y, gt, dt, half, step, ident, omega, alpha, gamma, beta, kappa, g0, z0, lv0, Z, V):
    """The shocks Z and log-variances V (a row per step, a column per path) of paths of
    ln sigma2 = omega + sum alpha_i (|z| - kappa) + gamma_i z + sum beta_j ln sigma2 (clipped to
    [-700, 700], as the simulation's steps) that start from the news g0, shocks z0 and log-variances
    lv0 (newest last) and take the normal scores Y through the cubic Hermite map of the law's
    quantiles (nodes gt, slopes dt per step, over [-half, half]; ``ident``: the scores are the
    shocks).  The log-variances feed on the shocks alone, so the variances' exponentials can follow
    in one pass over them all.  Returns 1, or 0 at once if a score lies beyond the map's nodes (the
    caller then takes the NumPy route, which maps those exactly).  A step at a time over all paths:
    first the step's shocks (``hermite_row``), then the log-variances, the sums in the order of the
    step-by-step route's."""
    h, n = Y.shape
    p = alpha.shape[0]
    q = beta.shape[0]
    one = p == 1 and q == 1
    for t in range(h):
        zt = Z[t]
        if ident:
            for i in range(n):
                zt[i] = Y[t, i]
        elif not hermite_row(Y[t], gt, dt, half, step, zt):
            return 0
        vt = V[t]
        if one and t > 0:
            a1, g1, b1 = alpha[0], gamma[0], beta[0]
            zp, vp = Z[t - 1], V[t - 1]
            for i in range(n):
                v = omega + a1 * (abs(zp[i]) - kappa)
                v += g1 * zp[i]
                v += b1 * vp[i]
                if v > 700.0:
                    v = 700.0
                elif v < -700.0:
                    v = -700.0
                vt[i] = v
            continue
        for i in range(n):
            v = omega
            for k in range(1, p + 1):  # lag k: a step of these paths, or the sample's end (newest last)
                if t >= k:
                    z = Z[t - k, i]
                    v += alpha[k - 1] * (abs(z) - kappa)
                    v += gamma[k - 1] * z
                else:
                    v += alpha[k - 1] * g0[p + t - k]
                    v += gamma[k - 1] * z0[p + t - k]
            for k in range(1, q + 1):
                v += beta[k - 1] * (V[t - k, i] if t >= k else lv0[q + t - k])
            if v > 700.0:
                v = 700.0
            elif v < -700.0:
                v = -700.0
            vt[i] = v
    return 1


@kernel
def _risk_sum_loop(Z, S, mu, phi, theta, r0, u0, cum, a_last, s_last):
    """The paths' returns mu + sum phi_i r[t-i] + sum theta_j e[t-j] + S z summed, the terms added
    in that order (as the step-by-step route adds them), the mean's lags starting from the returns
    r0 and the shocks u0 (newest last; ``phi`` and ``theta`` empty for a constant mean): ``cum``
    gets the sum of the returns, ``a_last`` the sum up to the last step plus its mean and ``s_last``
    its volatility (Z the shocks, S the volatilities, a row per step), rounded as the step-by-step
    route rounds them."""
    h, n = Z.shape
    pr = phi.shape[0]
    qu = theta.shape[0]
    R = np.empty((max(pr, 1), n))
    U = np.empty((max(qu, 1), n))
    ring_start(R, r0, pr)  # lag k sits at ring position (-k) mod pr at step 0
    ring_start(U, u0, qu)
    pc = np.empty(max(pr, 1), dtype=np.int64)
    pd = np.empty(max(qu, 1), dtype=np.int64)
    for i in range(n):
        cum[i] = 0.0
    for t in range(h):
        zt, st = Z[t], S[t]
        if pr == 0 and qu == 0:
            if t < h - 1:
                for i in range(n):
                    cum[i] += mu + st[i] * zt[i]
            else:
                for i in range(n):
                    sig, z = st[i], zt[i]
                    ret = mu + sig * z
                    a_last[i] = cum[i] + (ret - sig * z)
                    s_last[i] = sig
                    cum[i] += ret
            continue
        for k in range(1, pr + 1):  # the ring positions of the lags at this step
            pc[k - 1] = (t - k) % pr
        for k in range(1, qu + 1):
            pd[k - 1] = (t - k) % qu
        last = t == h - 1
        for i in range(n):
            sig, z = st[i], zt[i]
            e = sig * z
            ret = mu
            for k in range(pr):
                ret += phi[k] * R[pc[k], i]
            for k in range(qu):
                ret += theta[k] * U[pd[k], i]
            ret += e
            if last:
                a_last[i] = cum[i] + (ret - sig * z)
                s_last[i] = sig
            cum[i] += ret
            if pr:
                R[t % pr, i] = ret
            if qu:
                U[t % qu, i] = e
    return 1


def risk_sums(family, state, vp, Y, score_map, mu, phi=None, theta=None, r_lags=None, e_lags=None):
    """(cum, a_last, s_last) of the paths that continue ``state`` (from ``sim_continue``) with the
    normal scores ``Y`` (a row per step) mapped to shocks by ``score_map`` (``Distribution.normal_scores``)
    and the mean mu + sum phi_i r[t-i] + sum theta_j e[t-j] (lags from ``r_lags`` and ``e_lags``,
    newest last; none for a constant mean): the NumPy route's numbers (``sim_step``).  Two compiled
    passes with NumPy's exponential and square root between them, the functions that route calls
    (and several times faster over a block than the C library's exp a value at a time).  None where
    the kernels run as plain Python or a score lies beyond the map's nodes: the caller then
    simulates step by step."""
    if not (jit_enabled() and isinstance(family, Egarch) and state.clip):
        return None
    phi, theta, r0, u0 = arma_lags(phi, theta, r_lags, e_lags)
    omega, alpha, gamma, beta = family._split(family._vp(vp))
    g0 = np.array([float(x) for x in state.g], dtype=float)
    z0 = np.array([float(x) for x in state.z], dtype=float)
    lv0 = np.array([float(x) for x in state.lv], dtype=float)
    ident, gt, dt, half, step = score_map_arrays(score_map)
    Y = np.ascontiguousarray(Y, dtype=float)
    Z, V = np.empty(Y.shape), np.empty(Y.shape)
    if not _risk_log_variance_loop(Y, gt, dt, half, step, ident, float(omega), np.asarray(alpha, dtype=float),
                                   np.asarray(gamma, dtype=float), np.asarray(beta, dtype=float),
                                   float(state.kappa), g0, z0, lv0, Z, V):
        return None
    S = np.exp(V, out=V)
    np.sqrt(S, out=S)
    n = Y.shape[1]
    cum, a_last, s_last = np.empty(n), np.empty(n), np.empty(n)
    _risk_sum_loop(Z, S, float(mu), phi, theta, r0, u0, cum, a_last, s_last)
    return cum, a_last, s_last
