"""VOLTESTS, VOLRISK and VOLCOMPARE as worksheet functions: shapes, agreement with the core,
bad cells, and the never-raise property."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLCOMPARE, VOLFIT, VOLRISK, VOLTESTS
from xlfuncs.core import fit as core_fit
from xlfuncs.sheet.cache import FIT_CACHE

from test_sheet import (  # noqa: E402  (tests/ is on sys.path under pytest)
    _PROPERTY, ARCH_TABLE, R_ARCH, R_GARCH, _check_result, _fits, _returns, assert_error, col,
)

GARCH_CELLS = col(R_GARCH)
GARCH_TABLE = VOLFIT(GARCH_CELLS, "GARCH(1,1)")


def test_voltests_layout_and_values():
    out = VOLTESTS(GARCH_CELLS, GARCH_TABLE, 5)
    assert out[0] == ["test", "statistic", "df", "p_value", "reading"]
    assert all(isinstance(r[4], str) and r[4] for r in out[1:])
    labels = [r[0] for r in out[1:]]
    assert labels == ["Ljung-Box z", "Ljung-Box z^2", "ARCH-LM", "Jarque-Bera", "Sign bias",
                      "Negative size bias", "Positive size bias", "Joint sign bias"]
    rows = {r[0]: r for r in out[1:]}
    assert rows["Ljung-Box z"][2] == 5  # constant mean: no ARMA terms to subtract
    assert rows["Ljung-Box z^2"][2] == 3  # 5 lags less the GARCH(1,1) order, common practice
    # Jarque-Bera on the standardised residuals against SciPy
    from xlfuncs.core import in_sample
    f = core_fit(R_GARCH, "GARCH(1,1)")
    e, v, _ = in_sample(f, R_GARCH)
    jb = stats.jarque_bera(e / np.sqrt(v))
    assert_allclose(rows["Jarque-Bera"][1], jb.statistic, rtol=1e-10)
    assert_allclose(rows["Jarque-Bera"][3], jb.pvalue, rtol=1e-8, atol=1e-300)


def test_voltests_constant_variance_fit_is_the_classical_tests():
    """On a constant-variance fit the tests are the classical ones on the demeaned returns:
    Ljung-Box on the returns themselves (statsmodels as reference)."""
    from statsmodels.stats.diagnostic import acorr_ljungbox

    table = VOLFIT(GARCH_CELLS, "CONST")
    rows = {r[0]: r for r in VOLTESTS(GARCH_CELLS, table, 6)[1:]}
    ref = acorr_ljungbox(R_GARCH, lags=[6])
    assert_allclose(rows["Ljung-Box z"][1], ref["lb_stat"].iloc[0], rtol=1e-10)
    assert rows["Ljung-Box z^2"][2] == 6


def test_volrisk_layout_and_one_step_normal():
    """One-period VaR of a normal fit: -(m + s * norm.ppf(1 - level)) (SciPy)."""
    out = VOLRISK(GARCH_CELLS, GARCH_TABLE, 0.99, 1)
    assert [r[0] for r in out] == ["measure", "VaR", "ES", "mean", "sd", "level", "horizon", "method"]
    d = {r[0]: r[1] for r in out}
    assert_allclose(d["VaR"], -(d["mean"] + d["sd"] * stats.norm.ppf(0.01)), rtol=1e-12)
    assert_allclose(d["ES"], -d["mean"] + d["sd"] * stats.norm.pdf(stats.norm.ppf(0.01)) / 0.01, rtol=1e-10)
    assert d["level"] == 0.99 and d["horizon"] == 1 and d["method"].startswith("exact")
    assert d["ES"] > d["VaR"] > 0


def test_volrisk_defaults_and_horizon():
    d1 = {r[0]: r[1] for r in VOLRISK(GARCH_CELLS, GARCH_TABLE)}
    assert d1["level"] == 0.99 and d1["horizon"] == 1
    d12 = {r[0]: r[1] for r in VOLRISK(GARCH_CELLS, GARCH_TABLE, 0.99, 12)}
    assert "simulation" in d12["method"] and d12["VaR"] > d1["VaR"]


@pytest.mark.parametrize("level,pattern", [
    (1.5, "level must be between 0.5 and 1"), (99, "level must be between 0.5 and 1"),
    (0.3, "level must be between 0.5 and 1"), ("x", 'level must be a number, e.g. 0.99, got text "x"'),
    (True, "level must be a number"), ([[0.9, 0.95]], "level must be one cell"),
])
def test_volrisk_bad_level(level, pattern):
    assert_error(VOLRISK(GARCH_CELLS, GARCH_TABLE, level, 1), pattern)


@pytest.mark.parametrize("horizon", [0, 2.5, 601, "x", -1])
def test_volrisk_bad_horizon(horizon):
    assert_error(VOLRISK(GARCH_CELLS, GARCH_TABLE, 0.99, horizon), "horizon must be a whole number from 1 to 600")


@pytest.mark.parametrize("lags", [0, 2.5, "x", 10_000])
def test_voltests_bad_lags(lags):
    assert_error(VOLTESTS(GARCH_CELLS, GARCH_TABLE, lags), "lags must be a whole number from 1 to")


def test_volcompare_rows_and_rank():
    out = VOLCOMPARE(GARCH_CELLS, "ARCH(1), GARCH(1,1); GJR-GARCH(1,1)", [["normal"], ["t"]])
    assert out[0] == ["model", "dist", "loglik", "params", "aic", "bic", "persistence", "converged", "rank_bic"]
    body = out[1:]
    assert len(body) == 6
    for row in body:
        f = core_fit(R_GARCH, row[0], row[1])
        assert_allclose(row[2], f.loglik, rtol=1e-9)
        assert row[3] == f.n_free
        assert_allclose(row[5], -2 * f.loglik + f.n_free * math.log(f.nobs), rtol=1e-12)  # Schwarz (1978)
    ranks = sorted((r[5], r[8]) for r in body)
    assert [k for _, k in ranks] == list(range(1, 7))


def test_volcompare_bad_candidate_keeps_the_others():
    out = VOLCOMPARE(GARCH_CELLS, [["GARCH(1,1)"], ["FOO"], [None]])
    assert out[1][0] == "GARCH(1,1)" and out[1][8] == 1
    assert out[2][0] == "FOO" and out[2][2].startswith("ERROR: model \"FOO\"") and out[2][8] is None


@pytest.mark.parametrize("args,pattern", [
    ((GARCH_CELLS, None), "models is empty"),
    ((GARCH_CELLS, "GARCH", None, "bogus=1"), 'unknown key "bogus"'),
    (([[1.0], ["x"]], "GARCH"), 'returns row 2 holds text "x"'),
    ((GARCH_CELLS, [[3.0]]), "models must be text"),
])
def test_volcompare_errors(args, pattern):
    assert_error(VOLCOMPARE(*args), pattern)


def test_volcompare_uses_the_fit_cache():
    FIT_CACHE.clear()
    VOLCOMPARE(GARCH_CELLS, "ARCH(1), GARCH(1,1)")
    assert FIT_CACHE.stats["estimations"] == 2
    VOLFIT(GARCH_CELLS, "GARCH(1,1)")
    VOLCOMPARE(GARCH_CELLS, "ARCH(1), GARCH(1,1)")
    assert FIT_CACHE.stats["estimations"] == 2


def test_arch_table_tests_and_risk_run():
    assert len(VOLTESTS(col(R_ARCH), ARCH_TABLE)) == 9
    assert len(VOLRISK(col(R_ARCH), ARCH_TABLE, 0.95, 3)) == 8


# ----------------------------------------------------------------- never raise
_levels = st.one_of(st.floats(0, 1.5), st.sampled_from([None, "x", True, 0.99, 0.95, 99, [[0.9]]]))
_lags = st.one_of(st.integers(-2, 40), st.sampled_from([None, 2.5, "x", True, [[3]]]))
_small_horizons = st.one_of(st.integers(-1, 5), st.sampled_from([None, 2.5, "x", 700]))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, fit=_fits, lags=_lags)
def test_property_voltests_never_raises(returns, fit, lags):
    _check_result(VOLTESTS(returns, fit, lags))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, fit=_fits, level=_levels, horizon=_small_horizons)
def test_property_volrisk_never_raises(returns, fit, level, horizon):
    _check_result(VOLRISK(returns, fit, level, horizon))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, models=st.sampled_from(["CONST", "ARCH(1), CONST", [["ARCH(1)"], ["FOO"]], None, 3.0, "#N/A", "ERROR: x"]),
       dist=st.sampled_from([None, "normal", "normal, t", "bogus", 1.0]))
def test_property_volcompare_never_raises(returns, models, dist):
    out = VOLCOMPARE(returns, models, dist)
    assert isinstance(out, list) and all(isinstance(r, list) for r in out)
    if len(out) == 1:
        assert len(out[0]) == 1 and out[0][0].startswith("ERROR:")
    else:
        for row in out[1:]:
            for c in row:
                assert c is None or type(c) in (bool, int, float, str)
                if type(c) is float:
                    assert math.isfinite(c)


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(fit=_fits, periods=_small_horizons, paths=_small_horizons, shocks=_returns)
def test_property_volsim_and_volnews_never_raise(fit, periods, paths, shocks):
    from xlfuncs import VOLNEWS, VOLSIM

    _check_result(VOLSIM(fit, periods, paths, 3))
    _check_result(VOLNEWS(fit, shocks))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, var=_returns, level=_levels)
def test_property_volcoverage_never_raises(returns, var, level):
    from xlfuncs import VOLCOVERAGE

    _check_result(VOLCOVERAGE(returns, var, level))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, fit=st.one_of(_fits, st.sampled_from(["ARCH(1)", "CONST", "FOO", None])),
       window=st.one_of(st.integers(-1, 70), st.sampled_from([None, 2.5, "x"])),
       options=st.sampled_from([None, "what=series", "scheme=expanding; refit=7", "scheme=x", "refit=0", "bogus=1"]))
def test_property_volbacktest_never_raises(returns, fit, window, options):
    from xlfuncs import VOLBACKTEST

    _check_result(VOLBACKTEST(returns, fit, window, None, options))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, var=_returns, es=_returns, level=_levels)
def test_property_volcoverage_with_es_never_raises(returns, var, es, level):
    from xlfuncs import VOLCOVERAGE

    _check_result(VOLCOVERAGE(returns, var, level, es))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, fit=_fits)
def test_property_volstability_never_raises(returns, fit):
    from xlfuncs import VOLSTABILITY

    _check_result(VOLSTABILITY(returns, fit))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(a=_returns, b=_returns, lags=_lags)
def test_property_voldm_never_raises(a, b, lags):
    from xlfuncs import VOLDM

    _check_result(VOLDM(a, b, lags))


def test_compare_does_not_rank_fits_on_different_returns():
    """Under presample=drop each model leaves out its own lags: an AR(1) mean is fitted on one
    return fewer than a constant mean, and BIC over different samples does not compare (common
    practice: information criteria rank fits of the same data).  The ranks stay blank and a last
    row says why; under presample=mean (the same returns for all) the ranks are given."""
    import csv

    from xlfuncs import VOLCOMPARE
    from xlfuncs.demo import data_file

    r = [[float(x["return"])] for x in csv.DictReader(open(data_file("demo_returns.csv")))]
    out = VOLCOMPARE(r, [["GARCH(1,1)"], ["AR(1)-GARCH(1,1)"]], "normal", "presample=drop")
    assert [row[8] for row in out[1:3]] == [None, None]
    assert out[-1][0] == "note" and "no rank" in out[-1][1] and len(out[-1]) == len(out[0])
    same = VOLCOMPARE(r, [["GARCH(1,1)"], ["AR(1)-GARCH(1,1)"]], "normal")
    assert sorted(row[8] for row in same[1:]) == [1, 2] and same[-1][0] != "note"


def test_volsim_refuses_an_explosive_typed_table():
    """VOLSIM's paths start from the model's long-run variance; a typed table with alpha + beta =
    1.2 has none (covariance stationarity needs the sum below 1: Bollerslev 1986), and its paths
    ran to six figures without a word.  Refused; IGARCH (persistence 1 by design) and a stationary
    table still simulate."""
    from xlfuncs import VOLSIM

    head = [["parameter", "estimate"], ["dist", "normal"], ["mu", 0.0], ["omega", 0.1]]
    explosive = [head[0], ["model", "GARCH(1,1)"]] + head[1:] + [["alpha[1]", 0.6], ["beta[1]", 0.6]]
    out = VOLSIM(explosive, 300, 2)
    assert out[0][0].startswith("ERROR: the fit's persistence is 1.2, above 1")
    for model, a, b in (("IGARCH(1,1)", 0.1, 0.9), ("GARCH(1,1)", 0.1, 0.8)):
        table = [head[0], ["model", model]] + head[1:] + [["alpha[1]", a], ["beta[1]", b]]
        rows = VOLSIM(table, 3, 2)
        assert len(rows) == 3 and all(isinstance(v, float) for row in rows for v in row)
