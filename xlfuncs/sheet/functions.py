"""The worksheet functions: Excel-shaped values in, lists of rows out, never an exception.

| function | returns |
| --- | --- |
| ``VOLFIT(returns, [model], [dist], [options], [regressors])`` | the fit table |
| ``VOLSERIES(returns, fit, [what], [regressors])`` | one value per return row: variance, vol, resid, stdresid or longrun |
| ``VOLFORECAST(returns, fit, horizon, [what], [regressors], [future])`` | ``horizon`` rows: variance, vol, cumvar, cumvol, mean, longrun or table |
| ``VOLLOGLIK(returns, fit, [regressors])`` | the log-likelihood of the returns at the fit's parameters |
| ``VOLTESTS``, ``VOLSTABILITY``, ``VOLDM`` | residual diagnostics, parameter constancy, equal forecast loss, each row with a reading |
| ``VOLRISK``, ``VOLCOVERAGE``, ``VOLBACKTEST`` | VaR and ES; their coverage and ES backtests |

``regressors`` is a range with one column per regressor and one row per returns row (the rows
line up with the returns; option ``xvar=k,m`` sends columns k and m to the variance);
``future`` holds the regressors' values over the forecast steps, one row per step.

>>> table = VOLFIT([[0.5], [-1.2], [0.3], [0.9], [-0.4], [1.5], [-2.1], [0.2], [0.1], [-0.6],
...                 [0.8], [-0.3], [1.1], [-0.9], [0.4], [0.0], [-1.4], [0.7], [0.2], [-0.2]], "CONST")
>>> table[1]
['model', 'CONST', None, None, None]
>>> VOLFORECAST([[1], [2]], "not a table", 3)
[['ERROR: fit is not a fit table; pass the range VOLFIT returns, or a table with rows model, dist and the parameters']]
"""

from __future__ import annotations

import dataclasses
import math
import re

import numpy as np

from ..core.distributions import get_distribution
from ..core.estimate import evaluate, fit as core_fit, persistence_of
from ..core.forecast import MAX_HORIZON, forecast as core_forecast, in_sample, long_run_in_sample, require_long_run
from ..core.spec import check_return_units, parse_model, parse_options
from .cache import FIT_CACHE
from ..core.diagnostics import MIN_OBS as MIN_TEST_OBS, default_lags, max_lags, run_tests
from ..core.backtest import backtest as core_backtest, check_length
from ..core.coverage import coverage as core_coverage, news_impact
from ..core.comparison import MIN_PAIRS as DM_MIN_PAIRS, diebold_mariano, max_lags as dm_max_lags
from ..core.esbacktest import es_tests as core_es_tests
from ..core import readings
from ..core.stability import stability as core_stability
from ..core.errors import VolcastError
from ..core.forecast import DEFAULT_PATHS, DEFAULT_SEED
from ..core.simulate import simulate
from ..core.mean import layout, regressor_list
from .cells import (SheetError, as_rows, describe, excerpt, float_arg, future_block, int_arg, is_blank, is_error_text,
                    regressors_block, returns_column, sheet_function, shown, text_arg)
from .bounds import (SIM_PATHS, SIM_PERIODS, check_backtest, check_compare, check_draws, check_fit,
                     check_sim)
from .fittable import decode, encode

__all__ = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK", "VOLTESTS", "VOLRISK", "VOLCOMPARE",
           "VOLCOVERAGE", "VOLSIM", "VOLNEWS", "VOLBACKTEST", "VOLSTABILITY", "VOLDM", "fit_from_cells"]

_SERIES_WHAT = ("variance", "vol", "resid", "stdresid", "longrun")
_FORECAST_WHAT = ("variance", "vol", "cumvar", "cumvol", "mean", "longrun", "table")


def _choice(value, arg, choices, default):
    s = text_arg(value, arg, default)
    s = s.lower()
    if s not in choices:
        raise SheetError(f'{arg} must be one of {", ".join(choices)}; got {shown(s)}')
    return s


