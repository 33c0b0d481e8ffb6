"""Standardised shock distributions for conditional-variance models.

Every family here describes a shock ``z`` with mean 0 and variance 1, so that
a return innovation is ``e[t] = sigma[t] * z[t]``.  Shape parameters are
passed as a one-dimensional array in the order of ``param_names``.

============  ====================  ==============================================
name          parameters            what it is
============  ====================  ==============================================
``normal``    none                  standard normal
``t``         ``nu`` > 2            Student t rescaled to unit variance
``skewt``     ``nu`` > 2,           Hansen (1994) skewed t; ``lambda`` < 0 gives a
              -1 < ``lambda`` < 1   longer left tail, ``lambda`` = 0 is ``t``
``ged``       ``nu`` > 0            generalised error distribution; ``nu`` = 2 is
                                    normal, ``nu`` = 1 is Laplace
============  ====================  ==============================================

Each family is one :class:`Distribution` subclass.  The density methods
(``logpdf``, ``dlogpdf_dz``, ``dlogpdf_dparams``) are the likelihood's hot path:
they assume clean input, do no checking and contain no Python loops.  Outside
the parameter domain they return ``nan`` or ``inf`` rather than raising; call
:meth:`Distribution.check` (raises) or :meth:`Distribution.in_domain` (does
not) first.

>>> d = get_distribution("Student")
>>> d.name, d.param_names
('t', ('nu',))
>>> round(float(d.ppf(0.01, [8.0])), 4)
-2.5084
>>> round(get_distribution("normal").expected_shortfall(0.975, []), 4)
2.3378
>>> get_distribution("cauchy")
Traceback (most recent call last):
  ...
xlfuncs.core.errors.InputError: unknown distribution "cauchy"; use normal, t, skewt or ged
"""

import math

import numpy as np
from xlfuncs.core._lazy import special

from xlfuncs.core.errors import InputError, describe_value, excerpt, number_words

__all__ = [
    "Distribution",
    "Normal",
    "StudentT",
    "SkewT",
    "GED",
    "DISTRIBUTIONS",
    "get_distribution",
]

_INF = math.inf
_LOG_2PI = math.log(2.0 * math.pi)


def _fmt(value):
    """A number as a user would type it (``1.5``, ``2``), in words where it is not finite
    ("not a number", "infinity")."""
    x = float(value)
    return f"{x:.10g}" if np.isfinite(x) else number_words(x)


def _as_array(x):
    return np.asarray(x, dtype=float)


def _out(values, like):
    """Return a 0-d result as a Python float, anything else as an array."""
    return float(values) if np.ndim(like) == 0 else values


def _check_level(level):
    level = _as_array(level)
    if not np.all(np.isfinite(level)) or np.any((level <= 0.0) | (level >= 1.0)):
        bad = level[~(np.isfinite(level) & (level > 0.0) & (level < 1.0))]
        raise InputError(
            "level must be between 0 and 1 (exclusive), e.g. 0.99, "
            f"got {_fmt(np.ravel(bad)[0])}"
        )
    return level


