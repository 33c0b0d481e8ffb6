"""APARCH(p,q), the asymmetric power ARCH of Ding, Granger & Engle (1993):

    s[t]^delta = omega + sum_i alpha_i (|e[t-i]| - gamma_i e[t-i])^delta + sum_j beta_j s[t-j]^delta,

omega > 0, alpha_i >= 0, beta_j >= 0, -1 < gamma_i < 1, delta > 0.  With delta = 2 and gamma = 0
it is GARCH(p,q); with delta = 2 it is GJR-GARCH(p,q) with alpha_i (1 - gamma_i)^2 on e^2 and
4 alpha_i gamma_i on 1(e < 0) e^2.

The recursion.  The news terms N_i[t] = (|e[t]| - gamma_i e[t])^delta depend on the residuals
only, so the power variance S[t] = s[t]^delta is a linear filter of them (``linear_filter``, no
loop over observations) and s[t]^2 = S[t]^(2/delta).  Presample (``presample=mean``): each lagged
news term before the first observation is its sample mean at the trial parameters, and each
lagged S is sbar^(delta/2) with sbar the mean squared residual -- which makes delta = 2 reproduce
the GARCH and GJR presample exactly; ``drop``: the first p residuals are lags only, lagged S
before the start at sbar^(delta/2).

Derivatives.  The forward derivatives of S run through the same filter (one row per parameter);
the gradient of sum_t w_t s2[t] runs it once backwards (the adjoint).  Both carry d s2 = (2/delta)
(s2/S) dS, plus -(2/delta^2) s2 ln S for delta.  Where e = 0 the news term is 0 and so are its
derivatives (its d/d delta, N ln|e|, is 0 there as N -> 0 faster than ln|e|).

Summary figures.  The persistence of S is sum_i alpha_i kappa_i + sum_j beta_j with
kappa_i = E(|z| - gamma_i z)^delta of the fitted distribution (:func:`power_news_moment`), and
E[s^delta] = omega / (1 - persistence).  The unconditional *variance* E[s^2] is a moment of
order 2/delta of S, not a function of its mean: it is given where delta = 2 and left blank
otherwise.  Forecasts: E_T[S[T+h]] follows an exact recursion; the one-step variance is exact,
and so are all steps where delta = 2; otherwise steps 2 and later average seeded simulated paths.

Estimation.  The persistence is not linear in the parameters (kappa moves with gamma, delta and
the shape), so a maximum on the stationarity bound is held there by :meth:`Aparch._hold`, which
sets the last beta (the last alpha without betas) and returns its gradient.  Variance targeting
does not apply: the level the recursion fixes is E[s^delta], which the mean squared residual
does not give unless delta = 2.
"""

from __future__ import annotations

import math

import numpy as np
from .._lazy import special

from .._lazy import lazy_module, lfilter
from ..errors import InputError
from ._linear import linear_filter
from .base import UNIT_TOL, VarianceFamily

integrate = lazy_module("scipy.integrate")

__all__ = ["Aparch", "power_news_moment", "abs_power_moment"]

#: optimiser box of delta: beyond 4 the power variance needs fourth moments of the shocks
_DELTA_BOX = (0.1, 4.0)
_GAMMA_BOX = 1.0 - 1e-4


# ---------------------------------------------------------------------------------------------
# E(|z| - gamma z)^delta of the standardised shocks

def abs_power_moment(dist, eta, delta: float) -> float | None:
    """E|z|^delta of a symmetric standardised distribution in closed form, or None if not symmetric.

    normal: 2^(d/2) Gamma((d+1)/2) / sqrt(pi) (Ding, Granger & Engle 1993); Student t with unit
    variance: (nu-2)^(d/2) Gamma((d+1)/2) Gamma((nu-d)/2) / (sqrt(pi) Gamma(nu/2)), infinite for
    d >= nu; GED with unit variance: s^d Gamma((d+1)/nu) / Gamma(1/nu), s^2 = Gamma(1/nu)/Gamma(3/nu).
    """
    d = float(delta)
    if dist.name == "normal":
        return math.exp(0.5 * d * math.log(2.0) + special.gammaln(0.5 * (d + 1.0)) - 0.5 * math.log(math.pi))
    if dist.name == "t":
        nu = float(eta[0])
        if d >= nu:
            return math.inf
        return math.exp(0.5 * d * math.log(nu - 2.0) + special.gammaln(0.5 * (d + 1.0)) + special.gammaln(0.5 * (nu - d))
                        - 0.5 * math.log(math.pi) - special.gammaln(0.5 * nu))
    if dist.name == "ged":
        nu = float(eta[0])
        logs = 0.5 * (special.gammaln(1.0 / nu) - special.gammaln(3.0 / nu))
        return math.exp(d * logs + special.gammaln((d + 1.0) / nu) - special.gammaln(1.0 / nu))
    return None


