"""The module Excel loads through xlwings: thin wrappers over the worksheet layer.

No logic lives here.  Each wrapper declares its range arguments with ``ndim=2`` (so a single
cell still arrives as a list of rows), keeps the optional arguments positional with defaults,
and hands everything to the function of the same name in :mod:`xlfuncs.sheet`.  The first line
of each docstring is what Excel's function wizard shows; ``doc=`` documents each argument.

Point the xlwings add-in's "UDF Modules" setting at ``xlfuncs.udfs`` and import the functions.

Regressors.  ``VOLFIT``, ``VOLSERIES``, ``VOLLOGLIK``, ``VOLTESTS`` and ``VOLBACKTEST`` take an
optional last argument ``regressors``: one column per regressor and one row per returns row, the
rows lined up with the returns (a value enters the return of its own row, so a value known only
a period later must be lagged in the sheet).  The columns enter the mean as ``x[k]``, or the
variance as ``v[k]`` when the options say ``xvar=k``.  ``VOLFORECAST(returns, fit, horizon,
[what], [regressors], [future])`` and ``VOLRISK(returns, fit, [level], [horizon], [regressors],
[future])`` take the regressors and then their future values, one row per step.
"""

import xlwings as xw

from . import sheet

_RETURNS = "Returns: one column (or row) of numbers, most recent last; blanks before and after are ignored"
_FIT = "Fit table from VOLFIT (or one typed with rows model, dist and the parameters)"
_MODEL = ('Model string, e.g. "GARCH(1,1)", "AR(1)-GJR-GARCH(1,1)", "EGARCH(1,1)", "EWMA", "CGARCH", "GARCH(1,1)-M" '
          '(default GARCH(1,1))')
_DIST = 'Shock distribution: "normal" (default), "t", "skewt" or "ged"'
_OPTIONS = 'Options, e.g. "se=hessian; nu=8; presample=drop"; "xvar=2" sends regressor column 2 to the variance (optional)'
_REGRESSORS = ("Regressors (optional): one column per regressor, one row per returns row, lined up with the returns; "
               "a value enters the return of its own row")
_FUTURE = "Regressors' future values (optional; needed for a fit with regressors): one row per step, one column per regressor"


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("model", doc=_MODEL)
@xw.arg("dist", doc=_DIST)
@xw.arg("options", doc=_OPTIONS)
@xw.arg("regressors", ndim=2, doc=_REGRESSORS)
def VOLFIT(returns, model=None, dist=None, options=None, regressors=None):
    """Estimate an ARCH/GARCH-family model by maximum likelihood; returns the fit table."""
    return sheet.VOLFIT(returns, model, dist, options, regressors)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("fit", ndim=2, doc=_FIT)
@xw.arg("what", doc='"variance" (default), "vol", "resid", "stdresid" or "longrun" (the long-run component of a CGARCH)')
@xw.arg("regressors", ndim=2, doc=_REGRESSORS)
def VOLSERIES(returns, fit, what=None, regressors=None):
    """In-sample conditional variance (or vol, residuals, a component model's long-run component), one value per return row."""
    return sheet.VOLSERIES(returns, fit, what, regressors)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("fit", ndim=2, doc=_FIT)
@xw.arg("horizon", doc="Number of steps ahead, a whole number from 1 to 600")
@xw.arg("what", doc='"variance" (default), "vol", "cumvar", "cumvol", "mean", "longrun" (a CGARCH\'s long-run component) or "table"')
@xw.arg("regressors", ndim=2, doc=_REGRESSORS)
@xw.arg("future", ndim=2, doc=_FUTURE)
def VOLFORECAST(returns, fit, horizon=None, what=None, regressors=None, future=None):
    """Forecast the variance (or vol, cumulative variance, mean, long-run component) 1 to horizon steps ahead."""
    return sheet.VOLFORECAST(returns, fit, horizon, what, regressors, future)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("fit", ndim=2, doc=_FIT)