class Distribution:
    """A standardised (mean 0, variance 1) shock distribution.

    Subclasses set ``name``, ``param_names`` and ``_domain`` and implement the
    private hooks; the public methods here add the checking that is worth its
    cost outside the hot path.
    """

    name = ""
    param_names = ()
    #: one (low, high) open interval per parameter
    _domain = ()
    #: default starting values, one per parameter
    _start = ()

    # ---- parameters -------------------------------------------------------

    def bounds(self):
        """Open domain of each shape parameter, as ``[(low, high), ...]``."""
        return [tuple(b) for b in self._domain]

    def start(self):
        """Default starting values for the shape parameters."""
        return np.array(self._start, dtype=float)

    def in_domain(self, params):
        """True when ``params`` has the right length and lies inside the domain."""
        p = np.ravel(_as_array(params)) if np.size(params) else np.empty(0)
        if p.size != len(self.param_names):
            return False
        return all(
            math.isfinite(v) and lo < v < hi for v, (lo, hi) in zip(p, self._domain)
        )

    def check(self, params):
        """Raise :class:`InputError` unless ``params`` is admissible."""
        p = np.ravel(_as_array(params)) if np.size(params) else np.empty(0)
        k = len(self.param_names)
        if p.size != k:
            if k == 0:
                wanted = "no shape parameters"
            else:
                plural = "parameter" if k == 1 else "parameters"
                wanted = f"{k} {plural} ({', '.join(self.param_names)})"
            raise InputError(
                f"the {self.name} distribution takes {wanted}, got {p.size}"
            )
        for pname, v, (lo, hi) in zip(self.param_names, p, self._domain):
            if math.isfinite(v) and lo < v < hi:
                continue
            if hi == _INF:
                rule = f"greater than {_fmt(lo)}"
            else:
                rule = f"between {_fmt(lo)} and {_fmt(hi)}"
            raise InputError(
                f"{pname} must be {rule} for the {self.name} distribution, got {_fmt(v)}"
            )

    # ---- density and its derivatives (hot path, no checking) ---------------

    def logpdf(self, z, params):
        """Log density at ``z`` (vectorised)."""
        raise NotImplementedError

    def dlogpdf_dz(self, z, params):
        """Derivative of :meth:`logpdf` with respect to ``z``."""
        raise NotImplementedError

    def dlogpdf_dparams(self, z, params):
        """Derivatives of :meth:`logpdf` with respect to each shape parameter.

        Shape ``(len(param_names),) + np.shape(z)``.
        """
        raise NotImplementedError

    def d2logpdf(self, z, params):
        """Second derivatives of :meth:`logpdf`: ``(zz, zp, pp)`` with ``zz`` d2/dz2 (shape of z),
        ``zp`` d2/dz dparams (one row per shape parameter) and ``pp`` d2/dparams2 (k x k rows).

        By default ``zz`` comes from :meth:`_d2logpdf_dz2` (Richardson-extrapolated central
        differences of :meth:`dlogpdf_dz` unless a subclass has it in closed form) and ``zp``, ``pp``
        from Richardson-extrapolated central differences of the analytic first derivatives in
        the shape parameters (about eleven correct digits)."""
        z = np.asarray(z, dtype=float)
        p = np.array(_as_array(params), dtype=float).ravel() if np.size(params) else np.empty(0)
        k = len(self.param_names)
        zz = self._d2logpdf_dz2(z, p)
        zp = np.empty((k,) + z.shape)
        pp = np.empty((k, k) + z.shape)
        piece = self._piece(z, p)  # a density in pieces is differenced on each point's own piece
        for i in range(k):
            lo, hi = self._domain[i]
            h = 1e-3 * max(1.0, abs(p[i]))
            h = min(h, 0.25 * (p[i] - lo), 0.25 * (hi - p[i]))

            def diff(step):
                up, dn = p.copy(), p.copy()
                up[i] += step
                dn[i] -= step
                fu, gu = self._first(z, up, piece)
                fd, gd = self._first(z, dn, piece)
                return (fu - fd) / (2.0 * step), (gu - gd) / (2.0 * step)

            (a1, b1), (a2, b2) = diff(h), diff(0.5 * h)
            zp[i] = (4.0 * a2 - a1) / 3.0
            pp[:, i] = (4.0 * b2 - b1) / 3.0
        pp = 0.5 * (pp + np.swapaxes(pp, 0, 1))
        return zz, zp, pp

    def _piece(self, z, p):
        """Which smooth piece of the density each z lies on (None: the density is one piece)."""
        return None

    def _first(self, z, p, piece):
        """(d logpdf/dz, d logpdf/dparams) at z with shape parameters p, on the given pieces."""
        return self.dlogpdf_dz(z, p), self.dlogpdf_dparams(z, p)

    def _d2logpdf_dz2(self, z, p):
        """d2 logpdf / dz2; Richardson-extrapolated central differences of :meth:`dlogpdf_dz`."""
        h = 1e-3 * np.maximum(1.0, np.abs(z))
        d1 = (self.dlogpdf_dz(z + h, p) - self.dlogpdf_dz(z - h, p)) / (2.0 * h)
        d2 = (self.dlogpdf_dz(z + 0.5 * h, p) - self.dlogpdf_dz(z - 0.5 * h, p)) / h
        return (4.0 * d2 - d1) / 3.0

    def pdf(self, z, params):
        """Density at ``z``."""
        return np.exp(self.logpdf(z, params))

    # ---- distribution function ----------------------------------------------

    def cdf(self, x, params):
        """Distribution function at ``x`` (vectorised)."""
        x = _as_array(x)
        return _out(self._cdf(x, _as_array(params)), x)

    def ppf(self, q, params):
        """Quantile function at probability ``q`` (vectorised)."""
        q = _as_array(q)
        return _out(self._ppf(q, _as_array(params)), q)

    # ---- tail measures and moments ------------------------------------------

    def expected_shortfall(self, level, params):
        """Expected loss beyond the lower ``1 - level`` quantile, as a positive number.

        ``-E[z | z <= ppf(1 - level)]`` for a unit-variance shock; ``level`` is
        the confidence, e.g. 0.99.  Accepts an array of levels.
        """
        level = _check_level(level)
        p = _as_array(params)
        alpha = 1.0 - level
        q = self._ppf(alpha, p)
        return _out(-self._partial_first_moment(q, p) / alpha, level)

    def value_at_risk(self, level, params):
        """The lower ``1 - level`` quantile as a positive loss, ``-ppf(1 - level)``."""
        level = _check_level(level)
        return _out(-self._ppf(1.0 - level, _as_array(params)), level)

    def rvs(self, size, params, rng):
        """Random draws of the shape ``size`` from ``rng`` (a NumPy Generator)."""
        return self._rvs(size, _as_array(params), rng)

    #: the share of the normal-theory shift a proposal of :meth:`shifted_rvs` should use for
    #: multi-period tail figures (measured in benchmarks/risk_accuracy.py; heavy tails want less)
    tilt = 1.0

    def shifted_rvs(self, size, params, rng, theta: float):
        """Draws moved towards the lower tail by ``theta``, and the log likelihood ratio of each.

        Returns ``(z, logw)``: ``z`` from a proposal law that puts more mass below zero, and
        ``logw`` = log f(z) - log g(z), the log density ratio of the fitted law f to that
        proposal g, so that E_g[w h(z)] = E_f[h(z)] (importance sampling).  Here g is f shifted by
        -theta, which needs only the log density; a family can offer a better proposal.
        """
        y = self.rvs(size, params, rng)
        z = y - theta
        return z, self.logpdf(z, params) - self.logpdf(y, params)

    #: whether the law is symmetric about 0 (z and -z alike)
    symmetric = False
    #: the log-density is smooth in z (twice continuously differentiable everywhere: no |z| in
    #: it, as the GED's |z|^nu has, and no branch point, as the skewed t's has)
    smooth = False

    def normal_scores(self, params):
        """The map G(x) = ppf(Phi(x)) that turns standard-normal scores x into draws of this law.

        A draw is then a function of one normal number, so that quasi-random points and a shift
        of the normal scores (importance sampling with the plain normal likelihood ratio) serve
        every distribution alike.  G is a cubic Hermite interpolant on a uniform grid of x over
        [-8, 8] with the exact values ppf(Phi(x)) and slopes phi(x) / pdf(G(x)) at the nodes
        (error below 1e-9 on the grid's span for the four laws, tests/test_distributions.py);
        scores outside it take the exact ppf.  The normal's map is the identity.
        """
        return _ScoreMap(self, _as_array(params))

    def abs_moment(self, params):
        """``E|z|``."""
        return float(-2.0 * self._partial_first_moment(0.0, _as_array(params)))

    def neg_sq_moment(self, params):
        """``E[z^2 1(z < 0)]``; one half for a symmetric family."""
        return 0.5

    # ---- private hooks ---------------------------------------------------------

    def _cdf(self, x, p):
        raise NotImplementedError

    def _ppf(self, q, p):
        raise NotImplementedError

    def _partial_first_moment(self, q, p):
        """``integral_{-inf}^{q} z f(z) dz`` (vectorised in ``q``)."""
        raise NotImplementedError

    def _rvs(self, size, p, rng):
        return self._ppf(rng.random(size), p)

    def __repr__(self):
        return f"{type(self).__name__}()"