def fit_from_cells(returns, model=None, dist=None, options=None, bounded=True, regressors=None):
    """Clean the arguments of VOLFIT and return (FitResult, Returns), using the fit cache.

    ``bounded``: refuse a model larger than a worksheet call estimates (``bounds.check_fit``);
    the command line passes False.  ``regressors``: the range of regressors beside the returns.
    """
    spec = parse_model(text_arg(model, "model"))
    dname = text_arg(dist, "dist", "normal")
    d = get_distribution(dname)
    if bounded:
        check_fit(spec, d)
    opts = parse_options(text_arg(options, "options"))
    data = returns_column(returns, "returns", opts.missing)
    check_return_units(data.values, opts.returns)
    X = regressors_block(regressors, data)
    if X is None and opts.xvar:
        raise SheetError(f"options: xvar={','.join(map(str, opts.xvar))} sends regressor columns to the variance, but "
                         "no regressors are given; give their range as the last argument (the command line does not "
                         "take regressors yet)")
    spec = layout(spec, X, opts.xvar)
    if bounded and X is not None:
        check_fit(spec, d)
    key = FIT_CACHE.key(data.values, spec.canonical, d.name, opts.estimation_key, X)
    result = FIT_CACHE.get_or_fit(key, lambda: core_fit(data.values, spec, d, opts, X))
    if result.options != opts:
        result = dataclasses.replace(result, options=opts)
    return result, data


@sheet_function
def VOLFIT(returns, model=None, dist=None, options=None, regressors=None):
    """Estimate an ARCH/GARCH-family model by maximum likelihood; returns the fit table."""
    result, _ = fit_from_cells(returns, model, dist, options, regressors=regressors)
    return encode(result)


_LAST = "as the last argument"


def _needs_regressors(spec, X, where: str):
    """Refuse a fit with regressors used without them, and regressors given to a fit without."""
    K = spec.n_regressors
    if K and X is None:
        s = "s" if K > 1 else ""
        raise SheetError(f"this fit has {K} regressor{s} ({regressor_list(spec)}); give their column{s} {where} "
                         "(one row per returns row)")
    if X is not None and not K:
        raise SheetError("regressors are given but this fit has none (no x[k] or v[k] rows); leave them out")
    if X is not None and X.shape[1] != K:
        raise SheetError(f"regressors has {X.shape[1]} column{'s' if X.shape[1] != 1 else ''} but this fit has {K} "
                         f"regressor{'s' if K > 1 else ''} ({regressor_list(spec)}); give one column per regressor, "
                         "in the order of the fit")


def _table_and_returns(returns, fit, regressors=None, where: str = _LAST):
    table = decode(fit, "fit")
    data = returns_column(returns, "returns", table.options.missing)
    spec = table.spec
    X = regressors_block(regressors, data)
    _needs_regressors(spec, X, where)
    if len(data.values) < spec.ar + spec.arch_lags + 2:
        raise SheetError(f"returns: {spec.canonical} needs at least {spec.ar + spec.arch_lags + 2} numbers, got {len(data.values)}")
    if np.ptp(data.values) == 0 and spec.family.varies:
        raise SheetError("returns are all the same number; a constant series has no variance to model")
    result = evaluate(data.values, table.spec, table.dist, table.names, table.params, table.options, X,
                      rows=data.positions + 1)
    return table, data, result, X


@sheet_function
def VOLSERIES(returns, fit, what=None, regressors=None):
    """In-sample conditional variance (or vol, resid, stdresid, or the long-run component of a
    component model), one value per return row."""
    w = _choice(what, "what", _SERIES_WHAT, "variance")
    _, data, result, X = _table_and_returns(returns, fit, regressors)
    if w == "longrun":
        return data.spread(long_run_in_sample(result, data.values, X))
    resid, var, _ = in_sample(result, data.values, X)
    with np.errstate(all="ignore"):
        series = {
            "variance": var,
            "vol": np.sqrt(var),
            "resid": resid,
            "stdresid": resid / np.sqrt(var),
        }[w]
    return data.spread(series)