@xw.arg("regressors", ndim=2, doc=_REGRESSORS)
def VOLLOGLIK(returns, fit, regressors=None):
    """Log-likelihood of the returns at the fit table's parameters."""
    return sheet.VOLLOGLIK(returns, fit, regressors)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("fit", ndim=2, doc=_FIT)
@xw.arg("lags", doc="Lags for the Ljung-Box and ARCH-LM tests (default min(10, n/5))")
@xw.arg("regressors", ndim=2, doc=_REGRESSORS)
def VOLTESTS(returns, fit, lags=None, regressors=None):
    """Diagnostic tests of a fit: Ljung-Box, ARCH-LM, Jarque-Bera, sign bias."""
    return sheet.VOLTESTS(returns, fit, lags, regressors)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("fit", ndim=2, doc=_FIT)
@xw.arg("level", doc="Confidence level, e.g. 0.99 (default)")
@xw.arg("horizon", doc="Periods the loss accumulates over, 1 (default) to 600")
@xw.arg("regressors", ndim=2, doc=_REGRESSORS)
@xw.arg("future", ndim=2, doc=_FUTURE)
def VOLRISK(returns, fit, level=None, horizon=None, regressors=None, future=None):
    """VaR and expected shortfall of the next horizon periods as positive losses; also as % of value if the fit's options set returns=."""
    return sheet.VOLRISK(returns, fit, level, horizon, regressors, future)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("models", ndim=2, doc='Candidate models: a range of model strings or one text such as "ARCH(1), GARCH(1,1)"')
@xw.arg("dist", ndim=2, doc='Distribution(s), e.g. "normal" or "normal, t" (default normal)')
@xw.arg("options", doc=_OPTIONS)
def VOLCOMPARE(returns, models, dist=None, options=None):
    """Fit candidate models to the same returns and rank them by BIC."""
    return sheet.VOLCOMPARE(returns, models, dist, options)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("var", ndim=2, doc="VaR series, losses as positive numbers, one per return row")
@xw.arg("level", doc="Confidence level of the VaR, e.g. 0.99 (default)")
def VOLCOVERAGE(returns, var, level=None):
    """Coverage tests of a VaR series: exceptions, Kupiec, Christoffersen, traffic-light zone."""
    return sheet.VOLCOVERAGE(returns, var, level)


@xw.func
@xw.arg("fit", ndim=2, doc=_FIT)
@xw.arg("periods", doc="Periods per path")
@xw.arg("paths", doc="Number of paths, one column each (default 1)")
@xw.arg("seed", doc="Random seed, for reproducible paths")
def VOLSIM(fit, periods=None, paths=None, seed=None):
    """Simulated return paths from a fit, one column per path."""
    return sheet.VOLSIM(fit, periods, paths, seed)


@xw.func
@xw.arg("fit", ndim=2, doc=_FIT)
@xw.arg("shocks", ndim=2, doc="Shocks (return surprises) to evaluate, a column or row")
def VOLNEWS(fit, shocks):
    """News-impact curve: next-period variance for each shock."""
    return sheet.VOLNEWS(fit, shocks)


@xw.func
@xw.arg("returns", ndim=2, doc=_RETURNS)
@xw.arg("fit_or_model", ndim=2, doc="A fit table (parameters kept) or a model string (re-estimated as it walks)")
@xw.arg("window", doc="Estimation window: the first forecast is for the next return")
@xw.arg("level", doc="VaR confidence level, e.g. 0.99 (default)")
@xw.arg("options", doc='e.g. "scheme=expanding; refit=5; dist=t; what=series; xvar=2"')
@xw.arg("regressors", ndim=2, doc=_REGRESSORS)
def VOLBACKTEST(returns, fit_or_model, window=None, level=None, options=None, regressors=None):
    """Walk-forward backtest: coverage tests, traffic-light zone, QLIKE and MSE."""
    return sheet.VOLBACKTEST(returns, fit_or_model, window, level, options, regressors)
