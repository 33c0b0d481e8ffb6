"""How much work one worksheet call may ask for: every bound in one place.

A worksheet call answers in about ten seconds or refuses with an ``ERROR:`` cell that names the
bound.  The figures beside each bound are CPU seconds from ``benchmarks/bounds_timing.py`` on 2,500
simulated returns, on a 2-core machine shared with other work, where the same case varied by up to
about half from run to run (the README's "Bounds" lists them).  The command line is not bounded
here: ``volcast fit``, ``backtest`` and ``batch`` take any model the model string allows.

Time grows with the number of returns; the bounds are set for about 2,500 (ten years of daily
data).
"""

from __future__ import annotations

from ..core.errors import InputError
from ..core.families import FAMILIES
from ..core.families.egarch import Egarch

__all__ = [
    "BoundError", "FIT_PARAMS", "EGARCH_FIT_PARAMS", "IN_MEAN_FIT_PARAMS", "IN_MEAN_LAGS", "COMPARE_CANDIDATES",
    "COMPARE_WORK",
    "EGARCH_WEIGHT", "IN_MEAN_WEIGHT",
    "BACKTEST_WORK",
    "SIM_PERIODS", "SIM_PATHS",
    "SIM_CELLS", "SIM_DRAWS", "weight", "check_fit", "check_compare", "check_backtest", "check_sim", "check_draws",
]

#: parameters (mean, variance and distribution together) of a model a worksheet call estimates;
#: the slowest allowed measured 1.6-1.8 s (ARMA(6,6)-GARCH(1,1), 16); past it ARMA(12,12)-GARCH(1,1)
#: (28) took 6-8 s and ARMA(12,12)-GARCH(12,12) (50) 8.6 s, and cost grows with the returns
FIT_PARAMS = 16
#: the same for EGARCH, whose compiled recursion gives the gradient and Hessian: the slowest
#: 10-parameter fit measured about 0.9 s (AR(2)-EGARCH(2,1), t shocks); past it MA(2)-EGARCH(2,2)-ged
#: (11) 2.6-3.2 s, not converged (benchmarks/bounds_timing.py)
EGARCH_FIT_PARAMS = Egarch.max_fit_params  # 10, kept with the family
#: the same for an in-mean model (-M), whose residuals and variances run together one observation
#: at a time in Python with numerical derivatives: 8-parameter fits measured 1.7-4.3 s
#: (GJR-GARCH(1,1)-M skewt, ARMA(1,1)-GARCH(1,1)-M t), ARCH(2)-M skewt (7) 5.4-7.8 s; past it
#: ARMA(1,1)-GJR-GARCH(1,1)-M skewt (10) 5-11 s; an in-mean EGARCH keeps the 6 EGARCH had before its
#: recursion was compiled (``Egarch.max_in_mean_fit_params``; EGARCH(1,1)-M normal: 4.3-6.4 s)
IN_MEAN_FIT_PARAMS = 8
#: variance lags (ARCH plus GARCH orders) of an in-mean model a worksheet call estimates: past (1,1)
#: an over-fitted variance makes the numerical search slow -- 7-8 parameter fits measured 10-37 s
#: (GARCH(2,2)-M t, GJR-GARCH(2,1)-M t, GARCH(1,3)-M normal), where ARCH(2)-M skewt took 5.4 s
IN_MEAN_LAGS = 2
#: VOLCOMPARE candidates (models x distributions) in one call: 24 of the usual kind took 1.2 s,
#: 60 took 5.4 s
COMPARE_CANDIDATES = 24
#: VOLCOMPARE's work in units: a candidate with k parameters weighs k x k, an EGARCH one
#: EGARCH_WEIGHT x k x k.  The templates' comparison (GARCH, GJR-GARCH and EGARCH, normal and t)
#: weighs 285; 7 models of 16 parameters (1,792) took 5.0 s; six 10-parameter EGARCH models (1,800)
#: are refused (benchmarks/bounds_timing.py has the figures)
COMPARE_WORK = 1_700
EGARCH_WEIGHT = Egarch.cost_weight  # 3, kept with the family
#: an in-mean candidate weighs k x k x (its family's weight + IN_MEAN_WEIGHT): GARCH(1,1)-M t (396
#: units) took 0.4-1.0 s, GJR-GARCH(1,1)-M skewt (704) 1.7-2.5 s, EGARCH(1,1)-M normal (1,260)
#: 4.3-6.4 s; GARCH(1,1)-M and GJR-GARCH(1,1)-M x normal, t (1,606) 2.1-2.7 s
IN_MEAN_WEIGHT = 10
#: VOLBACKTEST's work in the units of COMPARE_WORK: each estimation weighs its returns times the
#: model's weight; for an EGARCH model each forecast also weighs window x (2 + p + q) / 2 for
#: evaluating the model and paths x (3 + p + q) / 100 for its simulated one-step variance.
#: Measured: 500 GARCH(1,1) estimations on 500 returns (4,000,000) 3.8-4.1 s; 16 EGARCH(1,1)
#: estimations on 500 returns with 500 forecasts (6,000,000) 7.3-12 s; 1,200 forecasts of an
#: EGARCH(12,12) table on 250 returns (10,380,000) 11.4 s
BACKTEST_WORK = 5_000_000
#: VOLSIM periods (the simulation steps one period at a time): 25,000 periods took at most 6.4 s
#: (GJR-GARCH(12,12)); 100,000 took 4.0 s for GARCH(1,1) and 23 s for GJR-GARCH(12,12)
SIM_PERIODS = 25_000
#: VOLSIM paths (columns)
SIM_PATHS = 10_000
#: VOLSIM cells, periods x paths: 1,000 x 1,000 took at most 0.7 s
SIM_CELLS = 1_000_000
#: simulated draws (paths x horizon) behind VOLRISK beyond one period and VOLFORECAST of an EGARCH
#: model; 1,000,000 paths x 20 periods took 0.8 s for GARCH(1,1), 2.7 s for EGARCH(1,1) and
#: 5.5-10 s for EGARCH(12,12) (VOLRISK; 54 s at 100 periods)
SIM_DRAWS = 20_000_000


