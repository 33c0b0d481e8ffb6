"""VOLBACKTEST: the walk-forward loop against a direct re-implementation, its coverage summary
against Kupiec's and Christoffersen's statistics, and its options."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLBACKTEST, VOLFIT, VOLFORECAST
from xlfuncs.core.coverage import christoffersen, kupiec, zone
from xlfuncs.sheet.cache import FIT_CACHE

from test_sheet import R_GARCH, col  # noqa: E402

CELLS = col(R_GARCH)


def _d(out):
    return {k: v for k, v in out}


def test_walk_forward_matches_refitting_by_hand():
    """Rolling window 380 over 400 returns: each forecast is the one-step forecast of a fit on the
    previous 380 returns, and VaR = -(mean + vol * norm.ppf(0.01)) (SciPy)."""
    series = VOLBACKTEST(CELLS, "GARCH(1,1)", 380, 0.99, "what=series; refit=10")
    assert series[0] == ["index", "variance", "VaR", "return", "exception", "ES", "QLIKE"]
    body = series[1:]
    assert len(body) == 20 and body[0][0] == 381
    for k in (0, 10):  # the steps where the model is re-estimated
        t = 380 + k
        window = CELLS[t - 380:t]
        fit = VOLFIT(window, "GARCH(1,1)")
        v = VOLFORECAST(window, fit, 1)[0][0]
        m = VOLFORECAST(window, fit, 1, "mean")[0][0]
        assert_allclose(body[k][1], v, rtol=1e-8)
        assert_allclose(body[k][2], -(m + np.sqrt(v) * stats.norm.ppf(0.01)), rtol=1e-8)
        assert body[k][3] == R_GARCH[t] and body[k][4] == (R_GARCH[t] < -body[k][2])


def test_summary_is_the_coverage_of_the_series():
    series = VOLBACKTEST(CELLS, "GARCH(1,1)", 300, 0.95, "what=series; refit=25")[1:]
    s = _d(VOLBACKTEST(CELLS, "GARCH(1,1)", 300, 0.95, "refit=25"))
    hits = [int(r[4]) for r in series]
    n, x = len(hits), sum(hits)
    assert s["forecasts"] == n == 100 and s["exceptions"] == x
    assert_allclose(s["Kupiec LR"], kupiec(n, x, 0.05)[0], rtol=1e-12)
    assert_allclose(s["independence LR"], christoffersen(hits)[0], rtol=1e-12)
    assert s["zone"] == zone(n, x, 0.05) and s["estimations"] == 4
    v = np.array([r[1] for r in series])
    e2 = (np.array([r[3] for r in series]) - 0.0) ** 2
    assert s["mean QLIKE"] > 0 and np.isfinite(s["mean MSE"]) and v.min() > 0 and e2.size == 100


def test_fixed_table_is_not_reestimated_and_expanding_scheme():
    table = VOLFIT(CELLS, "GARCH(1,1)")
    s = _d(VOLBACKTEST(CELLS, table, 350, 0.99, "scheme=expanding"))
    assert s["estimations"] == 0 and s["scheme"] == "expanding" and s["forecasts"] == 50


def test_backtest_result_is_reused():
    FIT_CACHE.clear()
    VOLBACKTEST(CELLS, "ARCH(1)", 380)
    n = FIT_CACHE.stats["estimations"]
    VOLBACKTEST(CELLS, "ARCH(1)", 380)
    assert FIT_CACHE.stats["estimations"] == n


@pytest.mark.parametrize("args,pattern", [
    (("GARCH(1,1)", 5), "window must be a whole number from"),
    (("GARCH(1,1)", 380, 0.99, "scheme=weekly"), "scheme=weekly is not allowed"),
    (("GARCH(1,1)", 380, 0.99, "refit=0"), "refit must be a whole number from 1"),
    (("GARCH(1,1)", 380, 1.2), "level must be between 0.5 and 1"),
    (("FOO", 380), 'model "FOO" is not understood'),
    (([["model"]], 380), "fit_or_model"),
])
def test_bad_inputs(args, pattern):
    out = VOLBACKTEST(CELLS, *args)
    assert len(out) == 1 and pattern in out[0][0], out


def test_forecasts_that_are_not_numbers_are_refused_not_counted(monkeypatch):
    """A refit whose parameters make the variance explode on the next windows (an EGARCH fit that
    did not converge on a 123-month window of the demo returns, its estimate as found) leaves
    one-step forecasts that are not numbers.  Coverage tests over them counted each as a period
    without an exception (internal consistency: a forecast that is no number is no forecast); the
    backtest now refuses, naming the first such row and the estimate behind it."""
    import csv

    import xlfuncs.core.backtest as bmod
    from xlfuncs.demo import data_file

    rows = list(csv.DictReader(open(data_file("demo_returns.csv"))))
    r = [[float(x["return"])] for x in rows]
    real_fit = bmod.fit

    class Stuck:  # the estimate the estimator reported on rows 183-305, not converged
        def __init__(self, res):
            self.params = np.array([0.18533187, 0.04330948, -0.22604702, -0.28469345, 0.97768951])
            self.converged = False
            self.names = res.names

    monkeypatch.setattr(bmod, "fit", lambda *a, **k: Stuck(real_fit(*a, **k)))
    FIT_CACHE.clear()
    out = VOLBACKTEST(r, "EGARCH(1,1)", 123, 0.99, "dist=normal; refit=7")
    text = out[0][0]
    assert text.startswith("ERROR: the one-step forecast of returns row") and "is not a number" in text, out[:3]
    assert "did not converge" in text and "refit=1" in text
    FIT_CACHE.clear()
    series = None
    monkeypatch.setattr(bmod, "fit", real_fit)
    series = VOLBACKTEST(r, "EGARCH(1,1)", 123, 0.99, "dist=normal; refit=7; what=series")
    # with the real estimator: either every forecast is a number, or the same refusal
    assert (isinstance(series[0][0], str) and series[0][0].startswith("ERROR: the one-step forecast")) or all(
        np.isfinite(v) for row in series[1:] for v in row[1:4])


@pytest.mark.parametrize("options,pattern", [
    ("dist=normal", "dist cannot apply to a fit table"),
    ("nu=30", "nu cannot apply to a fit table"),
    ("refit=12", "refit cannot apply to a fit table"),
    ("foo=1", "foo cannot apply to a fit table"),
])
def test_options_a_fit_table_cannot_take_are_refused(options, pattern):
    """With a fit table the parameters, distribution and options are kept: options that would
    re-estimate or change the fit were taken silently (the same exceptions whatever dist= said,
    'refit every 12' echoed with no estimation); now refused, as VOLFIT refuses unknown keys."""
    table = VOLFIT(CELLS, "GARCH(1,1)")
    out = VOLBACKTEST(CELLS, table, 350, 0.99, options)
    assert out[0][0].startswith("ERROR: options:") and pattern in out[0][0], out


def test_a_backtest_option_given_twice_is_refused():
    """dist=t; dist=normal took the last value (and dist=normal; dist=t the other); the fit's own
    options refuse a key given twice, and so does the backtest's now."""
    out = VOLBACKTEST(CELLS, "GARCH(1,1)", 350, 0.99, "dist=t; dist=normal")
    assert out[0][0] == "ERROR: options: dist is given twice; keep one value"
