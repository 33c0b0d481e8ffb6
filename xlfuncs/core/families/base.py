"""The protocol every variance family follows.

A family is a class; an instance is the family at given orders (``Garch(1, 1)``).  As in
``scipy.stats``, the public methods check what they are given and then call a private hook
(``persistence`` calls ``_persistence``) that may assume clean input; a family overrides the
hooks only.  Shared mathematics lives in private helpers (:mod:`._linear` for the recursions
linear in lagged squares).

The variance parameters ``vp`` are always the family's slice of the full parameter vector, in
the order of :attr:`VarianceFamily.param_names`; ``eta`` are the distribution's parameters and
``dist`` the :class:`~xlfuncs.core.distributions.Distribution` (families whose figures depend on
the shocks' distribution read it, the others ignore it).

| hook | what the family says |
| --- | --- |
| ``_names`` | parameter names for its orders |
| ``_box`` | optimiser scale and box bounds per parameter |
| ``_check`` | typed-in parameters outside the domain: raise with a message a user can act on |
| ``_admissible`` | the estimator's admissible region (positivity, stationarity) |
| ``_variance`` | the conditional variances on the likelihood positions |
| ``_derivatives``, ``_forward``, ``_adjoint`` | analytic scores and gradient (``analytic`` families) |
| ``_persistence``, ``_uncond_variance``, ``_half_life`` | the fit table's summary figures |
| ``_forecast`` | the h-step variance forecasts from the end of the sample |
| ``_moment_horizon`` | the last step whose E[sigma2^power] exists, and why not beyond (default: all exist) |
| ``_sim_start``, ``_sim_continue``, ``_sim_variance``, ``_sim_push`` | one simulation step at a time |
| ``_news_impact`` | next period's variance against this period's shock |
| ``_long_run``, ``_long_run_forecast`` | the long-run component, in sample and ahead (component models only) |
| ``_starts``, ``_target``, ``_sum_rule``, ``_hold``, ``_edges`` | what the estimator needs: start values, variance targeting, the implied weight, the linear edges of the admissible region |
| ``_filter_start`` (and optionally a faster ``_filter``) | the recursion one observation at a time, for a mean that reads sigma[t] (GARCH-in-mean) |
| ``_bad_shift`` | where an intercept series (variance regressors) leaves the family's domain (``takes_shift`` families) |
| ``_window_forecasts`` | the one-step variance after each of many windows of one residual series, without re-filtering each (``window_forecasts`` families) |

Intercept series (variance regressors).  A family with ``takes_shift = True`` adds a series
``shift`` (one value per likelihood position, or per forecast step) to the intercept of its
recursion: to omega for the families linear in lagged squares, to the log-variance's omega for
EGARCH.  Its hooks ``_variance``, ``_derivatives``, ``_forward``, ``_forecast`` and
``_sim_variance`` then take a keyword ``shift``, and ``_derivatives`` and ``_adjoint`` a keyword
``dshift`` (the shift's derivatives in its own parameters, one row each, appended after the
family's rows).  The keywords are passed only when there is a series, so a family without
them keeps its plain hooks; asked for one anyway, it answers with an :class:`InputError`.

One observation at a time.  :meth:`VarianceFamily.filter` runs the recursion forward while the
caller computes each residual from that period's variance (GARCH-in-mean: the residual depends
on sigma[t], which depends on the residuals before it).  The default runs the simulation hooks
on one path from the state ``_filter_start`` gives; a family may override ``_filter`` with a
tighter loop.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError, describe_value

__all__ = ["VarianceFamily", "History", "stationary", "UNIT_TOL"]

#: a persistence within this of one is one: a fit held on the stationarity bound sums its weights
#: to one, and a floating-point sum may land an ulp below; such a model has no unconditional
#: variance and no half-life
UNIT_TOL = 1e-12


def stationary(coefs) -> bool:
    """True if 1 - sum c_i L^i has all roots outside the unit circle."""
    c = np.asarray(coefs, dtype=float)
    if c.size == 0:
        return True
    if c.size == 1:
        return abs(c[0]) < 1.0
    roots = np.roots(np.concatenate([[1.0], -c]))  # z^n - c1 z^(n-1) - ... ; need |z| < 1
    return bool(np.all(np.abs(roots) < 1.0))


class History:
    """The end of a sample as a variance recursion saw it.

    ``e`` are the residuals on the positions the recursion read (lags included), ``s2`` the
    conditional variances on the likelihood positions, and ``s0`` how many leading residuals
    served as lags only (``presample=drop``), so that ``e[s0:]`` lines up with ``s2``.
    """

    __slots__ = ("e", "s2", "s0")

    def __init__(self, e, s2, s0: int = 0):
        self.e = np.asarray(e, dtype=float)
        self.s2 = np.asarray(s2, dtype=float)
        self.s0 = int(s0)
        if len(self.e) - self.s0 != len(self.s2):
            raise ValueError(f"history: {len(self.e)} residuals less {self.s0} lags do not match {len(self.s2)} variances")


class VarianceFamily:
    """Base class of the variance families; see the module docstring for the hooks."""

    #: what :attr:`ModelSpec.variance` holds for this family (lower case)
    key: str = ""
    #: model-string words (upper case, the first is the canonical spelling); none for the
    #: constant variance, which is the absence of a variance part
    words: tuple = ()
    #: how many orders the word takes: 0 (``EWMA``), 1 (``ARCH(p)``) or 2 (``GARCH(p,q)``)
    n_orders: int = 2
    #: the orders of the bare word
    default_orders: tuple = (1, 1)
    #: parameter-name stems the family brings, and which of them carry an index
    stems: tuple = ()
    indexed: tuple = ()
    #: the variance moves with the data (False only for the constant variance)
    varies: bool = True
    #: analytic derivatives through the recursion (``_derivatives``, ``_forward``, ``_adjoint``)
    analytic: bool = False
    #: the fewest ARCH terms (the first order) a model string of this family may give
    min_arch_terms: int = 0
    #: how much harder one estimation is than a linear family's with as many parameters (the
    #: worksheet bounds weigh candidates by it; measured by benchmarks/bounds_timing.py)
    cost_weight: int = 1
    #: the same for its in-mean (-M) models (None: ``cost_weight``), which run the recursion one
    #: observation at a time with numerical derivatives whatever the family's own derivatives
    in_mean_cost_weight: int | None = None
    #: the most parameters a worksheet call estimates for this family (None: the general bound)
    max_fit_params: int | None = None
    #: ... and for its in-mean (-M) models, whose recursion runs one observation at a time with
    #: numerical derivatives (None: the in-mean bound)
    max_in_mean_fit_params: int | None = None
    #: multi-step variance forecasts by seeded simulation (no closed form)
    simulated_forecast: bool = False
    #: the recursion is in the log of the variance, so omega may take any sign
    log_variance: bool = False
    #: the gradient by the adjoint of the recursion (else the likelihood sums the forward scores)
    has_adjoint: bool = False
    #: the second derivatives of sum_t w_t sigma2_t by the adjoint (``_second``), for the
    #: likelihood's analytic Hessian (else the estimator differentiates the analytic gradient)
    has_second: bool = False
    #: the recursion reads the distribution's parameters (EGARCH's E|z|): :meth:`second_pass`
    #: passes them to ``_second_pass``, and D and the second derivatives have their rows
    second_reads_shape: bool = False
    #: the closed-form second derivatives (``has_second``) hold between the kinks that the
    #: recursion's |e| puts along the mean parameters (EGARCH's news |z|), which they leave out:
    #: the Newton steps difference the analytic gradient along those parameters instead (and keep
    #: the bookkeeping for a maximum on a kink); the standard errors take the closed form
    second_between_kinks: bool = False
    #: the weights are held to sum to one, the last one implied (IGARCH)
    integrated: bool = False
    #: a maximum on the stationarity bound is re-estimated there with the persistence held at one
    holds_at_bound: bool = False
    #: the parameter variance targeting implies (``target=yes``), or None where it does not apply
    targeted: str | None = None
    #: fresh simulated paths need a burn-in to forget their start
    burn_in: bool = True
    #: the variance has a long-run (permanent) component of its own (``_long_run``)
    has_long_run: bool = False
    #: the recursion adds a per-observation series to its intercept (variance regressors)
    takes_shift: bool = False
    #: ``_window_forecasts`` gives, for many windows of one residual series, the variance the
    #: recursion run on each window alone gives one step after it, without re-filtering each
    #: window (a walk-forward evaluation asks; the others re-filter every window)
    window_forecasts: bool = False
    #: the recursion reads the residuals only through their squares (the GJR term 1(e<0) e^2
    #: included: its slope is continuous), so it puts no kink in the log-likelihood along the
    #: mean parameters where a residual crosses zero (EGARCH's |z| and APARCH's |e|^delta do)
    smooth_in_residuals: bool = False

    def __init__(self, p: int = 0, q: int = 0):
        self.p = int(p)
        self.q = int(q)
        self._param_names = tuple(self._names())
        self.n_params = len(self._param_names)

    # ------------------------------------------------------------------ model strings
    @classmethod
    def resolve(cls, word: str, orders: tuple) -> tuple:
        """(key, p, q) for the word with these orders; ValueError saying why they are not allowed.

        A family may hand a degenerate order to another (``GARCH(p,0)`` is ``ARCH(p)``).
        """
        p = orders[0] if len(orders) > 0 else 0
        q = orders[1] if len(orders) > 1 else 0
        if p < cls.min_arch_terms:
            raise ValueError(f"{word} needs at least one ARCH term (its first order must be 1 or more)")
        return cls._resolve(word, p, q)

    @classmethod
    def _resolve(cls, word, p, q):
        return cls.key, p, q

    @classmethod
    def read_orders(cls, word: str, args: str | None):
        """The orders in the parentheses after the word (``args``: upper case, no spaces; None
        for the bare word), or None to read them as :attr:`n_orders` whole numbers.  A family
        whose orders are not all numbers (``FIGARCH(1,d,1)``) reads its own text here and
        raises ValueError saying what it expects."""
        return None

    @property
    def canonical(self) -> str:
        """The variance part of a canonical model string: ``GARCH(1,1)``, ``ARCH(2)``, ``EWMA``."""
        if not self.words:
            return ""
        word = self.words[0]
        if self.n_orders == 0:
            return word
        if self.n_orders == 1:
            return f"{word}({self.p})"
        return f"{word}({self.p},{self.q})"

    @property
    def param_names(self) -> tuple:
        return self._param_names

    @property
    def arch_lags(self) -> int:
        """Lagged shocks the recursion reads (the observations ``presample=drop`` keeps as lags)."""
        return self.p if self.varies else 0

    @property
    def garch_lags(self) -> int:
        """Lagged variances the recursion reads."""
        return self.q if self.varies else 0

    @property
    def diagnostic_order(self) -> int:
        """The variance model's order that the Ljung-Box test on squared residuals allows for."""
        return self.p + self.q if self.varies else 0

    def __repr__(self) -> str:  # pragma: no cover - convenience
        return f"{type(self).__name__}({self.p}, {self.q})"

    # ------------------------------------------------------------------ checks
    def _vp(self, vp) -> np.ndarray:
        vp = np.asarray(vp, dtype=float)
        if vp.shape != (self.n_params,):
            raise ValueError(f"{self.canonical or 'constant variance'} takes {self.n_params} variance parameters "
                             f"({', '.join(self.param_names)}), got {vp.size}")
        return vp

    def _named(self, vp) -> dict:
        return dict(zip(self.param_names, (float(v) for v in vp)))

    def check(self, vp, eta=(), dist=None) -> None:
        """Raise InputError if given parameters lie outside the model's domain (typed fit tables)."""
        vp = self._vp(vp)
        for n, v in zip(self.param_names, vp):
            if not math.isfinite(v):
                raise InputError(f"parameter {n} must be a finite number, got {describe_value(v)}")
        self._check(self._named(vp), np.asarray(eta, dtype=float), dist)

    def _check(self, d, eta, dist):
        pass

    def check_fixed(self, name: str, value: float) -> None:
        """Raise InputError if a value fixed in the options lies outside the parameter's domain."""
        if name not in self.param_names:
            raise ValueError(f"{name} is not a parameter of {self.canonical}")
        self._check_fixed(name, float(value))

    def _check_fixed(self, name, value):
        pass

    def check_fixed_set(self, fixed: dict) -> None:
        """Raise InputError if the values fixed in the options, together, leave no admissible
        model (fixed weights whose persistence alone reaches the stationarity bound); ``fixed``
        maps names to values, each already checked alone by :meth:`check_fixed`."""
        self._check_fixed_set({n: float(v) for n, v in fixed.items() if n in self.param_names})

    def _check_fixed_set(self, fixed):
        pass

    def admissible(self, vp, eta=(), dist=None, held: bool = False) -> bool:
        """True inside the estimator's region; ``held``: the weights are held by a sum rule."""
        return bool(self._admissible(self._vp(vp), np.asarray(eta, dtype=float), dist, held))

    def _admissible(self, vp, eta, dist, held):
        return True

    def box(self, var: float) -> list:
        """(scale, (lower, upper)) for each parameter, given the returns' variance ``var``."""
        out = list(self._box(float(var)))
        if len(out) != self.n_params:  # pragma: no cover - a family's own error
            raise ValueError(f"{type(self).__name__}._box gave {len(out)} entries for {self.n_params} parameters")
        return out

    def _box(self, var):
        return [(1.0, (None, None))] * self.n_params

    # ------------------------------------------------------------------ the recursion
    def _shift_kw(self, shift, length: int | None = None, what: str = "shift") -> dict:
        """The keyword a hook takes for an intercept series (none without one)."""
        if shift is None:
            return {}
        if not self.takes_shift:
            raise InputError(f"variance regressors (xvar=) add to omega, which {self.canonical or 'a constant variance'} "
                             "does not take")
        shift = np.asarray(shift, dtype=float)
        if length is not None and shift.shape != (length,):
            raise ValueError(f"{what} must hold {length} values, one per variance, got shape {shift.shape}")
        return {"shift": shift}

    def _lik_length(self, n: int, presample: str) -> int:
        return n - (self.arch_lags if presample == "drop" else 0)

    def variance(self, vp, e, presample: str = "mean", eta=(), dist=None, shift=None) -> np.ndarray:
        """Conditional variances on the likelihood positions from the residuals ``e``.

        ``presample=mean``: every residual position is a likelihood position, lags before
        the start at the mean squared residual; ``drop``: the first :attr:`arch_lags`
        residuals are lags only.  ``shift`` (one value per likelihood position) is added to
        the recursion's intercept (``takes_shift`` families).
        """
        if presample not in ("mean", "drop"):
            raise ValueError(f"presample must be mean or drop, got {presample}")
        e = np.asarray(e, dtype=float)
        kw = self._shift_kw(shift, self._lik_length(len(e), presample))
        return self._variance(self._vp(vp), e, presample, eta, dist, **kw)

    def _variance(self, vp, e, presample, eta, dist):  # pragma: no cover - every family has one
        raise NotImplementedError

    def derivatives(self, vp, e, de, presample: str = "mean", eta=(), dist=None, shift=None, dshift=None):
        """(sigma2, D): D stacks d sigma2 / d (mean parameters, then variance parameters, then
        the shift's parameters), one row each, given the residuals' derivatives ``de`` (mean
        parameters x residuals) and the shift's ``dshift`` (its parameters x variances).  A
        family whose recursion reads the distribution's parameters ``eta`` (EGARCH, through
        E|z|) adds their rows last; the others stop before them and the likelihood takes the
        distribution's rows as zero."""
        if not self.analytic:
            raise NotImplementedError(f"{self.canonical} has no analytic derivatives")
        e = np.asarray(e, dtype=float)
        kw = self._shift_kw(shift, self._lik_length(len(e), presample))
        if kw:
            kw["dshift"] = np.asarray(dshift, dtype=float)
        return self._derivatives(self._vp(vp), e, np.asarray(de, dtype=float), presample,
                                 np.asarray(eta, dtype=float), dist, **kw)

    def forward(self, vp, e, presample: str = "mean", shift=None, eta=(), dist=None):
        """The recursion's state for :meth:`adjoint`; ``state.sig2`` holds the variances.  The
        shape parameters reach only a family whose recursion reads them (:attr:`second_reads_shape`)."""
        if not self.has_adjoint:
            raise NotImplementedError(f"{self.canonical} has no adjoint gradient")
        kw = self._shift_kw(shift, self._lik_length(len(e), presample))
        if self.second_reads_shape:
            kw["eta"] = np.asarray(eta, dtype=float)
            kw["dist"] = dist
        return self._forward(self._vp(vp), e, presample, **kw)

    def adjoint(self, state, w, de, gm, dshift=None):
        """Gradient of sum_t w_t sigma2_t in the variance parameters (then the shift's parameters
        when ``dshift`` is given, then the distribution's where the recursion reads them:
        :attr:`second_reads_shape`); adds the mean parameters' part to ``gm`` in place (``de``:
        the residuals' derivatives)."""
        if dshift is None:
            return self._adjoint(state, w, de, gm)
        return self._adjoint(state, w, de, gm, dshift=np.asarray(dshift, dtype=float))

    def second_pass(self, vp, e, de, presample: str = "mean", shift=None, dshift=None, eta=(), dist=None):
        """(state, D): the forward derivatives D as :meth:`derivatives` gives them, and the
        recursion's state (``state.sig2`` the variances) that :meth:`second` reads.  A family
        whose recursion reads the shape parameters (:attr:`second_reads_shape`) is given them and
        adds their rows to D, which :meth:`second` then covers too."""
        if not self.has_second:
            raise NotImplementedError(f"{self.canonical} has no analytic second derivatives")
        kw = self._shift_kw(shift, self._lik_length(len(e), presample))
        if kw:
            kw["dshift"] = np.asarray(dshift, dtype=float)
        if self.second_reads_shape:
            kw["eta"] = np.asarray(eta, dtype=float)
            kw["dist"] = dist
        return self._second_pass(self._vp(vp), np.asarray(e, dtype=float), np.asarray(de, dtype=float), presample, **kw)

    def second(self, state, D, de, w, residual_weights: bool = True):
        """sum_t w_t d2 sigma2_t / d(mean, variance, shift parameters)^2 for weights ``w`` on the
        state of :meth:`second_pass` (``D`` its forward derivatives, ``de`` the residuals'), as
        (S, ce): S with the residuals' second derivatives left out, and their weights ce (None
        without mean parameters), the whole being S + sum_s ce_s d2 e_s / d(mean)^2.
        ``residual_weights=False`` where the residuals are linear in the mean parameters (no
        d2 e): ce is then not computed and comes back as None."""
        if not self.has_second:
            raise NotImplementedError(f"{self.canonical} has no analytic second derivatives")
        if not residual_weights:
            return self._second(state, D, de, np.asarray(w, dtype=float), residual_weights=False)
        return self._second(state, D, de, np.asarray(w, dtype=float))

    def bad_shift(self, vp, shift) -> np.ndarray:
        """Where the intercept plus ``shift`` leaves the family's domain (a boolean per value;
        all False for a recursion in the log of the variance)."""
        self._shift_kw(shift)
        return np.asarray(self._bad_shift(self._vp(vp), np.asarray(shift, dtype=float)), dtype=bool)

    def _bad_shift(self, vp, shift):
        return np.zeros(shift.shape, dtype=bool)

    # ------------------------------------------------------------------ many windows at once
    def window_forecast(self, vp, e, starts, ends, presample: str = "mean", shift=None) -> np.ndarray:
        """For each window ``e[starts[k]:ends[k]]`` of the residual series ``e``, the variance at
        position ``ends[k]`` that :meth:`variance` run on that window alone (its own presample)
        and then one step more gives: the one-step forecast after the window, the same number as
        re-filtering the window, up to rounding.  ``shift`` (``takes_shift`` families) is the
        intercept series on every residual position of ``e``; each ``ends[k]`` must be a position
        of ``e`` (the residual there is not read).  Only for ``window_forecasts`` families."""
        if not self.window_forecasts:
            raise NotImplementedError(f"{self.canonical} re-filters each window")
        if presample not in ("mean", "drop"):
            raise ValueError(f"presample must be mean or drop, got {presample}")
        e = np.asarray(e, dtype=float)
        starts = np.asarray(starts, dtype=int)
        ends = np.asarray(ends, dtype=int)
        s0 = self.arch_lags if presample == "drop" else 0
        if starts.shape != ends.shape or np.any(starts < 0) or np.any(ends >= len(e)) or np.any(ends - starts <= s0):
            raise ValueError("windows must lie inside the residual series, each ending before its last position "
                             "and longer than the lags it drops")
        kw = self._shift_kw(shift, len(e))
        return self._window_forecasts(self._vp(vp), e, starts, ends, presample, **kw)

    def _window_forecasts(self, vp, e, starts, ends, presample):  # pragma: no cover - window_forecasts families
        raise NotImplementedError

    # ------------------------------------------------------------------ one observation at a time
    def filter(self, vp, u, step, presample: str = "mean", eta=(), dist=None, shift=None):
        """Residuals and variances computed jointly, one observation at a time.

        ``u`` are the residuals of the mean without the term that reads the variance (on the
        residual positions); they fix the presample exactly as :meth:`variance` fixes it from
        residuals ``u`` (the mean squared residual, and so on), so that when ``step`` returns
        ``u[t]`` the result is ``(u, variance(vp, u, presample))``.  ``step(t, s2)`` returns the
        residual at position ``t`` given its conditional variance ``s2``; at the positions that
        ``presample=drop`` keeps as lags only, ``s2`` is the presample level mean(u^2).
        Returns ``(e, sigma2)``: residuals on every position, variances on the likelihood
        positions; nan variances where the recursion leaves its domain.
        """
        if presample not in ("mean", "drop"):
            raise ValueError(f"presample must be mean or drop, got {presample}")
        u = np.asarray(u, dtype=float)
        kw = self._shift_kw(shift, self._lik_length(len(u), presample))
        return self._filter(self._vp(vp), u, step, presample, np.asarray(eta, dtype=float), dist, **kw)

    def _filter_begin(self, vp, u, step, presample, eta, dist):
        """The lag-only positions and the start of a one-observation filter: (residuals as a list,
        their first ``s0`` filled by ``step`` at the presample level mean(u^2), ``s0``, the state
        :meth:`_filter_start` gives)."""
        n = len(u)
        s0 = self.arch_lags if presample == "drop" else 0
        level = float(np.mean(u * u))
        e = [0.0] * n
        for t in range(s0):
            e[t] = float(step(t, level))
        return e, s0, self._filter_start(vp, eta, dist, u, e[:s0], presample)

    def _filter(self, vp, u, step, presample, eta, dist, shift=None):
        """The generic loop: the simulation hooks on one path from ``_filter_start``'s state."""
        n = len(u)
        e, s0, state = self._filter_begin(vp, u, step, presample, eta, dist)
        e = np.asarray(e)
        out = np.empty(n - s0)
        kw = {}
        for t in range(s0, n):
            if shift is not None:
                kw["shift"] = float(shift[t - s0])
            s2 = float(self._sim_variance(state, vp, eta, dist, **kw))
            if not (s2 > 0.0 and math.isfinite(s2)):
                return np.full(n, np.nan), np.full(n - s0, np.nan)
            et = float(step(t, s2))
            e[t] = et
            out[t - s0] = s2
            self._sim_push(state, et, et / math.sqrt(s2), s2)
        return e, out

    def _filter_start(self, vp, eta, dist, u, e_lags, presample):
        """The simulation state before the first likelihood position, in the presample convention
        of ``_variance`` applied to residuals ``u`` (the presample moments come from ``u``); under
        ``presample=drop`` ``e_lags`` are the residuals kept as lags only."""
        raise InputError(f"GARCH-in-mean (-M) is not available for {self.canonical} yet")

    # ------------------------------------------------------------------ summary figures
    def persistence(self, vp, eta=(), dist=None) -> float | None:
        """Sum of the recursion's own-lag weights; None where the variance does not move."""
        return self._persistence(self._vp(vp), np.asarray(eta, dtype=float), dist)

    def _persistence(self, vp, eta, dist):
        return None

    def uncond_variance(self, vp, eta=(), dist=None) -> float | None:
        """E[sigma^2]; None where undefined."""
        return self._uncond_variance(self._vp(vp), np.asarray(eta, dtype=float), dist)

    def _uncond_variance(self, vp, eta, dist):
        return None

    def half_life(self, vp, eta=(), dist=None) -> float | None:
        """Periods for a variance shock to halve, ln(1/2) / ln(persistence); None where undefined."""
        return self._half_life(self._vp(vp), np.asarray(eta, dtype=float), dist)

    def _half_life(self, vp, eta, dist):
        pers = self._persistence(vp, eta, dist)
        if pers is None or not (0.0 < pers < 1.0 - UNIT_TOL):
            return None
        return math.log(0.5) / math.log(pers)

    # ------------------------------------------------------------------ forecasts
    def forecast(self, vp, eta, dist, history: History, horizon: int, rng=None, paths: int = 0, shift=None):
        """(variance forecasts for steps 1..horizon, simulated?) from the end of the sample.

        Families without a closed form average ``paths`` simulated paths drawn from ``rng``.
        ``shift`` (one value per step) is the intercept series of the future periods.
        """
        if not isinstance(history, History):
            raise TypeError("history must be a History")
        H = int(horizon)
        if H < 1:
            raise ValueError(f"horizon must be 1 or more, got {horizon}")
        kw = self._shift_kw(shift, H, "the future shift")
        return self._forecast(self._vp(vp), np.asarray(eta, dtype=float), dist, history, H, rng, paths, **kw)

    def _forecast(self, vp, eta, dist, history, H, rng, paths):  # pragma: no cover
        raise NotImplementedError

    def moment_horizon(self, vp, eta, dist, horizon: int, power: float = 1.0):
        """(steps, why): E_T[(sigma2_{T+h})^power] is finite for h <= steps and infinite beyond,
        for the forecast from the end of any sample; ``why`` says so in a user's words (None
        when every step's expectation exists, the default).  ``power=1`` is the variance
        forecast, ``power=0.5`` E[sigma], which the expected shortfall needs.  A known
        intercept series (variance regressors) moves no moment's existence, so none is asked."""
        H = int(horizon)
        if H < 1:
            raise ValueError(f"horizon must be 1 or more, got {horizon}")
        return self._moment_horizon(self._vp(vp), np.asarray(eta, dtype=float), dist, H, float(power))

    def _moment_horizon(self, vp, eta, dist, H, power):
        return H, None

    def _simulated_forecast(self, vp, eta, dist, history, H, rng, paths, shift=None):
        """The mean over simulated paths of each step's variance (for families with no closed form)."""
        state = self._sim_continue(vp, eta, dist, history)
        out = np.empty(H)
        for h in range(H):
            z = dist.rvs(paths, eta, rng)
            kw = {} if shift is None else {"shift": shift[h]}
            s2 = self._sim_variance(state, vp, eta, dist, **kw)
            out[h] = float(np.mean(s2))
            self._sim_push(state, np.sqrt(s2) * z, z, s2)
        return out

    # ------------------------------------------------------------------ simulation
    #: the family can run whole simulated paths in one compiled pass (:meth:`sim_sums`)
    compiled_paths = False

    def sim_sums(self, state, vp, Y, score_map, mu, phi=None, theta=None, r_lags=None, e_lags=None):
        """(cum, a_last, s_last) of the paths that continue ``state`` (from :meth:`sim_continue`)
        with the normal scores ``Y`` (a row per step) mapped to shocks by ``score_map``
        (``Distribution.normal_scores``) and the mean r = mu + sum phi_i r[t-i] + sum theta_j e[t-j]
        + e, the terms added in that order: ``phi`` and ``theta`` the AR and MA coefficients (None
        or empty for a constant mean), ``r_lags`` the last len(phi) returns of the sample and
        ``e_lags`` its last len(theta) residuals (newest last; :func:`arma_lags`).  The sum of the
        returns, the sum before the last step plus the last step's mean, and the last step's
        volatility, as :meth:`sim_step` step by step gives them, in one compiled pass of the
        family's own kernel (``compiled_paths`` families).  None where there is no such pass: the
        caller then simulates step by step."""
        return None

    def sim_start(self, vp, eta, dist, paths: int):
        """The state of ``paths`` fresh paths before their first period."""
        return self._sim_start(self._vp(vp), np.asarray(eta, dtype=float), dist, int(paths))

    def sim_continue(self, vp, eta, dist, history: History):
        """The state of paths that continue the sample ``history``."""
        if not isinstance(history, History):
            raise TypeError("history must be a History")
        return self._sim_continue(self._vp(vp), np.asarray(eta, dtype=float), dist, history)

    def sim_step(self, state, vp, eta, dist, z, shift=None):
        """One period: (variance, shock) with standardised draws ``z``; the state moves on.
        ``shift`` is this period's addition to the intercept (variance regressors)."""
        vp = self._vp(vp)
        eta = np.asarray(eta, dtype=float)
        kw = {} if shift is None else self._shift_kw(float(shift))
        s2 = self._sim_variance(state, vp, eta, dist, **kw)
        e = np.sqrt(s2) * z
        self._sim_push(state, e, z, s2)
        return s2, e

    def _sim_start(self, vp, eta, dist, paths):  # pragma: no cover
        raise NotImplementedError

    def _sim_continue(self, vp, eta, dist, history):  # pragma: no cover
        raise NotImplementedError

    def _sim_variance(self, state, vp, eta, dist):  # pragma: no cover
        raise NotImplementedError

    def _sim_push(self, state, e, z, s2):  # pragma: no cover
        raise NotImplementedError

    # ------------------------------------------------------------------ news impact
    def news_impact(self, vp, eta, dist, shocks) -> np.ndarray:
        """Next period's variance as a function of this period's shock (Engle & Ng 1993)."""
        return self._news_impact(self._vp(vp), np.asarray(eta, dtype=float), dist, np.asarray(shocks, dtype=float))

    def _news_impact(self, vp, eta, dist, e):  # pragma: no cover
        raise NotImplementedError

    # ------------------------------------------------------------------ long-run component
    def long_run(self, vp, e, presample: str = "mean", eta=(), dist=None):
        """The long-run component of the variance on the likelihood positions (aligned with
        :meth:`variance`); None where the family has none."""
        if not self.has_long_run:
            return None
        if presample not in ("mean", "drop"):
            raise ValueError(f"presample must be mean or drop, got {presample}")
        return self._long_run(self._vp(vp), np.asarray(e, dtype=float), presample, np.asarray(eta, dtype=float), dist)

    def long_run_forecast(self, vp, eta, dist, history: History, horizon: int):
        """Forecasts of the long-run component for steps 1..horizon from the end of the sample;
        None where the family has none."""
        if not self.has_long_run:
            return None
        if not isinstance(history, History):
            raise TypeError("history must be a History")
        H = int(horizon)
        if H < 1:
            raise ValueError(f"horizon must be 1 or more, got {horizon}")
        return self._long_run_forecast(self._vp(vp), np.asarray(eta, dtype=float), dist, history, H)

    def _long_run(self, vp, e, presample, eta, dist):  # pragma: no cover - has_long_run families have one
        raise NotImplementedError

    def _long_run_forecast(self, vp, eta, dist, history, H):  # pragma: no cover
        raise NotImplementedError

    # ------------------------------------------------------------------ for the estimator
    def starts(self, v: float) -> list:
        """Starting points (variance parameter vectors) for residuals of mean square ``v``."""
        return [np.asarray(s, dtype=float) for s in self._starts(float(v))]

    def _starts(self, v):  # pragma: no cover
        raise NotImplementedError

    def target(self, vp, vbar: float, eta=(), dist=None) -> None:
        """Variance targeting: set the targeted parameter in ``vp`` (in place) so that the
        unconditional variance is ``vbar``."""
        if self.targeted is None:
            raise InputError(f"options: target=yes does not apply to {self.canonical}")
        self._target(vp, float(vbar), np.asarray(eta, dtype=float), dist)

    def _target(self, vp, vbar, eta, dist):  # pragma: no cover
        raise NotImplementedError

    def sum_rule(self, eta=(), dist=None):
        """(implied parameter, {parameter: weight}) of the rule sum weight * parameter = constant
        that IGARCH imposes and that holds a fit on the stationarity bound; None where none applies.

        A family whose persistence is not linear in its parameters gives (implied parameter, None)
        and sets the implied parameter itself (:meth:`hold`)."""
        return self._sum_rule(np.asarray(eta, dtype=float), dist)

    def _sum_rule(self, eta, dist):
        return None

    def edges(self) -> list:
        """The linear edges of the admissible region (besides the box bounds and the stationarity
        bound) on which a maximum may lie: one (implied parameter, {parameter: weight}, constant,
        words) per condition sum_i weight_i p_i >= constant.  On the edge the estimator holds the
        equality, the implied parameter solved from the others; ``words`` state the condition for
        the fit's message.  Default: none."""
        return list(self._edges())

    def _edges(self):
        return []

    def hold(self, vp, total: float, eta=(), dist=None) -> np.ndarray:
        """For a sum rule given without weights: set the implied parameter in ``vp`` (in place) so
        that the persistence is ``total``; returns its derivatives in the variance parameters, then
        the distribution's (zero at itself)."""
        return self._hold(vp, float(total), np.asarray(eta, dtype=float), dist)

    def _hold(self, vp, total, eta, dist):  # pragma: no cover - families with a nonlinear rule only
        raise NotImplementedError


def arma_lags(phi, theta, r_lags, e_lags):
    """(phi, theta, r0, u0) as the path kernels take them: float arrays, the lags newest last, empty
    for a constant mean (one entry per coefficient)."""
    def arr(x):
        return np.ascontiguousarray(np.zeros(0) if x is None else np.asarray(x, dtype=float).reshape(-1))

    phi, theta, r0, u0 = arr(phi), arr(theta), arr(r_lags), arr(e_lags)
    if len(r0) != len(phi) or len(u0) != len(theta):
        raise ValueError("the mean's lags must match its coefficients")
    return phi, theta, r0, u0