def _identity(x):
    return np.asarray(x, dtype=float)


class _ScoreMap:
    """G(x) = ppf(Phi(x)) of one distribution at fixed parameters (see Distribution.normal_scores)."""

    HALF, STEP = 8.0, 1.0 / 128.0

    def __init__(self, dist, p):
        self.dist, self.p = dist, p
        x = np.linspace(-self.HALF, self.HALF, int(round(2 * self.HALF / self.STEP)) + 1)
        g = self._exact(x)
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
            d = np.exp(-0.5 * (_LOG_2PI + x * x)) / np.exp(dist.logpdf(g, p))
        if not np.all(np.isfinite(d)):
            d = np.gradient(g, self.STEP)
        self.g, self.d = g, d * self.STEP  # slopes per grid step

    def _exact(self, x):
        if self.dist.symmetric:  # the upper half by symmetry, so that it keeps its digits
            return np.sign(x) * -self.dist._ppf(np.maximum(special.ndtr(-np.abs(x)), 1e-300), self.p)
        q = np.where(x <= 0.0, special.ndtr(x), 1.0 - special.ndtr(-x))
        return self.dist._ppf(np.clip(q, 1e-300, 1.0 - 2.0 ** -53), self.p)

    def __call__(self, x):
        x = np.asarray(x, dtype=float)
        if x.ndim == 1 and len(x) >= 1024:
            from .families._compiled import _load_numba, jit_enabled  # not at import: no cycle, no numba

            if jit_enabled() and _load_numba():  # one compiled pass; plain Python would be slower than NumPy
                out = np.empty(len(x))
                _hermite_map(np.ascontiguousarray(x), self.g, self.d, self.HALF, self.STEP, out)
                far = np.abs(x) > self.HALF
                if np.any(far):
                    out[far] = self._exact(x[far])
                return out
        u = (x + self.HALF) / self.STEP
        i = np.clip(np.floor(u), 0, len(self.g) - 2).astype(np.intp)
        out = hermite(self.g, self.d, i, u - i)
        far = np.abs(x) > self.HALF
        if np.any(far):
            out[far] = self._exact(x[far])
        return out