def _future(future, spec, h: int, need_mean: bool, what: str):
    """The regressors' future values read from cells (one row per step), or None where the model
    does not need them; a clear refusal where it does and they are missing."""
    Xf = future_block(future)
    K = spec.n_regressors
    if Xf is not None and not K:
        raise SheetError("future regressor values are given but this fit has no regressors; leave them out")
    if Xf is None and K and (need_mean or spec.xvar):
        s = "s" if K > 1 else ""
        raise SheetError(f"this fit has {K} regressor{s} ({regressor_list(spec)}); {what} needs their values over the "
                         f"next {h} period{'s' if h > 1 else ''}: give them as the last argument, future ({h} "
                         f"row{'s' if h > 1 else ''}, one per step, and {K} column{s})")
    return Xf


@sheet_function
def VOLFORECAST(returns, fit, horizon=None, what=None, regressors=None, future=None):
    """Forecast h = 1..horizon steps ahead: variance (default), vol, cumvar, cumvol, mean, longrun
    (the long-run component of a component model) or table."""
    h = int_arg(horizon, "horizon", 1, MAX_HORIZON)
    w = _choice(what, "what", _FORECAST_WHAT, "variance")
    table, data, result, X = _table_and_returns(returns, fit, regressors, "as the fifth argument, regressors")
    if w == "longrun":
        require_long_run(table.spec)
    Xf = _future(future, table.spec, h, w in ("mean", "table"), f"the {'mean' if w in ('mean', 'table') else 'variance'} forecast")
    if table.spec.family.simulated_forecast:
        check_draws(_paths(table.options), h, f"VOLFORECAST of {table.spec.variance_canonical}")
    fc = core_forecast(result, data.values, h, seed=table.options.seed, paths=table.options.paths, X=X, Xf=Xf,
                       mean=w in ("mean", "table"))
    # steps beyond fc.finite_steps have no finite E[sigma^2] (EGARCH with t shocks): they say so,
    # and so does an in-mean model's mean there (lambda_m times that volatility forecast)
    n_ok = h if fc.finite_steps is None else fc.finite_steps
    finite = np.isfinite(fc.variance[:n_ok]) & np.isfinite(fc.cumvar[:n_ok]) & np.isfinite(fc.mean[:n_ok])
    if not np.all(finite):
        bad = int(np.flatnonzero(~finite)[0]) + 1
        raise SheetError(
            f"the forecast overflows at step {bad}: the fit's parameters make the variance explode "
            "(check persistence and omega)"
        )
    infinite = f"infinite: {fc.why}"
    infinite_mean = f"infinite: the in-mean term needs the volatility forecast, and {fc.why}"

    def cell(values, i, note=infinite):
        v = float(values[i])
        return v if i < n_ok or math.isfinite(v) else note

    if w == "table":
        rows = [["step", "mean", "variance", "vol", "cumvar"]]
        for i in range(h):
            rows.append([i + 1, cell(fc.mean, i, infinite_mean), cell(fc.variance, i), cell(fc.vol, i),
                         cell(fc.cumvar, i)])
        return rows
    col = {"variance": fc.variance, "vol": fc.vol, "cumvar": fc.cumvar, "cumvol": fc.cumvol, "mean": fc.mean,
           "longrun": fc.longrun}[w]
    if w == "longrun":
        return [[float(v)] for v in col]
    return [[cell(col, i, infinite_mean if w == "mean" else infinite)] for i in range(h)]


@sheet_function
def VOLLOGLIK(returns, fit, regressors=None):
    """Log-likelihood of the returns at the fit table's parameters, under its options."""
    _, _, result, _ = _table_and_returns(returns, fit, regressors)
    ll = result.loglik
    if not np.isfinite(ll):
        raise SheetError("the log-likelihood is not finite at these parameters (a variance reached zero)")
    return [[float(ll)]]


def _paths(opts) -> int:
    """The simulated paths a fit's options ask for (the core's default when they do not say)."""
    return opts.paths or DEFAULT_PATHS


_COMPARE_HEADER = ["model", "dist", "loglik", "params", "aic", "bic", "persistence", "converged", "rank_bic"]


