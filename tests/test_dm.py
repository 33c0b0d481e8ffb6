"""VOLDM: the Diebold & Mariano (1995) test with Newey-West variance and the Harvey, Leybourne &
Newbold (1997) correction, against a direct computation and statsmodels' HAC variance of a mean."""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLBACKTEST, VOLDM, VOLFIT, VOLFORECAST
from xlfuncs.core.comparison import default_lags, diebold_mariano


def _column(x):
    return [[None if v is None else float(v)] for v in x]


def _d(out):
    return {row[0]: row[1] for row in out[1:]}


def _ma1_losses(n, seed, shift=0.0):
    """Two loss series whose difference is an MA(1) with mean ``shift``: autocorrelated, so the
    Newey-West lags matter."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n + 1)
    b = rng.gamma(2.0, 1.0, n)
    return b + shift + e[1:] + 0.5 * e[:-1], b


def _direct(a, b, L):
    """Written out: d = a - b; Bartlett long-run variance g0 + 2 sum (1 - k/(L+1)) g_k with
    autocovariances over n (Newey & West 1987); DM = dbar / sqrt(f/n) (Diebold & Mariano 1995);
    HLN (1997): DM * sqrt((n + 1 - 2h + h(h-1)/n)/n) with h = L + 1, two-sided t(n-1) p-value."""
    d = [x - y for x, y in zip(a, b)]
    n = len(d)
    dbar = sum(d) / n
    def gamma(k):
        return sum((d[t] - dbar) * (d[t - k] - dbar) for t in range(k, n)) / n
    f = gamma(0) + 2 * sum((1 - k / (L + 1)) * gamma(k) for k in range(1, L + 1))
    dm = dbar / math.sqrt(f / n)
    h = L + 1
    stat = dm * math.sqrt((n + 1 - 2 * h + h * (h - 1) / n) / n)
    return dbar, stat, 2 * stats.t.sf(abs(stat), n - 1)


@pytest.mark.parametrize("L", [0, 1, 4, 9])
def test_voldm_equals_the_direct_computation(L):
    a, b = _ma1_losses(250, 7, shift=0.15)
    out = VOLDM(_column(a), _column(b), L)
    assert [r[0] for r in out] == ["measure", "mean_diff", "statistic", "p_value", "lags", "pairs", "reading"]
    got = _d(out)
    dbar, stat, p = _direct(list(a), list(b), L)
    assert_allclose([got["mean_diff"], got["statistic"], got["p_value"]], [dbar, stat, p], rtol=1e-10)
    assert got["lags"] == L and got["pairs"] == 250


def test_newey_west_variance_equals_statsmodels():
    """statsmodels' HAC (Newey-West, Bartlett kernel, no small-sample correction) variance of the
    mean of d, from OLS on a constant, is the package's f / n."""
    sm = pytest.importorskip("statsmodels.api")
    a, b = _ma1_losses(300, 11, shift=0.1)
    d = a - b
    for L in (0, 3, 8):
        res = diebold_mariano(a, b, L)
        ols = sm.OLS(d, np.ones(len(d))).fit(cov_type="HAC", cov_kwds={"maxlags": L, "use_correction": False})
        assert_allclose(res.long_run_variance / len(d), ols.bse[0] ** 2, rtol=1e-10)
        assert_allclose(res.dm, d.mean() / ols.bse[0], rtol=1e-10)


def test_default_lags_rule():
    """floor(4 (n/100)^(2/9)), Newey & West (1994) (common practice): 4 at n = 100, 5 at n = 474."""
    assert default_lags(100) == 4 and default_lags(474) == 5 and default_lags(1000) == 6
    a, b = _ma1_losses(474, 3)
    assert _d(VOLDM(_column(a), _column(b)))["lags"] == 5