def hermite(v, dv, i, t):
    """The cubic Hermite interpolant on a uniform grid: values ``v`` and slopes per grid step
    ``dv`` at the nodes, evaluated in cell ``i`` at the fraction ``t`` of the step (arrays)."""
    t1 = 1.0 - t
    return t1 * t1 * ((1.0 + 2.0 * t) * v[i] + t * dv[i]) + t * t * ((3.0 - 2.0 * t) * v[i + 1] - t1 * dv[i + 1])


def score_map_arrays(score_map) -> tuple:
    """(ident, g, d, half, step): what a compiled loop needs to apply ``score_map`` (from
    :meth:`Distribution.normal_scores`) itself: ``ident`` where the map is the identity (normal
    shocks; the arrays are then placeholders), else the Hermite nodes, slopes per grid step and
    the grid's half-width and step."""
    if not isinstance(score_map, _ScoreMap):
        return True, np.zeros(2), np.zeros(2), 1.0, 1.0
    return False, score_map.g, score_map.d, float(score_map.HALF), float(score_map.STEP)


def _hermite_map_py(x, g, d, half, step, out):
    """The cubic Hermite interpolant of _ScoreMap.__call__, one point at a time (a numba kernel)."""
    last = g.shape[0] - 2
    for j in range(x.shape[0]):
        u = (x[j] + half) / step
        if u < 0.0:
            i = 0
        elif u >= last:
            i = last
        else:
            i = int(u)
        t = u - i
        t1 = 1.0 - t
        out[j] = t1 * t1 * ((1.0 + 2.0 * t) * g[i] + t * d[i]) + t * t * ((3.0 - 2.0 * t) * g[i + 1] - t1 * d[i + 1])


def _hermite_map(x, g, d, half, step, out):
    global _hermite_jit
    if _hermite_jit is None:
        from .families._compiled import _compile

        _hermite_jit = _compile(_hermite_map_py)
    _hermite_jit(x, g, d, half, step, out)


_hermite_jit = None


# ---------------------------------------------------------------------------
# normal


class Normal(Distribution):
    """Standard normal."""

    symmetric = True
    smooth = True

    name = "normal"
    param_names = ()
    _domain = ()
    _start = ()

    def logpdf(self, z, params=()):
        z = np.asarray(z, dtype=float)
        return -0.5 * (_LOG_2PI + z * z)

    def dlogpdf_dz(self, z, params=()):
        return -np.asarray(z, dtype=float)

    def dlogpdf_dparams(self, z, params=()):
        return np.empty((0,) + np.shape(z))

    def d2logpdf(self, z, params=()):
        z = np.asarray(z, dtype=float)
        return np.full(z.shape, -1.0), np.empty((0,) + z.shape), np.empty((0, 0) + z.shape)

    def abs_moment(self, params=()):
        return math.sqrt(2.0 / math.pi)

    def _cdf(self, x, p):
        return special.ndtr(x)

    def _ppf(self, q, p):
        return special.ndtri(q)

    def normal_scores(self, params=()):
        return _identity

    def _partial_first_moment(self, q, p):
        # integral_{-inf}^{q} z phi(z) dz = -phi(q)
        return -np.exp(-0.5 * (_LOG_2PI + q * q))

    def _rvs(self, size, p, rng):
        return rng.standard_normal(size)


# ---------------------------------------------------------------------------
# Student t with unit variance


def _t_logc(nu):
    """log of Gamma((nu+1)/2) / (sqrt(pi (nu-2)) Gamma(nu/2))."""
    return (
        special.gammaln(0.5 * (nu + 1.0))
        - special.gammaln(0.5 * nu)
        - 0.5 * math.log(math.pi * (nu - 2.0))
    )


def _t_dlogc(nu):
    """d/dnu of :func:`_t_logc`."""
    return 0.5 * (
        special.digamma(0.5 * (nu + 1.0)) - special.digamma(0.5 * nu) - 1.0 / (nu - 2.0)
    )


def _std_t_cdf(y, nu):
    """CDF of the unit-variance t at ``y``."""
    return special.stdtr(nu, y * np.sqrt(nu / (nu - 2.0)))


def _std_t_ppf(q, nu):
    """Quantile of the unit-variance t."""
    return special.stdtrit(nu, q) * np.sqrt((nu - 2.0) / nu)


