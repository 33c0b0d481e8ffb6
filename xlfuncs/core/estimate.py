"""Maximum-likelihood estimation, standard errors and the fit summary.

:func:`fit` estimates a model and returns a :class:`FitResult`; :func:`evaluate` builds a
``FitResult`` from given parameters (a fit table a person typed) without estimating.

The optimiser works on the *free* parameters: the full vector less the fixed ones (option
``name=value``), less the one a variance family's sum rule implies (IGARCH: the last beta, or
the last alpha when there is no beta) and less a variance-targeted omega.  It runs L-BFGS-B with
box bounds (positivity, distribution domains; each family gives its own) on parameters scaled to
order one, with the likelihood returning a large finite penalty outside the admissible region
(the family's: persistence >= 1, a negative GJR news coefficient; and a non-stationary AR or
non-invertible MA part), so a line search simply backs off.  Everything that depends on the
variance family -- start values, bounds, admissibility, the implied weight, variance targeting --
comes from :mod:`xlfuncs.core.families`; this module holds no branch on a family's name.  It then polishes by Newton steps on the Hessian
until the Newton decrement is below 1e-10, which pins every estimate far beyond its seventh
significant digit.  ``converged`` is TRUE only if that test passes.  The Hessian is in closed
form where the likelihood has it (:meth:`Likelihood.hessian`), else differences of the analytic
gradient; the standard errors' Hessian is recomputed at the estimate (closed form, or
Richardson-extrapolated central differences: eight digits and more).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, replace

import numpy as np
from ._lazy import special

from ._lazy import lazy_module
from .distributions import Distribution, get_distribution
from .errors import ConvergenceError, InputError, describe_value
from .families import FAMILIES, stationary
from .likelihood import Likelihood
from .mean import layout
from .spec import MAX_ORDER, ModelSpec, Options, parse_model, parse_options

optimize = lazy_module("scipy.optimize")  # only for the L-BFGS-B fallback
lapack = lazy_module("scipy.linalg.lapack")  # the Newton and scoring systems, on the first solve

__all__ = ["FitResult", "fit", "evaluate", "persistence_of", "check_params", "check_intercept", "free_scores"]

_PENALTY = 1e12
_DECREMENT_TOL = 1e-6  # converged: the log-likelihood is within about tol/2 of its maximum
_POLISH_TOL = 1e-12  # Newton polishing stops here
_NUMERIC_POLISH_TOL = 1e-9  # ... and here for an in-mean model (numerical derivatives)
_HELD = 1.0  # a fit on the stationarity bound holds persistence at one: the integrated (IGARCH-type) fit
_HELD_TOL = 1e-9  # ... and is re-checked there after the fit
_SCORING_TOL = 0.05  # scoring iterations hand over to Newton steps below this decrement
_SCORING_EXACT = 0.5  # ... and below this one where the Hessian is in closed form (measured:
# fewer passes in all on DEM/GBP and simulated GARCH, GJR and IGARCH fits than 0.05 or 2)
_BOUND_STEPS = 50.0  # below this decrement a scoring step that reaches a bound stops on it (see _bhhh)


# The optimiser's small systems (one row per free parameter) go straight to LAPACK: numpy.linalg's
# argument handling costs 20-35 us a call, ten times the factorisation of a 4 x 4 matrix, and the
# Newton and scoring steps of a GARCH fit make a dozen such calls.  The same LAPACK routines
# (Cholesky potrf/potrs, LU gesv) as numpy.linalg's; an error code instead of an exception.
def _pd_solve(M, g):
    """M^-1 g for a symmetric positive-definite M, by Cholesky; LinAlgError where M is not
    positive definite (as numpy.linalg.cholesky raises it)."""
    c, info = lapack.dpotrf(M, lower=1, clean=0)
    if info != 0:
        raise np.linalg.LinAlgError("Matrix is not positive definite")
    x, info = lapack.dpotrs(c, g, lower=1)
    if info != 0:  # pragma: no cover - an argument error
        raise np.linalg.LinAlgError("Cholesky solve failed")
    return x


def _same(a, b) -> bool:
    """np.array_equal for two vectors of free parameters, without its argument handling."""
    b = np.asarray(b)
    return a.shape == b.shape and bool((a == b).all())


def _solve(B, g):
    """B^-1 g by LU with partial pivoting (numpy.linalg.solve's routine); LinAlgError where B is
    singular."""
    _, _, x, info = lapack.dgesv(B, g)
    if info != 0:
        raise np.linalg.LinAlgError("Singular matrix")
    return x


# ---------------------------------------------------------------------------------------
@dataclass
class FitResult:
    """A model with its parameters, their inference and the fit statistics."""

    spec: ModelSpec
    dist: Distribution
    options: Options
    names: tuple
    params: np.ndarray
    std_errors: np.ndarray  # nan where not estimated (fixed, implied, targeted, at a bound)
    status: tuple  # per parameter: 'free', 'fixed', 'implied', 'target', 'bound'
    loglik: float
    nobs: int
    n_free: int
    converged: bool
    message: str
    estimated: bool = True  # False for a fit built from given parameters
    cov: np.ndarray | None = None

    # ----- derived statistics ------------------------------------------------------------
    def value(self, name: str) -> float:
        return float(self.params[self.names.index(name)])

    @property
    def param_dict(self) -> dict:
        return {n: float(v) for n, v in zip(self.names, self.params)}

    @property
    def aic(self) -> float:
        return -2.0 * self.loglik + 2.0 * self.n_free

    @property
    def bic(self) -> float:
        return -2.0 * self.loglik + self.n_free * math.log(self.nobs)

    @property
    def t_stats(self) -> np.ndarray:
        with np.errstate(all="ignore"):
            return self.params / self.std_errors

    @property
    def p_values(self) -> np.ndarray:
        # the normal's upper tail as stats.norm.sf computes it (ndtr(-x)), without the ~40 us of
        # the distribution object's argument handling on every fit table
        return 2.0 * special.ndtr(-np.abs(self.t_stats))

    @property
    def persistence(self) -> float | None:
        return persistence_of(self.spec, self.dist, self.params)

    @property
    def uncond_variance(self) -> float | None:
        return uncond_variance_of(self.spec, self.dist, self.params)

    @property
    def half_life(self) -> float | None:
        vp, eta = _variance_part(self.spec, self.dist, self.params)
        return self.spec.family.half_life(vp, eta, self.dist)


# ---------------------------------------------------------------------------------------
def _variance_part(spec: ModelSpec, dist: Distribution, params):
    """(variance parameters, distribution parameters) of a full parameter vector."""
    params = np.asarray(params, dtype=float)
    nm, nv, nd = len(spec.mean_names), len(spec.variance_names), len(dist.param_names)
    ns = len(spec.shift_names)
    if len(params) != nm + nv + ns + nd:
        raise ValueError(f"{spec.canonical} with {dist.name} shocks takes {nm + nv + ns + nd} parameters, got {len(params)}")
    return params[nm: nm + nv], params[nm + nv + ns:]


def persistence_of(spec: ModelSpec, dist: Distribution, params) -> float | None:
    """Sum of the variance recursion's own-lag weights; None for a constant variance."""
    vp, eta = _variance_part(spec, dist, params)
    return spec.family.persistence(vp, eta, dist)


def uncond_variance_of(spec: ModelSpec, dist: Distribution, params) -> float | None:
    """E[sigma^2]; None where undefined, and with variance regressors (it then moves with them)."""
    if spec.xvar:
        return None
    vp, eta = _variance_part(spec, dist, params)
    return spec.family.uncond_variance(vp, eta, dist)


def check_params(spec: ModelSpec, dist: Distribution, names, params) -> None:
    """Raise InputError if given parameters lie outside the model's domain (fit tables typed by hand)."""
    d = dict(zip(names, params))
    for n, v in d.items():
        if not math.isfinite(v):
            raise InputError(f"parameter {n} must be a finite number, got {describe_value(v)}")
    eta = np.array([d[n] for n in dist.param_names])
    dist.check(eta)
    vp = np.array([d[n] for n in spec.variance_names], dtype=float)
    spec.family.check(vp, eta, dist)


def check_intercept(lik: Likelihood, theta, rows=None) -> None:
    """Raise InputError if variance regressors push the family's intercept out of its domain
    (omega + sum v[k] Z[t,k] must stay above zero in the families linear in squares).
    ``rows``: the row number of each return, for the message (default 1, 2, ...)."""
    if lik.Z is None:
        return
    bad = lik.family.bad_shift(theta[lik._vs], lik.shift(theta))
    if bad.any():
        t = int(np.flatnonzero(bad)[0])
        i = lik.a + lik.s0 + t
        row = int(rows[i]) if rows is not None else i + 1
        terms = " + ".join(lik.spec.shift_names)
        raise InputError(f"the variance intercept omega + {terms} x (regressor) is not above zero at returns row {row} "
                         f"({float(theta[lik._vs][0] + lik.shift(theta)[t]):.6g}); the variance would not stay positive. "
                         "Keep omega + sum v[k] Z[t,k] above zero at every row (e.g. regressors of one sign with "
                         "v[k] >= 0)")


# ---------------------------------------------------------------------------------------
class _Problem:
    """Free-parameter view of a likelihood: mapping, bounds, objective and gradient."""

    def __init__(self, lik: Likelihood, options: Options, sum_to: float | None = None, eta=None, edges=()):
        self.lik = lik
        self.spec = spec = lik.spec
        self.family = fam = spec.family
        self.dist = lik.dist
        self.options = options
        names = lik.names
        k = lik.k
        fixed = options.fixed_dict
        for n in fixed:
            if n not in names:
                have = ", ".join(names)
                raise InputError(f'options: {n} is not a parameter of {spec.canonical} with {self.dist.name} shocks (it has {have})')
        status = ["free"] * k
        for n in fixed:
            status[lik.idx[n]] = "fixed"
        # a sum constraint on the variance weights: IGARCH (sum 1), or a fit held at the
        # stationarity bound (sum just below 1); the last beta (or last alpha) is implied
        self.implied = None
        self.sum_to = 1.0 if fam.integrated else sum_to
        rule = None
        self.held_by_family = False  # a rule the affine map cannot carry: the family sets the implied weight
        if self.sum_to is not None:
            rule = fam.sum_rule(lik.dist.start() if eta is None else eta, lik.dist)
            last = rule[0]
            if last in fixed:
                raise InputError(f"options: {last} is implied by the others (the alphas and betas of an IGARCH model sum to 1); fix another parameter")
            self.implied = lik.idx[last]
            status[self.implied] = "implied"
            self.held_by_family = rule[1] is None
        if options.xvar and not spec.xvar:
            raise InputError(f"options: xvar={','.join(map(str, options.xvar))} sends regressor columns to the variance, "
                             "but no regressors are given")
        self.target = options.target
        if self.target and spec.xvar:
            raise InputError("options: target=yes cannot be combined with variance regressors (xvar=): the long-run "
                             "variance then moves with the regressors; leave one of them out")
        if self.target:
            tname = fam.targeted
            if tname is None:
                raise InputError(f"options: target=yes works with {_targeting_families()} variances, not {spec.variance_canonical}")
            if tname in fixed:
                raise InputError(f"options: target=yes implies {tname}; do not also fix {tname}")
            status[lik.idx[tname]] = "target"
        # edges of the admissible region the fit is held on (VarianceFamily.edges): each implies
        # one parameter from the others, sum w_i p_i = c; shown as held at a bound
        self.edges = tuple(edges)
        for name, _, _, _ in self.edges:
            status[lik.idx[name]] = "bound"
        self.status = status
        self.free = np.array([i for i, s in enumerate(status) if s == "free"], dtype=int)
        if len(self.free) == 0:
            raise InputError("options: every parameter is fixed; nothing is left to estimate (use VOLLOGLIK to score fixed parameters)")
        self.base = np.zeros(k)
        for n, v in fixed.items():
            self.base[lik.idx[n]] = v
        # affine map full = base + A u (edge-implied parameters, then the sum rule's, included)
        A = np.zeros((k, len(self.free)))
        A[self.free, np.arange(len(self.free))] = 1.0
        for name, weights, const, _ in self.edges:
            j = lik.idx[name]
            others = {lik.idx[n]: w for n, w in weights.items() if n != name}
            self.base[j] = (const - sum(w * self.base[i] for i, w in others.items())) / weights[name]
            A[j] = -sum(w * A[i] for i, w in others.items()) / weights[name]
        if self.implied is not None and not self.held_by_family:
            weights = {lik.idx[n]: w for n, w in rule[1].items()}
            weights.pop(self.implied)
            self.base[self.implied] = self.sum_to - sum(w * self.base[i] for i, w in weights.items())
            A[self.implied] = -sum(w * A[i] for i, w in weights.items())
        self.A = A
        # every parameter free and nothing implied: the map is the identity, and the products
        # with A that carry derivatives to the free parameters are skipped (they change nothing)
        self.identity = bool(A.shape[0] == A.shape[1] and np.array_equal(A, np.eye(k)) and not self.base.any())
        self.analytic = lik.linear and not self.target
        # scoring iterations (BHHH): with analytic scores, or numerical ones for an in-mean model,
        # which starts next to its maximum (from the fit without the in-mean term)
        self.scoring = self.analytic or lik.in_mean
        # where Newton polishing stops: numerical derivatives of an in-mean likelihood (about seven
        # correct digits) cannot pin the decrement to 1e-12; 1e-9 still leaves the log-likelihood
        # within 1e-9 of its maximum and the estimates far inside their standard errors
        self.polish_tol = _NUMERIC_POLISH_TOL if lik.in_mean else _POLISH_TOL
        self.n_calls = 0
        self.last_second = None  # (u, terms, scores, Hessian) of the last closed-form pass
        self.last_value = None  # (u, negll) of the last point scored
        self._dist_bounds = tuple(self.dist.bounds())  # what admissible() checks at every trial point
        self._arma = bool(spec.ar or spec.ma)

    def jacobian(self, theta):
        """d full / d u at ``theta``: the affine map A, and where the family holds a rule of its
        own, the implied parameter's derivatives (from :meth:`VarianceFamily.hold`) carried through A."""
        if not self.held_by_family:
            return self.A
        _, _, _, vp, eta = self.lik.split(np.array(theta, dtype=float))
        row = np.zeros(self.lik.k)
        d = self.family.hold(vp, self.sum_to, eta, self.dist)  # variance parameters, then the distribution's
        nv, nd = len(vp), len(eta)
        row[self.lik.n_mean: self.lik.n_mean + nv] = d[:nv]
        if nd:
            row[self.lik.k - nd:] = d[nv:]
        row[self.implied] = 0.0
        M = self.A.copy()
        M[self.implied] = row @ self.A
        return M

    def full(self, u):
        theta = np.array(u, dtype=float) if self.identity else self.base + self.A @ u
        if self.held_by_family:
            _, _, _, vp, eta = self.lik.split(theta)
            self.family.hold(vp, self.sum_to, eta, self.dist)  # vp is a view: theta changes in place
        if self.target:
            # the mean square of the mean's residuals (without an in-mean term, as the presample)
            e, _ = self.lik.residuals(theta)
            vbar = float(np.mean(e * e))
            _, _, _, vp, eta = self.lik.split(theta)
            self.family.target(vp, vbar, eta, self.dist)  # vp is a view: theta changes in place
        return theta

    # ----- admissible region (beyond box bounds) ---------------------------------------
    def pressed(self, u) -> bool:
        """True where the point ``u`` lies against the stationarity bound (persistence within
        1e-3 of one) of a family whose fit is then held on it (:func:`fit`'s held route)."""
        if not self.family.holds_at_bound or self.sum_to is not None:
            return False
        pers = persistence_of(self.spec, self.dist, self.full(u))
        return pers is not None and pers > 1.0 - 1e-3

    def admissible(self, theta) -> bool:
        lik = self.lik
        vp, eta = theta[lik._vs], theta[lik.k - lik._nd:]
        for v, (lo, hi) in zip(eta, self._dist_bounds):
            if not (lo < v < hi):
                return False
        if self._arma and not lik.mean.admissible(theta[: lik.n_mean]):
            return False
        if not self.family.admissible(vp, eta, self.dist, held=self.sum_to is not None):
            return False
        return lik.intercept_ok(theta)  # variance regressors keep the intercept positive

    # ----- objective -------------------------------------------------------------------
    def negll(self, u):
        last = self.last_value
        if last is not None and _same(last[0], u):
            return last[1]  # the point a pass just scored (the estimate, scored again by _run)
        self.n_calls += 1
        theta = self.full(u)
        if not self.admissible(theta):
            return _PENALTY
        val = self.lik.loglik(theta)
        out = -val if math.isfinite(val) else _PENALTY
        self.last_value = (np.array(u, dtype=float), out)
        return out

    def scores_free(self, u):
        """(terms, per-observation scores nobs x n_free) at u; analytic or central differences."""
        theta = self.full(u)
        if self.analytic:
            l, G = self.lik.scores(theta)
            return l, (np.ascontiguousarray(G) if self.identity else G @ self.jacobian(theta))
        l = self.lik.terms(theta)
        G = np.empty((len(l), len(u)))
        for j in range(len(u)):
            h = self.steps[j]
            up, dn = u.copy(), u.copy()
            up[j] += h
            dn[j] -= h
            G[:, j] = (self.lik.terms(self.full(up)) - self.lik.terms(self.full(dn))) / (2 * h)
        return l, G

    def fun_grad(self, u):
        self.n_calls += 1
        theta = self.full(u)
        if not self.admissible(theta):
            return _PENALTY, np.zeros(len(u))
        if self.analytic:
            val, g = self.lik.gradient(theta)
            if not math.isfinite(val):
                return _PENALTY, np.zeros(len(u))
            return -val, -(g if self.identity else g @ self.jacobian(theta))
        val = self.lik.loglik(theta)
        if not math.isfinite(val):
            return _PENALTY, np.zeros(len(u))
        g = np.empty(len(u))
        for j in range(len(u)):
            h = self.steps[j]
            up, dn = u.copy(), u.copy()
            up[j] += h
            dn[j] -= h
            g[j] = -(self.negll(dn) - self.negll(up)) / (2 * h)
        return -val, g

    @property
    def exact_hessian(self) -> bool:
        """The Hessian comes in closed form (:meth:`Likelihood.hessian`): the likelihood has it
        and the free parameters map to the full vector affinely."""
        return self.analytic and not self.held_by_family and self.lik.has_hessian and not self.kinked_columns

    def second(self, u):
        """(terms, scores nobs x n_free, Hessian n_free x n_free) at u in closed form; the map
        full = base + A u being affine, the chain rule is A' H A (no second-order term)."""
        l, G, H = self.lik.hessian(self.full(u))
        val = float(l.sum())
        self.last_value = (np.array(u, dtype=float), -val if math.isfinite(val) else _PENALTY)
        if self.identity:  # the scores row-major, as the product gave them (sums in the same order)
            return l, np.ascontiguousarray(G), H
        A = self.A
        return l, G @ A, A.T @ H @ A

    @property
    def kinked_columns(self) -> list:
        """Free columns of mean parameters along which the log-likelihood kinks, where the
        likelihood has a closed-form Hessian and its variance recursion reads |e| (EGARCH's news
        |z|): a residual crossing zero jumps the slope, and over many residuals those jumps add a
        curvature that the closed form, which holds between the kinks, leaves out.  In the Newton
        steps these columns are differenced (:meth:`hessian`), with the differenced route's
        bookkeeping for kinks (:func:`_newton`); the standard errors take the closed form, whose
        omission has mean zero (:func:`_std_errors`)."""
        cols = getattr(self, "_kinked", None)
        if cols is None:
            cols = []
            if self.analytic and not self.held_by_family and self.lik.has_hessian and self.family.second_between_kinks:
                mean = set(self.spec.mean_names)
                cols = [c for c, i in enumerate(self.free) if self.lik.names[i] in mean]
            self._kinked = cols
        return cols

    def hessian(self, u, forward=False, g0=None, shrink=1.0, accurate=False, skip=()):
        """Hessian of the log-likelihood in the free parameters: in closed form where the
        likelihood has it (:attr:`exact_hessian`; the other arguments are then moot), else
        central differences of the analytic gradient (about seven correct digits, enough to steer
        Newton steps; ``forward=True``: forward differences, half the cost and about six digits;
        ``accurate=True``: Richardson-extrapolated, twice the cost and about ten digits, for the
        standard errors), or second differences of the log-likelihood itself where the gradient
        is numerical too.  Columns in ``skip``, which the caller replaces (with their rows), are
        not differenced."""
        m = len(u)
        H = np.zeros((m, m))
        if self.exact_hessian:
            return self.second(u)[2]
        if self.kinked_columns:
            # closed form but for the kinked columns, which are differenced as below
            H = self.second(u)[2]
            for j in self.kinked_columns:
                if j in skip:
                    continue
                if forward:
                    if g0 is None:
                        g0 = -self.fun_grad(u)[1]
                    h = self.steps[j] * shrink
                    up = u.copy()
                    up[j] += h
                    H[:, j] = (-self.fun_grad(up)[1] - g0) / h
                elif accurate:
                    H[:, j] = self._richardson_column(u, j)
                else:
                    h = self.steps[j]
                    up, dn = u.copy(), u.copy()
                    up[j] += h
                    dn[j] -= h
                    H[:, j] = (-self.fun_grad(up)[1] + self.fun_grad(dn)[1]) / (2 * h)
        elif self.analytic and forward:
            if g0 is None:
                g0 = -self.fun_grad(u)[1]
            for j in range(m):
                h = self.steps[j] * shrink
                up = u.copy()
                up[j] += h
                H[:, j] = (-self.fun_grad(up)[1] - g0) / h
        elif self.analytic and accurate:
            for j in range(m):
                if j not in skip:
                    H[:, j] = self._richardson_column(u, j)
        elif self.analytic:
            for j in range(m):
                h = self.steps[j]
                up, dn = u.copy(), u.copy()
                up[j] += h
                dn[j] -= h
                H[:, j] = (-self.fun_grad(up)[1] + self.fun_grad(dn)[1]) / (2 * h)
        else:
            f0 = -self.negll(u)
            hs = self.steps * 100.0
            for i in range(m):
                for j in range(i, m):
                    if i == j:
                        up, dn = u.copy(), u.copy()
                        up[i] += hs[i]
                        dn[i] -= hs[i]
                        H[i, i] = (-self.negll(up) - 2 * f0 + -self.negll(dn)) / hs[i] ** 2
                    else:
                        vals = []
                        for si, sj in ((1, 1), (1, -1), (-1, 1), (-1, -1)):
                            w = u.copy()
                            w[i] += si * hs[i]
                            w[j] += sj * hs[j]
                            vals.append(-self.negll(w))
                        H[i, j] = H[j, i] = (vals[0] - vals[1] - vals[2] + vals[3]) / (4 * hs[i] * hs[j])
        return 0.5 * (H + H.T)


    def _richardson_column(self, u, j):
        """d gradient / d u_j: central differences at steps h and h/2 combined as (4 D(h/2) -
        D(h)) / 3, which cancels the h^2 error term (Richardson); h is 1e-3 of the parameter's
        scale, shrunk where a point would leave the admissible region."""
        h = 100.0 * self.steps[j]
        for _ in range(6):
            pts = []
            for s in (h, -h, 0.5 * h, -0.5 * h):
                w = u.copy()
                w[j] += s
                pts.append(w)
            if all(self.admissible(self.full(w)) for w in pts):
                g = [-self.fun_grad(w)[1] for w in pts]
                return (4.0 * (g[2] - g[3]) / h - (g[0] - g[1]) / (2.0 * h)) / 3.0
            h *= 0.1
        # next to the edge of the region: one-sided differences from the admissible side
        for s in (h, -h):
            w = u.copy()
            w[j] += s
            if self.admissible(self.full(w)):
                return (-self.fun_grad(w)[1] + self.fun_grad(u)[1]) / s
        return np.full(len(u), np.nan)


_stationary = stationary  # the AR and MA checks use the families' helper


def _targeting_families() -> str:
    words = [cls.words[0] for cls in FAMILIES.values() if cls.targeted and cls.varies]
    return ", ".join(words[:-1]) + " and " + words[-1] if len(words) > 1 else "".join(words)


# ---------------------------------------------------------------------------------------
def _scale_and_bounds(problem: _Problem, r):
    lik = problem.lik
    spec = problem.spec
    sd = float(np.std(r)) or 1.0
    var = sd * sd
    box = dict(zip(spec.mean_names, lik.mean.box()))
    box.update(zip(spec.variance_names, problem.family.box(var)))
    for k, n in zip(spec.xvar, spec.shift_names):  # v[k]: per unit of its regressor
        sz = float(np.std(lik.X[:, k - 1])) or 1.0
        box[n] = (0.05 * var / sz, (None, None))
    scales, bounds = [], []
    for n in lik.names:
        if n in box:
            s, b = box[n]
        elif n == "nu":
            s = 1.0
            lo = problem.dist.bounds()[0][0]
            b = (lo + 0.02, 300.0) if lo > 0 else (0.2, 50.0)
        elif n == "lambda":
            s, b = 0.1, (-0.995, 0.995)
        else:  # pragma: no cover
            s, b = 1.0, (None, None)
        scales.append(s)
        bounds.append(b)
    free = problem.free
    return np.array(scales)[free], [bounds[i] for i in free]


def _start_candidates(problem: _Problem, r, extra=()) -> list:
    """Full-parameter starting points, best first by log-likelihood; ``extra`` are further
    full vectors to try (an in-mean model's: the fit without the in-mean term)."""
    lik = problem.lik
    dist = problem.dist
    k = lik.k
    idx = lik.idx
    fixed = problem.options.fixed_dict
    th = np.zeros(k)
    # mean: least squares for the linear parts (sample mean, AR, regressors), MA and in-mean at zero
    th[: lik.n_mean] = lik.mean.start(fixed)
    for n, v in fixed.items():
        th[idx[n]] = v
    e, _ = lik.residuals(th)
    v = float(np.mean(e * e)) or 1.0
    eta = dist.start()
    for n, val in zip(dist.param_names, eta):
        th[idx[n]] = val
    for n, val in fixed.items():
        th[idx[n]] = val
    cands = []
    vs = lik._vs
    # the variance weights a start may shrink: free, and not the intercept (the first)
    shrink = [i for i in range(vs.start + 1, vs.stop) if lik.names[i] not in fixed]
    for vp in problem.family.starts(v):
        t = th.copy()
        t[vs] = vp
        for n, val in fixed.items():
            t[idx[n]] = val
        if shrink and not problem.admissible(t):
            # fixed weights beside the usual starting ones can sum to 1 or more (beta[1]=0.95 with
            # a start's alpha of 0.1): the free weights shrink towards 0 until the start is inside
            for factor in (0.5, 0.25, 0.1, 0.0):
                t2 = t.copy()
                t2[shrink] *= factor
                if problem.admissible(t2):
                    t = t2
                    break
        cands.append(t)
    cands.extend(np.asarray(t, dtype=float) for t in extra)
    scored = []
    for t in cands:
        u = t[problem.free]
        val = -problem.negll(u)
        scored.append((val, t))
    scored.sort(key=lambda x: -x[0])
    return [t for val, t in scored if val > -_PENALTY / 2] or [scored[0][1]]


def _optimise(problem: _Problem, u0, scales, bounds, max_iter=500):
    """L-BFGS-B on scaled parameters; returns (u, info) ."""
    sb = []
    for (lo, hi), s in zip(bounds, scales):
        sb.append((None if lo is None else lo / s, None if hi is None else hi / s))

    def fg(x):
        f, g = problem.fun_grad(x * scales)
        return f, g * scales

    x0 = u0 / scales
    # keep the start strictly inside the box
    for i, (lo, hi) in enumerate(sb):
        if lo is not None and x0[i] <= lo:
            x0[i] = lo + 1e-6 * max(1.0, abs(lo))
        if hi is not None and x0[i] >= hi:
            x0[i] = hi - 1e-6 * max(1.0, abs(hi))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = optimize.minimize(fg, x0, jac=True, method="L-BFGS-B", bounds=sb,
                                options={"maxiter": max_iter, "ftol": 1e-13, "gtol": 1e-7})
    return res.x * scales, res, sb


def _polish(problem: _Problem, u, scales, sbounds, max_steps=8):
    """Newton steps on the Hessian; returns (u, H, decrement, active mask, steps taken)."""
    m = len(u)
    active = np.zeros(m, dtype=bool)
    H = None
    dec = math.inf
    taken = 0
    for _ in range(max_steps):
        f_now, g = problem.fun_grad(u)
        g = -g  # gradient of the log-likelihood
        # bounds that hold: at the bound with the gradient pushing out
        # bounds that hold: near the bound with the gradient pushing out; snap onto it
        x = u / scales
        active[:] = False
        for i, (lo, hi) in enumerate(sbounds):
            tol = 1e-3 * max(1.0, abs(x[i]))
            if lo is not None and x[i] - lo <= tol and g[i] < 0:
                active[i] = True
                x[i] = lo
            if hi is not None and hi - x[i] <= tol and g[i] > 0:
                active[i] = True
                x[i] = hi
        if active.any():
            snapped = x * scales
            if problem.negll(snapped) <= f_now + 1e-9:
                u = snapped
                f_now, g = problem.fun_grad(u)
                g = -g
            else:
                active[:] = False
        H = problem.hessian(u)
        fr = ~active
        Hf = H[np.ix_(fr, fr)]
        try:
            L = np.linalg.cholesky(-Hf)
        except np.linalg.LinAlgError:
            return u, H, math.inf, active, taken
        step_f = np.linalg.solve(L.T, np.linalg.solve(L, g[fr]))
        dec = float(g[fr] @ step_f)
        if dec < problem.polish_tol:
            return u, H, dec, active, taken
        step = np.zeros(m)
        step[fr] = step_f
        t = 1.0
        improved = False
        for _ls in range(30):
            cand = u + t * step
            ok = True
            for i, (lo, hi) in enumerate(sbounds):
                xi = cand[i] / scales[i]
                if (lo is not None and xi < lo) or (hi is not None and xi > hi):
                    ok = False
            if ok:
                fc = problem.negll(cand)
                if fc <= f_now + 1e-12 * max(1.0, abs(f_now)):
                    improved = True
                    break
            t *= 0.5
        if not improved:
            return u, H, dec, active, taken
        u = cand
        taken += 1
    f_now, g = problem.fun_grad(u)
    g = -g
    H = problem.hessian(u)
    fr = ~active
    try:
        L = np.linalg.cholesky(-H[np.ix_(fr, fr)])
        dec = float(g[fr] @ np.linalg.solve(L.T, np.linalg.solve(L, g[fr])))
    except np.linalg.LinAlgError:
        dec = math.inf
    return u, H, dec, active, taken


def _held_step(solve, M, g, u, on_lo_below, on_hi_above):
    """(step, held): the step M^-1 g of the parameters not held at a bound, by ``solve``.  Held
    are those on a bound (at or below ``on_lo_below``, at or above ``on_hi_above``: the bounds
    with a closeness) with the gradient ``g`` pushing outwards, and those on one that the step
    would cross (a metric that is not diagonal can point a parameter outwards against its own
    gradient).  Without a bound reached, ``solve(M, g)`` itself."""
    on_lo, on_hi = u <= on_lo_below, u >= on_hi_above
    m = len(u)
    if not (on_lo | on_hi).any():  # no bound reached: the plain step
        return solve(M, g), np.zeros(m, dtype=bool)
    held = (on_lo & (g < 0.0)) | (on_hi & (g > 0.0))
    for _ in range(m + 1):
        if not held.any():
            step = solve(M, g)
        elif held.all():
            step = np.zeros(m)
        else:
            fr = ~held
            step = np.zeros(m)
            step[fr] = solve(M[np.ix_(fr, fr)], g[fr])
        out = ~held & ((on_lo & (step < 0.0)) | (on_hi & (step > 0.0)))
        if not out.any():
            break
        held |= out
    return step, held


def _reach(u, step, lo, hi) -> float:
    """The largest t (at most 1) for which u + t step stays within [lo, hi]."""
    end = u + step
    if ((end >= lo) & (end <= hi)).all():
        return 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        room = np.where(step < 0.0, (lo - u) / step, np.where(step > 0.0, (hi - u) / step, np.inf))
    return min(1.0, float(room.min())) if len(room) else 1.0


def _bhhh(problem: _Problem, u0, scales, bounds, max_iter=60):
    """Scoring iterations with the outer product of the analytic scores (Berndt, Hall, Hall &
    Hausman 1974; the expected information for normal shocks), then Newton steps with step
    control (:func:`_newton`) on the closed-form Hessian, or a differenced one of the analytic
    gradient.

    The fast path for models with analytic scores.  Bounds of the variance and shape parameters
    (an ARCH weight at 0, a t shape at its upper limit: common on short windows) are kept as an
    active set: near the maximum (a decrement below :data:`_BOUND_STEPS`) a step that would cross
    one stops where it reaches it, and a parameter on a bound with the gradient pushing outwards
    is held there while the others are scored and polished (the conditions of a maximum on a
    bound); far from it, steps are shortened to stay inside, as a large first step projected
    onto the box can land in a corner that is a maximum of nothing but the corner (IGARCH with
    omega and alpha at 0).  Returns None (the caller falls back on L-BFGS-B) if it stalls,
    leaves the admissible region, ends near a bound it does not hold, or ends holding one whose
    gradient no longer pushes outwards.
    """
    from types import SimpleNamespace

    lo = np.array([-np.inf if b[0] is None else b[0] for b in bounds])
    hi = np.array([np.inf if b[1] is None else b[1] for b in bounds])

    # the variance and shape parameters' bounds are kept by projection (a maximum may lie on
    # them); the mean's (an AR or MA coefficient's +-0.9999) only fence off the non-stationary or
    # non-invertible region, and a point stays strictly inside them
    kept = problem.free >= problem.lik.n_mean
    clo, chi = np.where(kept, lo, -np.inf), np.where(kept, hi, np.inf)  # where a step stops
    slo, shi = np.where(kept, -np.inf, lo), np.where(kept, np.inf, hi)  # strict bounds
    eps = 1e-9 * scales  # a parameter this close to a kept bound is on it
    on_lo, on_hi = clo + eps, chi - eps

    strict = bool(np.isfinite(slo).any() or np.isfinite(shi).any())  # an AR or MA part

    def inside(u):  # in the box (closed where bounds are kept) and admissible
        if not ((u >= lo) & (u <= hi)).all():
            return False
        if strict and not ((u > slo) & (u < shi)).all():
            return False
        return problem.admissible(problem.full(u))

    def value_grad(u):  # log-likelihood and its gradient
        f, g = problem.fun_grad(u)
        return -f, -g

    # normal shocks: Fisher scoring with the expected information (Gauss-Newton for the mean
    # and variance); otherwise the outer product of the scores
    fisher = problem.dist.name == "normal" and problem.analytic

    def local(u, near=False):
        if near:  # next to the hand-over: the closed-form pass, which the Newton steps reuse
            l, G, H = problem.second(u)
            problem.last_second = (u.copy(), l, G, H)
            return float(l.sum()), G.sum(axis=0), G.T @ G
        theta = problem.full(u)
        if fisher:
            val, g, info = problem.lik.scores(theta, fisher=True)
            if problem.identity:
                return val, g, info
            A = problem.jacobian(theta)
            return val, g @ A, A.T @ info @ A
        l, G = problem.scores_free(u)
        return float(l.sum()), G.sum(axis=0), G.T @ G

    u = np.array(u0, dtype=float)
    if not inside(u):
        return None
    start_on = (u <= on_lo) | (u >= on_hi)  # the bounds the start is on
    f, g, B = local(u)
    if not math.isfinite(f):
        return None
    it = 0
    for it in range(1, max_iter + 1):
        try:
            step, held = _held_step(_solve, B, g, u, on_lo, on_hi)
        except np.linalg.LinAlgError:
            return None
        dec = float(g @ step)
        if not math.isfinite(dec):
            return None
        if dec < (_SCORING_EXACT if problem.exact_hessian else _SCORING_TOL):
            break
        # a step from a decrement this small most likely ends below the hand-over: score its
        # point by the closed-form pass the Newton steps start from, not a scoring pass more
        near = problem.exact_hessian and dec < 10.0 * _SCORING_EXACT
        # near the maximum a step stops at the first bound it reaches; far from it, it is halved
        # until it stays inside
        t = _reach(u, step, clo, chi) if dec < _BOUND_STEPS else 1.0
        shut = False  # a longer step left the admissible region
        for _ in range(40):
            cand = u + t * step
            if t < 1.0 and dec < _BOUND_STEPS:
                cand = np.clip(cand, clo, chi)  # the bound reached, exactly
            if t > 0.0 and inside(cand):
                fc, gc, Bc = local(cand, near and t == 1.0)
                if math.isfinite(fc) and fc > f + 1e-4 * t * dec:
                    break
            else:
                shut = True
            t *= 0.5
        else:
            return None
        if shut and problem.pressed(cand):
            return None  # against the stationarity bound: the fit held on it takes over (see _newton)
        u, f, g, B = cand, fc, gc, Bc
    else:
        return None
    out = _newton(problem, u, f, g, inside, value_grad, box=(clo, chi, on_lo, on_hi))
    if out is None:
        return None
    u, H, dec, taken, held = out
    near = np.minimum(u - lo, hi - u) / scales
    if np.any(near[~held] < 1e-3):
        return None
    if held.any():  # each held bound still holds at the maximum: its gradient pushes outwards
        _, g = value_grad(u)
        lower = u[held] - clo[held] <= chi[held] - u[held]
        if not np.all(np.where(lower, g[held] < 0.0, g[held] > 0.0)):
            return None
    res = SimpleNamespace(nit=it, success=True, message="converged", method="Fisher scoring" if fisher else "BHHH scoring",
                          reached=bool((held & ~start_on).any()))
    return u, H, dec, held, res, taken


def _newton(problem: _Problem, u, f, g, inside, value_grad, max_iter=80, box=None):
    """Newton steps from u (log-likelihood f, gradient g) to the maximum, with step control;
    returns (u, H, Newton decrement, steps taken, held), or None where it gives up.  ``box``:
    (lower, upper, lower + closeness, upper - closeness) of the bounds kept as an active set (a
    step that would cross one stops where it reaches it); ``held`` marks the parameters on a
    bound with the gradient, or the step, pushing outwards (renewed at every step), whose Newton
    steps are zero and which the decrement leaves out.

    The Hessian is the closed form at every step where the likelihood has it (:attr:`_Problem.
    exact_hessian`: one pass gives value, scores and Hessian, and the last one serves the
    standard errors); else a forward-difference Hessian of the analytic gradient updated by BFGS
    secants and refreshed when the decrement stops halving (a second stall within the tolerance is a
    kink, EGARCH's |z| in the mean parameters, and ends the steps).  Step control (Levenberg-Marquardt
    damping with a backtracking line search): where -H is not positive definite (a ridge or a
    saddle, e.g. near-cancelling AR and MA roots) or a step fails to raise the likelihood even
    when halved, the step solves (-H + mu diag|H|) s = g with mu raised tenfold until it is
    positive definite and the step raises the likelihood (Armijo's condition); mu falls again
    after full steps.  An undamped step is always tried first, so near the maximum the
    iterations are Newton's, converging quadratically."""
    exact = problem.exact_hessian
    m = len(u)
    fr = None  # the parameters not held, None while all are free
    held = np.zeros(m, dtype=bool)

    def at(v):  # (f, g, -H) at v
        last = problem.last_second
        if exact and last is not None and _same(last[0], v):
            return float(last[1].sum()), last[2].sum(axis=0), -last[3]
        if exact:
            l, G, H = problem.second(v)
            problem.last_second = (v.copy(), l, G, H)
            return float(l.sum()), G.sum(axis=0), -H
        fv, gv = value_grad(v)
        return fv, gv, -problem.hessian(v, forward=True, g0=gv)

    if exact:
        f, g, M = at(u)
    else:
        M = -problem.hessian(u, forward=True, g0=g)
    if not (math.isfinite(f) and np.all(np.isfinite(M))):
        return None
    mu = 0.0
    taken = 0
    failures = 0
    refreshes = 0
    prev = math.inf
    dec = math.inf
    for _ in range(max_iter):
        try:
            if box is None:
                plain = _pd_solve(M, g)
            else:  # the active set, renewed at every step
                plain, held = _held_step(_pd_solve, M, g, u, box[2], box[3])
                fr = ~held if held.any() else None
            dec = float(g @ plain)
        except np.linalg.LinAlgError:
            plain, dec = None, math.inf
        if dec < problem.polish_tol:
            if exact and dec > 0.0:
                # one more Newton step squares the error left (the decrement's floor leaves about
                # seven digits, the step fourteen).  Its pass also gives the estimate's Hessian;
                # below a decrement of 1e-16 the step moves the estimate by 1e-8 of a standard
                # error, which changes the Hessian and the scores in about their tenth digit, so
                # the pass at u serves (the step's value is still checked)
                cand = u + plain
                if inside(cand):
                    if dec < 1e-16:
                        fc = -problem.negll(cand)
                        if math.isfinite(fc) and fc >= f - 1e-9:
                            last = problem.last_second
                            problem.last_second = (cand.copy(),) + tuple(last[1:])
                            u = cand
                            taken += 1
                    else:
                        fc, gc, Mc = at(cand)
                        if math.isfinite(fc) and fc >= f - 1e-9 and np.all(np.isfinite(Mc)):
                            u, f, g, M = cand, fc, gc, Mc
                            taken += 1
                        else:
                            problem.last_second = None
            break
        if not exact and plain is not None and dec > 0.5 * prev and refreshes and dec < _DECREMENT_TOL:
            break  # a second stall within the tolerance: a kink (EGARCH's |z| in the mean parameters)
        if not exact and plain is not None and dec > 0.5 * prev and refreshes < 4:
            # the secant updates stopped helping: a fresh Hessian
            refreshes += 1
            M = -problem.hessian(u, forward=True, g0=g)
            prev = math.inf
            continue
        scale = np.abs(np.diag(M))
        scale[~(scale > 0)] = 1.0
        damp = mu if plain is not None else max(mu, 1e-4)
        step = plain if damp == 0.0 else None
        while step is None:
            try:
                if box is None:
                    step = _pd_solve(M + damp * np.diag(scale), g)
                else:
                    step, held = _held_step(_pd_solve, M + damp * np.diag(scale), g, u, box[2], box[3])
                    fr = ~held if held.any() else None
            except np.linalg.LinAlgError:
                damp = max(10.0 * damp, 1e-4)
                if damp > 1e8:
                    return None
        pred = float(g @ step)
        t = 1.0
        accepted = False
        if box is not None:  # a step that would cross a bound stops where it reaches it
            t = _reach(u, step, box[0], box[1])
        for _ls in range(12):
            cand = u + t * step
            if t < 1.0 and box is not None:
                cand = np.clip(cand, box[0], box[1])  # the bound reached, exactly
            if t > 0.0 and inside(cand):
                if exact:  # the full step's pass gives all; a shortened step's value comes first
                    fc, gc, Mc = at(cand) if t == 1.0 else (-problem.negll(cand), None, None)
                else:
                    fc, gc = value_grad(cand)
                # Armijo's sufficient increase; next to the maximum (a decrement at the rounding
                # floor of the log-likelihood) a full Newton step that loses no more than rounding
                if math.isfinite(fc) and (fc > f + 1e-4 * t * pred or (dec < 1e-8 and t == 1.0 and fc >= f - 1e-9)):
                    accepted = True
                    break
            t *= 0.5
        if not accepted:
            if dec < _DECREMENT_TOL:  # a stall within the tolerance: at the floor, or a kink
                break
            failures += 1
            if failures > 8 or problem.pressed(u):
                # against the stationarity bound the maximum lies beyond the admissible region:
                # the fit held on the bound takes over, and damped steps would only creep closer
                return None
            mu = max(10.0 * damp, 1e-3)
            if not exact:
                M = -problem.hessian(u, forward=True, g0=g)
            continue
        s_ = t * step
        if exact:
            if gc is None:
                fc, gc, Mc = at(cand)
            M = Mc
        else:
            y_ = g - gc  # secant pair for M ~ -H
            sy = float(s_ @ y_)
            if sy > 1e-300:
                Ms = M @ s_
                M = M - np.outer(Ms, Ms) / float(s_ @ Ms) + np.outer(y_, y_) / sy
        mu = damp / 10.0 if (t == 1.0 and damp > 1e-6) else (0.0 if t == 1.0 else damp)
        prev = dec
        u, f, g = cand, fc, gc
        taken += 1
    if not dec < _DECREMENT_TOL:  # a stall above the floor but within the tolerance is a maximum at
        return None  # a kink (EGARCH's |z| in the mean parameters), which no Newton step polishes
    if exact:
        return u, -M, dec, taken, held
    # a fresh Hessian at the estimate and one exact Newton step; forward differences of the
    # analytic gradient with a small step agree with central ones to about six digits at half
    # the cost (the standard errors recompute it to full accuracy)
    H = problem.hessian(u, forward=True, g0=g, shrink=0.1)
    try:
        if fr is None:
            step = np.linalg.solve(-H, g)
        else:
            step = np.zeros(m)
            step[fr] = np.linalg.solve(-H[np.ix_(fr, fr)], g[fr])
    except np.linalg.LinAlgError:
        return None
    cand = u + step
    if inside(cand):
        fc, _ = value_grad(cand)
        if fc >= f - 1e-12:
            u = cand
            taken += 1
            dec = min(dec, float(g @ step))
    return u, H, dec, taken, held


def _run(problem: _Problem, r, starts):
    """Optimise from up to three starting points; the best (ll, u, H, dec, active, res, steps)."""
    scales, bounds = _scale_and_bounds(problem, r)
    problem.steps = 1e-5 * scales
    best = None
    for t0 in starts[:3]:
        fast = _bhhh(problem, t0[problem.free], scales, bounds) if problem.scoring else None
        if fast is not None:
            u, H, dec, active, res, steps = fast
        else:
            u, res, sb = _optimise(problem, t0[problem.free], scales, bounds)
            u, H, dec, active, steps = _polish(problem, u, scales, sb)
        ll = -problem.negll(u)
        cand = (ll, u, H, dec, active, res, steps)
        if best is None or ll > best[0]:
            best = cand
        # polished to the floor, or a fast path that stalled within the tolerance at a kink.  A
        # fast path that ends holding a bound its start was not on may have been led onto a
        # maximum of the bound alone (FIGARCH(1,d,1) on DEM/GBP with beta at 0, 0.67 short of
        # the maximum on its positivity edge): the next start is tried too
        if math.isfinite(dec) and (dec < problem.polish_tol or (fast is not None and dec < _DECREMENT_TOL)) \
                and ll > -_PENALTY / 2 and not (fast is not None and res.reached):
            break
    return best


# the optimiser's own stopping messages in a spreadsheet user's words (its texts, from its runs)
_OPTIMISER_WORDS = (
    ("RELATIVE REDUCTION OF F", "the optimiser stopped where the log-likelihood no longer improved by a relative step"),
    ("ABNORMAL", "the optimiser's line search failed (the log-likelihood is flat or irregular there)"),
    ("NORM OF PROJECTED GRADIENT", "the optimiser stopped where the gradient was small"),
    ("TOTAL NO. OF", "the optimiser reached its limit of iterations"),
    ("ITERATIONS REACHED LIMIT", "the optimiser reached its limit of iterations"),
)


def _optimiser_words(message) -> str:
    """The optimiser's stopping message as words (its own text kept in brackets where unknown)."""
    text = message if isinstance(message, str) else str(message)
    for key, words in _OPTIMISER_WORDS:
        if key in text.upper():
            return words
    return f"the optimiser stopped ({text.strip() or 'no reason given'})"


def _clean_returns(r, spec: ModelSpec) -> np.ndarray:
    r = np.asarray(r, dtype=float).ravel()
    if r.size == 0:
        raise InputError("returns are empty; give at least one column of numbers")
    if not np.all(np.isfinite(r)):
        bad = int(np.flatnonzero(~np.isfinite(r))[0]) + 1
        raise InputError(f"returns row {bad} is not a finite number")
    if r.size < spec.min_obs:
        why = ""
        if spec.arch_lags > MAX_ORDER:  # a long memory: say where the floor comes from
            why = f" ({spec.arch_lags:,} lagged squares for its variance recursion and 3 per parameter)"
        raise InputError(f"{spec.canonical} needs at least {spec.min_obs} returns, got {r.size}{why}")
    if np.ptp(r) == 0:
        raise InputError("returns are all the same number; a constant series has no variance to model")
    return r


def _without_in_mean(r, spec, dist, options, X, lik) -> list:
    """The estimate of the model without its in-mean term, with lambda_m at zero (or its fixed
    value): the start an in-mean fit, whose derivatives are numerical, begins from."""
    fixed = tuple((n, v) for n, v in options.fixed if n != "lambda_m")
    try:
        plain = fit(r, replace(spec, in_mean=False), dist, replace(options, fixed=fixed), X)
    except (InputError, ConvergenceError):
        return []
    d = plain.param_dict
    d["lambda_m"] = options.fixed_dict.get("lambda_m", 0.0)
    return [np.array([d[n] for n in lik.names], dtype=float)]


def fit(r, model="GARCH(1,1)", dist="normal", options=None, X=None, starts=()) -> FitResult:
    """Estimate ``model`` with shocks ``dist`` on returns ``r`` by maximum likelihood.

    ``X`` are the regressors (one row per return, one column per regressor; columns named in
    the option ``xvar=`` enter the variance, the others the mean), None for none.  ``starts``:
    further full parameter vectors (in the order of the fit's ``names``) to try beside the usual
    starting points, e.g. the estimate on the previous window of a rolling re-estimation (warm
    starts); each candidate is ranked by its log-likelihood as the others are.
    """
    spec = model if isinstance(model, ModelSpec) else parse_model(model)
    dist = dist if isinstance(dist, Distribution) else get_distribution(dist)
    options = options if isinstance(options, Options) else parse_options(options)
    spec = layout(spec, X, options.xvar)
    r = _clean_returns(r, spec)
    lik = Likelihood(r, spec, dist, options.presample, X)
    problem = _Problem(lik, options)
    # check fixed values against the domain
    for n, v in options.fixed_dict.items():
        if n in dist.param_names:
            eta = dist.start().copy()
            eta[dist.param_names.index(n)] = v
            dist.check(eta)
        elif n in spec.variance_names:
            spec.family.check_fixed(n, v)
    spec.family.check_fixed_set(options.fixed_dict)  # fixed weights that together leave no admissible model
    lik.mean.check_fixed(options.fixed_dict)  # an AR part made non-stationary, an MA part non-invertible
    extra = _without_in_mean(r, spec, dist, options, X, lik) if spec.in_mean else []
    extra = list(extra) + [np.asarray(t, dtype=float) for t in starts if len(t) == lik.k]
    best = _run(problem, r, _start_candidates(problem, r, extra))
    if best[0] > -_PENALTY / 2 and not (math.isfinite(best[3]) and best[3] < _DECREMENT_TOL):
        # not converged: the optimiser restarted from its own end, with a fresh memory (L-BFGS-B
        # can stop on a relative reduction far from the maximum: CGARCH-skewt on SP500, 2.4 short)
        again = _run(problem, r, [problem.full(best[1])])
        if again[0] >= best[0] - 1e-9:
            best = again
    n_free = len(problem.free)
    off_bound = None  # a held fit whose persistence is not the bound (re-checked below)
    if spec.family.holds_at_bound and best[0] > -_PENALTY / 2:
        pers = persistence_of(spec, dist, problem.full(best[1]))
        first_ok = math.isfinite(best[3]) and best[3] < _DECREMENT_TOL
        # (not when the weight the bound would imply is fixed: the fit cannot be held there)
        implied_fixed = spec.family.sum_rule(dist.start(), dist)[0] in options.fixed_dict
        if pers is not None and not implied_fixed and (pers > 1.0 - 1e-3 or (pers > 0.9 and not first_ok)):
            # the maximum lies on the stationarity bound: maximise on the bound itself, persistence
            # one (so the fit is the integrated model's and never scores below it), with the
            # implied weight set at every trial point from the moments at that point's shape
            eta = problem.full(best[1])[lik.k - len(dist.param_names):]
            held = _Problem(lik, options, sum_to=_HELD, eta=eta)
            t0 = problem.full(best[1])
            alt = _run(held, r, [t0] + _start_candidates(held, r)[:2])
            if alt[0] >= best[0] - 1e-9 and not _off_edge_gains(held, alt[1]):
                problem, best = held, alt
                pers = persistence_of(spec, dist, problem.full(best[1]))
                if pers is None or not abs(pers - _HELD) < _HELD_TOL:
                    off_bound = pers
    if best[0] > -_PENALTY / 2 and not (math.isfinite(best[3]) and best[3] < _DECREMENT_TOL):
        # not converged: a maximum pressed against an edge of the admissible region (GJR's
        # alpha + gamma >= 0, FIGARCH's positivity conditions) is the maximum on that edge
        on_edge = _edge_fit(problem, best, r)
        if on_edge is not None:
            problem, best = on_edge
            off_bound = None
    ll, u, H, dec, active, res, steps = best
    if not problem.admissible(problem.full(u)):
        ll = -_PENALTY  # the best point is outside the region (every start was): no estimate
    if not ll > -_PENALTY / 2:
        raise ConvergenceError(
            f"no admissible estimate of {spec.canonical} with {dist.name} shocks was found from the starting points tried"
        )
    converged = bool(math.isfinite(dec) and dec < _DECREMENT_TOL) and off_bound is None
    gradient_only = False
    kinks = None
    if not converged and off_bound is None:
        kinks = _kink_maximum(problem, u, H, active)
        converged = kinks is not None
    if not converged and not math.isfinite(dec) and off_bound is None:
        # the Hessian is not negative definite (a flat or kinked likelihood): use the score
        # (LM) statistic g' (G'G)^-1 g with the outer product of the scores as the metric
        _, G = problem.scores_free(u)
        g = G.sum(axis=0)
        fr = ~active
        try:
            lm = float(g[fr] @ np.linalg.solve(G[:, fr].T @ G[:, fr], g[fr]))
        except np.linalg.LinAlgError:
            lm = math.inf
        gradient_only = converged = bool(lm < _DECREMENT_TOL)
        dec = lm
    theta = problem.full(u)
    status = list(problem.status)
    for col, i in enumerate(problem.free):
        if active[col]:
            status[i] = "bound"
    if converged:
        if gradient_only:
            msg = (f"converged by the score test ({dec:.1e}) after {res.nit} quasi-Newton iterations; the Hessian "
                   f"is not negative definite there, so some parameters may be poorly identified")
        else:
            kind = getattr(res, "method", "quasi-Newton")
            msg = f"converged: {res.nit} {kind} iterations and {steps} Newton steps; Newton decrement {dec:.1e}"
        if kinks:
            msg = (f"converged at a kink of the log-likelihood in {', '.join(lik.names[problem.free[c]] for c in kinks)} "
                   f"(a residual at zero; the slopes either side fall away from the estimate, and the other "
                   f"parameters' Newton decrement is below {_DECREMENT_TOL:g}) after {res.nit} iterations")
        held_names = [lik.names[problem.free[c]] for c in np.flatnonzero(active)]
        held_names += [name if words is None else f"{name} (on the edge {words})" for name, _, _, words in problem.edges]
        if held_names:
            msg += "; at a bound: " + ", ".join(held_names)
        if problem.sum_to is not None and not spec.family.integrated:
            msg += (f"; persistence held at the stationarity bound 1: the data favour an integrated variance, so "
                    f"this is the IGARCH-type fit ({lik.names[problem.implied]} implied by the other weights; "
                    f"no unconditional variance or half-life)")
    elif off_bound is not None:
        msg = (f"NOT converged: the fit held at the stationarity bound ends with persistence {off_bound!s}, "
               f"not 1; the estimates are not the maximum on the bound")
    else:
        msg = (f"NOT converged: {_optimiser_words(res.message)}; Newton decrement {dec:.2g} (tolerance "
               f"{_DECREMENT_TOL:g}): the log-likelihood may still rise; try other starting values (fix a "
               "parameter), another model, or more data")
    se, cov = _std_errors(problem, u, H, active, options.se)
    return FitResult(
        spec=spec, dist=dist, options=options, names=lik.names, params=theta, std_errors=se,
        status=tuple(status), loglik=ll, nobs=lik.nobs, n_free=int(n_free),
        converged=converged, message=msg, cov=cov,
    )


def _edge_fit(problem: _Problem, best, r):
    """(problem, best) of the fit held on the edges of the admissible region the estimate ``best``
    presses against (:meth:`VarianceFamily.edges`), when that fit converges, scores at least as
    much and gains nothing by stepping off each edge into the region; else None."""
    lik, spec, options = problem.lik, problem.spec, problem.options
    theta = problem.full(best[1])
    rule_names = set()
    if problem.implied is not None:
        rule_names.add(lik.names[problem.implied])
    usable, near, taken = [], [], set()
    for edge in spec.family.edges():
        name, weights, const, _ = edge
        if problem.status[lik.idx[name]] != "free" or rule_names & set(weights):
            continue
        usable.append(edge)
        vals = [w * theta[lik.idx[n]] for n, w in weights.items()]
        if name not in taken and sum(vals) - const < 1e-3 * max(1.0, sum(abs(v) for v in vals)):
            near.append(edge)
            taken.add(name)
    # box bounds the estimate presses against are edges too (p >= lo, -p >= -hi): a maximum with
    # a weight at 0 where the others still move (GARCH(1,2)'s beta[2]) is the maximum there
    scales, bounds = _scale_and_bounds(problem, r)
    for col, i in enumerate(problem.free):
        name, (lo, hi), sc = lik.names[i], bounds[col], scales[col]
        if name in taken or lik.names[i] in rule_names:
            continue
        if lo is not None and theta[i] - lo < 1e-2 * sc:
            near.append((name, {name: 1.0}, float(lo), None))
            taken.add(name)
        elif hi is not None and hi - theta[i] < 1e-2 * sc:
            near.append((name, {name: -1.0}, -float(hi), None))
            taken.add(name)
    # the edges the estimate presses against together, then each of the family's edges alone (the
    # optimiser may have stalled away from the edge the maximum lies on)
    sets = ([near] if near else []) + [[e] for e in usable if [e] != near]
    if not sets:
        return None
    eta = theta[lik.k - len(problem.dist.param_names):]
    sums = [problem.sum_to]
    if spec.family.holds_at_bound:  # on the stationarity bound and off it
        pers = persistence_of(spec, problem.dist, theta)
        sums = [None] + ([_HELD] if pers is not None and pers > 0.9 else [])
    found = None
    for edges in sets[:4]:
        for total in sums:
            try:
                edged = _Problem(lik, options, sum_to=total, eta=eta, edges=edges)
            except InputError:
                continue
            alt = _run(edged, r, [theta] + _start_candidates(edged, r)[:2])
            if not (math.isfinite(alt[3]) and alt[3] < _DECREMENT_TOL and alt[0] >= best[0] - 1e-9):
                continue
            if total is not None and not spec.family.integrated:
                pers = persistence_of(spec, problem.dist, edged.full(alt[1]))
                if pers is None or not abs(pers - total) < _HELD_TOL:
                    continue
            if not _off_edge_gains(edged, alt[1]) and (found is None or alt[0] > found[1][0]):
                found = (edged, alt)
    return found


def _off_edge_gains(edged: _Problem, u) -> bool:
    """True if one step off an edge into the admissible region (the implied parameter moved, the
    others kept) raises the log-likelihood: then the edge does not hold the maximum.  The
    stationarity bound of a fit held there is such an edge (its implied weight lowered)."""
    lik = edged.lik
    t = edged.full(u)
    f0 = lik.loglik(t)
    eta = t[lik.k - len(edged.dist.param_names):]
    held = edged.sum_to is not None
    moves = [(lik.idx[name], weights[name], held) for name, weights, _, _ in edged.edges]
    if held and not edged.family.integrated:
        moves.append((edged.implied, -1.0, False))
    for j, sign, on_bound in moves:
        step = t.copy()
        step[j] += math.copysign(1e-5 * max(abs(t[j]), 1e-2), sign)
        if edged.family.admissible(step[lik._vs], eta, edged.dist, held=on_bound) \
                and lik.loglik(step) > f0 + 1e-9:
            return True
    return False


def _kink_maximum(problem: _Problem, u, H, active):
    """The free parameters (columns) along which the log-likelihood has a kink with its maximum
    on it, when the Newton test fails there only; else None.

    A likelihood with |e| in it (EGARCH's news |z|) has a kink along the mean parameters wherever
    a residual is zero, and its maximum may sit on one: the gradient does not vanish there and no
    Newton step polishes it.  A kink shows as a jump between the one-sided slopes that does not
    shrink with the step (a smooth curvature's does); at a maximum on it the slopes point back
    to the estimate (rising on the left, falling on the right), and the Newton decrement of the
    other parameters is below the tolerance.
    """
    fr = np.flatnonzero(~active)
    if H is None or not np.all(np.isfinite(H)) or len(fr) == 0:
        return None
    f0 = -problem.negll(u)
    g = -problem.fun_grad(u)[1]

    def slopes(j, h):
        step = np.zeros(len(u))
        step[j] = h
        return (f0 + problem.negll(u - step)) / h, (-problem.negll(u + step) - f0) / h

    kinked = []
    for j in fr:
        h = problem.steps[j]
        left1, right1 = slopes(j, h)
        left, right = slopes(j, h / 4.0)
        noise = 1e-12 * max(1.0, abs(f0)) / (h / 4.0)  # rounding of the log-likelihood over the step
        if left - right > max(0.5 * (left1 - right1), 10.0 * noise):
            if right > noise or left < -noise:
                return None  # the log-likelihood still rises on one side
            kinked.append(int(j))
    if not kinked:
        return None
    rest = [int(j) for j in fr if j not in kinked]
    if rest:
        try:
            L = np.linalg.cholesky(-H[np.ix_(rest, rest)])
        except np.linalg.LinAlgError:
            return None
        if not float(g[rest] @ np.linalg.solve(L.T, np.linalg.solve(L, g[rest]))) < _DECREMENT_TOL:
            return None
    return kinked


def _needs_kink_check(problem: _Problem, closed: bool) -> bool:
    """Whether the standard errors look for kinks along the mean parameters: where the law has
    one (GED, skewed t), and where the recursion has one (EGARCH, APARCH) and the Hessian is
    differenced; a closed form holds between the kinks and a likelihood smooth in the residuals
    has none."""
    if not problem.dist.smooth:
        return True
    return not (closed or problem.family.smooth_in_residuals)


def _across_kinks(problem: _Problem, u, active, G, clean=False):
    """Columns of mean parameters whose curvature is a kink's, recomputed across the kink: a
    dict {free column: its column of the Hessian}, empty where there is none.

    A residual at (or next to) zero puts a kink, or a cusp, in the log-likelihood along the mean
    parameters where it reads |z| (EGARCH's news, GED shocks of shape near 1): a difference of the
    gradient over a step of 1e-5 then measures the jump of the slope over that step, not the
    curvature that carries the sampling variation, and its standard error comes out many times
    too small.  Such a column shows as a curvature that moves with the step (a smooth one agrees
    to many digits at two steps ten times apart); it is replaced by central differences of the
    gradient over one standard error (the outer product of the scores ``G``'), the scale on
    which the estimate varies, so the kink is averaged over as the expected information averages
    over it.

    With ``clean=True`` (a Hessian that would otherwise be differenced at wider steps) the other
    mean columns come back too, Richardson-extrapolated from the check's own two steps h and 10 h,
    (100 D(h) - D(10 h)) / 99: a span the check found free of kinks, where a wider stencil would
    catch the kinks of residuals further from zero, each a jump of the slope over the step, and
    scatter the standard error (see :func:`_std_errors`).
    """
    lik = problem.lik
    mean = set(lik.spec.mean_names)
    cols = [c for c, i in enumerate(problem.free) if lik.names[i] in mean and not active[c]]
    if not cols:
        return {}

    def grad(v):
        f, g = problem.fun_grad(v)
        return None if f >= _PENALTY / 2 else -g

    def curvature(j, h):
        up, dn = u.copy(), u.copy()
        up[j] += h
        dn[j] -= h
        gu, gd = grad(up), grad(dn)
        return None if gu is None or gd is None else (gu - gd) / (2 * h)

    kinked, out = [], {}
    for j in cols:
        a, b = curvature(j, problem.steps[j]), curvature(j, 10 * problem.steps[j])
        if a is not None and b is not None and abs(a[j] - b[j]) > 0.01 * max(abs(a[j]), abs(b[j])):
            kinked.append(j)
        elif clean and a is not None and b is not None:
            out[j] = (100.0 * a - b) / 99.0
    if not kinked:
        return out
    fr = np.flatnonzero(~active)
    try:
        opg = np.linalg.inv(G[:, fr].T @ G[:, fr])
    except np.linalg.LinAlgError:
        return out
    for j in kinked:
        k = int(np.flatnonzero(fr == j)[0])
        h = math.sqrt(opg[k, k]) if opg[k, k] > 0 else 1e3 * problem.steps[j]
        col = curvature(j, h)
        if col is not None:
            out[j] = col
    return out


def _std_errors(problem: _Problem, u, H, active, kind: str):
    """Standard errors and covariance of the full vector at the estimate u: the inverse of the
    negative Hessian ('hessian'), of the outer product of the scores ('opg'), or the sandwich
    of both ('robust').  The Hessian is recomputed at u to full accuracy (closed form, or
    Richardson differences of the analytic gradient); ``H``, the optimiser's last one, serves
    only where the gradient itself is numerical.

    Where the recursion kinks the likelihood along the mean parameters (EGARCH's news |z|) and
    the closed form exists, it serves in every column, the mean parameters' included: it holds
    between the kinks and leaves out the jumps of the slope where a residual crosses zero, whose
    sum has mean zero (each jump is weighted by the next variance's score, of mean zero given the
    past), so it estimates the information consistently.  A difference of the gradient over a
    step wide enough to catch some of those kinks does not: in 300 simulated EGARCH(1,1)-t
    samples of 2,500 returns (benchmarks/egarch_mean_se.py) the standard error of mu so
    differenced scattered 8 (Hessian kind) to 40 (robust) times as widely across samples as the
    closed form's (up to 20 times the sampling spread, and twice no positive-definite Hessian),
    while the closed form's median matched the spread of the estimates.  The kink check below still runs where the law
    itself has a kink (GED, skewed t) or the Hessian is differenced.
    """
    k = problem.lik.k
    se = np.full(k, np.nan)
    fr = ~active
    if H is None or not np.all(np.isfinite(H)):
        return se, None
    closed = problem.exact_hessian or (bool(problem.kinked_columns) and kind != "opg")
    if problem.exact_hessian:
        last = getattr(problem, "last_second", None)
        if last is not None and np.array_equal(last[0], u):
            _, _, G, H = last  # the optimiser's last pass was at the estimate
        else:
            _, G, H = problem.second(u)
    elif closed:  # between the kinks, in every column
        _, G, H = problem.second(u)
    else:
        _, G = problem.scores_free(u)
    across = {}
    differenced = not closed and problem.analytic and kind != "opg"  # Richardson, of the analytic gradient
    if _needs_kink_check(problem, closed):
        # mean parameters on a kink: curvature over one SE (the check costs four gradients);
        # a Hessian differenced here takes the check's clean columns too
        across = _across_kinks(problem, u, active, G, clean=differenced)
    if differenced:
        H = problem.hessian(u, accurate=True, skip=across)
    if across:
        H = H.copy()
        for j, col in across.items():
            H[:, j] = col
            H[j, :] = col
    if not np.all(np.isfinite(H)):
        return se, None
    every = bool(fr.all())  # no parameter at a bound: the whole matrices, not copies of them
    G = G if every else G[:, fr]
    Hf = H if every else H[np.ix_(fr, fr)]
    try:
        Hinv = np.linalg.inv(-Hf)
        if kind == "hessian":
            V = Hinv
        elif kind == "opg":
            V = np.linalg.inv(G.T @ G)
        else:
            V = Hinv @ (G.T @ G) @ Hinv
    except np.linalg.LinAlgError:
        return se, None
    if every and problem.identity:
        Vfull = V  # the free parameters are the full vector (A is the identity)
    else:
        A = problem.jacobian(problem.full(u))[:, fr]
        Vfull = A @ V @ A.T
    d = np.diag(Vfull)
    ok = d > 0
    se[ok] = np.sqrt(d[ok])
    for i, s in enumerate(problem.status):
        if s in ("fixed", "target", "bound"):  # 'bound': held on an edge of the region
            se[i] = np.nan
    for col, i in enumerate(problem.free):
        if active[col]:
            se[i] = np.nan
    return se, Vfull


def evaluate(r, spec: ModelSpec, dist: Distribution, names, params, options: Options | None = None, X=None,
             rows=None) -> FitResult:
    """A FitResult for given parameters on returns r: log-likelihood, no estimation, no standard
    errors.  ``X``: the regressors, one row per return (as :func:`fit` takes them); ``rows``:
    each return's row number, for messages."""
    options = options or Options()
    r = np.asarray(r, dtype=float)
    spec = layout(spec, X, options.xvar)
    lik = Likelihood(r, spec, dist, options.presample, X)
    check_params(spec, dist, names, params)
    theta = np.array([dict(zip(names, params))[n] for n in lik.names], dtype=float)
    check_intercept(lik, theta, rows)
    ll = lik.loglik(theta)
    nfree = len(lik.names)
    return FitResult(
        spec=spec, dist=dist, options=options, names=lik.names, params=theta,
        std_errors=np.full(lik.k, np.nan), status=tuple(["given"] * lik.k), loglik=ll, nobs=lik.nobs,
        n_free=nfree, converged=True, message="parameters given, not estimated", estimated=False,
    )


def free_scores(r, fit: FitResult):
    """Per-observation scores of the log-likelihood in the free parameters at ``fit.params``.

    Returns (names of the free parameters, scores nobs x n_free): the estimator's own scores
    (analytic for the families linear in lagged squares, central differences otherwise).  The
    free parameters are the ones the estimator moves, so not those the options fix, a sum rule
    implies or variance targeting sets; a parameter whose ``fit.status`` is ``'bound'`` (held
    at a box bound) is left out too, and a fit held at the stationarity bound (a weight
    ``'implied'`` in a family that is not integrated, or parameters whose persistence is the
    held value 1, as a fit table shows them) keeps that weight implied.
    """
    r = np.asarray(r, dtype=float)
    lik = Likelihood(r, fit.spec, fit.dist, fit.options.presample)
    fam = fit.spec.family
    theta = np.array([fit.param_dict[n] for n in lik.names], dtype=float)
    held = not fam.integrated and ("implied" in fit.status or (
        fam.holds_at_bound and abs((persistence_of(fit.spec, fit.dist, theta) or 0.0) - _HELD) < _HELD_TOL))
    eta = theta[lik.k - len(fit.dist.param_names):]
    problem = _Problem(lik, fit.options, sum_to=_HELD if held else None, eta=eta)
    scales, _ = _scale_and_bounds(problem, r)
    problem.steps = 1e-5 * scales
    _, G = problem.scores_free(theta[problem.free])
    keep = [c for c, i in enumerate(problem.free) if fit.status[i] != "bound"]
    return tuple(lik.names[problem.free[c]] for c in keep), G[:, keep]
