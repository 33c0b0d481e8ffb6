"""FIGARCH(1,d,1), the fractionally integrated GARCH of Baillie, Bollerslev & Mikkelsen (1996).

The model
---------
The squared shocks e2 follow a fractionally integrated ARMA (BBM 1996),

    (1 - varphi L) (1 - L)^d e2[t] = omega + (1 - beta L) v[t],     v[t] = e2[t] - s2[t],

so that (1 - beta L) s2[t] = omega + [1 - beta L - (1 - varphi L)(1 - L)^d] e2[t] (the recursion
form, common practice) and, dividing by (1 - beta L), the ARCH(infinity) form

    s2[t] = omega / (1 - beta) + lambda(L) e2[t],
    lambda(L) = 1 - (1 - beta L)^-1 (1 - varphi L) (1 - L)^d = sum_{k>=1} lambda_k L^k.

``omega`` is the constant of the recursion form; the constant of the ARCH(infinity) form is
c0 = omega / (1 - beta).  The paper's phi is called ``varphi`` here, to keep it apart from the AR
coefficients phi[i].  Parameters, in this order: ``omega``, ``d``, ``varphi``, ``beta[1]``;
``FIGARCH(0,d,1)`` has no varphi, ``FIGARCH(1,d,0)`` no beta[1], ``FIGARCH(0,d,0)`` neither.

The weights (derived here).  With delta_k the coefficients of (1 - L)^d, delta_0 = 1 and
delta_k = delta_{k-1} (k - 1 - d) / k, the coefficients of (1 - varphi L)(1 - L)^d are
a_k = delta_k - varphi delta_{k-1}; dividing by (1 - beta L) gives b_k = a_k + beta b_{k-1}
(b_0 = 1) and lambda_k = -b_k:

    lambda_1 = varphi - beta + d,
    lambda_k = beta lambda_{k-1} + (varphi - (k - 1 - d) / k) delta_{k-1}      (k >= 2).

Their derivatives in d, varphi and beta follow the same recursions (a linear filter in beta), so
the scores are analytic.  **Truncation**: the weights stop at lag K = 1,000 (common practice);
lambda_k = 0 beyond.  For 0 < d the untruncated weights sum to one (lambda(1) = 1, since
(1 - L)^d vanishes at L = 1); the 1,000 kept ones sum to Lambda_K < 1.

Positivity (BBM 1996, sufficient conditions for FIGARCH(1,d,1), re-derived here from the
recursion above): for 0 < d < 1 every delta_k (k >= 1) is negative, so the k-th term
(varphi - (k - 1 - d)/k) delta_{k-1} is non-negative wherever (k - 1 - d)/k >= varphi, and that
ratio grows with k (at d = 1 the terms from k = 3 on vanish).  So lambda_1 >= 0, lambda_2 >= 0 and
varphi <= (2 - d)/3 (the ratio at k = 3) make every term from k = 3 on non-negative, and with
beta >= 0 every weight is non-negative by induction:

    beta - d <= varphi <= (2 - d) / 3    and    d (varphi - (1 - d)/2) <= beta (varphi - beta + d),

with 0 <= d <= 1, 0 <= beta < 1 and omega > 0.  At d = 0 the terms the bound (2 - d)/3 controls
vanish (delta_k = 0 for k >= 1), so it is not imposed there: the conditions reduce to GARCH(1,1)'s
alpha = varphi - beta >= 0.  The conditions are sufficient, not necessary; the estimator and a
typed fit table both keep to them; at d = 0 varphi (= alpha + beta there) must also stay below 1,
GARCH(1,1)'s stationarity.  The variants (0,d,1), (1,d,0), (0,d,0) are the same
conditions with the missing parameter at zero.  Being only sufficient, they can bind where
positivity does not: on the DEM/GBP series with ``presample=drop`` the normal fit's maximum lies on
varphi = (2 - d)/3.  The two linear conditions are the family's edges (:meth:`_edges`), so the
estimator holds such a fit on the edge (varphi implied, shown `at bound`, named in the message)
and reports the maximum there (Conrad & Haag 2006 give necessary and sufficient conditions --
from memory, not used here).

d = 0 is GARCH(1,1): lambda(L) = (varphi - beta) L / (1 - beta L), i.e. alpha[1] = varphi - beta,
beta[1] = beta and the same omega (the recursion forms coincide).

Presample
---------
``presample=mean`` (default): squares and the variance before the sample are the mean squared
residual sbar, as every family here starts.  The model runs as the recursion
(1 - beta L) s2[t] = omega + (1 - beta L) lambda_K(L) e2[t] from s2[-1] = sbar; equivalently

    s2[t] = c0 + sum_{k=1..K} lambda_k e2[t-k] + beta^(t+1) (sbar (1 - Lambda_K) - c0),

the truncated ARCH(infinity) sum (squares before the sample at sbar) plus a term that carries the
presample variance and dies out geometrically.  At d = 0 this is exactly the GARCH(1,1) start
e2[-1] = s2[-1] = sbar, up to terms in beta^1000.

``presample=drop``: the truncated recursion reads 1,000 lagged squares, so the first 1,000
residuals serve only as lags and every variance in the likelihood is the truncated sum over
observed squares, with no presample value at all -- the conditional likelihood of the truncated
model, at the price of 1,000 observations.

Summary figures
---------------
For d > 0 the weights sum to one: the persistence is 1 (the sum of the ARCH(infinity) weights),
there is no finite unconditional variance and shocks decay hyperbolically, so uncond_variance and
half_life are blank.  At d = 0 (GARCH(1,1)) the persistence is alpha + beta = varphi, with the
GARCH unconditional variance omega / (1 - varphi) and half-life.

Forecasts, simulation, news impact
----------------------------------
The h-step variance forecast is the ARCH(infinity) sum with the future squares replaced by their
forecasts (E e2 = s2), plus the presample term beta^h times its value at the end of the sample:
exact under the truncated model.  A simulated path carries the last 1,000 squares.  Fresh paths
start with every lagged square at the truncated model's mean level L = c0 / (1 - Lambda_K) (finite
because the kept weights sum below one; held at most at 1,000 c0 as d nears 1, where Lambda_K
nears one), so the expected variance is L from the start.  The news-impact curve holds the earlier
squares at that level L: c0 + lambda_1 e^2 + (Lambda_K - lambda_1) L; at d = 0 it is the GARCH(1,1)
curve, and where Lambda_K is within 0.001 of one it is refused (no level to hold them at).
"""