def _std_t_partials(y, nu, c):
    """Antiderivatives ``integral_{-inf}^{y} u^j f(u) du`` of the unit-variance t, j = 0, 1, 2.

    With ``f(u) = c (1 + u^2/(nu-2))^(-(nu+1)/2)``; the recurrences follow from
    d/du [f(u) (nu-2+u^2)] = -(nu-1) u f(u) and integrating u * that by parts.
    """
    k = nu - 2.0
    finite = np.isfinite(y)
    yf = np.where(finite, y, 0.0)
    f = c * np.exp(-0.5 * (nu + 1.0) * np.log1p(yf * yf / k))
    g = np.where(finite, f * (k + yf * yf), 0.0)
    a0 = _std_t_cdf(y, nu)
    a1 = -g / (nu - 1.0)
    a2 = a0 - np.where(finite, yf, 0.0) * g / k
    return a0, a1, a2


class StudentT(Distribution):
    """Student t with ``nu`` degrees of freedom, rescaled to unit variance."""

    symmetric = True
    smooth = True

    name = "t"
    param_names = ("nu",)
    _domain = ((2.0, _INF),)
    _start = (8.0,)

    def logpdf(self, z, params):
        nu = float(params[0])
        z = np.asarray(z, dtype=float)
        return _t_logc(nu) - 0.5 * (nu + 1.0) * np.log1p(z * z / (nu - 2.0))

    def dlogpdf_dz(self, z, params):
        nu = float(params[0])
        z = np.asarray(z, dtype=float)
        return -(nu + 1.0) * z / (nu - 2.0 + z * z)

    def dlogpdf_dparams(self, z, params):
        nu = float(params[0])
        z = np.asarray(z, dtype=float)
        k = nu - 2.0
        z2 = z * z
        d = _t_dlogc(nu) - 0.5 * np.log1p(z2 / k) + 0.5 * (nu + 1.0) * z2 / (k * (k + z2))
        return d[np.newaxis, ...]

    def d2logpdf(self, z, params):
        nu = float(params[0])
        z = np.asarray(z, dtype=float)
        k = nu - 2.0
        z2 = z * z
        q = k + z2
        zz = -(nu + 1.0) * (k - z2) / (q * q)
        zp = z * (3.0 - z2) / (q * q)
        d2logc = 0.25 * (special.polygamma(1, 0.5 * (nu + 1.0)) - special.polygamma(1, 0.5 * nu)) + 0.5 / (k * k)
        pp = d2logc + z2 / (k * q) - 0.5 * (nu + 1.0) * z2 * (2.0 * k + z2) / (k * k * q * q)
        return zz, zp[np.newaxis, ...], pp[np.newaxis, np.newaxis, ...]

    def abs_moment(self, params):
        nu = float(params[0])
        # 2 * integral_0^inf z c (1 + z^2/(nu-2))^(-(nu+1)/2) dz = 2 c (nu-2)/(nu-1)
        return 2.0 * math.exp(_t_logc(nu)) * (nu - 2.0) / (nu - 1.0)

    def _cdf(self, x, p):
        return _std_t_cdf(x, float(p[0]))

    def _ppf(self, q, p):
        return _std_t_ppf(q, float(p[0]))

    def _partial_first_moment(self, q, p):
        # the j = 1 term of _std_t_partials alone: -c (1 + q^2/(nu-2))^(-(nu+1)/2) (nu-2+q^2)/(nu-1), 0 at +-inf
        nu = float(p[0])
        q = np.asarray(q, dtype=float)
        k = nu - 2.0
        finite = np.isfinite(q)
        qf = np.where(finite, q, 0.0)
        f = math.exp(_t_logc(nu)) * np.exp(-0.5 * (nu + 1.0) * np.log1p(qf * qf / k))
        return np.where(finite, -f * (k + qf * qf) / (nu - 1.0), 0.0)

    def _rvs(self, size, p, rng):
        nu = float(p[0])
        return rng.standard_t(nu, size) * math.sqrt((nu - 2.0) / nu)

    tilt = 0.5  # half the normal-theory shift: measured best at nu ~ 4 (benchmarks/risk_accuracy.py)

    def shifted_rvs(self, size, params, rng, theta: float):
        """The t as a normal variance mixture, z = n sqrt((nu - 2) / g), n standard normal and g
        chi-square with nu degrees of freedom: n is drawn from N(-theta, 1) (exponential tilting,
        likelihood ratio exp(theta n + theta^2 / 2)) and g as fitted, so a large draw moves
        further down than a small one."""
        nu = float(_as_array(params)[0])
        n = rng.standard_normal(size) - theta
        g = rng.chisquare(nu, size)
        return n * np.sqrt((nu - 2.0) / g), theta * n + 0.5 * theta * theta


# ---------------------------------------------------------------------------
# Hansen (1994) skewed t


def _skewt_constants(nu, lam):
    """Hansen's constants (c, a, b) for shape nu and asymmetry lambda."""
    logc = _t_logc(nu)
    c = math.exp(logc)
    r = (nu - 2.0) / (nu - 1.0)
    a = 4.0 * lam * c * r
    b = math.sqrt(1.0 + 3.0 * lam * lam - a * a)
    return c, a, b


