"""Expected-shortfall backtests in VOLCOVERAGE and VOLBACKTEST: the exceedance-residual test of
McNeil & Frey (2000) and the Z2 test of Acerbi & Szekely (2014), against the papers' definitions
on hand-built cases with known answers and on simulated forecasts that are right or understated."""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLBACKTEST, VOLCOVERAGE, VOLFIT, VOLFORECAST
from xlfuncs.core.distributions import get_distribution
from xlfuncs.core.esbacktest import es_tests, exceedance_residuals, mcneil_frey, z2_pvalue, z2_statistic

LEVEL = 0.975
ALPHA = 1 - LEVEL
Q = stats.norm.ppf(ALPHA)  # SciPy
ES_Z = stats.norm.pdf(Q) / ALPHA  # normal ES at 97.5%: phi(q)/alpha (closed form)


def _column(x):
    return [[float(v)] for v in x]


def _d(out):
    return {row[0]: row[1] for row in out[1:]}


def _normal_forecasts(T, seed, truth_scale=1.0):
    """Normal VaR and ES forecasts with a moving volatility; returns drawn with ``truth_scale``
    times that volatility (1: the forecasts are right; 1.3: VaR and ES are 30% too low)."""
    rng = np.random.default_rng(seed)
    sd = np.exp(rng.normal(0.0, 0.3, T))
    r = truth_scale * sd * rng.standard_normal(T)
    return r, -Q * sd, ES_Z * sd, sd


# ---------------------------------------------------------------------------- hand-built
def test_z2_hand_built_cases():
    """Z2 = 1 + sum r 1(r < -VaR) / (T alpha ES) (Acerbi & Szekely 2014).  200 days at 97.5%
    expect 5 exceptions; 5 exceptions of exactly -ES give Z2 = 0, the value under a right ES;
    tail losses 30% beyond the ES forecast give Z2 = 1 - 1.3 = -0.3."""
    T = 200
    var, es = np.full(T, 2.0), np.full(T, 3.0)
    r = np.full(T, 0.1)
    r[[10, 50, 90, 130, 170]] = -3.0
    assert_allclose(z2_statistic(r, var, es, LEVEL), 0.0, atol=1e-12)
    r[[10, 50, 90, 130, 170]] = -3.9
    assert_allclose(z2_statistic(r, var, es, LEVEL), -0.3, atol=1e-12)
    # ten exceptions of -ES each: twice the expected frequency counts too, Z2 = 1 - 2 = -1
    r[[10, 50, 90, 130, 170, 20, 60, 100, 140, 180]] = -3.0
    assert_allclose(z2_statistic(r, var, es, LEVEL), -1.0, atol=1e-12)


def test_exceedance_residuals_hand_built():
    """McNeil & Frey (2000): residuals (loss - ES) / sigma on the exceptions only; tail losses
    2.5, 3.0, 3.5 against ES 2.5 and sigma 1 give 0, 0.5, 1: mean 0.5, sd 0.5, t = sqrt(3)."""
    r = np.array([0.3, -2.5, 0.1, -3.0, -1.9, -3.5, 0.0])
    var, es, sigma = np.full(7, 2.0), np.full(7, 2.5), np.ones(7)
    x = exceedance_residuals(r, var, es, sigma)
    assert_allclose(x, [0.0, 0.5, 1.0])
    mean, t, p = mcneil_frey(x)
    assert_allclose([mean, t], [0.5, math.sqrt(3.0)], rtol=1e-12)
    assert 0.0 <= p < 0.5
    # against an ES of 3.0 the residuals are -0.5, 0, 0.5: t = 0, about half the resamples reach it
    mean, t, p = mcneil_frey(exceedance_residuals(r, var, np.full(7, 3.0), sigma))
    assert mean == 0.0 and t == 0.0 and 0.3 < p < 0.7


def test_bootstrap_p_value_close_to_student_t():
    """For 200 normal residuals the bootstrap-t p-value (Efron & Tibshirani 1993) is close to the
    one-sided Student t p-value (SciPy), its textbook approximation."""
    x = np.random.default_rng(4).normal(0.15, 1.0, 200)
    mean, t, p = mcneil_frey(x)
    assert_allclose(t, x.mean() / (x.std(ddof=1) / math.sqrt(200)), rtol=1e-12)
    assert_allclose(p, stats.t.sf(t, 199), atol=0.015)


