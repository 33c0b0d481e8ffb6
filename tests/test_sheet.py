"""Tests of the four central worksheet functions: VOLFIT, VOLSERIES, VOLFORECAST, VOLLOGLIK.

The contract is DESIGN.md ("Fit table", "Options string", "Worksheet function catalogue").
Outside references, named beside each check:
- the GARCH(1,1) variance recursion sigma2[t] = omega + alpha e[t-1]^2 + beta sigma2[t-1]
  (Bollerslev 1986; ARCH(1) is beta = 0, Engle 1982), with the presample convention of DESIGN.md;
- the normal log-density from SciPy (``scipy.stats.norm.logpdf``) and the two-sided normal
  p-value from ``scipy.stats.norm.sf``;
- AIC = -2 loglik + 2k (Akaike 1974) and BIC = -2 loglik + k ln n (Schwarz 1978);
- ordinary least squares from statsmodels (``statsmodels.api.OLS``) for the conditional AR(1);
- the closed-form normal ML estimates of mean and variance (common practice);
- the persistence, unconditional variance and half-life of a GARCH(1,1) and its h-step
  variance forecast (common practice).
All data are simulated with fixed seeds.
"""

import copy
import math
import re

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLFIT, VOLFORECAST, VOLLOGLIK, VOLSERIES
from xlfuncs.sheet.cache import FIT_CACHE

# ---------------------------------------------------------------------------------------------
# simulated data and small helpers