class BoundError(InputError):
    """A worksheet call asked for more work than a bound allows; the message names the bound."""


def _n_params(spec, dist) -> int:
    return len(spec.param_names) + len(dist.param_names)


def check_fit(spec, dist) -> None:
    """A model a worksheet call may estimate: at most FIT_PARAMS parameters (EGARCH_FIT_PARAMS,
    IN_MEAN_FIT_PARAMS; an in-mean model at most IN_MEAN_LAGS variance lags)."""
    k = _n_params(spec, dist)
    special = spec.family.max_fit_params
    limit = FIT_PARAMS if special is None else min(special, FIT_PARAMS)
    if spec.in_mean and IN_MEAN_FIT_PARAMS < limit:
        special, limit = IN_MEAN_FIT_PARAMS, IN_MEAN_FIT_PARAMS
    in_mean_special = spec.family.max_in_mean_fit_params
    if spec.in_mean and in_mean_special is not None and in_mean_special < limit:
        special = limit = in_mean_special  # the family's own in-mean bound, named after the family below
    lags = spec.family.arch_lags + spec.family.garch_lags
    if spec.in_mean and lags > IN_MEAN_LAGS:
        raise BoundError(f"{spec.canonical} has {lags} variance lags; a worksheet call estimates in-mean (-M) models "
                         f"with at most {IN_MEAN_LAGS} (e.g. GARCH(1,1)-M), whose numerical search can otherwise take "
                         "well over ten seconds; fit it with the volcast fit command instead")
    if k > limit:
        if spec.in_mean and limit == IN_MEAN_FIT_PARAMS:
            kind = "in-mean (-M) models"
        else:
            kind = f"{spec.variance_canonical.split('(')[0]} models" if special is not None else "models"
        raise BoundError(f"{spec.canonical} with {dist.name} shocks has {k} parameters; a worksheet call estimates "
                         f"{kind} of at most {limit} (a larger one can take well over ten seconds); "
                         "fit it with the volcast fit command instead")