from __future__ import annotations

import re
from functools import lru_cache

import numpy as np

from .._lazy import lazy_module, lfilter

from ..errors import InputError
from .base import VarianceFamily

__all__ = ["Figarch", "TRUNCATION", "weights"]

sfft = lazy_module("scipy.fft")  # on a FIGARCH fit's first transform: the module imports scipy.special

#: lags of the ARCH(infinity) weights kept (common practice)
TRUNCATION = 1000
_K = TRUNCATION
_TOL = 1e-12  # slack on the positivity conditions for typed values on the boundary
_MIN_GAP = 1e-3  # 1 - Lambda_K below this: no usable level (news impact refused, fresh paths capped)
_ORDERS_HELP = ("FIGARCH takes the orders (1,d,1), the middle one the letter d (the fractional "
                "differencing order, estimated); (0,d,1), (1,d,0) and (0,d,0) leave out varphi or beta")


@lru_cache(maxsize=16)
def _weights_cached(d: float, phi: float, beta: float):
    K = _K
    k = np.arange(1, K + 1, dtype=float)
    delta = np.empty(K + 1)
    delta[0] = 1.0
    delta[1:] = np.cumprod((k - 1.0 - d) / k)
    den = np.array([1.0, -beta])
    a = delta.copy()
    a[1:] -= phi * delta[:-1]
    b = lfilter([1.0], den, a)
    lam = -b[1:]
    # d delta_k / d d by the product rule; at d = 0 and d = 1 one factor is zero (closed forms)
    ddel = np.zeros(K + 1)
    if d == 0.0:
        ddel[1:] = -1.0 / k
    elif d == 1.0:
        ddel[1] = -1.0
        ddel[2:] = 1.0 / (k[1:] * (k[1:] - 1.0))
    else:
        ddel[1:] = delta[1:] * np.cumsum(-1.0 / (k - 1.0 - d))
    da = ddel.copy()
    da[1:] -= phi * ddel[:-1]
    dlam_d = -lfilter([1.0], den, da)[1:]
    dphi = np.zeros(K + 1)
    dphi[1:] = delta[:-1]  # d a_k / d varphi = -delta_{k-1}; lambda = -b
    dlam_phi = lfilter([1.0], den, dphi)[1:]
    shifted = np.zeros(K + 1)
    shifted[1:] = b[:-1]  # d b_k / d beta = b_{k-1} + beta d b_{k-1} / d beta
    dlam_beta = -lfilter([1.0], den, shifted)[1:]
    dlam = np.vstack([dlam_d, dlam_phi, dlam_beta])
    lam.setflags(write=False)
    dlam.setflags(write=False)
    return lam, dlam