def _split_list(value, arg: str, example: str = "GARCH(1,1)") -> list:
    """Texts from a range, each cell holding one item or several separated by commas or
    semicolons (commas inside parentheses, as in GARCH(1,1), do not separate)."""
    items = []
    for row in as_rows(value):
        for cell in row:
            if is_blank(cell):
                continue
            if is_error_text(cell) or not isinstance(cell, str):
                raise SheetError(f"{arg} must be text such as {example}, got {describe(cell)}")
            depth, start = 0, 0
            for i, ch in enumerate(cell + ","):
                if ch == "(":
                    depth += 1
                elif ch == ")":
                    depth -= 1
                elif ch in ",;" and depth <= 0:
                    piece = cell[start:i].strip()
                    if piece:
                        items.append(piece)
                    start = i + 1
    return items


@sheet_function
def VOLCOMPARE(returns, models, dist=None, options=None):
    """Fit several candidate models (and distributions) to the same returns; one row each, ranked by BIC."""
    model_list = _split_list(models, "models")
    if not model_list:
        raise SheetError("models is empty; give model strings such as GARCH(1,1), GJR-GARCH(1,1)")
    dist_list = _split_list(dist, "dist", "t (or several: normal, t, skewt)") or ["normal"]
    parsed = []
    for m in model_list:
        for d in dist_list:
            try:
                parsed.append((parse_model(m), get_distribution(d)))
            except VolcastError:
                pass  # not counted: its row says what is wrong
    check_compare(len(model_list) * len(dist_list), parsed)
    opts_text = text_arg(options, "options")
    parse_options(opts_text)  # a bad options string is one error for the whole call
    rows, bics, nobs = [], [], set()
    for m in model_list:
        for d in dist_list:
            try:
                result, _ = fit_from_cells(returns, m, d, opts_text)
            except SheetError:
                raise  # a problem with the returns themselves concerns every row
            except VolcastError as exc:
                rows.append([m, d, f"ERROR: {exc}"] + [None] * 6)
                bics.append(None)
                continue
            rows.append([
                result.spec.canonical, result.dist.name, float(result.loglik), int(result.n_free),
                float(result.aic), float(result.bic),
                None if result.persistence is None else float(result.persistence),
                bool(result.converged), None,
            ])
            bics.append(float(result.bic) if result.converged else None)
            if result.converged:
                nobs.add(int(result.nobs))
    if len(nobs) > 1:
        # fits on different returns (presample=drop drops each model's own lags): their criteria do
        # not compare, so no rank; the last row says why
        note = (f"no rank: the candidates are fitted on {min(nobs)} to {max(nobs)} returns (presample=drop "
                "leaves out each model's own lags), and information criteria compare fits on the same returns "
                "only; use presample=mean to rank them")
        return [list(_COMPARE_HEADER)] + rows + [["note", note] + [None] * 7]
    order = sorted((b, i) for i, b in enumerate(bics) if b is not None)
    for rank, (_, i) in enumerate(order, start=1):
        rows[i][8] = rank
    return [list(_COMPARE_HEADER)] + rows


@sheet_function
def VOLTESTS(returns, fit, lags=None, regressors=None):
    """Diagnostics of a fit: Ljung-Box on z and z^2, ARCH-LM, Jarque-Bera, Engle-Ng sign bias,
    each with a plain-language reading; a test that cannot run at these lags is blank and says why."""
    table, data, result, X = _table_and_returns(returns, fit, regressors)
    resid, var, _ = in_sample(result, data.values, X)
    with np.errstate(all="ignore"):
        z = resid / np.sqrt(var)
    z = z[np.isfinite(z)]
    n = len(z)
    spec = table.spec
    var_order = spec.family.diagnostic_order
    # too few residuals: every row says so (the lags are still read, so a bad one is named)
    L = int_arg(lags, "lags", 1, max_lags(n) if n >= MIN_TEST_OBS else 10_000,
                default=default_lags(n, max(spec.ar + spec.ma, var_order)))
    out = [["test", "statistic", "df", "p_value", "reading"]]
    results = run_tests(z, L, spec.ar + spec.ma, var_order)
    for t, reading in zip(results, readings.diagnostics(results, spec, table.dist, z)):
        df = _cell(t.df)
        out.append([t.label, _cell(t.statistic), int(df) if df is not None and df.is_integer() else df,
                    _cell(t.p_value), reading])
    return out


