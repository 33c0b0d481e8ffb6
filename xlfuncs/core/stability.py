"""Parameter constancy: the Nyblom (1989) test in the form of Hansen (1992).

At the maximum-likelihood estimate, let f[t] be the per-observation scores (the derivative of
observation t's log-likelihood term in the m free parameters), S[t] = f[1] + ... + f[t] their
cumulative sums (S[n] = 0 at an interior maximum) and V = sum_t f[t] f[t]' their outer product,
the information matrix estimate Hansen (1992) uses.  Then

* for parameter i alone: L_i = sum_t S_i[t]^2 / (n V_ii);
* for all of them jointly: L_c = (1/n) sum_t S[t]' V^-1 S[t].

Under constant parameters L_i converges to the integral of a squared Brownian bridge and L_c
to the integral of the squared norm of an m-dimensional one; large values say the scores drift,
i.e. the parameter moved during the sample.  The 5% critical values are those of Hansen (1992),
Table 1 (asymptotic, by simulation), as recalled from memory: 0.470 for one parameter (every
individual test), and for the joint test the value of the row m = number of parameters tested
(:data:`HANSEN_5PCT`, m = 1..20; the table stops there, so beyond it the critical value is
left blank).  ``tests/test_stability.py`` checks the table against the limiting distribution.

The statistic is defined at the maximum of the likelihood on the same returns.  Parameters
given rather than estimated are used as they are, provided they are the maximum: the score
statistic S[n]' V^-1 S[n] (0 at an interior maximum; about d^2 for parameters d standard
errors away) must stay below :data:`MAX_SCORE_STAT`, or the test is refused.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError

__all__ = ["HANSEN_5PCT", "INDIVIDUAL_5PCT", "MAX_SCORE_STAT", "Stability", "nyblom", "stability"]

#: Hansen (1992), Table 1: asymptotic 5% critical values of L_c by the number of parameters
#: (from memory; the m = 1 value is the individual tests')
HANSEN_5PCT = {1: 0.470, 2: 0.749, 3: 1.01, 4: 1.24, 5: 1.47, 6: 1.68, 7: 1.90, 8: 2.11, 9: 2.32, 10: 2.54,
               11: 2.75, 12: 2.96, 13: 3.15, 14: 3.34, 15: 3.54, 16: 3.75, 17: 3.95, 18: 4.14, 19: 4.33,
               20: 4.52}
INDIVIDUAL_5PCT = HANSEN_5PCT[1]
#: the largest score statistic S[n]' V^-1 S[n] accepted as "at the maximum" (parameters
#: within about 0.1 standard error of it)
MAX_SCORE_STAT = 0.01


@dataclass
class Stability:
    """Nyblom-Hansen statistics of one fit."""

    names: tuple  # the free parameters tested
    statistics: np.ndarray  # L_i, one per name (nan where the scores do not vary)
    joint: float  # L_c (nan where V is singular)
    crit_individual: float
    crit_joint: float | None  # None beyond Hansen's table
    nobs: int
    score_stat: float  # S[n]' V^-1 S[n]: 0 at an interior maximum
    estimated: bool  # False for parameters typed rather than estimated
    at_bound: tuple = ()  # estimated parameters left out because they sit on a bound

    @property
    def reject(self) -> np.ndarray:
        return self.statistics > self.crit_individual

    @property
    def joint_reject(self) -> bool | None:
        if self.crit_joint is None or not math.isfinite(self.joint):
            return None
        return bool(self.joint > self.crit_joint)


def nyblom(scores):
    """(L_i per column, L_c, S[n]' V^-1 S[n]) from per-observation scores, rows = observations.

    V = sum_t f[t] f[t]' (Hansen 1992).  A column with no variation gives nan for its L_i; a
    singular V gives nan for L_c and the score statistic.
    """
    f = np.asarray(scores, dtype=float)
    if f.ndim != 2 or f.shape[0] < 2 or f.shape[1] < 1:
        raise InputError(f"the stability test needs scores of at least two observations, got shape {f.shape}")
    n, m = f.shape
    S = np.cumsum(f, axis=0)
    V = f.T @ f
    d = np.diag(V)
    with np.errstate(divide="ignore", invalid="ignore"):
        ind = np.where(d > 0, np.sum(S * S, axis=0) / (n * np.where(d > 0, d, 1.0)), np.nan)
    try:
        L = np.linalg.cholesky(V)
        ok = np.min(np.abs(np.diag(L))) > 1e-10 * np.max(np.abs(np.diag(L)))
    except np.linalg.LinAlgError:
        ok = False
    if not ok:
        return ind, math.nan, math.nan
    W = np.linalg.solve(L, S.T)  # L^-1 S[t]: ||.||^2 = S' V^-1 S
    quad = np.sum(W * W, axis=0)
    return ind, float(np.sum(quad) / n), float(quad[-1])


def stability(r, fit) -> Stability:
    """The Nyblom-Hansen test of ``fit`` (a :class:`~xlfuncs.core.estimate.FitResult`) on returns ``r``.

    The scores come from the estimator (:func:`~xlfuncs.core.estimate.free_scores`): only the
    free parameters are tested; those held at a box bound (``fit.status`` ``'bound'``) are left
    out and listed in ``at_bound``.  Raises :class:`InputError` when nothing is left to test or
    the parameters are not the maximum of the likelihood on ``r``.
    """
    from .estimate import free_scores

    r = np.asarray(r, dtype=float)
    if all(n in fit.options.fixed_dict for n in fit.names):
        raise InputError("every parameter of the fit is fixed by its options; the stability test needs "
                         "estimated parameters")
    names, G = free_scores(r, fit)
    at_bound = tuple(n for n, s in zip(fit.names, fit.status) if s == "bound")
    if not names:
        raise InputError("no parameter is left to test: every estimated parameter sits on a bound")
    if not np.all(np.isfinite(G)):
        raise InputError("the scores are not finite at these parameters (a variance reached zero); "
                         "the stability test needs a fit whose likelihood is finite")
    ind, joint, score_stat = nyblom(G)
    if math.isfinite(score_stat) and score_stat > MAX_SCORE_STAT:
        raise InputError(
            f"the fit's parameters are not the maximum of the likelihood on these returns (score statistic "
            f"{score_stat:.3g}; it is 0 at the maximum), and the stability test is defined there: pass the "
            f"table VOLFIT estimated on these returns"
            + ("" if fit.converged else " (this fit did not converge)")
        )
    m = len(names)
    return Stability(names=tuple(names), statistics=ind, joint=joint, crit_individual=INDIVIDUAL_5PCT,
                     crit_joint=HANSEN_5PCT.get(m), nobs=int(G.shape[0]), score_stat=score_stat,
                     estimated=bool(fit.estimated), at_bound=at_bound)
