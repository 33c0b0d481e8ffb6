"""Value-at-Risk and expected shortfall of the cumulative return over the next periods.

Both measures are *losses*, positive numbers in the units of the returns.  For the sum
R = r[T+1] + ... + r[T+h] of the next ``h`` returns and a confidence ``level`` (e.g. 0.99):

* VaR = -(the 1 - level quantile of R): the loss exceeded with probability 1 - level;
* ES = -E[R | R <= -VaR]: the mean loss on the days beyond the VaR.

=============  ====================================================================
horizon        how
=============  ====================================================================
1              exact: R = m + s z with the one-step mean forecast m, the one-step
               volatility forecast s and z from the fitted distribution, so
               VaR = -(m + s ppf(1 - level)) and ES = -m + s ES_z(level)
2 and more     seeded simulation of ``paths`` future paths (default
               :func:`risk_paths`: 2^17, 2^16 beyond 150 periods, 2^15 beyond
               300; half that with regressors or an in-mean term) that continue the
               fitted recursions from the end of the sample
               (:func:`forward_steps`),
               with four variance reductions: scrambled Sobol' points (randomised
               quasi-Monte Carlo: a random linear scramble and digital shift of the
               sequence's direction numbers, :func:`_scrambled_directions`, and the
               normal quantile from interpolants, :class:`_NormalTable`, made with
               the proposal below in one compiled pass where numba runs) as the
               shocks' normal scores, each shock the fitted
               law's quantile of its score's normal probability
               (``Distribution.normal_scores``); the scores rotated so that the
               Sobol' sequence's first coordinate drives their sum; importance
               sampling (the scores of steps 1..h-1 moved towards losses along their
               sum and widened across it, each path weighted by its likelihood ratio,
               :class:`_Scores`); and conditional Monte Carlo for the last step
               (given the earlier steps, R = a + s z with z independent, so the
               distribution function of R is the weighted mean of F((x - a)/s) and
               VaR solves F_R(x) = 1 - level; ES is the weighted mean of
               a F(k) + s M(k), M the partial first moment of z, over the weighted
               mean of F(k), k = (x - a)/s; :func:`_tail_solve`, with F, its density
               and partial first moment from interpolants, :class:`_LastLaw`).  For a
               GARCH-type or EGARCH fit with a constant or ARMA mean the paths run in the
               family's compiled kernels, a block of paths at a time (:func:`_compiled_sums`),
               the same numbers as the step-by-step route
=============  ====================================================================

The ``mean`` and ``sd`` reported with them are those of R from the analytic forecast (the
sum of the mean forecasts and the square root of the cumulative variance), not from the
simulated paths.

Where the model's moments run out (EGARCH with Student-t or skewed-t shocks: E exp(c|z|) is
infinite, so E[sigma^2_{T+h}] and E[sigma_{T+h}] are infinite for h >= 2), ``sd`` and ``es``
are +inf with ``sd_note`` and ``es_note`` saying why: the tail mean of R does not exist, and a
simulated one would show a finite number.  VaR, a quantile, exists and is simulated as usual,
and so are ``var_value`` and ``es_value``: the value loss is bounded by the position's value.
An in-mean model's ``mean`` (lambda_m times the volatility forecasts) is then infinite too, with
``mean_note``.

Loss as a percentage of the position's value
--------------------------------------------
When the fit's options say how the returns are defined (``returns=log100``, ``log``,
``simple100`` or ``simple``), ``var_value`` and ``es_value`` give the same two measures for
the change in the position's value over the horizon, V = (value at T+h) / (value at T) - 1,
as positive percentages of the value:

* log returns (c = 1/100 for ``log100``, 1 for ``log``): V = exp(c R) - 1.  VaR_value =
  100 (1 - exp(-c VaR)), exact because the map is monotone.  ES_value = 100 E[1 - exp(c R) |
  R <= -VaR], the mean of the value loss over the tail -- smaller than the transform of ES
  (Jensen).  At horizon 1, R = m + s z and the tail mean is a one-dimensional integral over
  the fitted density of z, computed by adaptive quadrature; beyond, it is the weighted mean over
  the simulated tail paths, moved by 100 (exp(-c ES_paths) - exp(-c ES)) with ES_paths the same
  paths' tail mean of R (a control variate: the value map's change from their ES to the
  conditional one, so the Jensen gap stays that of the tail paths).
* simple returns: V = prod_t (1 + c r[T+t]) - 1.  At horizon 1 that is c R, so VaR_value and
  ES_value are VaR and ES times 100 c, with the loss capped at the whole value as beyond:
  VaR_value = min(100 c VaR, 100) and ES_value the tail mean of min(-100 c R, 100), from the
  fitted law's partial first moment (:func:`_simple_value_loss`).  Beyond, VaR_value and ES_value are the weighted empirical
  quantile and tail mean of V over the simulated paths (a factor 1 + c r below zero, a loss
  beyond the whole value, counts as 0: the position is gone).

``returns=log`` and ``simple`` (fractions) are refused for returns whose standard deviation is
above 1 (:func:`~xlfuncs.core.spec.check_return_units`, our own rule): percent data in the wrong units.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np
from scipy import special

from .distributions import hermite
from .families._compiled import hermite_cell, kernel
from ._lazy import quad
from .errors import InputError, value_words
from .forecast import DEFAULT_PATHS, DEFAULT_SEED, MAX_HORIZON, forecast
from .simulate import forward_steps
from .spec import RETURN_DEFINITIONS, check_return_units

# one period's value loss integrates with QUADPACK's routines loaded alone (_lazy.quad): importing
# scipy.integrate brings scipy.optimize, about 0.3 s CPU

__all__ = ["Risk", "risk", "risk_paths", "default_paths", "DEFAULT_PATHS", "RISK_PATHS", "RISK_LONG", "RISK_DRAWS", "MIN_PATHS", "MAX_PATHS",
           "RETURN_DEFINITIONS"]

#: the simulated paths behind the risk figures beyond one period when the fit's options do not
#: say, up to RISK_LONG periods (a power of two: the balanced point sets of the Sobol' sequence)
RISK_PATHS = 2 ** 17
#: the most draws, paths x periods, that the default paths make: 2^16 x 300 = 19.7 million,
#: within the worksheet's bound on draws (xlfuncs/sheet/bounds.py)
RISK_DRAWS = 2 ** 16 * 300
#: beyond this many periods the default paths are halved (2^16), and halved again beyond twice as
#: many (2^15 beyond 300 periods, up to the longest horizon, 600), so that the draws stay at most
#: RISK_DRAWS
RISK_LONG = RISK_DRAWS // RISK_PATHS
MIN_PATHS = 1000
MAX_PATHS = 1_000_000
_MAX_SEED = 2**31 - 1


def risk_paths(horizon: int, compiled: bool = True) -> int:
    """The default simulated paths of the risk figures over ``horizon`` periods (beyond one):
    RISK_PATHS where the paths run in the variance family's compiled kernels (``compiled``, see
    :func:`compiled_route`), half that on the step-by-step route (regressors, an in-mean term),
    where a path costs about twice as much; halved until the draws, paths x
    periods, are at most RISK_DRAWS."""
    paths = RISK_PATHS if compiled else RISK_PATHS // 2
    while paths * horizon > RISK_DRAWS and paths > 1:
        paths //= 2
    return paths


@dataclass
class Risk:
    """Risk figures of the cumulative return over ``horizon`` periods (losses positive)."""

    var: float  # Value-at-Risk
    es: float  # expected shortfall
    mean: float  # mean of the cumulative return (analytic forecast)
    sd: float  # its standard deviation (analytic forecast)
    level: float
    horizon: int
    method: str
    # the same measures as a percentage of the position's value (None when ``returns`` is None)
    var_value: float | None = None
    es_value: float | None = None
    returns: str | None = None  # how the returns are defined: log100, log, simple100, simple
    # why ``sd`` (E[sigma^2] beyond some step) or ``es`` (E[sigma]) is infinite; None where finite
    sd_note: str | None = None
    es_note: str | None = None
    # why ``mean`` is infinite (an in-mean term at a volatility forecast that does not exist)
    mean_note: str | None = None


#: c in V = exp(c R) - 1 (log) or V = c R (simple, one period): the returns' unit as a fraction
_UNIT = {"log100": 0.01, "log": 1.0, "simple100": 0.01, "simple": 1.0}


def _real(x) -> float | None:
    """``x`` as a float if it is a real number (not a bool), else None."""
    if isinstance(x, bool) or not isinstance(x, numbers.Real):
        return None
    return float(x)


def _whole(x, name: str, lo: int, hi: int) -> int:
    v = _real(x)
    if v is None or not (math.isfinite(v) and v.is_integer() and lo <= v <= hi):
        raise InputError(f"{name} must be a whole number from {lo} to {hi}, got {value_words(x)}")
    return int(v)


def _check_level(level) -> float:
    v = _real(level)
    if v is None or not (0.5 <= v < 1.0):  # also rejects nan
        raise InputError(f"level must be between 0.5 and 1, e.g. 0.99, got {value_words(level)}")
    return v


def _check_returns(returns) -> str:
    if not (isinstance(returns, str) and returns.strip().lower() in RETURN_DEFINITIONS):
        raise InputError(f"returns must be one of {', '.join(RETURN_DEFINITIONS)}, got {value_words(returns)}")
    return returns.strip().lower()


def _log_tail_value_loss(dist, eta, m: float, s: float, c: float, zq: float, a: float) -> float:
    """E[1 - exp(c (m + s z)) | z <= zq] * P(z <= zq) / a for z with the fitted density.

    The integrand -expm1(c (m + s z)) f(z) is bounded by max(1, exp(c (m + s zq))) times the
    density on the lower tail, so the integral is finite for every family, Student t included.
    """
    def integrand(z: float) -> float:
        return -math.expm1(c * (m + s * z)) * math.exp(float(dist.logpdf(np.array(z), eta)))

    val, _ = quad(integrand, -math.inf, zq, epsabs=0.0, epsrel=1e-12, limit=200)
    return val / a


def _simple_value_loss(dist, eta, m: float, s: float, c: float, var: float, es: float, a: float) -> tuple:
    """(VaR_value, ES_value) in percent of value for one period of simple returns R = m + s z.

    The value loss is L = min(100 c (-R), 100): the value cannot fall below zero, as on the
    multi-period route.  VaR_value = min(100 c VaR, 100).  ES_value is the mean of L over the
    tail z <= zq (probability a): 100 c ES less, where the loss passes 100 % (z <= k with
    k = (-1/c - m)/s), the excess E[(100 c (-R) - 100) 1{z <= k}] / a, from the partial moment
    E[z 1{z <= k}] of the fitted distribution.
    """
    var_value = min(100.0 * c * var, 100.0)
    if var_value >= 100.0:
        return 100.0, 100.0
    es_value = 100.0 * c * es
    k = np.array((-1.0 / c - m) / s) if s > 0 else np.array(-math.inf)
    pk = float(dist.cdf(k, eta)) if math.isfinite(k) else 0.0
    if pk > 0.0:
        # E[(-R) 1{z <= k}] = -m F(k) - s E[z 1{z <= k}], the partial first moment of the fitted law
        below = -m * pk - s * float(dist._partial_first_moment(k, np.asarray(eta, dtype=float)))
        es_value -= (100.0 * c * below - 100.0 * pk) / a
    return var_value, min(es_value, 100.0)


def _weighted_quantile(x, w, alpha: float) -> float:
    """The smallest x[i] at which the weighted distribution function sum(w 1(x <= x[i])) / n reaches alpha."""
    n = len(x)
    m = min(n, max(64, int(8 * alpha * n)))
    if np.all(w >= 0):  # sort only the lowest m, once their weights pass alpha n
        while m < n:
            low = np.argpartition(x, m - 1)[:m]
            wm = float(np.sum(w[low]))
            if wm >= alpha * n:
                order = low[np.argsort(x[low], kind="stable")]
                cw = np.cumsum(w[order]) / n
                if cw[-1] >= alpha:
                    return float(x[order[int(np.searchsorted(cw, alpha))]])
            # else take more: as many as the weight so far says, and a quarter more
            m = min(n, max(m + 1, int(1.25 * m * alpha * n / wm) + 1 if wm > 0 else n))
    order = np.argsort(x, kind="stable")
    cw = np.cumsum(w[order]) / len(x)
    i = min(int(np.searchsorted(cw, alpha)), len(x) - 1)
    return float(x[order[i]])


def _weighted_tail_mean(x, w, tail) -> float:
    """The weighted mean of x over the paths in ``tail``."""
    return float(np.sum(w[tail] * x[tail]) / np.sum(w[tail]))


def _conditional_var(dist, eta, a, s, w, alpha: float, start: float):
    """The alpha-quantile, as a loss, of R = a + s z, z from ``dist`` independent of (a, s), over weighted paths.

    Conditional Monte Carlo with importance weights ``w`` (mean 1 in expectation): the
    distribution function of R is estimated by mean(w F((x - a) / s)), a smooth function of x,
    and its alpha-quantile found by a safeguarded Newton iteration from ``start``.  None if a
    path's a, s or weight is not a finite number.
    """
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(s)) and np.all(s > 0) and np.all(np.isfinite(w))):
        return None
    n = len(a)

    def g(x):
        k = (x - a) / s
        return float(w @ dist.cdf(k, eta)) / n - alpha, float(w @ (dist.pdf(k, eta) / s)) / n

    lo, hi = -math.inf, math.inf
    x = start
    width = float(np.max(s)) + 1.0
    for _ in range(200):
        gx, dg = g(x)
        if gx > 0:
            hi = x
        else:
            lo = x
        nx = x - gx / dg if (dg > 0 and math.isfinite(dg)) else math.nan
        if not (lo < nx < hi):  # outside the bracket: bisect, or step out while one side is open
            if math.isinf(lo):
                nx, width = x - width, 2.0 * width
            elif math.isinf(hi):
                nx, width = x + width, 2.0 * width
            else:
                nx = 0.5 * (lo + hi)
        done = abs(nx - x) <= 1e-10 * (1.0 + abs(x))
        x = nx
        if done:
            break
    return -x


class _LastLaw:
    """The fitted law's distribution function F, density f, its slope f' and partial first moment
    M(k) = integral of z f(z) up to k, as piecewise cubic Hermite interpolants on a uniform grid.

    The last step's figures evaluate them at every path twice (:func:`_tail_solve`); the special
    functions behind the exact ones (incomplete beta and gamma functions) cost 0.4-1 microsecond a
    point, the interpolant a few nanoseconds.  Each interpolant takes the exact values and slopes at
    the nodes (F' = f, M' = k f, f' = f dlog f/dz), so its error is of order step^4 times the fourth
    derivative: below 1e-10 on the grid at a step of 1/64, a few 1e-9 near a GED's mode, where its
    fourth derivative grows as |z|^(nu - 3) (tests/test_risk.py checks them against SciPy's; in the
    VaR, a mean of F over the paths set to 1 - level, that moves the result by less than 1e-7).
    A node sits at the law's mode (skewed t: -a/b, Hansen 1994; else 0), where the skewed t's
    density has its kink, so that every cell is smooth; a GED's density moves as |z|^nu there, so
    points within 0.5 of its mode, and points beyond the grid, take the exact functions.
    """

    STEP = 1.0 / 64.0
    HALF = 64.0

    def __init__(self, dist, eta):
        self.dist, self.eta = dist, eta
        self.p = np.asarray(eta, dtype=float)
        mode = 0.0
        if dist.name == "skewt":
            from .distributions import _skewt_constants

            _, a, b = _skewt_constants(float(self.p[0]), float(self.p[1]))
            mode = -a / b
        # a GED's density moves as |z|^nu near its mode, so the cells beside it are not smooth
        # however the nodes sit: points within 0.5 of it take the exact functions
        self.mode, self.near = mode, (0.5 if dist.name == "ged" else -1.0)
        n = int(round(self.HALF / self.STEP))
        self.lo = mode - n * self.STEP
        self.n = 2 * n + 1
        k = self.lo + self.STEP * np.arange(self.n)
        f, F, M, df = self._exact(k)
        h = self.STEP
        self.F, self.dF = F, f * h
        self.f, self.df = f, df * h
        self.M, self.dM = M, k * f * h
        self._tables = None  # (values, slopes) of F, f and M, for the compiled pass

    def _exact(self, k):
        d, eta = self.dist, self.eta
        f = d.pdf(k, eta)
        with np.errstate(invalid="ignore", over="ignore"):
            df = f * d.dlogpdf_dz(k, eta)
        df = np.where(f > 0, df, 0.0)
        return f, d.cdf(k, eta), d._partial_first_moment(k, self.p), df

    def _cell(self, k):
        u = (k - self.lo) * (1.0 / self.STEP)
        out = ~((u >= 0.0) & (u < self.n - 1))
        if self.near > 0:
            out |= np.abs(k - self.mode) < self.near
        i = np.minimum(np.maximum(u, 0.0), self.n - 2).astype(np.intp)
        t = u - i
        return i, t, out

    def values(self, k, what):
        """A tuple of the functions named in ``what`` ('F', 'f', 'M', 'df') at the points ``k``
        (in one compiled pass, :func:`_last_law_kernel_py`, where numba is already loaded)."""
        from .families._compiled import compiled_loaded  # not at import: the module stays light

        if compiled_loaded() and k.ndim == 1:
            if self._tables is None:
                self._tables = (np.ascontiguousarray([self.F, self.f, self.M]),
                                np.ascontiguousarray([self.dF, self.df, self.dM]))
            V, D = self._tables
            codes = np.array(["FfM".index(w) if w != "df" else 3 for w in what], dtype=np.int64)
            res = np.empty((len(what), len(k)))
            flag = np.empty(len(k), dtype=np.bool_)
            nout = _last_law_kernel(np.ascontiguousarray(k, dtype=float), self.lo, 1.0 / self.STEP, self.n,
                                    self.mode, self.near, V, D, codes, res, flag)
            res = tuple(res)
            out = flag if nout else None
        else:
            res, out = self._numpy_values(k, what)
            if not np.any(out):
                out = None
        if out is not None:
            ko = k[out]
            f, F, M, df = self._exact(ko)
            exact = {"F": F, "f": f, "M": M, "df": df}
            for v, w in zip(res, what):
                v[out] = exact[w]
        return tuple(res)

    def _numpy_values(self, k, what):
        i, t, out = self._cell(k)
        res = []
        for w in what:
            if w == "df":  # the slope of f's interpolant (used for a starting step only)
                t2 = t * t
                f0, f1 = self.f[i], self.f[i + 1]
                v = ((6.0 * t2 - 6.0 * t) * (f0 - f1) + (3.0 * t2 - 4.0 * t + 1.0) * self.df[i]
                     + (3.0 * t2 - 2.0 * t) * self.df[i + 1]) * (1.0 / self.STEP)
            else:
                v = hermite(getattr(self, w), getattr(self, "d" + w), i, t)
            res.append(v)
        return res, out


def _last_law_kernel_py(k, lo, inv_step, nodes, mode, near, V, D, codes, res, flag):
    """:meth:`_LastLaw.values` at the points ``k`` in one pass (a numba kernel), the same arithmetic
    as its NumPy form: row c of ``res`` gets the interpolant of function ``codes[c]`` (0: F, 1: f,
    2: M, rows of the nodes' values V and slopes per step D; 3: the slope of f's interpolant);
    ``flag`` marks the points beyond the grid or within ``near`` of the mode, which the caller
    gives the exact functions.  Returns how many are flagged."""
    top = float(nodes - 2)
    nflag = 0
    for p in range(k.shape[0]):
        u = (k[p] - lo) * inv_step
        bad = not (u >= 0.0 and u < nodes - 1)
        if near > 0 and abs(k[p] - mode) < near:
            bad = True
        flag[p] = bad
        if bad:
            nflag += 1
        i = int(min(max(u, 0.0), top))
        t = u - i
        for c in range(codes.shape[0]):
            w = codes[c]
            if w == 3:
                t2 = t * t
                res[c, p] = ((6.0 * t2 - 6.0 * t) * (V[1, i] - V[1, i + 1]) + (3.0 * t2 - 4.0 * t + 1.0) * D[1, i]
                             + (3.0 * t2 - 2.0 * t) * D[1, i + 1]) * inv_step
            else:
                res[c, p] = hermite_cell(t, V[w, i], D[w, i], V[w, i + 1], D[w, i + 1])
    return nflag


_last_law_kernel = kernel(_last_law_kernel_py)


def _tail_solve(law, a, s, w, alpha: float, start: float):
    """(VaR, ES), as losses, of R = a + s z over weighted paths, in two passes over the paths; None to fall back.

    The same estimators as :func:`_conditional_var` and :func:`_conditional_es` (the root of
    G(x) = mean(w F((x - a) / s)) - alpha, and the conditional tail mean there), reached with
    fewer evaluations of the distribution function, each from the interpolants of
    ``law`` (a :class:`_LastLaw`): at ``start`` G, G' and G'' (from the density
    and its slope) give a quadratic step to x1; at x1 F, f and the partial first moment give one
    Newton step to x2 and, to first order, the tail mean at x2 (d/dx sum w E[R 1(R <= x)] =
    x sum w f / s).  None if the paths left the finite numbers or the Newton step at x1 is not
    below 1e-4 of the loss (the quadratic start was too far): the callers then iterate.
    """
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(s)) and np.all(s > 0) and np.all(np.isfinite(w))):
        return None
    n = len(a)
    inv_s = 1.0 / s
    k = (start - a) * inv_s
    F, f, df = law.values(k, ("F", "f", "df"))
    g0 = float(w @ F) / n - alpha
    ws = w * inv_s
    g1 = float(ws @ f) / n
    g2 = float((ws * inv_s) @ df) / n
    if not (g1 > 0 and math.isfinite(g1) and math.isfinite(g2)):
        return None
    disc = g1 * g1 - 2.0 * g0 * g2
    step = -2.0 * g0 / (g1 + math.sqrt(disc)) if disc >= 0 else -g0 / g1
    x1 = start + step
    k = (x1 - a) * inv_s
    F, f, M = law.values(k, ("F", "f", "M"))
    wF = float(w @ F)
    g1 = float(ws @ f) / n
    if not (g1 > 0 and math.isfinite(g1)):
        return None
    d = -(wF / n - alpha) / g1
    x2 = x1 + d
    if not abs(d) <= 1e-4 * (1.0 + abs(x1)):  # x2 then within about 1e-8 of the root (quadratic convergence)
        return None
    num = float((w * F) @ a) + float(w @ (s * M))
    num += x1 * n * g1 * d  # the tail sum moved from x1 to x2, first order
    den = wF + n * g1 * d
    return -x2, -num / den


# ------------------------------------------------------------------ quasi-random normal scores
#: the inverse normal's interpolants (module docstring of _NormalTable)
_R0 = 1.0 / 32.0


class _NormalTable:
    """The standard normal quantile x(u) = Phi^-1(u) as two cubic Hermite interpolants on uniform grids.

    By symmetry x(u) = -a(r) for u < 1/2 and a(r) for u >= 1/2, with r = min(u, 1 - u) and
    a(r) = -Phi^-1(r) >= 0.  For r >= 1/32, a on a uniform grid in r (CSTEPS cells); below, a as
    a function of t = sqrt(-2 ln r), nearly linear (a ~ t - (ln t + ln 2 pi / 2) / t, common
    practice), on a uniform grid in t up to r = 2^-60.  Nodes carry SciPy's ndtri and the exact
    slopes (da/dr = -1 / phi(a), da/dt = t r / phi(a)), so the error, of order step^4 times the
    fourth derivative, stays below 1e-13 (tests/test_risk.py checks it against SciPy's ndtri).
    About 3 ns a point compiled, a fifth of ndtri's.
    """

    CCELLS, TSTEP = 4096, 1.0 / 256.0

    def __init__(self):
        n = self.CCELLS
        self.cstep = (0.5 - _R0) / n
        r = _R0 + self.cstep * np.arange(n + 1)
        r[-1] = 0.5
        a = -special.ndtri(r)
        phi = np.exp(-0.5 * a * a) / math.sqrt(2.0 * math.pi)
        self.cvd = np.empty(2 * (n + 1))  # values and slopes interleaved, for the compiled kernel
        self.cvd[0::2], self.cvd[1::2] = a, (-1.0 / phi) * self.cstep
        self.cv, self.cd = self.cvd[0::2], self.cvd[1::2]
        self.t0 = math.sqrt(-2.0 * math.log(_R0))
        tmax = math.sqrt(-2.0 * math.log(2.0 ** -60))
        m = int(math.ceil((tmax - self.t0) / self.TSTEP)) + 1
        t = self.t0 + self.TSTEP * np.arange(m + 1)
        rt = np.exp(-0.5 * t * t)
        at = -special.ndtri(rt)
        phit = np.exp(-0.5 * at * at) / math.sqrt(2.0 * math.pi)
        self.tv, self.td = at, (t * rt / phit) * self.TSTEP

    def __call__(self, u):
        """Phi^-1(u), vectorised (the NumPy route; :func:`_score_kernel` the same arithmetic)."""
        u = np.asarray(u, dtype=float)
        low = u < 0.5
        r = np.where(low, u, 1.0 - u)
        centre = r >= _R0
        out = np.empty_like(r)
        s = (r[centre] - _R0) * (1.0 / self.cstep)
        i = np.minimum(s.astype(np.intp), self.CCELLS - 1)
        out[centre] = hermite(self.cv, self.cd, i, s - i)
        t = np.sqrt(-2.0 * np.log(r[~centre]))
        s = (t - self.t0) * (1.0 / self.TSTEP)
        i = np.minimum(s.astype(np.intp), len(self.tv) - 2)
        out[~centre] = hermite(self.tv, self.td, i, s - i)
        return np.where(low, -out, out)


_NORMAL_TABLE = None


def _normal_table() -> _NormalTable:
    global _NORMAL_TABLE
    if _NORMAL_TABLE is None:
        _NORMAL_TABLE = _NormalTable()
    return _NORMAL_TABLE


class _RadiusTable:
    """rho(g) = F^-1(Phi(g)), the chi law's quantile with ``k`` degrees of freedom at a normal
    score's probability: the length of k independent standard normal scores drawn from one normal
    score, a cubic Hermite interpolant on a uniform grid of g over [-HALF, HALF] (SciPy's chi.ppf,
    chi.isf above 0, and the exact slopes phi(g) / f(rho) at the nodes), written as SciPy's chi law
    writes them over scipy.special (the same numbers, without importing scipy.stats: 0.6-0.8 s CPU)."""

    HALF, STEP = 8.25, 1.0 / 64.0

    def __init__(self, k: int):
        n = int(round(2 * self.HALF / self.STEP))
        g = -self.HALF + self.STEP * np.arange(n + 1)
        a = 0.5 * k
        rho = np.where(g <= 0.0, np.sqrt(2.0 * special.gammaincinv(a, special.ndtr(np.minimum(g, 0.0)))),
                       np.sqrt(2.0 * special.gammainccinv(a, special.ndtr(-np.maximum(g, 0.0)))))
        logpdf = (np.log(2) - 0.5 * np.log(2) * k - special.gammaln(a)) + special.xlogy(k - 1.0, rho) - 0.5 * rho ** 2
        slope = np.exp(-0.5 * g * g - logpdf) / math.sqrt(2.0 * math.pi)
        self.v, self.d = rho, slope * self.STEP

    def __call__(self, g):
        u = (np.asarray(g, dtype=float) + self.HALF) * (1.0 / self.STEP)
        i = np.minimum(np.maximum(u, 0.0), len(self.v) - 2).astype(np.intp)
        return hermite(self.v, self.d, i, u - i)


_RADII: dict = {}


def _radius_table(k: int) -> _RadiusTable:
    t = _RADII.get(k)
    if t is None:
        t = _RADII[k] = _RadiusTable(k)
    return t


_DIRECTIONS: dict = {}


def _joe_kuo_table():
    """(poly, vinit): the primitive polynomials and initial direction numbers of Joe and Kuo's (2008)
    table as SciPy ships them (``scipy/stats/_sobol_direction_numbers.npz``), read without importing
    scipy.stats (about 0.6-0.8 s CPU); None where the file is not there."""
    import os

    import scipy

    path = os.path.join(os.path.dirname(scipy.__file__), "stats", "_sobol_direction_numbers.npz")
    try:
        with np.load(path) as z:
            return np.asarray(z["poly"]), np.asarray(z["vinit"])
    except (OSError, KeyError, ValueError):
        return None


def _bratley_fox_directions(poly, vinit, dims: int, bits: int = 64) -> np.ndarray:
    """The direction numbers of Sobol's sequence from primitive polynomials and initial values, by
    the recurrence of Bratley and Fox (1988, Algorithm 659): for a polynomial of degree s with inner
    coefficients a_1..a_{s-1}, m_j = 2^s m_{j-s} XOR m_{j-s} XOR sum_k 2^k a_k m_{j-k}; direction j
    is m_j shifted so that its leading bit is bit ``bits`` - 1 - j.  Coordinate 0 is van der
    Corput's (every m_j = 1)."""
    v = np.zeros((dims, bits), dtype=object)  # Python integers: no overflow in the shifts
    v[0, :] = 1
    for d in range(1, dims):
        p = int(poly[d])
        s = p.bit_length() - 1
        for j in range(min(s, bits)):
            v[d, j] = int(vinit[d, j])
        for j in range(s, bits):
            new = v[d, j - s]
            for k in range(1, s + 1):  # bit s - k of p is a_k (a_s = 1: the term 2^s m_{j-s})
                if (p >> (s - k)) & 1:
                    new ^= v[d, j - k] << k
            v[d, j] = new
    out = np.empty((dims, bits), dtype=np.uint64)
    for j in range(bits):
        for d in range(dims):
            out[d, j] = np.uint64(int(v[d, j]) << (bits - 1 - j))
    return out


def _sobol_directions(dims: int, m: int) -> np.ndarray:
    """The first ``m`` direction numbers of each of the first ``dims`` coordinates of Sobol's
    sequence (Joe and Kuo's, as SciPy holds them), 64-bit integers with the leading bit at the top:
    point k of the sequence in Gray-code order is the XOR of those of the set bits of k ^ (k >> 1).
    Made from SciPy's table of polynomials and initial values (:func:`_bratley_fox_directions`;
    tests/test_risk.py checks them against SciPy's own), else through scipy.stats.qmc."""
    key = (dims, m)
    v = _DIRECTIONS.get(key)
    if v is None:
        table = _joe_kuo_table()
        if table is not None and len(table[0]) >= dims:
            v = np.ascontiguousarray(_bratley_fox_directions(*table, dims)[:, :m])
        else:
            from scipy.stats import qmc  # only here: the module is slow to import

            sob = qmc.Sobol(dims, scramble=False, bits=64)
            sv = getattr(sob, "_sv", None)
            if isinstance(sv, np.ndarray) and sv.shape == (dims, 64) and sv.dtype == np.uint64:
                v = np.ascontiguousarray(sv[:, :m])
            else:  # point 2^(b+1) - 1 of the unscrambled sequence is direction b (exact: b < 53 bits)
                pts = sob.random(2 ** m)
                idx = 2 ** (np.arange(m) + 1) - 1
                v = np.ascontiguousarray((pts[idx].T * 2.0 ** 64).astype(np.uint64))
        _DIRECTIONS[key] = v
    return v


def _scrambled_directions(dims: int, m: int, rng) -> tuple:
    """(directions, shift): Sobol's direction numbers under a random linear matrix scramble (each
    coordinate's digits times a random lower-triangular binary matrix with unit diagonal,
    Matousek 1998) and a random digital shift, from ``rng``: the randomised quasi-Monte Carlo
    points stay a (t, m, s)-net, and each point is uniform on the unit cube (Owen 1997)."""
    v = _sobol_directions(dims, m)
    ones = np.uint64(0xFFFFFFFFFFFFFFFF)
    rows = rng.integers(0, ones, size=(dims, 64), dtype=np.uint64, endpoint=True)
    k = np.arange(64, dtype=np.uint64)
    pos = np.uint64(63) - k  # row k gives the digit at bit 63 - k: the (k+1)-th digit
    keep = np.where(k == 0, np.uint64(0), ones << (np.uint64(64) - np.maximum(k, np.uint64(1))))
    rows = (rows & keep) | (np.uint64(1) << pos)
    par = rows[:, None, :] & v[:, :, None]  # dims x m x 64: each digit's bits, folded to their parity
    for k in (32, 16, 8, 4, 2, 1):  # (NumPy >= 1.24: no bitwise_count before 2.0)
        par ^= par >> np.uint64(k)
    vs = np.bitwise_or.reduce((par & np.uint64(1)) << pos, axis=-1)
    shift = rng.integers(0, ones, size=dims, dtype=np.uint64, endpoint=True)
    return np.ascontiguousarray(vs), shift


def _sobol_uniforms(vs, shift, n: int) -> np.ndarray:
    """The first ``n`` points (Gray-code order) as an (n, dims) array of uniforms, NumPy route:
    the centre (2k + 1) 2^-53 of each point's cell of width 2^-52, never 0 or 1."""
    dims, m = vs.shape
    q = np.empty((1 << m, dims), dtype=np.uint64)
    q[0] = shift
    size = 1
    for b in range(m):  # the reflected Gray code: points 2^b..2^(b+1)-1 are 2^b-1..0 XOR direction b
        q[size:2 * size] = q[size - 1::-1] ^ vs[:, b]
        size *= 2
    return (q[:n] >> np.uint64(12)).astype(np.float64) * 2.0 ** -52 + 2.0 ** -53


def _score_kernel_py(i0, vs, shift, d, radial, first_shift, scale, log_scale, v, vw, cvd, r0, inv_cstep, ccells,
                     tv, td, t0, inv_tstep, rv, rd, rhalf, inv_rstep, Y, logw):
    """The normal scores of :class:`_Scores` for paths i0..i0+n-1 (a numba kernel), in two passes.

    First a coordinate at a time over the paths: the coordinate of each path's Sobol' point (Gray-code
    order: point k is point k-1 XOR the direction of the lowest set bit of k), its uniform (the centre
    of its cell of width 2^-52) turned into a normal score by the interpolants of :class:`_NormalTable`,
    written into the step's row of Y (with ``radial``, coordinate 1, the radius's, into a row of its
    own and coordinates 2.. into rows 1..), and the sums of squares the weights need gathered on
    the way.  Then a step at a time over the paths, one pass a row: with ``radial``, the scores
    across the sum direction made from the radius (the chi law's interpolant rv, rd) times the
    direction of the normal scores of rows 1..d-1; the proposal's move and widening of the first
    ``d`` scores, their log likelihood ratio, and the reflection onto the sum direction (``v``,
    with ``vw`` = 2 v / v.v).  Each path's sums run over the steps in order, as a path at a time
    would, so the numbers are those of that order.  Y holds a row per step, a column per path."""
    steps, n = Y.shape
    dims = vs.shape[0]
    m = vs.shape[1]
    low_bit = np.zeros(n, dtype=np.int64)  # the direction that point i0 + i flips (i >= 1)
    for i in range(1, n):
        k = i0 + i
        b = 0
        while (k & 1) == 0:
            k >>= 1
            b += 1
        low_bit[i] = b
    rad = np.empty(n)
    before = np.zeros(n)  # the squared length of the scores before the move
    nn = np.zeros(n)  # radial: the squared length of the scores of coordinates 2..d
    top = tv.shape[0] - 2
    twelve = np.uint64(12)
    for j in range(dims):
        if radial and j == 1:
            row = rad
        elif radial and j > 1:
            row = Y[j - 1]
        else:
            row = Y[j]
        q = shift[j]
        gray = i0 ^ (i0 >> 1)  # point i0: the XOR of the directions of the set bits of its Gray code
        b = 0
        while gray > 0:
            if gray & 1:
                q ^= vs[j, b]
            gray >>= 1
            b += 1
        for i in range(n):
            if i > 0:
                b = low_bit[i]
                if b < m:
                    q ^= vs[j, b]
            u = float(np.int64(q >> twelve)) * 2.0 ** -52 + 2.0 ** -53
            low = u < 0.5
            r = u if low else 1.0 - u
            if r >= r0:
                s = (r - r0) * inv_cstep
                c = int(s)
                if c > ccells - 1:
                    c = ccells - 1
                c2 = 2 * c  # cvd interleaves the nodes' values and slopes: one cache line a cell
                a = hermite_cell(s - c, cvd[c2], cvd[c2 + 1], cvd[c2 + 2], cvd[c2 + 3])
            else:
                s = (math.sqrt(-2.0 * math.log(r)) - t0) * inv_tstep
                c = int(s)
                if c > top:
                    c = top
                a = hermite_cell(s - c, tv[c], td[c], tv[c + 1], td[c + 1])
            row[i] = -a if low else a
        if radial and 2 <= j <= d:
            for i in range(n):
                nn[i] += row[i] * row[i]
        elif not radial and j < d:
            for i in range(n):
                before[i] += row[i] * row[i]
    if radial:  # rows 1..d-1 become the radius times the direction of their scores: nn the factor
        rtop = rv.shape[0] - 2
        y0 = Y[0]
        for i in range(n):
            s = (rad[i] + rhalf) * inv_rstep
            c = int(s)
            if c < 0:
                c = 0
            elif c > rtop:
                c = rtop
            rho = hermite_cell(s - c, rv[c], rd[c], rv[c + 1], rd[c + 1])
            nn[i] = rho / math.sqrt(nn[i])
            before[i] = y0[i] * y0[i] + rho * rho
    if d >= 1:
        after = np.zeros(n)
        c2 = np.zeros(n)
        y = Y[0]
        for i in range(n):
            y[i] = y[i] - first_shift
            after[i] += y[i] * y[i]
            c2[i] += y[i] * vw[0]
        for j in range(1, d):  # the radius (radial), the widening, and their sums, in one pass a row
            y = Y[j]
            vj = vw[j]
            if radial:
                for i in range(n):
                    x = y[i] * nn[i]
                    x = x * scale
                    y[i] = x
                    after[i] += x * x
                    c2[i] += x * vj
            else:
                for i in range(n):
                    x = y[i] * scale
                    y[i] = x
                    after[i] += x * x
                    c2[i] += x * vj
        for i in range(n):
            logw[i] = 0.5 * (before[i] - after[i]) + log_scale
        if d > 1:
            for j in range(d):
                y = Y[j]
                vj = v[j]
                for i in range(n):
                    y[i] = y[i] - c2[i] * vj
    else:
        for i in range(n):
            logw[i] = 0.0


_score_kernel = kernel(_score_kernel_py)


@kernel
def _pad_move(Y, moved, scale, theta, log_scale, logw):
    """The proposal's move of the padding steps' scores (rows of Y, a column per path): the first
    ``moved`` rows widened and moved, x = scale y - theta, each path's log likelihood ratio
    gathering (y^2 - x^2) / 2 + ln scale a row at a time, in the order and with the arithmetic of
    :meth:`_Scores.step` (so the two routes give the same numbers); the rows after (the last
    step's) left as drawn."""
    n = Y.shape[1]
    for j in range(moved):
        y = Y[j]
        for i in range(n):
            yi = y[i]
            x = scale * yi - theta
            y[i] = x
            logw[i] += 0.5 * (yi * yi - x * x) + log_scale


#: the share of the normal-theory shift of the sum's quantile that the normal scores of steps
#: 1..h-1 are moved by (along their sum), and the factor the scores' spread across the other
#: directions is widened by at 22 periods (measured in benchmarks/risk_accuracy.py: the widening
#: samples the heavy-tailed volatility paths more often); the widening is 1 + (SCALE - 1)
#: sqrt(21 / (h - 1)) beyond 22 periods, so that the spread of the paths' weights, which grows as
#: (s^2 / sqrt(2 s^2 - 1))^(h-2), stays near that at 22 periods
TILT = 0.8
SCALE = 1.2
#: the scores across the sum direction as a radius (its own Sobol' coordinate, the second, so
#: that the sum and the radius, which drive the losses and the volatility, form a two-dimensional
#: net) times a direction (the normal scores of the next coordinates, normalised)
RADIAL = True
#: the paths whose scores one pass of the compiled kernels makes before the family's kernel takes
#: them (22 x 4,096 scores, 0.7 MB: in the cache between the two); also the blocks of paths whose
#: padding steps (beyond QMC_STEPS) come from one generator each
BLOCK = 4096
#: the paths whose weighted empirical quantile starts the solvers of the VaR (:func:`_tail_solve`):
#: the first 2^13 points of the scrambled sequence, a net of their own; a start within a few tenths
#: of a percent of the root is enough for the quadratic step and the Newton step that follow
START_PATHS = 8192
#: the steps that take quasi-random scores; later steps of a long horizon take pseudo-random ones
#: (padding, common practice), so the Sobol' points made stay paths x QMC_STEPS
QMC_STEPS = 64


class _Scores:
    """Normal scores of the shocks, one step at a time, and each path's log likelihood ratio.

    Randomised quasi-Monte Carlo: the points of a Sobol' sequence in min(h, QMC_STEPS)
    dimensions, scrambled with the seed (:func:`_scrambled_directions`: the estimator stays
    unbiased), turned into standard-normal scores g by :class:`_NormalTable`; steps beyond take
    pseudo-random scores, each block of :data:`BLOCK` paths from a generator of its own (a child
    of the seed's ``SeedSequence``), so that a block's every step is known before its first.  Where numba runs, one compiled pass
    (:func:`_score_kernel_py`) makes a path's point, scores, move, weight and rotation at once, a
    block of paths at a time for the family's kernel (:meth:`blocks`), or all of them when the
    step-by-step route asks for ``y``; elsewhere NumPy makes them with the same arithmetic.

    The d = min(h - 1, QMC_STEPS) quasi-random scores of steps 1..h-1 are rotated so that the
    first coordinate, the best spread of a Sobol' sequence, drives their sum: y = H g with H the
    Householder reflection that maps the first axis to (1, ..., 1) / sqrt(d), an orthogonal map,
    so y are independent standard normal scores again (the sum-direction construction, as the
    Brownian bridge for paths: Moskowitz and Caflisch 1996; Caflisch, Morokoff and Owen 1997).
    With :data:`RADIAL` (d >= 2), the d - 1 scores across the sum direction are a radius times a
    direction: the radius, the chi law's quantile (d - 1 degrees of freedom) of the second Sobol'
    coordinate's normal probability (:class:`_RadiusTable`), the direction that of the normal scores
    of coordinates 3..d+1 (an isotropic normal vector is its chi-distributed length times an
    independent uniform direction, so the scores are standard normal again).  The sum and the
    radius, which drive a path's loss and its volatility, then take the sequence's two best
    coordinates, a two-dimensional net (measured: the VaR's spread over 200 seeds 8% lower on
    DEM/GBP GARCH(1,1)-t and GJR-GARCH(1,1)-skewt).
    Importance sampling acts on g before the rotation: g_1 moved down by theta sqrt(d), which moves
    every step's score by theta (TILT times the shift of the sum of h unit shocks to its
    alpha-quantile spread over the steps, common practice); the other coordinates widened by s
    (SCALE).  A path's log likelihood ratio, the standard normal density over the proposal's, is
    the sum over the moved coordinates of (g^2 - x^2) / 2 + ln s (ln s only for widened ones).
    Pseudo-random steps beyond QMC_STEPS are moved and widened one by one, x = s y - theta (in
    :meth:`step`, or :func:`_pad_move` over a block's rows: the same arithmetic).  The last step's
    scores are left as fitted (they are integrated out exactly).
    """

    def __init__(self, horizon: int, paths: int, seed: int, alpha: float):
        self.horizon, self.paths = horizon, paths
        self.dims = dims = min(horizon, QMC_STEPS)
        self.rng = np.random.default_rng(seed)
        m = max(int(math.ceil(math.log2(paths))), 0)
        self.radial = bool(RADIAL) and min(horizon - 1, dims) >= 2
        vs, shift = _scrambled_directions(dims + 1 if self.radial else dims, m, self.rng)
        self.theta = TILT * -float(special.ndtri(alpha)) / math.sqrt(horizon)
        self.scale = 1.0 + (SCALE - 1.0) * min(1.0, math.sqrt(21.0 / max(horizon - 1, 1)))
        self.d = d = min(horizon - 1, dims)
        # the pseudo-random steps beyond QMC_STEPS: drawn a block of BLOCK paths at a time, each
        # block from a generator of its own (children of the seed's sequence), so that a block's
        # steps are known before its first step (the compiled route makes them with its scores)
        # and the step-by-step route, a step for every block in turn, draws the same numbers
        self.pad = horizon - dims
        self._pad_rngs = [np.random.default_rng(c) for c in np.random.SeedSequence(seed).spawn(-(-paths // BLOCK))] \
            if self.pad else []
        v = np.full(max(d, 1), -1.0 / math.sqrt(max(d, 1)))
        v[0] += 1.0
        vw = v * (2.0 / float(v @ v)) if d > 1 else np.zeros(len(v))
        first_shift = self.theta * math.sqrt(d) if d >= 1 else 0.0
        log_scale = (d - 1) * math.log(self.scale) if d >= 1 else 0.0
        self._args = (vs, shift, d, first_shift, self.scale, log_scale, v, vw)
        self._radius = _radius_table(d - 1 if self.radial else 1)
        self._y = None
        from .families._compiled import _load_numba, jit_enabled  # not at import: numba only when used

        self.compiled = bool(jit_enabled() and _load_numba())
        if self.compiled:
            self.logw = np.empty(paths)  # filled block by block (blocks) or at once (y)
        else:
            self._numpy_scores()

    def _kernel(self, i0: int, Y, logw):
        vs, shift, d, first_shift, scale, log_scale, v, vw = self._args
        t, rt = _normal_table(), self._radius
        _score_kernel(i0, vs, shift, d, self.radial, first_shift, scale, log_scale, v, vw, t.cvd, _R0,
                      1.0 / t.cstep, t.CCELLS, t.tv, t.td, t.t0, 1.0 / t.TSTEP, rt.v, rt.d, rt.HALF, 1.0 / rt.STEP,
                      Y, logw)

    def _numpy_scores(self):
        vs, shift, d, first_shift, scale, log_scale, v, vw = self._args
        g = _normal_table()(_sobol_uniforms(vs, shift, self.paths))  # paths x Sobol' coordinates
        if self.radial:  # the scores across the sum direction: a radius times a direction
            rho = self._radius(g[:, 1])
            f = rho / np.sqrt(np.sum(g[:, 2:d + 1] * g[:, 2:d + 1], axis=1))
            before = g[:, 0] * g[:, 0] + rho * rho
            g = np.concatenate([g[:, :1], g[:, 2:d + 1] * f[:, None], g[:, d + 1:]], axis=1)
        if d >= 1:
            x = g[:, :d]  # a view: moved and rotated in place
            if not self.radial:
                before = np.sum(x * x, axis=1)
            x[:, 0] -= first_shift
            x[:, 1:] *= scale
            self.logw = 0.5 * (before - np.sum(x * x, axis=1)) + log_scale
            if d > 1:
                x -= np.outer(x @ vw, v)
        else:
            self.logw = np.zeros(self.paths)
        self._y = np.ascontiguousarray(g.T)  # one row a step

    @property
    def y(self) -> np.ndarray:
        """The scores of every path, a row a step (made at the first use on the compiled route)."""
        if self._y is None:
            self._y = np.empty((self.dims, self.paths))
            self._kernel(0, self._y, self.logw)
        return self._y

    def blocks(self, size: int = BLOCK):
        """(i0, Y) for the paths i0..i0+len-1 in blocks of ``size`` (compiled route), the weights
        written into ``logw`` on the way: a block's scores stay in the cache for the family's kernel."""
        if self.pad and size != BLOCK:
            raise ValueError("the padding steps are drawn a block of BLOCK paths at a time")
        rows = self.dims + self.pad
        Y = np.empty((rows, min(size, self.paths)))
        for i0 in range(0, self.paths, size):
            n = min(size, self.paths - i0)
            if n < Y.shape[1]:
                Y = np.empty((rows, n))
            logw = self.logw[i0:i0 + n]
            self._kernel(i0, Y, logw)
            if self.pad:
                self._pad_rngs[i0 // BLOCK].standard_normal(out=Y[self.dims:])
                _pad_move(Y[self.dims:], self.pad - 1, self.scale, self.theta, math.log(self.scale), logw)
            yield i0, Y

    def step(self, h: int) -> np.ndarray:
        if h < self.d:
            return self.y[h]
        if h < self.dims:
            y = self.y[h]
        else:  # a padding step: each block's next row (the steps come in order)
            y = np.concatenate([g.standard_normal(min(BLOCK, self.paths - b * BLOCK))
                                for b, g in enumerate(self._pad_rngs)])
        if h == self.horizon - 1:
            return y
        x = self.scale * y - self.theta
        self.logw += 0.5 * (y * y - x * x) + math.log(self.scale)
        return x


def _conditional_es(dist, eta, a, s, w, cut: float) -> float:
    """ES, as a loss, of R = a + s z beyond ``cut``, z from ``dist`` independent of (a, s), over weighted paths.

    Given a path, E[R 1(R <= cut)] = a F(k) + s M(k) with k = (cut - a) / s and M(k) the
    integral of z f(z) up to k, so ES = -sum w (a F(k) + s M(k)) / sum w F(k): conditional
    Monte Carlo, as for the VaR.
    """
    k = (cut - a) / s
    p = w * dist.cdf(k, eta)
    m = w * (s * dist._partial_first_moment(k, np.asarray(eta, dtype=float)))
    return -float((p @ a + np.sum(m)) / np.sum(p))


def compiled_route(spec, horizon: int) -> bool:
    """Whether the risk figures' paths over ``horizon`` periods run in the variance family's
    compiled kernels (:func:`_compiled_sums`): a constant (or zero) or ARMA mean without regressors
    or in-mean term, a family with such kernels, and the kernels compiled."""
    from .families._compiled import jit_enabled

    return not (spec.in_mean or spec.n_regressors) and bool(spec.family.compiled_paths) and jit_enabled()


def default_paths(spec, horizon: int) -> int:
    """The paths the risk figures of a model ``spec`` simulate over ``horizon`` periods when none
    are asked for: :func:`risk_paths` on the route its paths take (:func:`compiled_route`)."""
    return risk_paths(horizon, compiled_route(spec, horizon))


def _compiled_sums(fit, r, horizon: int, scores: "_Scores", to_shock, X=None):
    """(cum, a_last, s_last) of the simulated paths from the variance family's own compiled
    kernels, a block of paths at a time (the family's ``sim_sums``: ``risk_sums`` in :mod:`~xlfuncs.core.families._linear`
    and :mod:`~xlfuncs.core.families.egarch`): the sum of the returns, the sum before the last step
    plus its mean, and the last step's volatility, the numbers the step-by-step route
    (:func:`~xlfuncs.core.simulate.forward_steps`) gives from the same scores, the ARMA terms'
    lags starting, as there, from the sample's last returns and residuals.  For a constant (or
    zero) or ARMA mean without regressors or in-mean term (every step's scores and the paths'
    weights are known before the first step: quasi-random, then the padding a block at a time);
    None otherwise, or where the family has no such kernel or numba does not run them.
    """
    spec = fit.spec
    if not compiled_route(spec, horizon) or scores.horizon != horizon:
        return None
    fam = spec.family
    from .families import History
    from .forecast import in_sample

    resid, var, lik = in_sample(fit, r, X)
    theta = np.asarray(fit.params, dtype=float)
    mu, phi, tht, vp, eta = lik.split(theta)
    mu = float(mu) if spec.has_mu else 0.0
    r = np.asarray(r, dtype=float)
    arma = (np.asarray(phi, dtype=float)[:spec.ar], np.asarray(tht, dtype=float)[:spec.ma],
            r[len(r) - spec.ar:] if spec.ar else None,
            np.nan_to_num(resid)[len(resid) - spec.ma:] if spec.ma else None)  # as forward_steps starts them
    state = fam.sim_continue(vp, eta, fit.dist, History(resid[lik.a:], var[lik.a + lik.s0:], lik.s0))
    if not scores.compiled or scores._y is not None:
        if scores.pad:  # scores made by NumPy (numba absent): the padding steps a block at a time
            return None
        return fam.sim_sums(state, vp, scores.y[:horizon], to_shock, mu, *arma)
    n = scores.paths
    cum, a_last, s_last = np.empty(n), np.empty(n), np.empty(n)
    for i0, Y in scores.blocks():  # scores made a block at a time, while they are in the cache
        out = fam.sim_sums(state, vp, Y[:horizon], to_shock, mu, *arma)
        if out is None:
            return None
        k = Y.shape[1]
        cum[i0:i0 + k], a_last[i0:i0 + k], s_last[i0:i0 + k] = out
    return cum, a_last, s_last


def risk(fit, r, level=0.99, horizon=1, paths=None, seed=None, returns=None, X=None, Xf=None) -> Risk:
    """VaR and expected shortfall of the sum of the next ``horizon`` returns after ``r``.

    ``fit`` is a :class:`~xlfuncs.core.estimate.FitResult` and ``r`` the returns it describes
    (most recent last).  ``level`` is the confidence, 0.5 <= level < 1.  At horizon 1 the
    figures are exact under the fitted distribution; beyond, they come from ``paths``
    simulated paths (default :func:`risk_paths`: :data:`RISK_PATHS`, halved beyond :data:`RISK_LONG` periods and again
    beyond twice as many) drawn with ``seed`` (default
    :data:`~xlfuncs.core.forecast.DEFAULT_SEED`), so the same inputs give the same numbers.
    ``mean`` and ``sd`` are always the analytic forecast's (exact for every family with a
    closed-form variance forecast, EGARCH's included).

    ``returns`` (``log100``, ``log``, ``simple100`` or ``simple``; default: the fit's
    ``options.returns``) says how the returns are defined; when it is known, ``var_value`` and
    ``es_value`` carry the loss as a percentage of the position's value (module docstring).

    ``X`` are the regressors of the sample and ``Xf`` their values over the next ``horizon``
    periods (one row each), for a fit with regressors.  An in-mean fit's one-period figures are
    exact too: sigma[T+1] is known at T.
    """
    level = _check_level(level)
    horizon = _whole(horizon, "horizon", 1, MAX_HORIZON)
    fc_paths = None if paths is None else _whole(paths, "paths", MIN_PATHS, MAX_PATHS)
    paths = default_paths(fit.spec, horizon) if fc_paths is None else fc_paths
    seed = DEFAULT_SEED if seed is None else _whole(seed, "seed", 0, _MAX_SEED)
    if returns is None:
        returns = getattr(getattr(fit, "options", None), "returns", None)
    defn = None if returns is None else _check_returns(returns)
    check_return_units(r, defn)
    c = _UNIT.get(defn)
    is_log = defn in ("log100", "log")

    nd = len(fit.dist.param_names)
    params = np.asarray(fit.params, dtype=float)
    eta = params[len(params) - nd:]

    fc = forecast(fit, r, horizon, seed=seed, paths=fc_paths, X=X, Xf=Xf)  # as VOLFORECAST's
    mean = float(np.sum(fc.mean))
    sd = math.sqrt(float(fc.cumvar[-1]))
    sd_note = fc.why if fc.finite_steps is not None and fc.finite_steps < horizon else None
    mean_note = fc.why if sd_note is not None and not math.isfinite(mean) else None
    # ES is the mean of the tail: it exists only where every E[sigma_{T+h}] does
    vp = np.array([params[list(fit.names).index(n)] for n in fit.spec.variance_names], dtype=float)
    _, es_note = fit.spec.family.moment_horizon(vp, eta, fit.dist, horizon, power=0.5)

    var_value = es_value = None
    if horizon == 1:
        q = float(fit.dist.ppf(1.0 - level, eta))
        var = -(mean + sd * q)
        es = -mean + sd * float(fit.dist.expected_shortfall(level, eta))
        method = f"exact (fitted {fit.dist.name} distribution)"
        if is_log:
            var_value = -100.0 * math.expm1(-c * var)
            es_value = 100.0 * _log_tail_value_loss(fit.dist, eta, mean, sd, c, q, 1.0 - level)
        elif defn in ("simple100", "simple"):
            var_value, es_value = _simple_value_loss(fit.dist, eta, mean, sd, c, var, es, 1.0 - level)
    else:
        alpha = 1.0 - level
        scores = _Scores(horizon, paths, seed, alpha)
        to_shock = fit.dist.normal_scores(eta)

        last: list = []

        def draw(h):
            z = to_shock(scores.step(h))
            if h == horizon - 1:  # the last step's shock, integrated exactly in the VaR and ES below
                last.append(z)
            return z

        # log of the value factor prod (1 + c r), for simple returns only
        log_factor = np.zeros(paths) if defn in ("simple100", "simple") else None
        sums = None if log_factor is not None else _compiled_sums(fit, r, horizon, scores, to_shock, X)
        if sums is not None:
            cum, a_last, s_last = sums
        else:
            cum = np.zeros(paths)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            for h, (ret, s2) in enumerate(() if sums is not None else
                                          forward_steps(fit, r, horizon, paths, None, X, Xf, draw=draw)):
                if h == horizon - 1:
                    # given the first h-1 steps, R = a + s z with the last shock z independent of (a, s)
                    s_last = np.sqrt(s2)
                    a_last = cum + (ret - s_last * last[0])
                cum += ret
                if log_factor is not None:
                    log_factor += np.log1p(np.maximum(c * ret, -1.0))  # a factor below 0 is the value gone
        w = np.exp(scores.logw)
        del scores
        # the solvers' start: the weighted quantile of the first START_PATHS paths (a scrambled net
        # of their own); the root they reach does not depend on it beyond their tolerance
        start = _weighted_quantile(cum[:START_PATHS], w[:START_PATHS], alpha)
        fast = _tail_solve(_LastLaw(fit.dist, eta), a_last, s_last, w, alpha, start)
        if fast is not None:
            var, es = fast
            cut = -var
        else:
            var = _conditional_var(fit.dist, eta, a_last, s_last, w, alpha, start)
            es = None
            if var is not None:
                cut = -var
                es = _conditional_es(fit.dist, eta, a_last, s_last, w, cut)
            else:  # the paths left the finite numbers: the weighted empirical quantile of them all
                cut = _weighted_quantile(cum, w, alpha)
        tail = cum <= cut
        es_paths = -_weighted_tail_mean(cum, w, tail)
        if es is None or not math.isfinite(es):
            es = es_paths
        var = -cut
        method = f"simulation ({paths} paths, seed {seed}; scrambled Sobol points, importance sampling, last step exact)"
        if is_log:
            var_value = -100.0 * math.expm1(-c * var)
            with np.errstate(over="ignore"):
                es_value = -100.0 * _weighted_tail_mean(np.expm1(c * cum), w, tail)
            if es_note is None and es != es_paths:
                # a control variate: the tail paths' value loss moved by the value map's change between
                # their ES and the conditional one; the Jensen gap stays the tail paths' own (>= 0)
                es_value += 100.0 * (math.expm1(-c * es_paths) - math.expm1(-c * es))
        elif log_factor is not None:
            with np.errstate(invalid="ignore"):
                change = np.expm1(log_factor)  # V = value(T+h)/value(T) - 1
            vcut = _weighted_quantile(change, w, alpha)
            var_value = -100.0 * vcut
            es_value = -100.0 * _weighted_tail_mean(change, w, change <= vcut)
    if es_note is not None:
        es = math.inf  # a simulated tail mean would show a finite number for an infinite one
    return Risk(var=float(var), es=float(es), mean=mean, sd=sd, level=level, horizon=horizon, method=method,
                var_value=None if var_value is None else float(var_value),
                es_value=None if es_value is None else float(es_value), returns=defn,
                sd_note=sd_note, es_note=es_note, mean_note=mean_note)