@sheet_function
def VOLSTABILITY(returns, fit):
    """Nyblom-Hansen parameter-constancy test of a fit: one row per estimated parameter and a joint row."""
    if decode(fit, "fit").spec.n_regressors:
        raise SheetError("VOLSTABILITY does not take a fit with regressors yet; test the model without them")
    table, data, result, _ = _table_and_returns(returns, fit)
    result = dataclasses.replace(result, status=table.statuses(), estimated=table.estimated,
                                 converged=table.converged is not False)
    st = core_stability(data.values, result)
    each, joint = readings.stability(st)
    out = [["parameter", "statistic", "crit_5pct", "reject", "reading"]]
    for name, L, rej, text in zip(st.names, st.statistics, st.reject, each):
        out.append([name, _cell(L), st.crit_individual, bool(rej) if np.isfinite(L) else None, text])
    for name in st.at_bound:
        out.append([name, None, None, None, "at a bound: not tested (the test needs an interior estimate)"])
    out.append(["joint", _cell(st.joint), st.crit_joint, st.joint_reject, joint])
    return out


def _pairs(a, b, arg_a: str, arg_b: str):
    """Two ranges of numbers read pairwise: the values of the rows where both hold one, and a note
    when some rows have a number in one range only."""
    x = returns_column(a, arg_a, "skip")
    y = returns_column(b, arg_b, "skip")
    if x.length != y.length:
        raise SheetError(f"{arg_a} and {arg_b} must cover the same rows, got {x.length} and {y.length} cells")
    px, py = set(x.positions.tolist()), set(y.positions.tolist())
    common = sorted(px & py)
    if not common:
        raise SheetError(f"{arg_a} and {arg_b} have no row where both hold a number")
    xm = dict(zip(x.positions.tolist(), x.values.tolist()))
    ym = dict(zip(y.positions.tolist(), y.values.tolist()))
    note = None
    if px != py:
        note = (f"used the {len(common)} rows where both hold a number ({arg_a} has {len(px)}, "
                f"{arg_b} has {len(py)})")
    return np.array([xm[i] for i in common]), np.array([ym[i] for i in common]), note


@sheet_function
def VOLDM(losses_a, losses_b, lags=None):
    """Diebold-Mariano test of equal forecast loss, Newey-West variance, Harvey-Leybourne-Newbold correction."""
    a, b, note = _pairs(losses_a, losses_b, "losses_a", "losses_b")
    n = len(a)
    # too few pairs: the core says so before any complaint about the lags
    L = None if _one_blank(lags) or n < DM_MIN_PAIRS else int_arg(lags, "lags", 0, dm_max_lags(n))
    res = diebold_mariano(a, b, L)
    reading = readings.diebold_mariano(res, "losses_a", "losses_b")
    if note:
        reading = f"{reading}; {note}"
    return _measure_rows([["mean_diff", res.mean_diff], ["statistic", res.statistic], ["p_value", res.p_value],
                          ["lags", res.lags], ["pairs", res.pairs], ["reading", reading]])


def _one_blank(value) -> bool:
    return all(is_blank(c) for r in as_rows(value) for c in r)


def _cell(x):
    if x is None:
        return None
    x = float(x)
    return x if np.isfinite(x) else None


