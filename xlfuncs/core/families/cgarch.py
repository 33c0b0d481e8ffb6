"""CGARCH(1,1), the component model of Engle & Lee (1999): a long-run (permanent) component q
and a transitory one s2 - q,

    q[t]         = omega + rho (q[t-1] - omega) + psi (e2[t-1] - s2[t-1])
    s2[t] - q[t] = alpha (e2[t-1] - q[t-1]) + beta (s2[t-1] - q[t-1])

with e2 = e^2 and s2 the conditional variance (the form of Engle & Lee 1999, written here from
memory; the paper's phi is ``psi`` here, clear of the AR coefficients ``phi[i]``).  ``omega`` is
the level the long-run component reverts to, and so the unconditional variance.

**As a GARCH(2,2).**  With v = e2 - s2 (the news, mean zero), (1 - rho L)(q - omega) = psi L v and
(1 - delta L)(s2 - q) = alpha L v, delta = alpha + beta; multiplying out (derived here, and the
restriction Engle & Lee state) gives the GARCH(2,2)

    s2[t] = w + a1 e2[t-1] + a2 e2[t-2] + b1 s2[t-1] + b2 s2[t-2],
    w  = (1 - rho)(1 - delta) omega,   a1 = alpha + psi,   a2 = -(psi delta + alpha rho),
    b1 = rho + beta - psi,             b2 = psi delta - rho beta,

which is how the recursion runs: through the shared linear machinery (:mod:`._linear`), its
analytic scores and adjoint gradient carried back to (omega, alpha, beta, rho, psi) by the
Jacobian of this map at the parameters.  The model string is ``CGARCH(1,1)`` (or ``CGARCH``);
as a GARCH(2,2) it reads two lagged squares and two lagged variances, so ``presample=drop``
keeps the first two residuals as lags.

**Presample** (the GARCH(2,2) one of the code base, made a component state).  ``presample=mean``:
the two periods before the first observation had variance and squared residual both at the
mean squared residual sbar (no news).  ``presample=drop``: the first two residuals are lags
only and the variances at those two positions are sbar.  Either way the component split of the
two presample variances is the only one the recursion allows: with x1 = q - omega, x2 = s2 - q,
c = sbar - omega and v_a, v_b the news of the two presample periods (zero under ``mean``),

    x1 + x2 = c at both,  so  x1[-2] = (c (1 - delta) - (alpha + psi) v_a) / (rho - delta),
    x1[-1] = rho x1[-2] + psi v_a,   q[0] = omega + rho x1[-1] + psi v_b,

and from there the two recursions above give exactly the GARCH(2,2)'s variances (the tests
write them out).  rho > delta (below) keeps the split defined.

**Region** (from memory: Engle & Lee 1999 give 1 > rho > alpha + beta > 0, beta > psi > 0,
alpha > 0, omega > 0 as sufficient for a positive variance, the ordering rho > alpha + beta
identifying the long-run component as the slower one).  Here: omega > 0, 0 < rho < 1, alpha,
beta, psi >= 0, alpha + beta < rho (the paper's ordering: without it the two components swap
places with the same likelihood), and in place of the paper's sufficient beta >= psi the exact
condition that the variance is positive whatever the past shocks: every weight of the ARCH(inf)
form of the GARCH(2,2) is 0 or more (Nelson & Cao 1992; see :func:`weights_nonnegative`).  This
region holds GARCH(1,1) exactly: alpha = beta = 0 leaves s2 = q, a GARCH(1,1) with alpha_g =
psi, beta_g = rho - psi and omega_g = (1 - rho) omega, which the paper's beta > psi would shut out.
The estimator stops rho at :data:`RHO_CAP`: as rho -> 1 only (1 - rho) omega is identified.

**Summary figures.**  The fit table's ``persistence`` is rho, the persistence of the long-run
component and the slowest decay of the variance forecast (the transitory component decays at
alpha + beta < rho); ``half_life`` is ln(1/2) / ln(rho); ``uncond_variance`` is omega.

**Forecasts** (closed form; E[v] = 0 ahead): with q1 and s1 the next period's long-run component
and variance,

    E q[T+h]  = omega + rho^(h-1) (q1 - omega),
    E s2[T+h] = E q[T+h] + (alpha + beta)^(h-1) (s1 - q1).

The long-run component itself (in sample and forecast) is what ``what=longrun`` shows.

**News impact**, both components at their long-run level omega: s2 = omega + (alpha + psi)(e^2 - omega).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ._linear import LinearFamily, linear_filter

__all__ = ["Cgarch", "weights_nonnegative", "garch22", "RHO_CAP"]

#: the estimator's upper bound on rho.  As rho -> 1 the data see omega only through
#: (1 - rho) omega, so a likelihood that keeps rising towards an integrated long-run component
#: would send omega off to infinity; the fit stops here instead (a half-life of about 6,900
#: periods) and says "at a bound: rho".  Typed tables may hold any rho below 1.
RHO_CAP = 0.9999


def garch22(omega, alpha, beta, rho, psi):
    """The GARCH(2,2) coefficients (w, a1, a2, b1, b2) of CGARCH(1,1) parameters."""
    delta = alpha + beta
    return ((1.0 - rho) * (1.0 - delta) * omega, alpha + psi, -(psi * delta + alpha * rho),
            rho + beta - psi, psi * delta - rho * beta)


def weights_nonnegative(a1, a2, b1, b2, tol: float = 1e-12) -> bool:
    """True if every ARCH(inf) weight of the GARCH(2,2) with these coefficients is 0 or more.

    The weights are theta_1 = a1, theta_2 = a2 + b1 a1, theta_k = b1 theta_(k-1) + b2 theta_(k-2);
    positivity of the variance for every past needs them all >= 0 (Nelson & Cao 1992).  With
    lam1 >= lam2 the roots of z^2 = b1 z + b2: if b2 >= 0 and b1 >= 0 the recursion keeps the
    first two signs; if b2 < 0 both roots are real and of one sign (complex roots or negative
    ones make the weights change sign for ever), and theta_k - lam2 theta_(k-1) =
    lam1^(k-2) (theta_2 - lam2 theta_1), so the condition is theta_2 >= lam2 theta_1 (which the
    dominant root needs, and which gives theta_k >= 0 by induction).  A root pair with b1 < 0
    has a negative dominant root: refused.  ``tol`` absorbs rounding on the boundary (psi = 0
    gives theta_2 = lam2 theta_1 exactly).
    """
    t1 = a1
    t2 = a2 + b1 * a1
    if t1 < -tol or t2 < -tol or b1 < 0:
        return False
    if b2 >= 0:
        return True
    disc = b1 * b1 + 4.0 * b2
    if disc < 0:
        return False
    lam2 = 0.5 * (b1 - math.sqrt(disc))
    return t2 - lam2 * t1 >= -tol


class Cgarch(LinearFamily):
    key = "cgarch"
    words = ("CGARCH",)
    n_orders = 2
    default_orders = (1, 1)
    stems = ("omega", "alpha", "beta", "rho", "psi")
    indexed = ("alpha", "beta")
    targeted = "omega"  # omega is the unconditional variance itself
    has_long_run = True
    # variance regressors (xvar=) would have to enter one of the two components; not offered
    takes_shift = False
    #: one estimation of CGARCH(1,1)-t on 2,500 returns took 1.1-2.5 times GARCH(1,1)-t's CPU time
    #: (median of 3, four series), about what the worksheet bounds' k x k units already give (49
    #: against 25), so no extra weight
    cost_weight = 1

    def __init__(self, p: int = 2, q: int = 2):
        super().__init__(2, 2)  # as a GARCH(2,2): two lagged squares, two lagged variances

    @classmethod
    def _resolve(cls, word, p, q):
        if (p, q) != (1, 1):
            raise ValueError(f"{word} is the component model of order (1,1) only (one long-run and one "
                             f"transitory component): write CGARCH(1,1) or CGARCH, not {word}({p},{q})")
        return cls.key, 2, 2

    @property
    def canonical(self) -> str:
        return f"{self.words[0]}(1,1)"

    def __repr__(self) -> str:  # pragma: no cover - convenience
        return "Cgarch(1, 1)"

    def _names(self):
        return ("omega", "alpha[1]", "beta[1]", "rho", "psi")

    # ------------------------------------------------------------------ the GARCH(2,2) map
    def _coefficients(self, vp):
        w, a1, a2, b1, b2 = garch22(*vp)
        return w, np.array([a1, a2]), np.zeros(0), np.array([b1, b2])

    def _jacobian(self, vp):
        omega, alpha, beta, rho, psi = vp
        delta = alpha + beta
        # rows w, a1, a2, b1, b2; columns omega, alpha, beta, rho, psi
        return np.array([
            [(1 - rho) * (1 - delta), -(1 - rho) * omega, -(1 - rho) * omega, -(1 - delta) * omega, 0.0],
            [0.0, 1.0, 0.0, 0.0, 1.0],
            [0.0, -(psi + rho), -psi, -alpha, -delta],
            [0.0, 0.0, 1.0, 1.0, -1.0],
            [0.0, psi, psi - rho, -beta, delta],
        ])

    # ------------------------------------------------------------------ domain
    def _check_fixed(self, name, value):
        if name == "omega" and not value > 0:
            raise InputError(f"options: omega must be greater than 0, got {value:g}")
        if name == "rho" and not 0.0 < value < 1.0:
            raise InputError(f"options: rho must be between 0 and 1, got {value:g}")
        if name in ("alpha[1]", "beta[1]", "psi") and value < 0:
            raise InputError(f"options: {name} must be 0 or more, got {value:g}")

    def _check(self, d, eta, dist):
        omega, alpha, beta, rho, psi = (d[n] for n in self.param_names)
        if not omega > 0:
            raise InputError(f"omega (the long-run variance) must be greater than 0, got {omega:g}")
        if not 0.0 < rho < 1.0:
            raise InputError(f"rho (the long-run component's persistence) must be between 0 and 1, got {rho:g}")
        for n, v in (("alpha[1]", alpha), ("beta[1]", beta), ("psi", psi)):
            if v < 0:
                raise InputError(f"{n} must be 0 or more, got {v:g}")
        if not alpha + beta < rho:
            raise InputError(f"alpha[1] + beta[1] must be below rho (the transitory component decays faster than "
                             f"the long-run one), got {alpha + beta:g} against rho {rho:g}")
        if not weights_nonnegative(*garch22(omega, alpha, beta, rho, psi)[1:]):
            raise InputError(f"psi {psi:g} is too large for these alpha[1], beta[1] and rho: the variance could "
                             "turn negative; lower psi")

    def _admissible(self, vp, eta, dist, held):
        omega, alpha, beta, rho, psi = vp
        if not (omega > 0 and 0.0 < rho < 1.0 and alpha >= 0 and beta >= 0 and psi >= 0 and alpha + beta < rho):
            return False
        return weights_nonnegative(*garch22(omega, alpha, beta, rho, psi)[1:])

    def _box(self, var):
        # rho lives near 1, so its scale is finer than the weights'
        return [(0.1 * var, (var * 1e-9, None)), (0.05, (0.0, 1.0)), (0.05, (0.0, 1.0)),
                (0.01, (0.0, RHO_CAP)), (0.05, (0.0, 1.0))]

    # ------------------------------------------------------------------ summary figures
    def _persistence(self, vp, eta, dist):
        return float(vp[3])  # rho: the long-run component's, the slowest decay

    def _uncond_variance(self, vp, eta, dist):
        omega, alpha, beta, rho, _ = vp
        return float(omega) if rho < 1.0 and alpha + beta < 1.0 else None

    # ------------------------------------------------------------------ estimator's needs
    def _starts(self, v):
        # (alpha, beta, rho, psi): a slow long-run component and a faster transitory one
        grid = ((0.05, 0.80, 0.99, 0.03), (0.08, 0.60, 0.97, 0.05), (0.10, 0.40, 0.95, 0.08), (0.15, 0.20, 0.90, 0.10))
        return [[v, a, b, r, s] for a, b, r, s in grid]

    def _target(self, vp, vbar, eta, dist):
        vp[0] = vbar

    def _sum_rule(self, eta, dist):
        return None

    # ------------------------------------------------------------------ the long-run component
    def _long_run_path(self, vp, e, s2, s0):
        """The long-run component q on the likelihood positions and one past the end (length
        len(s2) + 1), and the next variance, from residuals ``e`` (``s0`` lags only) and their
        variances ``s2``; the presample of the module docstring."""
        omega, alpha, beta, rho, psi = (float(x) for x in vp)
        delta = alpha + beta
        e2 = np.asarray(e, dtype=float) ** 2
        sbar = float(e2.mean())
        c = sbar - omega
        if s0 == 0:
            va = vb = 0.0
        else:
            va, vb = e2[s0 - 2] - sbar, e2[s0 - 1] - sbar
        if not rho > delta:
            raise InputError("rho must exceed alpha[1] + beta[1] to tell the long-run component from the transitory one")
        x1 = (c * (1.0 - delta) - (alpha + psi) * va) / (rho - delta)
        x1 = rho * x1 + psi * va
        q0 = omega + rho * x1 + psi * vb
        news = e2[s0:] - s2
        m = len(s2)
        q = np.empty(m + 1)
        q[0] = q0
        # q[t+1] - omega = rho (q[t] - omega) + psi news[t]: an AR(1) filter from q0
        q[1:] = omega + linear_filter(np.array([1.0, -rho]), psi * news, np.array([rho * (q0 - omega)]))
        s_next = q[m] + alpha * (e2[-1] - q[m - 1]) + beta * (s2[-1] - q[m - 1]) if m else q[0]
        return q, s_next

    def _long_run(self, vp, e, presample, eta, dist):
        s2 = self._variance(vp, e, presample, eta, dist)
        s0 = 0 if presample == "mean" else self.arch_lags
        return self._long_run_path(vp, e, s2, s0)[0][:-1]

    def _long_run_forecast(self, vp, eta, dist, history, H):
        q, _ = self._long_run_path(vp, history.e, history.s2, history.s0)
        omega, rho = vp[0], vp[3]
        return omega + rho ** np.arange(H) * (q[-1] - omega)

    def _forecast(self, vp, eta, dist, history, H, rng, paths):
        q, s_next = self._long_run_path(vp, history.e, history.s2, history.s0)
        omega, alpha, beta, rho, _ = vp
        k = np.arange(H)
        lr = omega + rho ** k * (q[-1] - omega)
        return lr + (alpha + beta) ** k * (s_next - q[-1]), False

    # ------------------------------------------------------------------ news impact
    def _news_impact(self, vp, eta, dist, e):
        omega, alpha, _, _, psi = vp
        return omega + (alpha + psi) * (e ** 2 - omega)