class SkewT(Distribution):
    """Hansen (1994) skewed t with unit variance.

    ``g(z) = b c (1 + ((b z + a)/(1 -/+ lambda))^2/(nu-2))^(-(nu+1)/2)`` with the
    minus sign below ``-a/b`` and the plus sign above, where
    ``c = Gamma((nu+1)/2)/(sqrt(pi(nu-2)) Gamma(nu/2))``,
    ``a = 4 lambda c (nu-2)/(nu-1)`` and ``b = sqrt(1 + 3 lambda^2 - a^2)``.
    """

    name = "skewt"
    param_names = ("nu", "lambda")
    _domain = ((2.0, _INF), (-1.0, 1.0))
    _start = (8.0, 0.0)

    def logpdf(self, z, params):
        nu = float(params[0])
        lam = float(params[1])
        c, a, b = _skewt_constants(nu, lam)
        z = np.asarray(z, dtype=float)
        d = np.where(b * z + a < 0.0, 1.0 - lam, 1.0 + lam)
        y = (b * z + a) / d
        return math.log(b * c) - 0.5 * (nu + 1.0) * np.log1p(y * y / (nu - 2.0))

    def dlogpdf_dz(self, z, params):
        return self._dz(np.asarray(z, dtype=float), params, None)

    def _dz(self, z, params, lower):
        nu = float(params[0])
        lam = float(params[1])
        _, a, b = _skewt_constants(nu, lam)
        if lower is None:
            lower = b * z + a < 0.0
        d = np.where(lower, 1.0 - lam, 1.0 + lam)
        y = (b * z + a) / d
        return -(nu + 1.0) * y * b / (d * (nu - 2.0 + y * y))

    def _piece(self, z, p):
        _, a, b = _skewt_constants(float(p[0]), float(p[1]))
        return b * z + a < 0.0

    def _first(self, z, p, piece):
        return self._dz(z, p, piece), self._dparams(z, p, piece)

    def _d2logpdf_dz2(self, z, p):
        nu = float(p[0])
        lam = float(p[1])
        _, a, b = _skewt_constants(nu, lam)
        d = np.where(b * z + a < 0.0, 1.0 - lam, 1.0 + lam)
        y = (b * z + a) / d
        q = nu - 2.0 + y * y
        return -(nu + 1.0) * (b / d) ** 2 * (nu - 2.0 - y * y) / (q * q)

    def dlogpdf_dparams(self, z, params):
        return self._dparams(np.asarray(z, dtype=float), params, None)

    def _dparams(self, z, params, lower):
        nu = float(params[0])
        lam = float(params[1])
        c, a, b = _skewt_constants(nu, lam)
        k = nu - 2.0
        r = k / (nu - 1.0)
        dlogc = _t_dlogc(nu)
        # derivatives of Hansen's constants
        da_nu = 4.0 * lam * c * (dlogc * r + 1.0 / (nu - 1.0) ** 2)
        da_lam = 4.0 * c * r
        db_nu = -a * da_nu / b
        db_lam = (3.0 * lam - a * da_lam) / b

        if lower is None:
            lower = b * z + a < 0.0
        sgn = np.where(lower, -1.0, 1.0)
        d = 1.0 + lam * sgn
        y = (b * z + a) / d
        y2 = y * y
        dy_nu = (db_nu * z + da_nu) / d
        dy_lam = (db_lam * z + da_lam - y * sgn) / d
        m = 0.5 * (nu + 1.0)
        g_nu = db_nu / b + dlogc - 0.5 * np.log1p(y2 / k) - m * (2.0 * y * dy_nu * k - y2) / (
            k * (k + y2)
        )
        g_lam = db_lam / b - m * 2.0 * y * dy_lam / (k + y2)
        return np.stack([g_nu, g_lam])

    def neg_sq_moment(self, params):
        p = _as_array(params)
        return float(self._partial_moments(0.0, p)[2])

    def _cdf(self, x, p):
        nu = float(p[0])
        lam = float(p[1])
        _, a, b = _skewt_constants(nu, lam)
        u = b * x + a
        lower = u < 0.0
        d = np.where(lower, 1.0 - lam, 1.0 + lam)
        tcdf = _std_t_cdf(u / d, nu)  # one t evaluation a point, on its own piece
        return np.where(lower, (1.0 - lam) * tcdf, 0.5 * (1.0 - lam) + (1.0 + lam) * (tcdf - 0.5))

    def _ppf(self, q, p):
        nu = float(p[0])
        lam = float(p[1])
        _, a, b = _skewt_constants(nu, lam)
        split = 0.5 * (1.0 - lam)
        lower = q < split
        # the lower piece maps q to the t probability q/(1-lam); the upper to
        # 1/2 + (q - split)/(1+lam); each side is evaluated only where it applies
        p_t = np.where(lower, q / (1.0 - lam), 0.5 + (q - split) / (1.0 + lam))
        d = np.where(lower, 1.0 - lam, 1.0 + lam)
        y = _std_t_ppf(np.clip(p_t, 0.0, 1.0), nu)
        return (d * y - a) / b

    def _partial_moments(self, q, p):
        """``integral_{-inf}^{q} z^j g(z) dz`` for j = 0, 1, 2 (vectorised in ``q``).

        On each piece z = (d y - a)/b and g(z) dz = d f(y) dy with f the
        unit-variance t, so the integrals reduce to partial moments of f.
        """
        nu = float(p[0])
        lam = float(p[1])
        c, a, b = _skewt_constants(nu, lam)
        q = _as_array(q)
        u = b * q + a
        # lower piece: y from -inf to min(u, 0)/(1 - lam)
        dl = 1.0 - lam
        l0, l1, l2 = _std_t_partials(np.minimum(u, 0.0) / dl, nu, c)
        # upper piece: y from 0 to max(u, 0)/(1 + lam)
        du = 1.0 + lam
        h0, h1, h2 = _std_t_partials(np.maximum(u, 0.0) / du, nu, c)
        z0, z1, z2 = _std_t_partials(np.zeros_like(u), nu, c)
        h0, h1, h2 = h0 - z0, h1 - z1, h2 - z2

        m0 = dl * l0 + du * h0
        m1 = (dl * (dl * l1 - a * l0) + du * (du * h1 - a * h0)) / b
        m2 = (
            dl * (dl * dl * l2 - 2.0 * a * dl * l1 + a * a * l0)
            + du * (du * du * h2 - 2.0 * a * du * h1 + a * a * h0)
        ) / (b * b)
        return m0, m1, m2

    def _partial_first_moment(self, q, p):
        return self._partial_moments(q, p)[1]

    def _rvs(self, size, p, rng):
        return self._ppf(rng.random(size), p)