def simulate_garch(n, mu, omega, alpha, beta, seed):
    """A constant-mean GARCH(1,1) path with normal shocks (beta=0 gives an ARCH(1))."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal(n + 100)
    s2 = omega / (1.0 - alpha - beta)
    out = np.empty(n + 100)
    for t in range(n + 100):
        e = math.sqrt(s2) * z[t]
        out[t] = mu + e
        s2 = omega + alpha * e * e + beta * s2
    return out[100:]  # drop a burn-in


R_GARCH = simulate_garch(400, mu=0.05, omega=0.1, alpha=0.15, beta=0.75, seed=11)
R_ARCH = simulate_garch(300, mu=0.0, omega=0.5, alpha=0.4, beta=0.0, seed=12)
R_IID = np.random.default_rng(2).standard_normal(300)


def col(x):
    return [[float(v)] for v in x]


def rows_by_name(table):
    return {row[0]: row for row in table}


def value(table, name):
    return rows_by_name(table)[name][1]


def is_error(result):
    return (
        isinstance(result, list) and len(result) == 1 and len(result[0]) == 1
        and isinstance(result[0][0], str) and result[0][0].startswith("ERROR:")
    )


def assert_error(result, pattern=None):
    assert is_error(result), result
    if pattern is not None:
        assert re.search(pattern, result[0][0]), result[0][0]


def column_values(result):
    """A one-column result as floats, nan for blank cells."""
    assert all(len(r) == 1 for r in result)
    return np.array([np.nan if r[0] is None else r[0] for r in result], dtype=float)


GARCH_TABLE = VOLFIT(col(R_GARCH), "GARCH(1,1)")
ARCH_TABLE = VOLFIT(col(R_ARCH), "ARCH(1)")
PARAM_ROW_NAMES = ("mu", "omega", "alpha[1]", "beta[1]")
STAT_ROW_NAMES = ("loglik", "aic", "bic", "nobs", "persistence", "uncond_variance", "half_life", "converged")


def test_simulated_fits_are_clean():
    # the premise of the tests below: converged, nothing held at a bound
    for table in (GARCH_TABLE, ARCH_TABLE):
        assert not is_error(table), table
        assert value(table, "converged") is True
        assert not any(isinstance(c, str) and c == "at bound" for row in table for c in row)


# ---------------------------------------------------------------------------------------------
# the fit table layout (DESIGN.md "Fit table")


def test_fit_table_layout():
    t = GARCH_TABLE
    assert t[0] == ["parameter", "estimate", "std_error", "t_stat", "p_value"]
    assert t[1] == ["model", "GARCH(1,1)", None, None, None]
    assert t[2] == ["dist", "normal", None, None, None]
    assert t[3] == ["options", "presample=mean; se=robust", None, None, None]
    assert [r[0] for r in t[4:8]] == list(PARAM_ROW_NAMES)
    assert [r[0] for r in t[8:]] == list(STAT_ROW_NAMES)
    assert len(t) == 1 + 3 + len(PARAM_ROW_NAMES) + len(STAT_ROW_NAMES)
    assert {len(r) for r in t} == {5}  # rectangular, so it spills as one block
    for r in t[4:8]:
        assert all(isinstance(v, float) for v in r[1:]), r
    for r in t[8:-1]:
        assert r[2:] == [None, None, None], r
    assert isinstance(value(t, "nobs"), int) and value(t, "nobs") == len(R_GARCH)
    conv = t[-1]
    assert conv[0] == "converged" and conv[1] is True
    assert isinstance(conv[2], str) and conv[2]  # the optimiser's message in the third column
    assert conv[3:] == [None, None]


def test_fit_table_parameter_rows_for_other_models():
    t = VOLFIT(col(R_ARCH), "ar(1)-arch", "Gaussian", "presample=drop")
    assert t[1][1] == "AR(1)-ARCH(1)"
    assert t[2][1] == "normal"
    assert t[3][1] == "presample=drop; se=robust"
    assert [r[0] for r in t[4:8]] == ["mu", "phi[1]", "omega", "alpha[1]"]
    assert [r[0] for r in t[8:]] == list(STAT_ROW_NAMES)


def test_distribution_parameter_row_follows_the_variance_rows():
    t = VOLFIT(col(R_ARCH), "ARCH(1)", "Student", "SE=Hessian; NU=8")
    assert t[2][1] == "t"
    assert t[3][1] == "presample=mean; se=hessian; nu=8"
    assert [r[0] for r in t[4:8]] == ["mu", "omega", "alpha[1]", "nu"]


def test_t_stat_and_p_value_columns():
    for r in GARCH_TABLE[4:8]:
        _, est, se, t, p = r
        assert_allclose(t, est / se, rtol=1e-12)
        assert_allclose(p, 2.0 * stats.norm.sf(abs(t)), rtol=1e-10)  # SciPy two-sided normal p-value


def test_persistence_rows():
    d = {n: value(GARCH_TABLE, n) for n in PARAM_ROW_NAMES}
    pers = d["alpha[1]"] + d["beta[1]"]  # common practice: alpha + beta for a GARCH(1,1)
    assert_allclose(value(GARCH_TABLE, "persistence"), pers, rtol=1e-12)
    assert_allclose(value(GARCH_TABLE, "uncond_variance"), d["omega"] / (1 - pers), rtol=1e-12)
    assert_allclose(value(GARCH_TABLE, "half_life"), math.log(0.5) / math.log(pers), rtol=1e-12)


def test_constant_variance_table():
    t = VOLFIT(col(R_GARCH), "CONST")
    assert [r[0] for r in t[4:6]] == ["mu", "omega"]
    # closed-form normal ML estimates (common practice): the sample mean and the variance with ddof=0
    assert_allclose(value(t, "mu"), R_GARCH.mean(), rtol=1e-7)
    assert_allclose(value(t, "omega"), R_GARCH.var(), rtol=1e-7)
    assert value(t, "persistence") is None
    assert value(t, "half_life") is None
    assert_allclose(value(t, "uncond_variance"), value(t, "omega"), rtol=1e-12)
    # and the maximised log-likelihood is the normal one at those estimates (scipy.stats.norm)
    ll = stats.norm.logpdf(R_GARCH, R_GARCH.mean(), math.sqrt(R_GARCH.var())).sum()
    assert_allclose(value(t, "loglik"), ll, rtol=1e-10)


@pytest.mark.parametrize(
    "data, model, dist, options, n_fixed",
    [
        (R_GARCH, "GARCH(1,1)", None, None, 0),
        (R_ARCH, "ARCH(1)", None, None, 0),
        (R_ARCH, "ARCH(1)", None, "mu=0", 1),
        (R_ARCH, "ARCH(1)", "t", "nu=8", 1),
        (R_ARCH, "ARCH(1)", "t", "nu=8; mu=0", 2),
        (R_ARCH, "ARCH(1)", None, "presample=drop", 0),
        (R_GARCH, "CONST", None, None, 0),
    ],
)
def test_aic_bic_count_free_parameters(data, model, dist, options, n_fixed):
    t = VOLFIT(col(data), model, dist, options)
    names = {r[0] for r in t}
    params = [r for r in t[4:] if r[0] not in STAT_ROW_NAMES]
    assert not any(r[2] == "at bound" for r in params)  # premise: every free parameter is interior
    assert sum(r[2] == "fixed" for r in params) == n_fixed
    k = len(params) - n_fixed
    ll, n = value(t, "loglik"), value(t, "nobs")
    assert {"aic", "bic"} <= names
    assert_allclose(value(t, "aic"), -2 * ll + 2 * k, rtol=1e-12)  # Akaike (1974)
    assert_allclose(value(t, "bic"), -2 * ll + k * math.log(n), rtol=1e-12)  # Schwarz (1978)


def test_fixed_parameter_rows():
    t = VOLFIT(col(R_ARCH), "ARCH(1)", None, "alpha0=0.6; Mu=0")
    assert t[3][1] == "presample=mean; se=robust; omega=0.6; mu=0"
    rows = rows_by_name(t)
    assert rows["omega"][1:] == [0.6, "fixed", None, None]
    assert rows["mu"][1:] == [0.0, "fixed", None, None]
    assert isinstance(rows["alpha[1]"][2], float)


def test_nobs_with_presample_drop():
    # DESIGN.md: for a constant-mean ARCH(1) the conditional likelihood starts at t = 2
    t = VOLFIT(col(R_ARCH), "ARCH(1)", None, "presample=drop")
    assert value(t, "nobs") == len(R_ARCH) - 1


def test_conditional_ar1_is_ols():
    # DESIGN.md: a constant-variance AR(1) under presample=drop has OLS as its maximiser;
    # reference: statsmodels OLS of r[t] on (1, r[t-1]), ML variance SSR / (n - 1)
    r = R_ARCH
    t = VOLFIT(col(r), "AR(1)", None, "presample=drop")
    ols = sm.OLS(r[1:], sm.add_constant(r[:-1])).fit()
    assert_allclose([value(t, "mu"), value(t, "phi[1]")], ols.params, rtol=1e-6)
    assert_allclose(value(t, "omega"), ols.ssr / (len(r) - 1), rtol=1e-6)
    assert value(t, "nobs") == len(r) - 1


# ---------------------------------------------------------------------------------------------
# ranges: trimming, rows, missing=skip


def test_leading_and_trailing_blanks_are_trimmed():
    FIT_CACHE.clear()
    plain = VOLFIT(col(R_ARCH), "ARCH(1)")
    FIT_CACHE.clear()  # estimate again, rather than read the cache
    padded = VOLFIT([[None], [""], ["  "]] + col(R_ARCH) + [[None]] * 5 + [[""]], "ARCH(1)")
    assert padded == plain
    assert value(padded, "nobs") == len(R_ARCH)


def test_row_range_works_like_a_column():
    FIT_CACHE.clear()
    as_col = VOLFIT(col(R_ARCH), "ARCH(1)")
    FIT_CACHE.clear()
    as_row = VOLFIT([[None] + list(R_ARCH) + [None, None]], "ARCH(1)")
    assert as_row == as_col
    series = VOLSERIES([list(R_ARCH)], as_col)
    assert len(series) == 1 and len(series[0]) == len(R_ARCH)
    assert_allclose(np.array(series[0], dtype=float), column_values(VOLSERIES(col(R_ARCH), as_col)))


def test_missing_skip():
    holey = col(R_ARCH[:50]) + [[None]] + col(R_ARCH[50:])
    assert_error(VOLFIT(holey, "ARCH(1)"), r"returns row 51 is blank inside the data.*missing=skip")
    FIT_CACHE.clear()
    t = VOLFIT(holey, "ARCH(1)", None, "missing=skip")
    assert t[3][1] == "presample=mean; se=robust; missing=skip"
    plain = VOLFIT(col(R_ARCH), "ARCH(1)")
    assert t[4:] == plain[4:]  # the same numbers, the same fit
    s = VOLSERIES(holey, t)
    assert len(s) == len(holey) and s[50] == [None]
    assert_allclose(column_values(s[:50] + s[51:]), column_values(VOLSERIES(col(R_ARCH), plain)))
    assert VOLLOGLIK(holey, t) == VOLLOGLIK(col(R_ARCH), plain)


# ---------------------------------------------------------------------------------------------
# VOLSERIES and VOLLOGLIK against the published recursion


def garch_reference(r, mu, omega, alpha, beta, presample):
    """sigma2[t] = omega + alpha e[t-1]^2 + beta sigma2[t-1] (Bollerslev 1986), presample per DESIGN.md.

    presample=mean: e[0-1]^2 = sigma2[0-1] = mean(e^2), every observation enters.
    presample=drop: the first observation is a lag only; the variance lag before it is mean(e^2).
    """
    e = r - mu
    m = float(np.mean(e * e))
    var = np.full(len(r), np.nan)
    if presample == "mean":
        prev_e2, prev_s2, start = m, m, 0
    else:
        prev_e2, prev_s2, start = e[0] ** 2, m, 1
    for t in range(start, len(r)):
        var[t] = omega + alpha * prev_e2 + beta * prev_s2
        prev_e2, prev_s2 = e[t] ** 2, var[t]
    ll = stats.norm.logpdf(r[start:], mu, np.sqrt(var[start:])).sum()  # SciPy normal density
    return e, var, ll


@pytest.mark.parametrize("presample", ["mean", "drop"])
@pytest.mark.parametrize("model", ["GARCH(1,1)", "ARCH(1)"])
def test_series_and_loglik_match_the_recursion(model, presample):
    r = R_GARCH
    t = VOLFIT(col(r), model, None, f"presample={presample}")
    d = rows_by_name(t)
    beta = d["beta[1]"][1] if "beta[1]" in d else 0.0
    e, var, ll = garch_reference(r, d["mu"][1], d["omega"][1], d["alpha[1]"][1], beta, presample)
    got = column_values(VOLSERIES(col(r), t))
    assert np.array_equal(np.isnan(got), np.isnan(var))  # blank exactly where undefined
    assert_allclose(got[~np.isnan(var)], var[~np.isnan(var)], rtol=1e-10)
    assert_allclose(VOLLOGLIK(col(r), t)[0][0], ll, rtol=1e-10)
    assert_allclose(value(t, "loglik"), ll, rtol=1e-10)
    assert_allclose(column_values(VOLSERIES(col(r), t, "resid")), e, rtol=1e-12)


@pytest.mark.parametrize("table", [GARCH_TABLE, ARCH_TABLE], ids=["garch", "arch"])
def test_vol_and_stdresid(table):
    r = R_GARCH
    var = column_values(VOLSERIES(col(r), table))
    vol = column_values(VOLSERIES(col(r), table, "vol"))
    resid = column_values(VOLSERIES(col(r), table, "RESID"))
    std = column_values(VOLSERIES(col(r), table, "stdresid"))
    assert_allclose(vol, np.sqrt(var), rtol=1e-12)
    assert_allclose(std, resid / vol, rtol=1e-12)
    assert_allclose(resid, r - value(table, "mu"), rtol=1e-12)
    assert column_values(VOLSERIES(col(r), table, None)).tolist() == var.tolist()  # variance is the default


def test_series_one_value_per_row_with_blanks_where_undefined():
    padded = [[None], [""]] + col(R_ARCH[:40]) + [[None], [None], [None]]
    for what in ("variance", "vol", "resid", "stdresid"):
        s = VOLSERIES(padded, ARCH_TABLE, what)
        assert len(s) == len(padded)
        assert s[:2] == [[None], [None]] and s[-3:] == [[None]] * 3
        assert all(isinstance(c[0], float) for c in s[2:-3])


@pytest.mark.parametrize(
    "model, blank_first",
    [
        ("ARCH(1)", {"variance": 1, "vol": 1, "resid": 0, "stdresid": 1}),
        ("AR(1)", {"variance": 1, "vol": 1, "resid": 1, "stdresid": 1}),
    ],
)
def test_presample_drop_blanks_the_first_observation(model, blank_first):
    t_drop = VOLFIT(col(R_ARCH), model, None, "presample=drop")
    t_mean = VOLFIT(col(R_ARCH), model)
    for what, k in blank_first.items():
        s = VOLSERIES(col(R_ARCH), t_drop, what)
        assert [c[0] is None for c in s[:2]] == [True] * k + [False] * (2 - k), (what, s[:2])
        assert all(c[0] is not None for c in s[1:])
        assert all(c[0] is not None for c in VOLSERIES(col(R_ARCH), t_mean, what))


# ---------------------------------------------------------------------------------------------
# VOLFORECAST: shapes and the GARCH(1,1) forecast (common practice)


def test_forecast_garch11():
    t = GARCH_TABLE
    r = R_GARCH
    mu, omega, a, b = (value(t, n) for n in PARAM_ROW_NAMES)
    var = column_values(VOLSERIES(col(r), t))
    one = omega + a * (r[-1] - mu) ** 2 + b * var[-1]
    pers, vbar = a + b, omega / (1 - a - b)
    h = np.arange(1, 11)
    expected = vbar + pers ** (h - 1) * (one - vbar)  # common practice: E[sigma2_{T+h}] for GARCH(1,1)
    got = column_values(VOLFORECAST(col(r), t, 10))
    assert_allclose(got, expected, rtol=1e-10)
    assert_allclose(column_values(VOLFORECAST(col(r), t, 10.0, "vol")), np.sqrt(expected), rtol=1e-10)
    assert_allclose(column_values(VOLFORECAST(col(r), t, 10, "cumvar")), np.cumsum(expected), rtol=1e-10)
    assert_allclose(column_values(VOLFORECAST(col(r), t, 10, "cumvol")), np.sqrt(np.cumsum(expected)), rtol=1e-10)
    assert_allclose(column_values(VOLFORECAST(col(r), t, 10, "mean")), np.full(10, mu), rtol=1e-12)
    table = VOLFORECAST(col(r), t, 10, "table")
    assert table[0] == ["step", "mean", "variance", "vol", "cumvar"]
    assert [row[0] for row in table[1:]] == list(range(1, 11))
    assert_allclose(np.array([row[1:] for row in table[1:]], dtype=float),
                    np.column_stack([np.full(10, mu), expected, np.sqrt(expected), np.cumsum(expected)]),
                    rtol=1e-10)


def test_forecast_horizon_limits():
    assert len(VOLFORECAST(col(R_ARCH), ARCH_TABLE, 1)) == 1
    assert len(VOLFORECAST(col(R_ARCH), ARCH_TABLE, 600)) == 600


# ---------------------------------------------------------------------------------------------
# tables typed by hand (DESIGN.md: header optional, names case-insensitive, unknown rows ignored,
# alpha0/alpha1 accepted, only model, dist and parameter rows needed)

_P = {n: value(GARCH_TABLE, n) for n in PARAM_ROW_NAMES}


def _typed_tables():
    mu, om, a, b = (_P[n] for n in PARAM_ROW_NAMES)
    minimal = [["model", "GARCH(1,1)"], ["dist", "normal"], ["mu", mu], ["omega", om], ["alpha[1]", a], ["beta[1]", b]]
    yield "minimal", minimal
    yield "with_header", [["parameter", "estimate", "std_error"]] + minimal
    yield "other_case", [["MODEL", "garch(1, 1)"], ["Dist", "Normal"], ["MU", mu], ["Omega", om],
                         ["ALPHA[1]", a], ["Beta[1]", b]]
    yield "alpha0_alpha1", [["model", "GARCH"], ["dist", "gaussian"], ["mu", mu], ["alpha0", om],
                            ["alpha1", a], ["beta1", b]]
    yield "no_dist_row", [row for row in minimal if row[0] != "dist"]
    yield "shuffled", [minimal[4], minimal[0], minimal[5], minimal[2], minimal[1], minimal[3]]
    yield "unknown_rows", [["note", "typed by hand"], ["model", "GARCH(1,1)"], ["source", 42.0], ["dist", "normal"],
                           ["mu", mu], ["omega", om], ["alpha[1]", a], ["beta[1]", b], ["loglik", 123.0],
                           ["aic", None], [17.0, "a number in the first column"], ["converged", "maybe"]]
    oversized = [row + [None, None, None] for row in minimal] + [[None] * 5 for _ in range(8)] + [["", "", "", "", ""]]
    yield "oversized", oversized
    yield "ragged", [["model", "GARCH(1,1)", None], ["mu", mu], ["omega", om, None, None, None, None],
                     ["alpha[1]", a, "typed"], ["beta[1]", b], [], [None]]
    yield "numbers_as_text", [["model", "GARCH(1,1)"], ["mu", repr(mu)], ["omega", repr(om)],
                              ["alpha[1]", repr(a)], ["beta[1]", repr(b)]]


TYPED = list(_typed_tables())


@pytest.mark.parametrize("name, typed", TYPED, ids=[n for n, _ in TYPED])
def test_typed_table_works_like_the_fit_table(name, typed):
    r = col(R_GARCH)
    assert VOLSERIES(r, typed) == VOLSERIES(r, GARCH_TABLE)
    assert VOLSERIES(r, typed, "stdresid") == VOLSERIES(r, GARCH_TABLE, "stdresid")
    assert VOLFORECAST(r, typed, 5) == VOLFORECAST(r, GARCH_TABLE, 5)
    assert VOLFORECAST(r, typed, 3, "table") == VOLFORECAST(r, GARCH_TABLE, 3, "table")
    assert VOLLOGLIK(r, typed) == VOLLOGLIK(r, GARCH_TABLE)


def test_typed_table_options_row_is_honoured():
    typed = dict(TYPED)["minimal"] + [["options", "presample=drop"]]
    drop = VOLFIT(col(R_GARCH), "GARCH(1,1)", None, "presample=drop")
    d = rows_by_name(drop)
    e, var, ll = garch_reference(R_GARCH, *(d[n][1] for n in PARAM_ROW_NAMES), "drop")
    assert VOLLOGLIK(col(R_GARCH), typed)[0][0] != VOLLOGLIK(col(R_GARCH), GARCH_TABLE)[0][0]
    typed_at_drop = [["model", "GARCH(1,1)"], ["options", "presample=drop"]] + [[n, d[n][1]] for n in PARAM_ROW_NAMES]
    assert_allclose(VOLLOGLIK(col(R_GARCH), typed_at_drop)[0][0], ll, rtol=1e-10)


def test_typed_table_fixed_option_supplies_a_missing_parameter():
    typed = [["model", "ARCH(1)"], ["options", "mu=0"], ["omega", 0.5], ["alpha1", 0.4]]
    full = [["model", "ARCH(1)"], ["mu", 0.0], ["omega", 0.5], ["alpha1", 0.4]]
    assert VOLLOGLIK(col(R_ARCH), typed) == VOLLOGLIK(col(R_ARCH), full)


@pytest.mark.parametrize("presample", ["mean", "drop"])
@pytest.mark.parametrize(
    "data, model, dist, extra",
    [(R_GARCH, "GARCH(1,1)", None, ""), (R_ARCH, "ARCH(1)", None, ""), (R_ARCH, "ARCH(1)", None, "; mu=0"),
     (R_ARCH, "ARCH(1)", "t", "; nu=8"), (R_GARCH, "CONST", None, "")],
)
def test_loglik_at_the_fit_table_equals_its_loglik(data, model, dist, extra, presample):
    t = VOLFIT(col(data), model, dist, f"presample={presample}{extra}")
    assert_allclose(VOLLOGLIK(col(data), t)[0][0], value(t, "loglik"), rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# ERROR: cells, never exceptions

_R = col(R_ARCH[:60])


def _with(cell, at=5, base=_R):
    return base[:at] + [[cell]] + base[at:]


BAD_RETURNS = [
    ("text", _with("n/a"), r'returns row 6 holds text "n/a"; numbers only'),
    ("bool", _with(True), r"returns row 6 holds the logical value TRUE"),
    ("false", _with(False, at=0), r"returns row 1 holds the logical value FALSE"),
    ("na", _with("#N/A"), r"returns row 6 holds the error #N/A"),
    ("div0", _with("#DIV/0!"), r"returns row 6 holds the error #DIV/0!"),
    ("nan", _with(float("nan"), at=3), r"returns row 4 holds a value that is not a number; finite numbers only$"),
    ("inf", _with(float("-inf"), at=3), r"returns row 4 holds minus infinity; finite numbers only$"),
    ("blank_inside", _with(None), r"returns row 6 is blank inside the data; fill it, or add missing=skip"),
    ("empty_text_inside", _with(""), r"returns row 6 is blank inside the data"),
    ("row_counts_leading_blanks", [[None], [None]] + _with("x", at=1), r'returns row 4 holds text "x"'),
    ("row_range", [[1.0, 2.0, "x", 3.0] + [0.5] * 40], r'returns column 3 holds text "x"'),
    ("all_blank", [[None], [""], [None]], r"returns holds no numbers \(every cell is blank\)"),
    ("empty", [], r"returns is empty"),
    ("two_d", [[1.0, 2.0], [3.0, 4.0], [5.0, 6.0]], r"returns must be a single column or a single row, got 3 rows by 2 columns"),
    ("error_text", "ERROR: returns row 3 holds text", r"returns holds an error from another cell"),
    ("nested", [[[1.0, 2.0]]] + _R, r"returns row 1 holds a list"),
]


def _call(func, returns):
    if func == "VOLFIT":
        return VOLFIT(returns, "ARCH(1)")
    if func == "VOLSERIES":
        return VOLSERIES(returns, ARCH_TABLE)
    if func == "VOLFORECAST":
        return VOLFORECAST(returns, ARCH_TABLE, 3)
    return VOLLOGLIK(returns, ARCH_TABLE)


FUNCS = ["VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK"]


@pytest.mark.parametrize("func", FUNCS)
@pytest.mark.parametrize("name, returns, pattern", BAD_RETURNS, ids=[c[0] for c in BAD_RETURNS])
def test_bad_returns_give_an_error_cell(func, name, returns, pattern):
    assert_error(_call(func, returns), r"^ERROR: " + pattern)


@pytest.mark.parametrize("func", FUNCS)
def test_constant_series(func):
    assert_error(_call(func, [[0.25]] * 80), r"all the same number")


def test_too_few_observations():
    assert_error(VOLFIT(_R[:5], "ARCH(1)"), r"ARCH\(1\) needs at least \d+ returns, got 5")
    assert_error(VOLFIT([[1.0]], "CONST"), r"CONST needs at least \d+ returns, got 1")
    for func in (lambda r: VOLSERIES(r, ARCH_TABLE), lambda r: VOLFORECAST(r, ARCH_TABLE, 2),
                 lambda r: VOLLOGLIK(r, ARCH_TABLE)):
        assert_error(func(_R[:2]), r"ARCH\(1\) needs at least \d+ numbers, got 2")


@pytest.mark.parametrize(
    "model, dist, options, pattern",
    [
        ("FOO", None, None, r'model "FOO" is not understood'),
        ("GARCH(1,1,1)", None, None, r"GARCH takes 2 whole-number orders"),
        (3.0, None, None, r"model must be text"),
        ("#N/A", None, None, r"model holds an error from another cell"),
        ("ARCH(1)", "cauchy", None, r'unknown distribution "cauchy"; use normal, t, skewt or ged'),
        ("ARCH(1)", True, None, r"dist must be text, got the logical value TRUE"),
        ("ARCH(1)", None, "foo=1", r'options: unknown key "foo"'),
        ("ARCH(1)", None, "se=white", r"options: se=white is not allowed"),
        ("ARCH(1)", None, 5.0, r"options must be text"),
        ("ARCH(1)", None, "beta=0.5", r"options: beta\[1\] is not a parameter of ARCH\(1\) with normal shocks"),
        ("ARCH(1)", None, "nu=8", r"options: nu is not a parameter of ARCH\(1\) with normal shocks"),
        ("ARCH(1)", "t", "nu=2", r"nu must be"),
        ("ARCH(1)", None, "omega=-1", r"omega must be greater than 0"),
        ("ARCH(1)", None, "mu=0; omega=0.5; alpha1=0.1", r"nothing is left to estimate"),
        ("ARCH(1)", [["normal"], ["t"]], None, r"dist must be one cell, got 2 filled cells"),
    ],
)
def test_bad_model_dist_options(model, dist, options, pattern):
    assert_error(VOLFIT(_R, model, dist, options), pattern)


@pytest.mark.parametrize(
    "horizon, pattern",
    [
        (0, r"horizon must be a whole number from 1 to 600, got 0$"),
        (2.5, r"horizon must be a whole number from 1 to 600, got 2.5$"),
        ("x", r'horizon must be a whole number from 1 to 600, got text "x"'),
        (601, r"horizon must be a whole number from 1 to 600, got 601$"),
        (-3, r"horizon must be a whole number from 1 to 600, got -3$"),
        (float("nan"), r"horizon must be a whole number"),
        (True, r"horizon must be a whole number from 1 to 600, got the logical value TRUE"),
        (None, r"horizon is required"),
        ("", r"horizon is required"),
        ("#N/A", r"horizon must be a whole number"),
        ([[1], [2]], r"horizon must be one cell, got 2 filled cells"),
    ],
)
def test_bad_horizon(horizon, pattern):
    assert_error(VOLFORECAST(_R, ARCH_TABLE, horizon), r"^ERROR: " + pattern)


def test_bad_what():
    assert_error(VOLSERIES(_R, ARCH_TABLE, "volatility"), r'what must be one of variance, vol, resid, stdresid, longrun; got "volatility"')
    assert_error(VOLFORECAST(_R, ARCH_TABLE, 3, "median"), r"what must be one of variance, vol, cumvar, cumvol, mean, longrun, table")


_ARCH_ROWS = [["model", "ARCH(1)"], ["mu", 0.0], ["omega", 0.5], ["alpha[1]", 0.4]]

BAD_FITS = [
    ("error_text", "ERROR: model \"FOO\" is not understood", r"fit holds an error from another cell: model"),
    ("error_in_range", [["ERROR: returns holds no numbers"]], r"fit holds an error from another cell"),
    ("plain_text", "not a table", r"fit is not a fit table; pass the range VOLFIT returns"),
    ("number", 5.0, r"fit is not a fit table"),
    ("blank", None, r"fit is not a fit table"),
    ("numbers", [[1.0, 2.0], [3.0, 4.0]], r"fit is not a fit table"),
    # a plain reference to the anchor of a spilled VOLFIT passes its one cell (Excel's dynamic-array rule)
    ("anchor_only", "parameter", r"fit is only the top-left cell of a fit table; pass the whole table \(A1# where"),
    ("anchor_only_range", [["parameter"]], r"fit is only the top-left cell of a fit table"),
    ("no_model_row", _ARCH_ROWS[1:], r"fit has no model row"),
    ("lacks_parameter", _ARCH_ROWS[:3], r"fit lacks the parameter alpha\[1\] that ARCH\(1\) with normal shocks needs"),
    ("lacks_two", _ARCH_ROWS[:2], r"fit lacks the parameters omega, alpha\[1\]"),
    ("lacks_nu", _ARCH_ROWS + [["dist", "t"]], r"fit lacks the parameter nu"),
    ("omega_zero", [_ARCH_ROWS[0], _ARCH_ROWS[1], ["omega", 0.0], _ARCH_ROWS[3]], r"fit: omega must be greater than 0, got 0$"),
    ("omega_negative", [_ARCH_ROWS[0], _ARCH_ROWS[1], ["Omega", -0.1], _ARCH_ROWS[3]], r"fit: omega must be greater than 0, got -0.1$"),
    ("alpha_negative", _ARCH_ROWS[:3] + [["alpha1", -0.1]], r"fit: alpha\[1\] must be 0 or more, got -0.1$"),
    ("nu_two", _ARCH_ROWS + [["dist", "t"], ["nu", 2.0]], r"fit: nu must be greater than 2 for the t distribution, got 2$"),
    ("nu_one", _ARCH_ROWS + [["dist", "t"], ["nu", 1.0]], r"fit: nu must be greater than 2 for the t distribution, got 1$"),
    ("lambda_one", _ARCH_ROWS + [["dist", "skewt"], ["nu", 6.0], ["lambda", 1.0]], r"fit: lambda must be between -1 and 1 for the skewt distribution"),
    ("lambda_minus_one", _ARCH_ROWS + [["dist", "skewt"], ["nu", 6.0], ["lambda", -1.0]], r"fit: lambda must be between -1 and 1 for the skewt distribution"),
    ("lambda_big", _ARCH_ROWS + [["dist", "skewt"], ["nu", 6.0], ["lambda", 1.5]], r"fit: lambda must be between -1 and 1 for the skewt distribution"),
    ("bad_model", [["model", "GARCH(1"]] + _ARCH_ROWS[1:], r'fit: model "GARCH\(1" is not understood'),
    ("bad_dist", _ARCH_ROWS + [["dist", "cauchy"]], r'fit: unknown distribution "cauchy"'),
    ("bad_options", _ARCH_ROWS + [["options", "se=white"]], r"fit: options: se=white is not allowed"),
    ("text_value", _ARCH_ROWS[:2] + [["omega", "big"], _ARCH_ROWS[3]], r"fit: the row omega must hold a number"),
    ("bool_value", _ARCH_ROWS[:2] + [["omega", True], _ARCH_ROWS[3]], r"fit: the row omega must hold a number"),
    ("blank_value", _ARCH_ROWS[:2] + [["omega", None], _ARCH_ROWS[3]], r"fit: the row omega has no value"),
    ("twice", _ARCH_ROWS + [["alpha0", 0.5]], r"fit: the parameter omega appears twice"),
    ("nan_value", _ARCH_ROWS[:2] + [["omega", float("nan")], _ARCH_ROWS[3]], r"fit: parameter omega must be a finite number"),
]


@pytest.mark.parametrize("func", ["VOLSERIES", "VOLFORECAST", "VOLLOGLIK"])
@pytest.mark.parametrize("name, fit, pattern", BAD_FITS, ids=[c[0] for c in BAD_FITS])
def test_bad_fit_argument(func, name, fit, pattern):
    r = col(R_ARCH)
    result = {"VOLSERIES": lambda: VOLSERIES(r, fit), "VOLFORECAST": lambda: VOLFORECAST(r, fit, 3),
              "VOLLOGLIK": lambda: VOLLOGLIK(r, fit)}[func]()
    assert_error(result, r"^ERROR: " + pattern)


@pytest.mark.parametrize(
    "typed, horizon",
    [
        ([["model", "ARCH(1)"], ["mu", 0.0], ["omega", 1.0], ["alpha1", 5.0]], 600),
        ([["model", "EGARCH(1,1)"], ["mu", 0.0], ["omega", 0.1], ["alpha1", 0.2], ["gamma1", 0.0], ["beta1", 1.5]], 3),
    ],
    ids=["arch_alpha_5", "egarch_beta_1.5"],
)
@pytest.mark.filterwarnings("ignore::RuntimeWarning")
def test_forecast_cells_are_finite_numbers_or_an_error(typed, horizon):
    result = VOLFORECAST(col(R_ARCH[:50]), typed, horizon)
    assert is_error(result) or all(type(c[0]) is float and math.isfinite(c[0]) for c in result), result[-1]


def test_a_good_call_after_bad_ones_still_works():
    r = col(R_ARCH)
    good = (VOLFIT(r, "ARCH(1)"), VOLSERIES(r, ARCH_TABLE), VOLFORECAST(r, ARCH_TABLE, 4), VOLLOGLIK(r, ARCH_TABLE))
    for _, bad, _ in BAD_RETURNS:
        VOLFIT(bad, "ARCH(1)")
        VOLSERIES(bad, ARCH_TABLE)
    for _, fit, _ in BAD_FITS:
        VOLFORECAST(r, fit, 4)
    VOLFIT(r, "FOO")
    VOLFORECAST(r, ARCH_TABLE, 0)
    again = (VOLFIT(r, "ARCH(1)"), VOLSERIES(r, ARCH_TABLE), VOLFORECAST(r, ARCH_TABLE, 4), VOLLOGLIK(r, ARCH_TABLE))
    assert again == good
    assert not any(is_error(x) for x in again)


def test_inputs_are_not_modified():
    r = col(R_ARCH)
    before_r, before_t = copy.deepcopy(r), copy.deepcopy(ARCH_TABLE)
    VOLFIT(r, "ARCH(1)")
    VOLSERIES(r, ARCH_TABLE)
    VOLFORECAST(r, ARCH_TABLE, 3)
    VOLLOGLIK(r, ARCH_TABLE)
    assert r == before_r and ARCH_TABLE == before_t


# ---------------------------------------------------------------------------------------------
# the fit cache


@pytest.fixture
def fresh_cache():
    FIT_CACHE.clear()
    yield FIT_CACHE
    FIT_CACHE.clear()


def test_same_numbers_estimate_once(fresh_cache):
    r = col(R_ARCH)
    tables = [VOLFIT(r, "ARCH(1)") for _ in range(10)]
    assert fresh_cache.stats["estimations"] == 1
    assert fresh_cache.stats["hits"] == 9
    assert all(t == tables[0] for t in tables)
    # the same numbers in a padded range, or as a row, are the same fit
    VOLFIT([[None]] + r + [[""]], "arch(1)")
    VOLFIT([list(R_ARCH)], "ARCH(1)")
    assert fresh_cache.stats["estimations"] == 1


def test_different_inputs_estimate_again(fresh_cache):
    r = col(R_ARCH)
    VOLFIT(r, "ARCH(1)")
    VOLFIT(r, "ARCH(1)", None, "se=hessian")
    assert fresh_cache.stats["estimations"] == 2
    VOLFIT(r, "ARCH(1)", None, "presample=drop")
    assert fresh_cache.stats["estimations"] == 3
    VOLFIT(r, "ARCH(1)", None, "mu=0")
    assert fresh_cache.stats["estimations"] == 4
    VOLFIT(r, "CONST")
    assert fresh_cache.stats["estimations"] == 5
    VOLFIT(r, "ARCH(1)", "t")
    assert fresh_cache.stats["estimations"] == 6
    VOLFIT(col(R_ARCH[:-1]), "ARCH(1)")
    assert fresh_cache.stats["estimations"] == 7


def test_options_that_do_not_change_the_estimate_reuse_it(fresh_cache):
    r = col(R_ARCH)
    plain = VOLFIT(r, "ARCH(1)")
    yearly = VOLFIT(r, "ARCH(1)", None, "periods=12")
    assert fresh_cache.stats["estimations"] == 1
    assert yearly[3][1] == "presample=mean; se=robust; periods=12"  # the options row is the call's own
    assert yearly[4:] == plain[4:]
    assert VOLFIT(r, "ARCH(1)") == plain  # and the cached fit was not changed by the other call
    assert fresh_cache.stats["estimations"] == 1


def test_a_failed_fit_is_not_cached(fresh_cache):
    assert is_error(VOLFIT(col(R_ARCH), "ARCH(1)", None, "nu=8"))
    assert fresh_cache.stats["estimations"] == 0


# ---------------------------------------------------------------------------------------------
# scale equivariance: the estimate must not depend on the units of the returns


def test_fit_is_scale_equivariant_on_iid_data():
    # i.i.d. normal data put the GARCH(1,1) maximum on the boundary (alpha = 0, beta -> 1), where an
    # optimiser is most likely to stop short at one scale and not another.
    # A normal likelihood scales as loglik(s r) = loglik(r) - n ln s (change of variables; common practice)
    n = len(R_IID)
    lls, conv = [], []
    for s in (1e-3, 1.0, 100.0):
        t = VOLFIT(col(s * R_IID), "GARCH(1,1)")
        lls.append(value(t, "loglik") + n * math.log(s))
        conv.append(value(t, "converged"))
    assert conv == [True, True, True]
    assert_allclose(lls, lls[0], atol=1e-6)


def test_fit_is_scale_equivariant_at_an_interior_maximum():
    n = len(R_GARCH)
    base = VOLFIT(col(R_GARCH), "GARCH(1,1)")
    for s in (0.01, 100.0):
        t = VOLFIT(col(s * R_GARCH), "GARCH(1,1)")
        assert_allclose(value(t, "loglik") + n * math.log(s), value(base, "loglik"), rtol=1e-9)
        assert_allclose(value(t, "mu") / s, value(base, "mu"), rtol=1e-5)
        assert_allclose(value(t, "omega") / s**2, value(base, "omega"), rtol=1e-5)
        assert_allclose([value(t, "alpha[1]"), value(t, "beta[1]")],
                        [value(base, "alpha[1]"), value(base, "beta[1]")], rtol=1e-5)


# ---------------------------------------------------------------------------------------------
# a property: whatever the cells hold, a list of rows comes back, never an exception

_cell = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(-5, 5),
    st.none(),
    st.just(""),
    st.text(max_size=6),
    st.booleans(),
    st.integers(-10, 10),
    st.sampled_from(["#N/A", "#VALUE!", "#DIV/0!", "ERROR: boom", "model", "dist", "options", "mu", "omega",
                     "alpha1", "alpha[1]", "ARCH(1)", "CONST", "normal", "t", "1.5", " "]),
)
_shapes = st.one_of(
    _cell,
    st.lists(_cell, max_size=25),
    st.lists(st.lists(_cell, max_size=5), max_size=25),
    st.lists(st.one_of(_cell, st.lists(_cell, max_size=3)), max_size=10),
    st.lists(st.lists(st.lists(_cell, max_size=2), max_size=2), max_size=3),
)
_good_numbers = st.lists(st.floats(-5, 5, allow_nan=False), min_size=12, max_size=60)


def _mostly(good, bad):
    """Draw from ``good`` two times in three, so the success paths are exercised as well as the errors."""
    return st.integers(0, 2).flatmap(lambda i: good if i else bad)


_returns = _mostly(
    st.one_of(
        _good_numbers.map(col),
        _good_numbers.map(lambda xs: [xs]),
        _good_numbers.map(lambda xs: [[None]] * 2 + col(xs) + [[""]] * 3),
    ),
    st.one_of(
        _shapes,
        st.tuples(_good_numbers, st.integers(0, 59), _cell).map(
            lambda x: col(x[0][: x[1]]) + [[x[2]]] + col(x[0][x[1]:])),
    ),
)

_CONST_TABLE = VOLFIT(col(R_ARCH), "CONST")


@st.composite
def _mutated_table(draw):
    table = copy.deepcopy(draw(st.sampled_from([ARCH_TABLE, _CONST_TABLE, _ARCH_ROWS])))
    for _ in range(draw(st.integers(0, 3))):
        i = draw(st.integers(0, len(table) - 1))
        j = draw(st.integers(0, len(table[i]) - 1))
        table[i][j] = draw(_cell)
    if draw(st.booleans()):
        table = table + [[None] * draw(st.integers(0, 6))] * draw(st.integers(0, 3))
    return table


_good_fits = st.sampled_from([ARCH_TABLE, _CONST_TABLE, _ARCH_ROWS])
_fits = _mostly(_good_fits, st.one_of(_mutated_table(), _shapes))
_models = st.sampled_from(["CONST", "ARCH(1)", "arch", "ZERO-ARCH(1)", "zero", "FOO", "ARCH(0)", 3.0, True, "#N/A",
                           "ERROR: x", [["ARCH(1)"]], [["ARCH(1)", "CONST"]]])
_dists = st.sampled_from([None, "normal", "Gaussian", "bogus", 1.0, True, "#N/A", [[None]]])
_options = st.sampled_from([None, "", "presample=drop", "se=hessian", "se=opg", "mu=0", "missing=skip", "periods=12",
                            "bogus", "nu=", "nu=8", "target=yes", "omega=-1", 2.0, True])
_horizons = _mostly(st.integers(1, 30) | st.floats(1, 30).map(float.__floor__).map(float),
                    st.one_of(st.integers(-3, 700), st.floats(allow_nan=True, allow_infinity=True), _cell,
                              st.lists(_cell, max_size=3)))
_good_whats = st.sampled_from([None, "variance", "vol", "resid", "stdresid", "cumvar", "cumvol", "mean", "table", "VOL"])
_whats = _mostly(_good_whats, st.just("nonsense") | _cell)


def _check_result(result):
    assert isinstance(result, list) and result, result
    assert all(isinstance(row, list) and row for row in result), result
    cells = [c for row in result for c in row]
    for c in cells:
        # plain spreadsheet values only (no NumPy scalars, no nan/inf that a cell would show as #NUM!)
        assert c is None or type(c) in (bool, int, float, str), (type(c), c)
        if type(c) is float:
            assert math.isfinite(c), result
    if any(isinstance(c, str) and c.startswith("ERROR:") for c in cells):
        assert len(result) == 1 and len(result[0]) == 1, result
        assert "Traceback" not in result[0][0]


_PROPERTY = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, model=_models, dist=_dists, options=_options)
def test_property_volfit_never_raises(returns, model, dist, options):
    before = repr((returns, model, dist, options))
    _check_result(VOLFIT(returns, model, dist, options))
    assert repr((returns, model, dist, options)) == before  # the caller's cells are untouched


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, fit=_fits, what=_whats)
def test_property_volseries_never_raises(returns, fit, what):
    before = repr((returns, fit, what))
    _check_result(VOLSERIES(returns, fit, what))
    assert repr((returns, fit, what)) == before


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, fit=_fits, horizon=_horizons, what=_whats)
def test_property_volforecast_never_raises(returns, fit, horizon, what):
    before = repr((returns, fit, horizon, what))
    _check_result(VOLFORECAST(returns, fit, horizon, what))
    assert repr((returns, fit, horizon, what)) == before


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@_PROPERTY
@given(returns=_returns, fit=_fits)
def test_property_volloglik_never_raises(returns, fit):
    before = repr((returns, fit))
    _check_result(VOLLOGLIK(returns, fit))
    assert repr((returns, fit)) == before