def test_z2_simulated_thresholds_match_the_paper():
    """Acerbi & Szekely (2014) give Z2 thresholds for alpha = 2.5% and 250 days of about -0.70
    (5%) and -1.8 (0.01%) (from memory); the p-value simulated under normal forecasts agrees."""
    T = 250
    es = np.full(T, ES_Z)

    def ppf(u, rows):
        return stats.norm.ppf(u)

    p5 = z2_pvalue(-0.70, np.zeros(T), np.ones(T), es, LEVEL, ppf, sims=4000)
    assert abs(p5 - 0.05) < 0.012
    assert z2_pvalue(-1.8, np.zeros(T), np.ones(T), es, LEVEL, ppf, sims=4000) < 0.002


# ---------------------------------------------------------------------------- simulated
def test_right_forecasts_reject_at_about_the_nominal_rate():
    """30 samples of 500 days with right normal VaR and ES: each test rejects at 5% at most 5
    times (binomial(30, 0.05) exceeds 5 with probability 0.003)."""
    mf = z2 = 0
    for s in range(30):
        r, v, e, _ = _normal_forecasts(500, 100 + s)
        t = es_tests(r, v, e, LEVEL, sims=1000, boot=2000)
        mf += t.mf_p < 0.05
        z2 += t.z2_p < 0.05
    assert mf <= 5 and z2 <= 5


def test_understated_es_rejects():
    """Returns 30% more volatile than forecast (VaR and ES 30% too low), 1,000 days: both tests
    reject and the reading says so.  With the VaR right and the ES only half as far beyond it as it
    should be (2,500 days, about 60 exceptions, expected t about 4), the exceedance residuals reject
    while Z2, whose expected value moves only to about 1 - 2.34/2.15 = -0.09 here, need not."""
    r, v, e, _ = _normal_forecasts(1000, 7, truth_scale=1.3)
    out = _d(VOLCOVERAGE(_column(r), _column(v), LEVEL, _column(e)))
    assert out["McNeil-Frey p_value"] < 0.01 and out["Z2 p_value"] < 0.01 and out["Acerbi-Szekely Z2"] < -0.7
    assert out["ES reading"] == "ES understated: losses beyond the VaR exceed the ES forecasts"
    assert out["coverage reading"] == "too many exceptions: VaR too low"
    r, v, e, _ = _normal_forecasts(2500, 8)
    low = v + 0.5 * (e - v)
    t = es_tests(r, v, low, LEVEL)
    assert t.mf_p < 0.01 and t.mf_mean > 0


# ---------------------------------------------------------------------------- worksheet
def test_volcoverage_keeps_its_layout_without_es():
    r, v, e, _ = _normal_forecasts(300, 9)
    out = VOLCOVERAGE(_column(r), _column(v), LEVEL)
    assert [row[0] for row in out] == [
        "measure", "forecasts", "exceptions", "exception rate", "expected rate", "Kupiec LR", "Kupiec p_value",
        "independence LR", "independence p_value", "conditional coverage LR", "conditional coverage p_value", "zone",
        "coverage reading"]
    with_es = VOLCOVERAGE(_column(r), _column(v), LEVEL, _column(e))
    assert with_es[:len(out)] == out
    assert [row[0] for row in with_es[len(out):]] == [
        "McNeil-Frey t", "McNeil-Frey p_value", "Acerbi-Szekely Z2", "Z2 p_value", "Z2 null", "ES reading"]


def test_volbacktest_es_series_and_tests(dmbp):
    """A fixed normal GARCH(1,1) table over DEM/GBP: ES = -mean + vol phi(q)/alpha (closed form,
    SciPy), and the summary's ES tests equal VOLCOVERAGE's on the series: the residuals scaled by
    the volatility there and by ES - VaR here differ by a constant factor, which leaves t unchanged,
    and the normal matched to each VaR and ES is the fitted one, so Z2's simulated p-value agrees."""
    cells = _column(dmbp[:1400])
    table = VOLFIT(cells[:1000], "GARCH(1,1)")
    series = VOLBACKTEST(cells, table, 1000, LEVEL, "what=series")
    assert series[0] == ["index", "variance", "VaR", "return", "exception", "ES", "QLIKE"]
    body = series[1:]
    window = cells[:1000]
    m = VOLFORECAST(window, table, 1, "mean")[0][0]
    assert_allclose(body[0][5], -m + math.sqrt(body[0][1]) * ES_Z, rtol=1e-10)
    summary = _d(VOLBACKTEST(cells, table, 1000, LEVEL))
    cov = _d(VOLCOVERAGE([[row[3]] for row in body], [[row[2]] for row in body], LEVEL, [[row[5]] for row in body]))
    assert summary["exceptions"] == cov["exceptions"] > 0
    for k in ("McNeil-Frey t", "Acerbi-Szekely Z2"):
        assert_allclose(summary[k], cov[k], rtol=1e-9)
    assert_allclose(summary["McNeil-Frey p_value"], cov["McNeil-Frey p_value"], atol=1e-12)
    assert_allclose(summary["Z2 p_value"], cov["Z2 p_value"], atol=0.01)
    assert summary["Z2 null"] == "fitted normal distribution"