# ---------------------------------------------------------------------------
# generalised error distribution with unit variance


def _ged_logscale(nu):
    """log s with s = sqrt(Gamma(1/nu)/Gamma(3/nu)), the scale giving unit variance."""
    return 0.5 * (special.gammaln(1.0 / nu) - special.gammaln(3.0 / nu))


class GED(Distribution):
    """Generalised error distribution with shape ``nu``, rescaled to unit variance.

    ``f(z) = nu / (2 s Gamma(1/nu)) exp(-|z/s|^nu)`` with
    ``s = sqrt(Gamma(1/nu)/Gamma(3/nu))``.
    """

    symmetric = True

    name = "ged"
    param_names = ("nu",)
    _domain = ((0.0, _INF),)
    _start = (1.5,)

    def logpdf(self, z, params):
        nu = float(params[0])
        logs = _ged_logscale(nu)
        const = math.log(0.5 * nu) - special.gammaln(1.0 / nu) - logs
        z = np.asarray(z, dtype=float)
        return const - np.abs(z * math.exp(-logs)) ** nu

    def dlogpdf_dz(self, z, params):
        nu = float(params[0])
        z = np.asarray(z, dtype=float)
        w = np.abs(z * math.exp(-_ged_logscale(nu))) ** nu
        # -nu |z/s|^(nu-1) sign(z) / s = -nu w / z; taken as 0 at z = 0 (the cusp
        # for nu <= 1, where only one-sided derivatives exist)
        nz = z != 0.0
        return np.where(nz, -nu * w / np.where(nz, z, 1.0), 0.0)

    def d2logpdf(self, z, params):
        # with x = |z| / s(nu), L = log x, w = x^nu and dw/dnu = w (L - nu dlogs):
        #   d2/dz dnu   = -w (1 + nu (L - nu dlogs)) / z
        #   d2/dnu2     = -1/nu^2 - psi1(1/nu)/nu^4 - 2 psi(1/nu)/nu^3 - dd
        #                 - w (L - nu dlogs)^2 + w (2 dlogs + nu dd),   dd = d(dlogs)/dnu
        nu = float(params[0])
        z = np.asarray(z, dtype=float)
        logs = _ged_logscale(nu)
        i1 = special.digamma(1.0 / nu)
        i3 = special.digamma(3.0 / nu)
        t1 = special.polygamma(1, 1.0 / nu)
        t3 = special.polygamma(1, 3.0 / nu)
        dlogs = (3.0 * i3 - i1) / (2.0 * nu * nu)
        dd = (t1 - 9.0 * t3) / (2.0 * nu ** 4) - (3.0 * i3 - i1) / nu ** 3
        nz = z != 0.0
        x = np.where(nz, np.abs(z), 1.0) * math.exp(-logs)
        w = np.where(nz, x ** nu, 0.0)
        L = np.log(x)
        c = L - nu * dlogs
        zz = self._d2logpdf_dz2(z, np.array([nu]))
        zp = np.where(nz, -w * (1.0 + nu * c) / np.where(nz, z, 1.0), 0.0)
        pp = (-1.0 / nu ** 2 - t1 / nu ** 4 - 2.0 * i1 / nu ** 3 - dd) - w * c * c + w * (2.0 * dlogs + nu * dd)
        return zz, zp[np.newaxis, ...], pp[np.newaxis, np.newaxis, ...]

    def _d2logpdf_dz2(self, z, p):
        # -nu (nu - 1) |z/s|^nu / z^2, taken as 0 at z = 0 (as the first derivative is)
        nu = float(p[0])
        w = np.abs(z * math.exp(-_ged_logscale(nu))) ** nu
        nz = z != 0.0
        return np.where(nz, -nu * (nu - 1.0) * w / np.where(nz, z * z, 1.0), 0.0)

    def dlogpdf_dparams(self, z, params):
        nu = float(params[0])
        logs = _ged_logscale(nu)
        i1 = special.digamma(1.0 / nu)
        i3 = special.digamma(3.0 / nu)
        dlogs = (3.0 * i3 - i1) / (2.0 * nu * nu)
        z = np.asarray(z, dtype=float)
        x = np.abs(z) * math.exp(-logs)
        w = x**nu
        # d/dnu of log(nu/2) - gammaln(1/nu) - log s - x^nu, with x = |z|/s(nu)
        d = 1.0 / nu + i1 / (nu * nu) - dlogs - (special.xlogy(w, x) - w * nu * dlogs)
        return d[np.newaxis, ...]

    def abs_moment(self, params):
        nu = float(params[0])
        return math.exp(
            _ged_logscale(nu) + special.gammaln(2.0 / nu) - special.gammaln(1.0 / nu)
        )

    def _cdf(self, x, p):
        nu = float(p[0])
        t = np.abs(x * math.exp(-_ged_logscale(nu))) ** nu
        tail = 0.5 * special.gammaincc(1.0 / nu, t)
        return np.where(x < 0.0, tail, 1.0 - tail)

    def _ppf(self, q, p):
        nu = float(p[0])
        s = math.exp(_ged_logscale(nu))
        tail = np.minimum(q, 1.0 - q)
        x = special.gammainccinv(1.0 / nu, 2.0 * tail) ** (1.0 / nu)
        return s * np.where(q < 0.5, -x, x)

    def _partial_first_moment(self, q, p):
        # integral_{-inf}^{q} z f(z) dz = -s Gamma(2/nu) Q(2/nu, |q/s|^nu) / (2 Gamma(1/nu)),
        # Q the regularised upper incomplete gamma; even in q because z f(z) is odd
        nu = float(p[0])
        logs = _ged_logscale(nu)
        t = np.abs(q * math.exp(-logs)) ** nu
        scale = math.exp(logs + special.gammaln(2.0 / nu) - special.gammaln(1.0 / nu))
        return -0.5 * scale * special.gammaincc(2.0 / nu, t)

    def _rvs(self, size, p, rng):
        nu = float(p[0])
        s = math.exp(_ged_logscale(nu))
        mag = rng.gamma(1.0 / nu, 1.0, size) ** (1.0 / nu)
        sign = np.where(rng.random(size) < 0.5, -1.0, 1.0)
        return s * sign * mag