def _skewt_integrand(nu: float, lam: float):
    """Hansen's (1994) skewed-t density as a plain scalar function (quad calls it often)."""
    logc = special.gammaln(0.5 * (nu + 1.0)) - special.gammaln(0.5 * nu) - 0.5 * math.log(math.pi * (nu - 2.0))
    c = math.exp(logc)
    a = 4.0 * lam * c * (nu - 2.0) / (nu - 1.0)
    b = math.sqrt(1.0 + 3.0 * lam * lam - a * a)
    k, m, bc = nu - 2.0, -0.5 * (nu + 1.0), b * c
    lo, hi = 1.0 - lam, 1.0 + lam

    def pdf(z):
        u = b * z + a
        y = u / (lo if u < 0.0 else hi)
        return bc * (1.0 + y * y / k) ** m

    return pdf, -a / b  # the density and its kink


def _half_moment(pdf, sign: float, delta: float, kink: float | None) -> float:
    """integral_0^inf y^delta pdf(sign * y) dy by adaptive quadrature, split at a kink of the density."""
    def f(y):
        return y ** delta * pdf(sign * y)

    opts = dict(epsabs=0.0, epsrel=1e-11, limit=200)
    cut = None if kink is None else sign * kink
    if cut is not None and cut > 0.0:
        return integrate.quad(f, 0.0, cut, **opts)[0] + integrate.quad(f, cut, math.inf, **opts)[0]
    return integrate.quad(f, 0.0, math.inf, **opts)[0]


_HALF_CACHE: dict = {}


def _half_moments(dist, eta, delta: float):
    """(E[z^delta 1(z>0)], E[(-z)^delta 1(z<0)]) of the standardised shocks, cached by
    (distribution, delta, shape): the estimator asks again at every trial point, and only a
    change of delta or of the shape parameters changes them."""
    key = (dist.name, float(delta)) + tuple(float(v) for v in np.ravel(eta))
    got = _HALF_CACHE.get(key)
    if got is not None:
        return got
    sym = abs_power_moment(dist, eta, delta)
    if sym is not None:
        got = (0.5 * sym, 0.5 * sym)
    else:
        if dist.name == "skewt":
            nu, lam = float(eta[0]), float(eta[1])
            if delta >= nu:  # the tails of z^delta f(z) decay as z^(delta - nu - 1)
                got = (math.inf, math.inf)
            else:
                pdf, kink = _skewt_integrand(nu, lam)
                got = (_half_moment(pdf, 1.0, delta, kink), _half_moment(pdf, -1.0, delta, kink))
        else:  # any other standardised density: quadrature of its own log-density
            def pdf(z):
                return math.exp(float(dist.logpdf(np.array([z]), eta)[0]))

            got = (_half_moment(pdf, 1.0, delta, None), _half_moment(pdf, -1.0, delta, None))
    if len(_HALF_CACHE) > 4096:
        _HALF_CACHE.clear()
    _HALF_CACHE[key] = got
    return got


def power_news_moment(gamma, delta: float, dist, eta) -> np.ndarray:
    """kappa_i = E(|z| - gamma_i z)^delta for each gamma_i, under the standardised distribution.

    (|z| - g z)^delta is ((1 - g) z)^delta for z > 0 and ((1 + g)(-z))^delta for z < 0, so
    kappa = (1 - g)^delta E[z^delta 1(z>0)] + (1 + g)^delta E[(-z)^delta 1(z<0)]; the two half
    moments are closed forms for the symmetric distributions (:func:`abs_power_moment`) and
    one-dimensional quadrature of the density otherwise (Hansen's skewed t).  Infinite where
    the shocks lack the moment (Student and skewed t with delta >= nu).
    """
    g = np.asarray(gamma, dtype=float)
    up, down = _half_moments(dist, np.asarray(eta, dtype=float), float(delta))
    with np.errstate(invalid="ignore"):
        return (1.0 - g) ** delta * up + (1.0 + g) ** delta * down


def _normal_kappa(g: float, d: float) -> float:
    return 0.5 * ((1.0 - g) ** d + (1.0 + g) ** d) * math.exp(
        0.5 * d * math.log(2.0) + special.gammaln(0.5 * (d + 1.0)) - 0.5 * math.log(math.pi))