def test_readings_follow_the_sign_and_the_p_value():
    a, b = _ma1_losses(400, 2, shift=0.6)
    d = _d(VOLDM(_column(a), _column(b)))
    assert d["statistic"] > 0 and d["p_value"] < 0.05
    assert d["reading"] == "losses_b forecasts better (lower mean loss) at 5%"
    d = _d(VOLDM(_column(b), _column(a)))
    assert d["reading"] == "losses_a forecasts better (lower mean loss) at 5%"
    a, b = _ma1_losses(400, 2, shift=0.0)
    assert _d(VOLDM(_column(a), _column(b)))["reading"] == "no significant difference in forecast loss at 5%"
    assert _d(VOLDM(_column(b), _column(b)))["reading"] == "identical losses: nothing to compare"


def test_blank_rows_are_dropped_pairwise():
    """Blanks in either column (e.g. two VOLBACKTEST series with different windows side by side)
    leave out that row in both; the reading says how many rows were used."""
    a, b = _ma1_losses(120, 5, shift=0.1)
    ca, cb = _column(a), _column(b)
    for i in (0, 1, 2, 50):
        ca[i] = [None]
    cb[119] = [None]
    keep = [i for i in range(120) if i not in (0, 1, 2, 50, 119)]
    got = _d(VOLDM(ca, cb, 2))
    dbar, stat, p = _direct([a[i] for i in keep], [b[i] for i in keep], 2)
    assert_allclose([got["mean_diff"], got["statistic"], got["p_value"]], [dbar, stat, p], rtol=1e-10)
    assert got["pairs"] == 115
    assert got["reading"].endswith("used the 115 rows where both hold a number (losses_a has 116, losses_b has 119)")


def test_qlike_columns_of_two_backtests(dmbp):
    """The QLIKE columns of VOLBACKTEST's series for two models on the same window line up row by
    row; each QLIKE is ln h + e^2 / h of its row (common practice)."""
    cells = _column(dmbp[:700])
    s1 = VOLBACKTEST(cells, "GARCH(1,1)", 600, 0.99, "what=series; refit=50")
    s2 = VOLBACKTEST(cells, "EWMA", 600, 0.99, "what=series; refit=50")
    assert s1[0][-1] == "QLIKE" and [r[0] for r in s1[1:]] == [r[0] for r in s2[1:]]
    window = cells[:600]  # the first forecast's estimation window
    fit = VOLFIT(window, "GARCH(1,1)")
    mu = VOLFORECAST(window, fit, 1, "mean")[0][0]
    h, r = s1[1][1], s1[1][3]
    assert_allclose(s1[1][6], math.log(h) + (r - mu) ** 2 / h, rtol=1e-12)
    out = _d(VOLDM([[r[6]] for r in s2[1:]], [[r[6]] for r in s1[1:]]))
    dbar, stat, p = _direct([r[6] for r in s2[1:]], [r[6] for r in s1[1:]], default_lags(100))
    assert_allclose([out["mean_diff"], out["statistic"], out["p_value"]], [dbar, stat, p], rtol=1e-10)


@pytest.mark.parametrize("args,pattern", [
    (([[1.0]] * 20, [[1.0]] * 19), "losses_a and losses_b must cover the same rows, got 20 and 19 cells"),
    (([[1.0]] * 10 + [[None]] * 10, [[None]] * 10 + [[1.0]] * 10), "have no row where both hold a number"),
    (([[1.0]] * 5, [[2.0]] * 5), "needs at least 10 pairs of losses, got 5"),
    (([[1.0]] * 20, [[2.0]] * 20, 10), "lags must be a whole number from 0 to 9"),
    (([[1.0]] * 20, [[2.0]] * 20, -1), "lags must be a whole number from 0 to 9"),
    (([[1.0]] * 19 + [["QLIKE"]], [[2.0]] * 20), 'losses_a row 20 holds text "QLIKE"'),
])
def test_bad_inputs(args, pattern):
    out = VOLDM(*args)
    assert len(out) == 1 and out[0][0].startswith("ERROR:") and pattern in out[0][0], out