@sheet_function
def VOLRISK(returns, fit, level=None, horizon=None, regressors=None, future=None):
    """Value-at-Risk and expected shortfall of the next horizon periods' cumulative return.

    Losses are positive, in return units.  When the fit's options say how the returns are
    defined (``returns=log100``, ``log``, ``simple100``, ``simple``), rows ``VaR_value`` and
    ``ES_value`` follow ``ES``: the loss as a percentage of the position's value, from the
    distribution of the value change; a last row ``returns`` names the definition.

    A fit with regressors takes them (``regressors``, one row per returns row) and their values
    over the next ``horizon`` periods (``future``, one row per period).
    """
    lv = float_arg(level, "level", 0.99, "0.99")
    h = int_arg(horizon, "horizon", 1, MAX_HORIZON, default=1)
    table, data, result, X = _table_and_returns(returns, fit, regressors, "as the fifth argument, regressors")
    Xf = _future(future, table.spec, h, True, "VOLRISK")
    if h > 1 or table.spec.family.simulated_forecast:
        from ..core.risk import risk_paths  # here: its module imports scipy.integrate (and scipy.optimize)

        check_draws(table.options.paths or (risk_paths(h) if h > 1 else DEFAULT_PATHS), h, "VOLRISK")
    from ..core.risk import risk as core_risk

    rk = core_risk(result, data.values, lv, h, paths=table.options.paths, seed=table.options.seed, X=X, Xf=Xf)
    # a figure whose expectation does not exist (EGARCH with t shocks beyond one period) says so
    es = f"infinite: ES needs E[sigma], and {rk.es_note}" if rk.es_note else float(rk.es)
    sd = f"infinite: {rk.sd_note}" if rk.sd_note else float(rk.sd)
    mean = f"infinite: the in-mean term needs the volatility forecast, and {rk.mean_note}" if rk.mean_note \
        else float(rk.mean)
    values = [rk.var] + [v for v in (es, sd, mean) if not isinstance(v, str)]
    if rk.returns is not None:
        values += [rk.var_value, rk.es_value]
    if not all(np.isfinite(v) for v in values):
        raise SheetError("the risk figures overflow: the fit's parameters make the variance explode")
    rows = [["measure", "value"], ["VaR", float(rk.var)], ["ES", es]]
    if rk.returns is not None:
        rows += [["VaR_value", float(rk.var_value)], ["ES_value", float(rk.es_value)]]
    rows += [["mean", mean], ["sd", sd], ["level", float(rk.level)],
             ["horizon", int(rk.horizon)], ["method", rk.method]]
    if rk.returns is not None:
        rows.append(["returns", rk.returns])
    return rows


@sheet_function
def VOLCOVERAGE(returns, var, level=None, es=None):
    """Coverage tests of any VaR series (losses positive, one per return row) against the returns;
    with an ES series as well, the McNeil-Frey and Acerbi-Szekely Z2 tests of the ES."""
    lv = float_arg(level, "level", 0.99, "0.99")
    r = returns_column(returns, "returns", "skip")
    v = returns_column(var, "var", "skip")
    if r.length != v.length:
        raise SheetError(f"returns and var must cover the same rows, got {r.length} and {v.length} cells")
    rows_used = set(r.positions.tolist()) & set(v.positions.tolist())
    e = None
    if not _one_blank(es):
        e = returns_column(es, "es", "skip")
        if e.length != r.length:
            raise SheetError(f"returns and es must cover the same rows, got {r.length} and {e.length} cells")
        rows_used &= set(e.positions.tolist())
    common = sorted(rows_used)
    if not common:
        raise SheetError("returns and var have no row where both hold a number" if e is None
                         else "returns, var and es have no row where all three hold a number")
    rmap = dict(zip(r.positions.tolist(), r.values.tolist()))
    vmap = dict(zip(v.positions.tolist(), v.values.tolist()))
    rr, vv = [rmap[i] for i in common], [vmap[i] for i in common]
    c = core_coverage(rr, vv, lv)
    rows = coverage_rows(c) + [["coverage reading", readings.coverage(c)]]
    if e is not None:
        emap = dict(zip(e.positions.tolist(), e.values.tolist()))
        try:
            t = core_es_tests(rr, vv, [emap[i] for i in common], lv)
        except VolcastError as exc:
            raise SheetError(_row_words(str(exc), common, r.orientation)) from None
        rows += es_rows(t)
    return _measure_rows(rows)