def test_volbacktest_student_t_es(dmbp):
    """With t shocks, ES of the unit-variance t at 97.5%: sqrt((nu-2)/nu) (nu + q^2)/(nu - 1)
    f(q)/alpha, q and f the Student t quantile and density (McNeil, Frey & Embrechts 2005, from
    memory; SciPy for q and f)."""
    cells = _column(dmbp[:1100])
    table = VOLFIT(cells[:1000], "GARCH(1,1)", "t")
    nu = {row[0]: row[1] for row in table}["nu"]
    series = VOLBACKTEST(cells, table, 1000, LEVEL, "what=series")[1:]
    m = VOLFORECAST(cells[:1000], table, 1, "mean")[0][0]
    q = stats.t.ppf(ALPHA, nu)
    es_z = math.sqrt((nu - 2) / nu) * (nu + q * q) / (nu - 1) * stats.t.pdf(q, nu) / ALPHA
    assert_allclose(series[0][5], -m + math.sqrt(series[0][1]) * es_z, rtol=1e-9)
    assert "t distribution" in _d(VOLBACKTEST(cells, table, 1000, LEVEL))["Z2 null"]


@pytest.mark.parametrize("es,pattern", [
    ([[2.0]] * 29, "returns and es must cover the same rows, got 30 and 29 cells"),
    ([[2.0]] * 12 + [[0.5]] + [[2.0]] * 17, "ES row 13 (0.5) is below the VaR (1)"),
    ([[2.0]] * 29 + [["x"]], 'es row 30 holds text "x"'),
])
def test_volcoverage_es_errors(es, pattern):
    r = [[0.1]] * 30
    v = [[1.0]] * 30
    out = VOLCOVERAGE(r, v, 0.99, es)
    assert len(out) == 1 and out[0][0].startswith("ERROR:") and pattern in out[0][0], out


def test_volcoverage_rows_without_all_three():
    out = VOLCOVERAGE([[0.1]] * 10 + [[None]] * 10, [[1.0]] * 20, 0.99, [[None]] * 10 + [[2.0]] * 10)
    assert out == [["ERROR: returns, var and es have no row where all three hold a number"]]


def test_es_row_numbers_name_the_range_rows():
    """With blanks at the top, the row an ES error names is the row of the range."""
    r = [[None]] * 3 + [[0.1]] * 30
    v = [[None]] * 3 + [[1.0]] * 30
    e = [[None]] * 3 + [[2.0]] * 10 + [[0.5]] + [[2.0]] * 19
    out = VOLCOVERAGE(r, v, 0.99, e)
    assert "ES row 14 (0.5)" in out[0][0], out


def test_es_tests_with_a_distribution_scale_by_the_volatility():
    """With a distribution the residuals are scaled by the given volatility (the paper's form)."""
    r, v, e, sd = _normal_forecasts(400, 12)
    t = es_tests(r, v, e, LEVEL, mean=np.zeros(400), sd=sd, dist=get_distribution("normal"), eta=np.empty((1, 0)))
    x = exceedance_residuals(r, v, e, sd)
    assert t.exceptions == x.size > 0
    assert_allclose(t.mf_mean, np.mean((-r[r < -v] - e[r < -v]) / sd[r < -v]), rtol=1e-12)


def test_volbacktest_keeps_coverage_when_an_es_forecast_is_a_gain():
    """A series with a mean far above its spread (common practice: a 90% VaR of such a series is a
    gain, so its ES is negative): the ES tests cannot run (Z2 divides by ES), and the backtest says
    why in the ES reading instead of losing the coverage tests to one ERROR cell."""
    rng = np.random.default_rng(7)
    r = 5.0 + 0.1 * rng.standard_normal(300)
    out = _d(VOLBACKTEST(_column(r), "GARCH(1,1)", 200, 0.9))
    assert out["forecasts"] == 100 and isinstance(out["Kupiec p_value"], float)
    assert out["McNeil-Frey t"] is None and out["Acerbi-Szekely Z2"] is None
    assert out["ES reading"].startswith("not computed: ES row ") and "not a positive loss" in out["ES reading"]
    series = VOLBACKTEST(_column(r), "GARCH(1,1)", 200, 0.9, "what=series")
    assert min(row[5] for row in series[1:]) < 0  # the gain the reading speaks of