def weight(spec, dist) -> int:
    """The work units of estimating one candidate: k x k times its family's ``cost_weight`` (EGARCH 3),
    and for an in-mean model k x k times its family's ``in_mean_cost_weight`` (EGARCH 25; else the
    ``cost_weight``) plus IN_MEAN_WEIGHT."""
    k = _n_params(spec, dist)
    fam = spec.family
    if spec.in_mean:  # a family may weigh its in-mean models apart (EGARCH: by differences, as before)
        own = fam.in_mean_cost_weight if fam.in_mean_cost_weight is not None else fam.cost_weight
        return k * k * (own + IN_MEAN_WEIGHT)
    return k * k * fam.cost_weight


def check_compare(n: int, candidates) -> None:
    """One VOLCOMPARE call: ``n`` candidates, of which ``candidates`` (spec, dist) parse."""
    if n > COMPARE_CANDIDATES:
        raise BoundError(f"models x dist gives {n} candidates; at most {COMPARE_CANDIDATES} in one call "
                         "(split the comparison over several cells)")
    work = sum(weight(spec, dist) for spec, dist in candidates)
    if work > COMPARE_WORK:
        heavy = {}  # the families weighed more than k x k, as many as there are among the candidates
        for spec, _ in candidates:
            if spec.family.cost_weight > 1:
                heavy[spec.family.words[0]] = heavy.get(spec.family.words[0], 0) + 1
        in_mean = sum(1 for spec, _ in candidates if spec.in_mean)
        if in_mean:
            heavy["in-mean"] = in_mean
        among = f" ({', '.join(f'{n} {word}' for word, n in heavy.items())} among them)" if heavy else ""
        weights = ", ".join(f"{cls.words[0]} {cls.cost_weight} x k x k" for cls in FAMILIES.values() if cls.cost_weight > 1)
        if in_mean:
            weights += f", and an in-mean model {IN_MEAN_WEIGHT} x k x k more"
        raise BoundError(f"the candidates weigh {work:,} units of work{among}; at most "
                         f"{COMPARE_WORK:,} in one call, about ten seconds (a model with k parameters weighs k x k, "
                         f"except {weights}); split the comparison over several cells")


def check_backtest(spec, dist, n: int, window: int, scheme: str, refit: int, estimating: bool, paths: int) -> None:
    """The work of one VOLBACKTEST call on ``n`` returns (``paths``: of the EGARCH forecasts)."""
    steps = max(n - window, 0)
    estimations = evaluations = draws = 0
    if estimating:
        check_fit(spec, dist)
        starts = range(0, steps, max(refit, 1))
        estimations = sum(window if scheme == "rolling" else window + i for i in starts) * weight(spec, dist)
    looped = spec.family.simulated_forecast or spec.in_mean  # recursions in a loop
    if looped:
        lags = spec.p + spec.q
        evaluations = sum((window if scheme == "rolling" else window + i) for i in range(steps)) * (2 + lags) // 2
    if spec.family.simulated_forecast:  # forecasts by simulation
        draws = steps * paths * (3 + lags) // 100
    work = estimations + evaluations + draws
    if work > BACKTEST_WORK:
        parts = f"estimations {estimations:,}"
        if spec.family.simulated_forecast:
            parts += f", {spec.family.words[0]} evaluations {evaluations:,}, simulated draws {draws:,}"
        elif looped:
            parts += f", in-mean evaluations {evaluations:,}"
        raise BoundError(f"this backtest weighs {work:,} units of work ({parts}); a worksheet call does at most "
                         f"{BACKTEST_WORK:,}, about ten seconds; raise refit=, shorten the window or the returns, "
                         "lower paths=, or run volcast backtest")


def check_sim(periods: int, paths: int) -> None:
    """VOLSIM's cells (its periods and paths are read as whole numbers up to SIM_PERIODS, SIM_PATHS)."""
    if periods * paths > SIM_CELLS:
        raise BoundError(f"periods x paths is {periods * paths:,} cells; at most {SIM_CELLS:,}")


def check_draws(paths: int, horizon: int, what: str) -> None:
    """A simulation of ``paths`` paths over ``horizon`` periods behind ``what``."""
    if paths * horizon > SIM_DRAWS:
        raise BoundError(f"{what} simulates {paths:,} paths x {horizon} periods = {paths * horizon:,} draws; at most "
                         f"{SIM_DRAWS:,} in a worksheet call (lower paths= in the fit's options or the horizon)")