# ---------------------------------------------------------------------------------------------
class _State:
    """What the forward recursion leaves for the adjoint."""

    __slots__ = ("e", "sig2", "S", "N", "sgn", "fac", "logb", "sbar", "c0", "den", "tail", "m",
                 "omega", "alpha", "gamma", "beta", "delta", "mean_mode")


class _SimState:
    """Per lagged shock its power split by sign (:meth:`Aparch._split_power`) -- (level, None) for
    a presample shock at its expectation -- and the lagged power variances S = s^delta of
    simulated paths, newest last; with the news coefficients of :meth:`Aparch._sim_coefficients`."""

    __slots__ = ("shocks", "S", "S_new", "coefs", "delta")

    def __init__(self, shocks, S, coefs, delta):
        self.shocks, self.S, self.S_new = shocks, S, None
        self.coefs, self.delta = coefs, delta


class Aparch(VarianceFamily):
    key = "aparch"
    words = ("APARCH",)
    stems = ("omega", "alpha", "gamma", "beta", "delta")
    indexed = ("alpha", "gamma", "beta")
    analytic = True
    has_adjoint = True
    simulated_forecast = True  # beyond one step unless delta = 2 (see _forecast)
    min_arch_terms = 1
    holds_at_bound = True  # by the nonlinear rule of _hold
    #: CPU time per k x k unit against the linear families' on 2,500 returns: APARCH(1,1)-t against
    #: GARCH(1,1)-t 0.8-1.7 times (ten series; 2-3.4 times the time, k = 7 against 5), models of
    #: k = 8-9 1.1-7.5 times (median 1.5), k = 15-16 on a GARCH series 4-8 times (ARMA(2,2)-APARCH(2,2)-skewt
    #: 8.7 s); 4 keeps two 15-parameter candidates out of one VOLCOMPARE call
    cost_weight = 4

    # ------------------------------------------------------------------ names and pieces
    def _names(self):
        p, q = self.p, self.q
        return (["omega"] + [f"alpha[{i}]" for i in range(1, p + 1)] + [f"gamma[{i}]" for i in range(1, p + 1)]
                + [f"beta[{j}]" for j in range(1, q + 1)] + ["delta"])

    def _split(self, vp):
        p, q = self.p, self.q
        return (float(vp[0]), vp[1: 1 + p], vp[1 + p: 1 + 2 * p], vp[1 + 2 * p: 1 + 2 * p + q],
                float(vp[1 + 2 * p + q]))

    # ------------------------------------------------------------------ domain
    def _check_fixed(self, name, value):
        self._check_one(name, value, "options: ")

    def _check_fixed_set(self, fixed):
        # each lag adds alpha_i E(|z| - gamma_i z)^delta >= 0 to the persistence: the fixed betas
        # alone are a lower bound of it
        names = [f"beta[{j}]" for j in range(1, self.q + 1) if f"beta[{j}]" in fixed]
        total = sum(fixed[n] for n in names)
        if names and total >= 1.0:
            raise InputError(f"options: the fixed weights {' + '.join(names)} sum to {total:g}; a stationary "
                             f"{self.canonical} needs its persistence (the betas plus the alphas' share) below 1, "
                             f"so the betas must sum below 1")

    def _check_one(self, name, v, where=""):
        if name == "omega" and not v > 0:
            raise InputError(f"{where}omega must be greater than 0, got {v:g}")
        if (name.startswith("alpha") or name.startswith("beta")) and v < 0:
            raise InputError(f"{where}{name} must be 0 or more, got {v:g}")
        if name.startswith("gamma") and not -1.0 < v < 1.0:
            raise InputError(f"{where}{name} must be between -1 and 1 (APARCH asymmetry), got {v:g}")
        if name == "delta" and not v > 0:
            raise InputError(f"{where}delta must be greater than 0 (the power of the APARCH variance: 2 models "
                             f"the variance, 1 the standard deviation), got {v:g}")

    def _check(self, d, eta, dist):
        for n, v in d.items():
            self._check_one(n, v)

    def _admissible(self, vp, eta, dist, held):
        omega, alpha, gamma, beta, delta = self._split(vp)
        if not np.all(np.isfinite(vp)):
            return False
        if not (omega > 0 and delta > 0) or np.any(alpha < 0) or np.any(beta < 0) or np.any(np.abs(gamma) >= 1.0):
            return False
        pers = self._persistence(vp, eta, dist)
        if held:  # on the bound by construction (_hold), up to the rounding of the weights' sum
            return pers is not None and pers < 1.0 + UNIT_TOL
        return pers is not None and pers < 1.0

    def _box(self, var):
        lo_d, hi_d = _DELTA_BOX
        # omega is on the scale of s^delta = var^(delta/2): its floor covers every delta in the box
        floor = 1e-9 * min(var ** (0.5 * lo_d), var ** (0.5 * hi_d))
        out = [(0.05 * var ** 0.75, (floor, None))]
        out += [(0.05, (0.0, None))] * self.p
        out += [(0.05, (-_GAMMA_BOX, _GAMMA_BOX))] * self.p
        out += [(0.05, (0.0, 1.0))] * self.q
        return out + [(0.1, _DELTA_BOX)]

    # ------------------------------------------------------------------ the recursion
    def _news(self, e, gamma, delta):
        """N (p x n): N[i-1] = (|e| - gamma_i e)^delta; with sign(e), 1 - gamma_i sign(e) and ln of the base."""
        sgn = np.sign(e)
        fac = 1.0 - gamma[:, None] * sgn[None, :]
        b = np.abs(e)[None, :] * fac
        pos = b > 0
        with np.errstate(all="ignore"):
            N = np.where(pos, b ** delta, 0.0)
            logb = np.where(pos, np.log(np.where(pos, b, 1.0)), 0.0)
        return N, sgn, fac, logb

    def _pad(self, X, mean_mode):
        """Prepend each row's mean p times (presample=mean); rows are lags' arrays over positions."""
        if not mean_mode:
            return X
        return np.concatenate([np.repeat(X.mean(axis=-1, keepdims=True), self.p, axis=-1), X], axis=-1)

    def _core(self, vp, e, presample):
        st = _State()
        omega, alpha, gamma, beta, delta = self._split(vp)
        p, q = self.p, self.q
        st.e = e
        st.omega, st.alpha, st.gamma, st.beta, st.delta = omega, alpha, gamma, beta, delta
        st.mean_mode = presample == "mean"
        st.sbar = sbar = float(np.mean(e * e))
        st.N, st.sgn, st.fac, st.logb = self._news(e, gamma, delta)
        Np = self._pad(st.N, st.mean_mode)
        m = Np.shape[1] - p
        st.m = m
        x = np.full(m, omega)
        for i in range(1, p + 1):
            x += alpha[i - 1] * Np[i - 1, p - i: p - i + m]
        with np.errstate(all="ignore"):
            st.c0 = c0 = sbar ** (0.5 * delta)
        if q:
            st.den = np.concatenate([[1.0], -beta])
            st.tail = np.cumsum(beta[::-1])[::-1]
            st.S = linear_filter(st.den, x, c0 * st.tail)
        else:
            st.den = st.tail = None
            st.S = x
        with np.errstate(all="ignore"):
            st.sig2 = np.where(st.S > 0, np.abs(st.S) ** (2.0 / delta), np.nan)
        return st

    def _variance(self, vp, e, presample, eta, dist):
        return self._core(vp, e, presample).sig2

    def _lag_weights(self, st, lam, i):
        """v (over residual positions) with sum_t lam_t Npad_i[t + p - i] = N_i @ v, for any
        array in place of N_i: the window of lag i, presample entries spread as a mean."""
        p, m, n = self.p, st.m, len(st.e)
        v = np.zeros(n)
        if st.mean_mode:
            v[: m - i] = lam[i:]
            v += lam[:i].sum() / n
        else:
            v[p - i: p - i + m] = lam
        return v

    # ------------------------------------------------------------------ analytic derivatives
    def _pieces(self, st):
        """d N / d gamma_i (p x n), d N / d delta (p x n) and d N / d e (p x n)."""
        N, delta = st.N, st.delta
        dg = -delta * N * st.sgn[None, :] / st.fac
        dd = N * st.logb
        e = st.e
        nz = e != 0
        with np.errstate(all="ignore"):
            de = np.where(nz[None, :], delta * N / np.where(nz, e, 1.0)[None, :], 0.0)
        return dg, dd, de

    def _derivatives(self, vp, e, de, presample, eta=(), dist=None):
        st = self._core(vp, e, presample)
        p, q, m = self.p, self.q, st.m
        alpha, delta, S, sig2 = st.alpha, st.delta, st.S, st.sig2
        dg, dd, dNe = self._pieces(st)
        nm = de.shape[0]
        n_var = self.n_params
        RHS = np.zeros((nm + n_var, m))
        ZI = np.zeros((nm + n_var, q)) if q else None
        mm = st.mean_mode
        iw = lambda i: slice(p - i, p - i + m)  # noqa: E731 - the window of lag i in padded coordinates
        Np, dgp, ddp = self._pad(st.N, mm), self._pad(dg, mm), self._pad(dd, mm)
        if nm:
            for i in range(1, p + 1):
                dN = dNe[i - 1][None, :] * de  # (nm x n)
                RHS[:nm] += alpha[i - 1] * self._pad(dN, mm)[:, iw(i)]
            if q:
                dsbar = (2.0 * e[None, :] * de).mean(axis=1)
                dc0 = 0.5 * delta * st.sbar ** (0.5 * delta - 1.0) * dsbar
                ZI[:nm] = dc0[:, None] * st.tail[None, :]
        o = nm
        RHS[o] = 1.0
        for i in range(1, p + 1):
            RHS[o + i] = Np[i - 1, iw(i)]
            RHS[o + p + i] = alpha[i - 1] * dgp[i - 1, iw(i)]
            RHS[-1] += alpha[i - 1] * ddp[i - 1, iw(i)]
        for j in range(1, q + 1):
            lag = np.empty(m)
            lag[:j] = st.c0
            lag[j:] = S[:-j]
            RHS[o + 2 * p + j] = lag
        if q:
            ZI[-1] = st.c0 * 0.5 * math.log(st.sbar) * st.tail
            DS, _ = lfilter([1.0], st.den, RHS, axis=1, zi=ZI)
        else:
            DS = RHS
        with np.errstate(all="ignore"):
            D = (2.0 / delta) * (sig2 / S) * DS
            D[-1] -= (2.0 / delta ** 2) * sig2 * np.log(S)
        return sig2, D

    def _forward(self, vp, e, presample):
        return self._core(vp, e, presample)

    def _adjoint(self, st, w, de, gm):
        p, q = self.p, self.q
        alpha, delta, S, sig2 = st.alpha, st.delta, st.S, st.sig2
        with np.errstate(all="ignore"):
            wS = w * (2.0 / delta) * sig2 / S
        lam = linear_filter(st.den, np.ascontiguousarray(wS[::-1]))[::-1] if q else wS
        dg, dd, dNe = self._pieces(st)
        g = np.zeros(self.n_params)
        g[0] = lam.sum()
        g_delta = 0.0
        mean_part = gm is not None and len(gm)
        for i in range(1, p + 1):
            v = self._lag_weights(st, lam, i)
            g[i] = st.N[i - 1] @ v
            g[p + i] = alpha[i - 1] * (dg[i - 1] @ v)
            g_delta += alpha[i - 1] * (dd[i - 1] @ v)
            if mean_part:
                gm += alpha[i - 1] * (de @ (dNe[i - 1] * v))
        for j in range(1, q + 1):
            lag = np.empty(st.m)
            lag[:j] = st.c0
            lag[j:] = S[:-j]
            g[2 * p + j] = lag @ lam
        if q:
            edge = float(lam[:q] @ st.tail)
            g_delta += st.c0 * 0.5 * math.log(st.sbar) * edge
            if mean_part:
                dsbar = de @ (2.0 * st.e) / len(st.e)
                gm += 0.5 * delta * st.sbar ** (0.5 * delta - 1.0) * dsbar * edge
        with np.errstate(all="ignore"):
            g_delta -= (2.0 / delta ** 2) * float(np.sum(w * sig2 * np.log(S)))
        g[-1] = g_delta
        return g

    # ------------------------------------------------------------------ summary figures
    def _kappa(self, vp, eta, dist):
        _, _, gamma, _, delta = self._split(vp)
        return power_news_moment(gamma, delta, dist, eta)

    def _persistence(self, vp, eta, dist):
        """sum_i alpha_i E(|z| - gamma_i z)^delta + sum_j beta_j, the persistence of s^delta
        (Ding, Granger & Engle 1993); None where the shocks lack the moment (t with delta >= nu)."""
        _, alpha, _, beta, delta = self._split(vp)
        if not delta > 0:
            return None
        kap = self._kappa(vp, eta, dist)
        if not np.all(np.isfinite(kap)):
            return None
        return float(alpha @ kap + beta.sum())

    def power_mean(self, vp, eta=(), dist=None) -> float | None:
        """E[s^delta] = omega / (1 - persistence); None where the persistence is 1 or more."""
        vp = self._vp(vp)
        pers = self._persistence(vp, np.asarray(eta, dtype=float), dist)
        if pers is None or not pers < 1.0 - UNIT_TOL:  # one, to the rounding of the weights' sum
            return None
        return float(vp[0] / (1.0 - pers))

    def _uncond_variance(self, vp, eta, dist):
        """E[s^2]: omega / (1 - persistence) where delta = 2; blank (None) otherwise.

        For delta != 2 the variance s^2 = S^(2/delta) is a moment of order 2/delta of the power
        variance S = s^delta, and such a moment is not a function of E[S] = omega/(1 - persistence):
        it depends on the whole stationary distribution of S (for delta < 2 it may even be
        infinite while E[S] is finite).  No closed form is known, so the figure is left blank
        rather than approximated.
        """
        if self._split(vp)[4] != 2.0:
            return None
        return self.power_mean(vp, eta, dist)

    # (half-life: the base's ln(1/2)/ln(persistence), the half-life of a shock to E_t[s^delta])

    # ------------------------------------------------------------------ forecasts
    def _power_forecast(self, vp, eta, dist, history, H):
        """E_T[S[T+h]], h = 1..H, exactly: E(|e| - gamma e)^delta = kappa S for a future shock."""
        omega, alpha, gamma, beta, delta = self._split(vp)
        p, q = self.p, self.q
        kap = self._kappa(vp, eta, dist)
        e = history.e
        N = self._news(e[len(e) - p:], gamma, delta)[0]  # p lags x last p shocks
        S_obs = history.s2[len(history.s2) - q:] ** (0.5 * delta) if q else np.zeros(0)
        out = []
        for h in range(H):
            v = omega
            for i in range(1, p + 1):
                k = h + 1 - i  # steps ahead of the lagged shock (<= 0: observed)
                v += alpha[i - 1] * (N[i - 1, p - 1 + k] if k <= 0 else kap[i - 1] * out[k - 1])
            for j in range(1, q + 1):
                k = h + 1 - j
                v += beta[j - 1] * (S_obs[q - 1 + k] if k <= 0 else out[k - 1])
            out.append(v)
        return np.array(out)

    def _forecast(self, vp, eta, dist, history, H, rng, paths):
        """The variance forecasts: step 1 exact (s[T+1] is known at T), every step exact where
        delta = 2 (E_T[s^2] is then the power forecast), else the mean over seeded simulated
        paths, with the exact E_T[s^delta] as a control variate (Glasserman 2004, section 4.1)."""
        delta = self._split(vp)[4]
        ES = self._power_forecast(vp, eta, dist, history, H)
        if delta == 2.0:
            return ES, False
        with np.errstate(all="ignore"):
            first = ES[0] ** (2.0 / delta) if ES[0] > 0 else math.nan
        if H == 1:
            return np.array([first]), False
        state = self._sim_continue(vp, eta, dist, history)
        out = np.empty(H)
        for h in range(H):
            z = dist.rvs(paths, eta, rng)
            s2 = np.broadcast_to(self._sim_variance(state, vp, eta, dist), (paths,))
            x = np.broadcast_to(state.S_new, (paths,))
            if h == 0:
                out[0] = first
            else:
                y_bar = float(np.mean(s2))
                out[h] = y_bar
                if math.isfinite(ES[h]) and paths > 2:
                    with np.errstate(all="ignore"):  # (sums, not BLAS dot products: no thread start-up)
                        xc = x - x.mean()
                        vx = float(np.sum(xc * xc))
                        if vx > 0 and math.isfinite(vx):
                            b = float(np.sum(xc * (s2 - y_bar))) / vx
                            adj = y_bar - b * (float(x.mean()) - ES[h])
                            if math.isfinite(adj) and adj > 0:
                                out[h] = adj
            self._sim_push(state, np.sqrt(s2) * z, z, s2)
        return out, True

    # ------------------------------------------------------------------ simulation
    def _news_of(self, e, gamma, delta):
        """[N_1(e), ..., N_p(e)] of one shock (scalar or an array over paths)."""
        out = []
        with np.errstate(all="ignore"):
            for g in gamma:
                b = np.abs(e) * (1.0 - g * np.sign(e))
                out.append(np.where(b > 0, b ** delta, 0.0))
        return out

    def _sim_coefficients(self, vp, eta, dist):
        """alpha_i (1 - gamma_i)^delta, alpha_i (1 + gamma_i)^delta and alpha_i kappa_i: the news
        term of lag i is |e|^delta times the first for e > 0, the second for e < 0, and the third
        times E[s^delta] at its expectation."""
        _, alpha, gamma, _, delta = self._split(vp)
        kap = self._kappa(vp, eta, dist)
        with np.errstate(all="ignore"):
            up, down = alpha * (1.0 - gamma) ** delta, alpha * (1.0 + gamma) ** delta
        return up, down, np.where(np.isfinite(kap), alpha * kap, alpha)

    @staticmethod
    def _split_power(e, delta):
        """(|e|^delta where e > 0 else 0, |e|^delta where e < 0 else 0): the news term of lag i is
        alpha_i (1 - gamma_i)^delta times the first plus alpha_i (1 + gamma_i)^delta times the second."""
        with np.errstate(all="ignore"):
            a = np.abs(e) ** delta
            a_up = np.where(e > 0, a, 0.0) if np.ndim(e) else (a if e > 0 else 0.0)
        return a_up, a - a_up

    def _sim_start(self, vp, eta, dist, paths):
        """Fresh paths: lagged s^delta at E[s^delta] (100 omega where undefined) and each lagged
        news term at its expectation kappa_i E[s^delta]; the burn-in forgets the start."""
        level = self.power_mean(vp, eta, dist)
        S0 = level if level is not None else 100.0 * self._split(vp)[0]
        coefs = self._sim_coefficients(vp, eta, dist)
        return _SimState([(S0, None)] * self.p, [S0] * self.q, coefs, self._split(vp)[4])

    def _sim_continue(self, vp, eta, dist, history):
        delta = self._split(vp)[4]
        e = history.e[len(history.e) - self.p:]
        shocks = [self._split_power(float(x), delta) for x in e]
        S = list(history.s2[len(history.s2) - self.q:] ** (0.5 * delta)) if self.q else []
        return _SimState(shocks, S, self._sim_coefficients(vp, eta, dist), delta)

    def _filter_start(self, vp, eta, dist, u, e_lags, presample):
        """The state before the first likelihood position as :meth:`_variance` starts from
        residuals ``u``: under ``presample=mean`` each lagged news term at its sample mean
        (the mean of the split powers, so that alpha_i (1 -/+ gamma_i)^delta weigh them as in the
        recursion), under ``drop`` the lag residuals' own; lagged s^delta at sbar^(delta/2)."""
        delta = float(self._split(vp)[4])
        sbar = float(np.mean(u * u))
        if presample == "mean":
            up, down = self._split_power(u, delta)
            shocks = [(float(np.mean(up)), float(np.mean(down)))] * self.p
        else:
            shocks = [self._split_power(float(x), delta) for x in e_lags]
        return _SimState(shocks, [sbar ** (0.5 * delta)] * self.q, self._sim_coefficients(vp, eta, dist), delta)

    def _sim_variance(self, state, vp, eta, dist):
        omega, _, _, beta, delta = self._split(vp)
        up, down, expected = state.coefs
        v = omega
        for i in range(1, self.p + 1):
            a_up, a_down = state.shocks[-i]
            if a_down is None:  # a presample shock at its expectation
                v = v + expected[i - 1] * a_up
            else:
                v = v + up[i - 1] * a_up + down[i - 1] * a_down
        for j in range(1, self.q + 1):
            v = v + beta[j - 1] * state.S[-j]
        state.S_new = v
        with np.errstate(all="ignore"):
            arr = np.asarray(v, dtype=float)
            s2 = np.where(arr > 0, np.abs(arr) ** (2.0 / delta), np.nan)
        return s2 if np.ndim(v) else float(s2)

    def _sim_push(self, state, e, z, s2):
        if self.p:
            state.shocks = state.shocks[1:] + [self._split_power(e, state.delta)]
        if self.q:
            state.S = state.S[1:] + [state.S_new]

    # ------------------------------------------------------------------ news impact
    def _news_impact(self, vp, eta, dist, e):
        """Next period's variance against this period's shock e, the lagged s^delta at its
        unconditional mean E[s^delta] and the older news terms at their expectations:
        (omega + alpha_1 (|e| - gamma_1 e)^delta + sum_(i>1) alpha_i kappa_i E[S] + sum_j beta_j E[S])^(2/delta)."""
        omega, alpha, gamma, beta, delta = self._split(vp)
        level = self.power_mean(vp, eta, dist)
        if level is None:
            pers = self._persistence(vp, eta, dist)
            if pers is None or not abs(pers - 1.0) < UNIT_TOL:
                raise InputError("the news-impact curve needs a stationary model (persistence below 1)")
            level = 0.0  # persistence one (held on the bound): no long-run level; as IGARCH, lags left out
        kap = self._kappa(vp, eta, dist)
        rest = float(alpha[1:] @ kap[1:]) * level + float(beta.sum()) * level
        S = omega + alpha[0] * self._news_of(e, gamma[:1], delta)[0] + rest
        return S ** (2.0 / delta)

    # ------------------------------------------------------------------ estimator's needs
    def _starts(self, v):
        """A grid over delta (2, 1.5, 1), asymmetry (0, 0.25) and (alpha, beta) weights, omega
        setting E[s^delta] to v^(delta/2) under normal shocks (the estimator ranks them)."""
        p, q = self.p, self.q
        out = []
        for delta in (2.0, 1.5, 1.0):
            for g in (0.0, 0.25):
                for a_tot, b_tot in ((0.05, 0.9), (0.1, 0.8), (0.2, 0.6)):
                    vp = np.zeros(self.n_params)
                    vp[1: 1 + p] = a_tot / p
                    vp[1 + p: 1 + 2 * p] = g
                    if q:
                        vp[1 + 2 * p: 1 + 2 * p + q] = b_tot / q
                    vp[-1] = delta
                    pers = a_tot * _normal_kappa(g, delta) + (b_tot if q else 0.0)
                    vp[0] = v ** (0.5 * delta) * max(1.0 - pers, 0.02)
                    out.append(vp)
        return out

    def _sum_rule(self, eta, dist):
        """The persistence sum alpha_i kappa_i + sum beta_j is not linear in the parameters (kappa_i
        moves with gamma_i, delta and the shape): the last beta (the last alpha without betas) is
        implied, and :meth:`_hold` sets it."""
        return (f"beta[{self.q}]" if self.q else f"alpha[{self.p}]"), None

    def _hold(self, vp, total, eta, dist):
        """Set the implied weight x (the last beta, or the last alpha) so that the persistence is
        ``total``, and return dx/d(variance parameters, shape) = -(d persistence) / (d persistence / dx)."""
        p, q = self.p, self.q
        x = 2 * p + q if q else p  # index of the implied weight
        omega, alpha, gamma, beta, delta = self._split(vp)
        grad = np.zeros(self.n_params + len(eta))
        if not delta > 0:
            vp[x] = math.nan
            return grad
        kap, dk_g, dk_d, dk_eta = self._kappa_derivatives(gamma, delta, dist, eta)
        if not (np.all(np.isfinite(kap)) and np.all(np.isfinite(dk_d)) and np.all(np.isfinite(dk_eta))):
            vp[x] = math.nan  # no persistence to hold: inadmissible
            return grad
        if q:
            vp[x] = total - float(alpha @ kap) - float(beta[:-1].sum())
        else:
            vp[x] = (total - float(alpha[:-1] @ kap[:-1])) / kap[-1]
        alpha = vp[1: 1 + p]
        # d persistence / d (omega, alpha, gamma, beta, delta, shape)
        dp = np.concatenate([[0.0], kap, alpha * dk_g, np.ones(q), [float(alpha @ dk_d)], alpha @ dk_eta])
        grad = -dp / dp[x]
        grad[x] = 0.0
        return grad

    def _kappa_derivatives(self, gamma, delta, dist, eta):
        """kappa_i = (1 - g_i)^d U + (1 + g_i)^d D with the half moments U, D of the shocks, and its
        derivatives in g_i, in delta and in the shape (the half moments' by central differences:
        they are smooth, closed forms or quadrature to 1e-11)."""
        U, D = _half_moments(dist, eta, delta)
        lo, hi = 1.0 - gamma, 1.0 + gamma
        with np.errstate(all="ignore"):
            a, b = lo ** delta, hi ** delta
            kap = a * U + b * D
            dk_g = delta * (-(lo ** (delta - 1.0)) * U + hi ** (delta - 1.0) * D)
            h = 1e-5 * max(1.0, delta)
            Up, Dp = _half_moments(dist, eta, delta + h)
            Um, Dm = _half_moments(dist, eta, delta - h)
            dk_d = a * np.log(lo) * U + b * np.log(hi) * D + (a * (Up - Um) + b * (Dp - Dm)) / (2 * h)
            dk_eta = np.zeros((len(gamma), len(eta)))
            for j in range(len(eta)):
                h = 1e-5 * max(1.0, abs(float(eta[j])))
                up, dn = np.array(eta, dtype=float), np.array(eta, dtype=float)
                up[j] += h
                dn[j] -= h
                Up, Dp = _half_moments(dist, up, delta)
                Um, Dm = _half_moments(dist, dn, delta)
                dk_eta[:, j] = (a * (Up - Um) + b * (Dp - Dm)) / (2 * h)
        return kap, dk_g, dk_d, dk_eta