# ---------------------------------------------------------------------------
# look-up by name

_INSTANCES = {d.name: d for d in (Normal(), StudentT(), SkewT(), GED())}

#: canonical names, in the order the user guide lists them
DISTRIBUTIONS = tuple(_INSTANCES)

# keys are lower case with spaces, hyphens and underscores removed
_ALIASES = {
    "normal": "normal",
    "gaussian": "normal",
    "norm": "normal",
    "t": "t",
    "student": "t",
    "studentt": "t",
    "studentst": "t",
    "skewt": "skewt",
    "skewedt": "skewt",
    "skewstudent": "skewt",
    "skewedstudent": "skewt",
    "ged": "ged",
    "generalizederror": "ged",
    "generalisederror": "ged",
}


def get_distribution(name):
    """The :class:`Distribution` for ``name``: case-insensitive, spaces ignored.

    A :class:`Distribution` passes straight through.
    """
    if isinstance(name, Distribution):
        return name
    if not isinstance(name, str):
        raise InputError(
            f"distribution must be a name such as normal, t, skewt or ged, got {describe_value(name)}"
        )
    key = "".join(name.split()).lower()
    canonical = _ALIASES.get(key.replace("-", "").replace("_", "").replace("'", ""))
    if canonical is None:
        raise InputError(f'unknown distribution "{excerpt(name.strip())}"; use normal, t, skewt or ged')
    return _INSTANCES[canonical]