def _row_words(message: str, common, orientation) -> str:
    """The core counts rows of the numbers it was given; say which row of the range that is."""
    unit = "column" if orientation == "row" else "row"

    def repl(m):
        k = int(m.group(2)) - 1
        return f"{m.group(1)} {unit} {common[k] + 1}" if 0 <= k < len(common) else m.group(0)

    return re.sub(r"\b(ES|VaR|returns) row (\d+)", repl, message)


def es_rows(t, reason=""):
    """The ES tests' rows of a backtest; blank with the reason in the reading when not computed."""
    if t is None:
        return [[name, None] for name in ("McNeil-Frey t", "McNeil-Frey p_value", "Acerbi-Szekely Z2",
                                          "Z2 p_value", "Z2 null")] + [["ES reading", f"not computed: {reason}"]]
    return [["McNeil-Frey t", t.mf_t],
            ["McNeil-Frey p_value", t.mf_p], ["Acerbi-Szekely Z2", t.z2], ["Z2 p_value", t.z2_p],
            ["Z2 null", t.z2_null], ["ES reading", readings.expected_shortfall(t)]]


def coverage_rows(c):
    return [["forecasts", c.forecasts], ["exceptions", c.exceptions],
            ["exception rate", c.rate], ["expected rate", c.expected_rate],
            ["Kupiec LR", c.lr_uc], ["Kupiec p_value", c.p_uc],
            ["independence LR", c.lr_ind], ["independence p_value", c.p_ind],
            ["conditional coverage LR", c.lr_cc], ["conditional coverage p_value", c.p_cc], ["zone", c.zone]]


def _measure_rows(rows):
    return [["measure", "value"]] + [[k, _cell(v) if isinstance(v, float) else v] for k, v in rows]


@sheet_function
def VOLSIM(fit, periods=None, paths=None, seed=None):
    """Simulated return paths from a fit, one column per path, reproducible by seed."""
    n = int_arg(periods, "periods", 1, SIM_PERIODS)
    m = int_arg(paths, "paths", 1, SIM_PATHS, default=1)
    s = int_arg(seed, "seed", 0, 2**31 - 1, default=DEFAULT_SEED)
    check_sim(n, m)
    table = decode(fit, "fit")
    pers = persistence_of(table.spec, table.dist, table.params)
    if pers is not None and not table.spec.family.integrated and pers > 1.0 + 1e-9:
        # the paths start from the long-run variance, which an explosive model does not have (they
        # ran to +-129,000 in 300 periods from a typed table with persistence 1.2)
        raise SheetError(f"the fit's persistence is {pers:.4g}, above 1: its variance grows without bound and has no "
                         "long-run level for simulated paths to start from; give a stationary model")
    out = simulate(table.spec, table.dist, table.params, n, m, rng=np.random.default_rng(s))
    if not np.all(np.isfinite(out)):
        raise SheetError("the simulated paths overflow: the fit's parameters make the variance explode")
    return out.tolist()


@sheet_function
def VOLNEWS(fit, shocks):
    """The news-impact curve: next-period variance for each shock, lagged variance at its long-run level."""
    table = decode(fit, "fit")
    data = returns_column(shocks, "shocks", "skip")
    curve = news_impact(table.as_fit_result(), data.values)
    if not np.all(np.isfinite(curve)):
        raise SheetError("the news-impact curve overflows at these shocks")
    return data.spread(curve)


_BACKTEST_KEYS = {"scheme": ("rolling", "expanding"), "what": ("summary", "series")}


def _split_backtest_options(text):
    """The backtest's own keys (scheme, refit, what, dist) and the rest for the fits."""
    own, rest = {}, []
    for chunk in (text or "").split(";"):
        key, sep, value = chunk.partition("=")
        k = key.strip().lower()
        if sep and k in ("scheme", "refit", "what", "dist"):
            v = value.strip().lower()
            if k in _BACKTEST_KEYS and v not in _BACKTEST_KEYS[k]:
                raise SheetError(f"options: {k}={excerpt(value.strip())} is not allowed; use "
                                 + " or ".join(f"{k}={c}" for c in _BACKTEST_KEYS[k]))
            if k == "refit":
                v = int_arg(v, "options: refit", 1, 100_000)
            if k in own:  # as the fit's own options: a key given twice is refused, not the last one taken
                raise SheetError(f"options: {k} is given twice; keep one value")
            own[k] = v
        elif chunk.strip():
            rest.append(chunk)
    return own, "; ".join(rest) or None