def weights(d: float, varphi: float = 0.0, beta: float = 0.0):
    """(lambda_1..lambda_K, their derivatives in (d, varphi, beta) as 3 rows) of FIGARCH(1,d,1)."""
    return _weights_cached(float(d), float(varphi), float(beta))


class _Fft:
    """Convolutions and correlations on one padded grid of length ``L`` with kernels of K + 1."""

    def __init__(self, L: int):
        self.L = L
        self.n = sfft.next_fast_len(L + _K + 1, real=True)

    def f(self, x):
        return sfft.rfft(x, self.n, axis=-1)

    def inv(self, X):
        return sfft.irfft(X, self.n, axis=-1)


def _kernel(lam):
    out = np.zeros(lam.shape[:-1] + (_K + 1,))
    out[..., 1:] = lam
    return out


class _State:
    """What the forward recursion leaves for the adjoint."""

    __slots__ = ("e", "sig2", "P", "FP", "fft", "off", "m", "mean", "sbar", "g", "lam", "dlam", "Lam",
                 "omega", "d", "phi", "beta", "c0", "R")


class _SimState:
    """Simulated paths: the squares common to all paths before the first step (``base``, lag 1
    first), the squares simulated since (``sim``, oldest first, ``m`` rows in use) and the
    presample term of the next period ``u``.

    The steps run in blocks of ``B``: at the start of a block, the contribution of every square
    simulated before it to each of the block's ``B`` variances is one matrix product (``far``);
    within the block only the squares of the block itself are added step by step.
    """

    __slots__ = ("lam", "lamext", "c0", "beta", "base", "u", "sim", "m", "B", "j", "m0", "far")

    def __init__(self, lam, c0, beta, base, u):
        self.lam, self.c0, self.beta, self.base, self.u = lam, c0, beta, base, u
        self.lamext = None
        self.sim, self.m, self.B, self.j, self.m0, self.far = None, 0, 1, 0, 0, None

    def start_block(self):
        K, B = _K, self.B
        if self.sim is not None and self.m >= K and len(self.sim) < self.m + B:
            self.sim[:K] = self.sim[self.m - K: self.m]  # keep the last K squares only
            self.m = K
        self.m0 = m0 = self.m
        self.far = None
        if m0:
            if self.lamext is None:
                self.lamext = np.concatenate([[0.0], self.lam, np.zeros(B)])
            lo = max(0, m0 - K)
            lags = (m0 - lo) + np.arange(B)[:, None] - np.arange(m0 - lo)[None, :]  # 1 .. K + B - 1
            self.far = self.lamext[lags] @ self.sim[lo:m0]

    def variance(self):
        lam, m, j = self.lam, self.m, self.j
        v = self.c0 + self.u
        if m < _K:
            v = v + float(lam[m:] @ self.base[: _K - m])
        if self.far is not None:
            v = v + self.far[j]
        if j:
            v = v + lam[j - 1:: -1] @ self.sim[self.m0: self.m0 + j]
        return v

    def push(self, e2):
        if self.sim is None:
            # a block's products hold B x paths numbers: at most about 4 million
            self.B = int(min(64, max(1, 4_000_000 // max(e2.size, 1))))
            self.sim = np.empty((self.B,) + e2.shape)
        elif self.m == len(self.sim):
            cap = max(self.m + 1, min(2 * len(self.sim), _K + 2 * self.B))
            grown = np.empty((cap,) + self.sim.shape[1:])
            grown[: self.m] = self.sim[: self.m]
            self.sim = grown
        self.sim[self.m] = e2
        self.m += 1
        self.j += 1
        self.u = self.u * self.beta


class Figarch(VarianceFamily):
    key = "figarch"
    words = ("FIGARCH",)
    n_orders = 2  # varphi's and beta's, with the letter d between them
    default_orders = (1, 1)
    stems = ("omega", "d", "varphi", "beta")
    indexed = ("beta",)
    analytic = True
    has_adjoint = True
    # fit time against GARCH(1,1), same returns: 2.5-3 times with t shocks (2,500 returns, and 29
    # windows of 1,021), 3.7-5.4 times with normal ones; k x k alone says 1.44-1.56
    cost_weight = 3

    # ------------------------------------------------------------------ model strings
    @classmethod
    def read_orders(cls, word, args):
        if args is None:
            return tuple(cls.default_orders)
        parts = args.split(",")
        if len(parts) != 3 or parts[1].upper() != "D" or not all(re.fullmatch(r"\d+", x) for x in (parts[0], parts[2])):
            raise ValueError(_ORDERS_HELP)
        p, q = int(parts[0]), int(parts[2])
        if p > 1 or q > 1:
            raise ValueError(f"FIGARCH({p},d,{q}) is not supported; {_ORDERS_HELP}")
        return p, q

    @property
    def canonical(self) -> str:
        return f"FIGARCH({self.p},d,{self.q})"

    def _names(self):
        return ["omega", "d"] + (["varphi"] if self.p else []) + (["beta[1]"] if self.q else [])

    @property
    def arch_lags(self) -> int:
        return _K  # the lagged squares the truncated recursion reads

    @property
    def diagnostic_order(self) -> int:
        return self.n_params - 1  # d, varphi, beta: the estimated weights' parameters

    def __repr__(self) -> str:  # pragma: no cover - convenience
        return f"Figarch({self.p}, {self.q})"

    def _split(self, vp):
        i = 2
        phi = beta = 0.0
        if self.p:
            phi = float(vp[i])
            i += 1
        if self.q:
            beta = float(vp[i])
        return float(vp[0]), float(vp[1]), phi, beta

    def _rows(self):
        """Rows of the weights' derivative matrix (d, varphi, beta) that are parameters here."""
        return [0] + ([1] if self.p else []) + ([2] if self.q else [])

    # ------------------------------------------------------------------ domain
    @staticmethod
    def _violation(omega, d, phi, beta, tol=0.0):
        """None inside the region of BBM (1996) (see the module docstring), else what is wrong."""
        if not omega > 0:
            return f"omega must be greater than 0, got {omega:g}"
        if not -tol <= d <= 1.0 + tol:
            return f"d (the fractional differencing order) must be from 0 to 1, got {d:g}"
        if not (-tol <= beta < 1.0):
            return f"beta[1] must be at least 0 and below 1, got {beta:g}"
        l1 = phi - beta + d
        if l1 < -tol:
            return (f"the first ARCH(inf) weight varphi - beta[1] + d must not be negative (positivity, Baillie, "
                    f"Bollerslev & Mikkelsen 1996), got {l1:.6g}")
        l2 = beta * (phi - beta + d) - d * (phi - 0.5 * (1.0 - d))
        if l2 < -tol:
            return (f"the second ARCH(inf) weight beta[1] (varphi - beta[1] + d) - d (varphi - (1 - d)/2) must not be "
                    f"negative (positivity, Baillie, Bollerslev & Mikkelsen 1996), got {l2:.6g}")
        if d == 0 and not phi < 1.0:
            return f"at d = 0 the model is GARCH(1,1) with persistence varphi, which must be below 1, got {phi:g}"
        if d > 0 and phi > (2.0 - d) / 3.0 + tol:
            return (f"varphi must be at most (2 - d)/3 = {(2.0 - d) / 3.0:.6g} when d > 0 (positivity, Baillie, "
                    f"Bollerslev & Mikkelsen 1996), got {phi:g}")
        return None

    def _check(self, d, eta, dist):
        why = self._violation(d["omega"], d["d"], d.get("varphi", 0.0), d.get("beta[1]", 0.0), _TOL)
        if why:
            raise InputError(f"{self.canonical}: {why}")

    def _check_fixed(self, name, value):
        if name == "omega" and not value > 0:
            raise InputError(f"options: omega must be greater than 0, got {value:g}")
        if name == "d" and not 0.0 <= value <= 1.0:
            raise InputError(f"options: d (the fractional differencing order) must be from 0 to 1, got {value:g}")
        if name == "beta[1]" and not 0.0 <= value < 1.0:
            raise InputError(f"options: beta[1] must be at least 0 and below 1, got {value:g}")
        if name == "varphi" and not -1.0 < value < 1.0:
            raise InputError(f"options: varphi must be between -1 and 1, got {value:g}")

    def _admissible(self, vp, eta, dist, held):
        if not np.all(np.isfinite(vp)):
            return False
        return self._violation(*self._split(vp), _TOL) is None  # an edge held by the estimator rounds

    def _edges(self):
        """The linear positivity conditions (module docstring): varphi <= (2 - d)/3 and
        varphi - beta[1] + d >= 0, each holding varphi on its edge (FIGARCH(1,d,q) only)."""
        if not self.p:
            return []
        out = [("varphi", {"varphi": -3.0, "d": -1.0}, -2.0, "varphi <= (2 - d)/3")]
        if self.q:
            out.append(("varphi", {"varphi": 1.0, "beta[1]": -1.0, "d": 1.0}, 0.0, "varphi - beta[1] + d >= 0"))
        else:
            out.append(("varphi", {"varphi": 1.0, "d": 1.0}, 0.0, "varphi + d >= 0"))
        return out

    def _box(self, var):
        out = [(0.05 * var, (var * 1e-9, None)), (0.1, (0.0, 1.0))]
        if self.p:
            out.append((0.1, (-1.0, 1.0)))
        if self.q:
            out.append((0.1, (0.0, 1.0 - 1e-6)))
        return out

    # ------------------------------------------------------------------ the recursion
    def _setup(self, vp, e, presample, mean_of=np.mean):
        """The padded squares P (presample first under ``mean``), its transform and the pieces."""
        st = _State()
        omega, d, phi, beta = self._split(vp)
        st.omega, st.d, st.phi, st.beta = omega, d, phi, beta
        st.lam, st.dlam = weights(d, phi, beta)
        st.Lam = float(st.lam.sum())
        st.c0 = omega / (1.0 - beta)
        e2 = e * e
        n = len(e)
        st.e = e
        st.mean = presample == "mean"
        if st.mean:
            st.sbar = float(mean_of(e2))
            st.P = np.concatenate([np.full(_K, st.sbar), e2])
            st.off = _K  # P position of residual 0
            st.m = n
            st.g = beta ** np.arange(1, n + 1) if beta else np.zeros(n)
            st.R = st.sbar * (1.0 - st.Lam) - st.c0
        else:
            st.sbar = 0.0
            st.P = e2
            st.off = 0
            st.m = max(n - _K, 0)
            st.g = np.zeros(st.m)
            st.R = 0.0
        st.fft = _Fft(len(st.P))
        st.FP = st.fft.f(st.P)
        return st

    def _sum(self, st, kernels):
        """sum_k kernel_k P[j - k] at the likelihood positions j = K .. K + m - 1."""
        out = st.fft.inv(st.FP * st.fft.f(_kernel(kernels)))
        return out[..., _K: _K + st.m]

    def _sig2(self, st):
        return st.c0 + self._sum(st, st.lam) + st.g * st.R

    def _variance(self, vp, e, presample, eta, dist):
        st = self._setup(vp, e, presample)
        if st.m == 0:
            return np.zeros(0)
        return self._sig2(st)

    def _derivatives(self, vp, e, de, presample, eta=(), dist=None):
        st = self._setup(vp, e, presample)
        m, g, beta = st.m, st.g, st.beta
        sig2 = self._sig2(st) if m else np.zeros(0)
        nm = de.shape[0]
        rows = self._rows()
        D = np.empty((nm + self.n_params, m))
        if m == 0:
            return sig2, D
        # mean parameters: the squares move with the residuals (and sbar with them)
        if nm:
            dE2 = 2.0 * e * de
            if st.mean:
                dsbar = dE2.mean(axis=1)
                dP = np.concatenate([np.repeat(dsbar[:, None], _K, axis=1), dE2], axis=1)
            else:
                dP = dE2
            conv = st.fft.inv(st.fft.f(dP) * st.fft.f(_kernel(st.lam))[None, :])[:, _K: _K + m]
            D[:nm] = conv
            if st.mean:
                D[:nm] += np.outer(dsbar * (1.0 - st.Lam), g)
        # omega
        D[nm] = (1.0 - g) / (1.0 - beta)
        # the weights' parameters
        dlam = st.dlam[rows]
        A = self._sum(st, dlam)
        for r, (row, Ar) in enumerate(zip(rows, A)):
            Dr = Ar - g * (st.sbar * float(dlam[r].sum()))
            if row == 2:  # beta also moves c0 and the presample term's decay
                dc0 = st.omega / (1.0 - beta) ** 2
                gp = np.arange(1, m + 1) * beta ** np.arange(0, m) if st.mean else np.zeros(m)
                Dr = Dr + dc0 * (1.0 - g) + gp * st.R
            D[nm + 1 + r] = Dr
        return sig2, D

    # ------------------------------------------------------------------ adjoint
    def _forward(self, vp, e, presample):
        st = self._setup(vp, e, presample, lambda a: a.sum() * (1.0 / len(a)))
        st.sig2 = self._sig2(st) if st.m else np.zeros(0)
        return st

    def _adjoint(self, st, w, de, gm):
        m, g, beta = st.m, st.g, st.beta
        rows = self._rows()
        out = np.zeros(self.n_params)
        if m == 0:
            return out
        W = np.zeros(len(st.P))
        W[_K: _K + m] = w
        FW = st.fft.f(W)
        # C_k = sum_t w_t P[t - k] (k = 0..K): the correlation of the weights with the squares
        C = st.fft.inv(FW * np.conj(st.FP))[: _K + 1]
        wg = float(w @ g)
        out[0] = (float(w.sum()) - wg) / (1.0 - beta)
        dlam = st.dlam[rows]
        for r, row in enumerate(rows):
            val = float(dlam[r] @ C[1:]) - st.sbar * float(dlam[r].sum()) * wg
            if row == 2:
                dc0 = st.omega / (1.0 - beta) ** 2
                val += dc0 * (float(w.sum()) - wg)
                if st.mean and m:
                    gp = np.arange(1, m + 1) * beta ** np.arange(0, m)
                    val += st.R * float(w @ gp)
            out[1 + r] = val
        if gm is not None and len(gm):
            # r_j = sum_t w_t lambda_{t - j}: the weight of the square at P position j
            rj = st.fft.inv(FW * np.conj(st.fft.f(_kernel(st.lam))))[: len(st.P)]
            e = st.e
            dE2 = 2.0 * e * de
            n = len(e)
            gm += dE2 @ rj[st.off: st.off + n]
            if st.mean:
                dsbar = dE2.sum(axis=1) * (1.0 / n)
                gm += dsbar * (float(rj[: _K].sum()) + (1.0 - st.Lam) * wg)
        return out

    # ------------------------------------------------------------------ summary figures
    def _persistence(self, vp, eta, dist):
        omega, d, phi, beta = self._split(vp)
        return phi if d == 0.0 else 1.0

    def _uncond_variance(self, vp, eta, dist):
        omega, d, phi, beta = self._split(vp)
        if d == 0.0 and phi < 1.0:
            return omega / (1.0 - phi)
        return None

    # ------------------------------------------------------------------ forecast
    def _end_state(self, vp, history):
        """(lam, c0, beta, the last K squares lag 1 first, presample term of the last period)."""
        omega, d, phi, beta = self._split(vp)
        lam, _ = weights(d, phi, beta)
        c0 = omega / (1.0 - beta)
        e2 = history.e ** 2
        fill = float(np.mean(e2)) if history.s0 == 0 else 0.0  # drop keeps 1,000 observed lags
        X = np.concatenate([np.full(_K, fill), e2])
        base = X[::-1][:_K].copy()  # lag 1 (the last square) first
        # the last variance less the truncated sum that produced it: the presample term there
        prev = X[len(X) - 1 - _K: len(X) - 1][::-1]  # the squares at lags 1..K of the last period
        u_last = float(history.s2[-1]) - c0 - float(lam @ prev)
        return lam, c0, beta, base, u_last

    def _forecast(self, vp, eta, dist, history, H, rng, paths):
        lam, c0, beta, base, u_last = self._end_state(vp, history)
        # the observed part of step h: sum_{k>=h} lambda_k e2[n - 1 + h - k]
        hmax = min(H, _K)
        obs = np.zeros(H)
        for h in range(1, hmax + 1):
            obs[h - 1] = float(lam[h - 1:] @ base[: _K - h + 1])
        x = c0 + obs + u_last * beta ** np.arange(1, H + 1)
        # the future squares at their forecasts: s2_h = x_h + sum_{k<h} lambda_k s2_{h-k}
        den = np.concatenate([[1.0], -lam[: max(H - 1, 0)]])
        return lfilter([1.0], den, x), False

    # ------------------------------------------------------------------ simulation
    def _level(self, vp):
        """The truncated model's mean level c0 / (1 - Lambda_K) (see the module docstring)."""
        omega, d, phi, beta = self._split(vp)
        lam, _ = weights(d, phi, beta)
        c0 = omega / (1.0 - beta)
        gap = 1.0 - float(lam.sum())
        return c0, lam, beta, gap

    def _sim_start(self, vp, eta, dist, paths):
        c0, lam, beta, gap = self._level(vp)
        level = c0 / max(gap, _MIN_GAP)
        return _SimState(lam, c0, beta, np.full(_K, level), 0.0)

    def _sim_continue(self, vp, eta, dist, history):
        lam, c0, beta, base, u_last = self._end_state(vp, history)
        return _SimState(lam, c0, beta, base, beta * u_last)

    def _sim_variance(self, state, vp, eta, dist):
        if state.j == state.B:
            state.j = 0
        if state.j == 0:
            state.start_block()
        return state.variance()

    def _sim_push(self, state, e, z, s2):
        state.push(np.asarray(e, dtype=float) ** 2)

    # ------------------------------------------------------------------ news impact
    def _news_impact(self, vp, eta, dist, e):
        c0, lam, beta, gap = self._level(vp)
        if gap < _MIN_GAP:
            raise InputError(f"the news-impact curve of this {self.canonical} needs a finite level: its 1,000 weights "
                             f"sum to {1 - gap:.6f}, within 0.001 of one (d near 1), so the earlier squares have no "
                             "level to be held at")
        level = c0 / gap
        return c0 + lam[0] * e ** 2 + (1.0 - gap - lam[0]) * level

    # ------------------------------------------------------------------ estimator's needs
    def _starts(self, v):
        # (d, varphi, beta); the last two stay admissible with d held at 0 (varphi >= beta)
        grid = [(0.4, 0.2, 0.5), (0.2, 0.1, 0.2), (0.6, 0.1, 0.6), (0.5, 0.3, 0.7), (0.3, 0.0, 0.2),
                (0.2, 0.5, 0.45), (0.1, 0.6, 0.55)]
        out = []
        for d, phi, beta in grid:
            phi = phi if self.p else 0.0
            beta = beta if self.q else 0.0
            if self.q and not self.p:
                beta = min(beta, 0.8 * d)  # beta <= d without varphi
            if self.p and not self.q:
                phi = min(phi, 0.4 * (1.0 - d))  # varphi <= (1 - d)/2 without beta
            if self._violation(1.0, d, phi, beta) is not None:
                continue
            lam, _ = weights(d, phi, beta)
            omega = v * (1.0 - float(lam.sum())) * (1.0 - beta)
            vp = [omega, d] + ([phi] if self.p else []) + ([beta] if self.q else [])
            out.append(vp)
        return out