@sheet_function
def VOLBACKTEST(returns, fit_or_model, window=None, level=None, options=None, regressors=None):
    """Walk-forward backtest of one-step variance and VaR forecasts: coverage tests, zone, losses.

    ``regressors`` (one row per returns row): each forecast reads the row of the return it
    forecasts, so a regressor must be known one period ahead (lag it in the sheet if not)."""
    lv = float_arg(level, "level", 0.99, "0.99")
    own, rest = _split_backtest_options(text_arg(options, "options"))
    rows = as_rows(fit_or_model)
    filled = [c for r in rows for c in r if not is_blank(c)]
    if len(filled) == 1 and isinstance(filled[0], str) and not is_error_text(filled[0]):
        try:
            spec = parse_model(filled[0])
        except VolcastError as exc:
            raise SheetError(f"fit_or_model must be a fit table or a model string: {exc}") from None
        dist = get_distribution(own.get("dist", "normal"))
        opts = parse_options(rest)
        params = None
    else:
        table = decode(fit_or_model, "fit_or_model")
        spec, dist, opts, params = table.spec, table.dist, table.options, table.params
        # a fit table's parameters are kept: what would re-estimate or change the fit does not apply
        # (it was taken silently, and refit was echoed as if used); scheme still says which returns
        # each forecast filters (the last window, or all before it)
        unused = [k for k in ("dist", "refit") if k in own]
        if rest:
            unused += [c.partition("=")[0].strip() for c in rest.split(";") if c.strip()]
        if unused:
            raise SheetError(f"options: {', '.join(unused)} cannot apply to a fit table, whose parameters, "
                             "distribution and options are kept (scheme= and what= apply); give a model string "
                             "to re-estimate, or leave them out")
    data = returns_column(returns, "returns", opts.missing)
    X = regressors_block(regressors, data)
    if params is None:
        if X is None and opts.xvar:
            raise SheetError(f"options: xvar={','.join(map(str, opts.xvar))} sends regressor columns to the variance, "
                             "but no regressors are given; give their range as the last argument")
        spec = layout(spec, X, opts.xvar)
    else:
        _needs_regressors(spec, X, _LAST)
    check_length(len(data.values), spec)  # a series too short for any window says so first
    w = int_arg(window, "window", 1, len(data.values) - 1)
    check_backtest(spec, dist, len(data.values), w, own.get("scheme", "rolling"), own.get("refit", 1),
                   estimating=params is None, paths=_paths(opts))
    key = ("backtest",) + FIT_CACHE.key(data.values, spec.canonical, dist.name, opts.estimation_key, X) + (
        w, lv, own.get("scheme", "rolling"), own.get("refit", 1), None if params is None else tuple(params),
        opts.paths, opts.seed)
    bt = FIT_CACHE.get_or_fit(key, lambda: core_backtest(
        data.values, spec, dist, opts, w, lv, own.get("scheme", "rolling"), own.get("refit", 1), params, X=X))
    if own.get("what") == "series":
        out = [["index", "variance", "VaR", "return", "exception", "ES", "QLIKE"]]
        for i, v, var, a, x, es, ql in zip(bt.index, bt.variance, bt.var, bt.actual, bt.exception, bt.es,
                                           bt.qlike_series):
            out.append([int(data.positions[i]) + 1, float(v), float(var), float(a), bool(x), float(es), float(ql)])
        return out
    return _measure_rows(coverage_rows(bt.coverage) + [
        ["mean QLIKE", bt.qlike], ["mean MSE", bt.mse], ["scheme", own.get("scheme", "rolling")],
        ["refit every", own.get("refit", 1)], ["estimations", bt.fits],
        ["coverage reading", readings.coverage(bt.coverage)]] + es_rows(bt.es_tests, bt.es_reason))
