"""Regressors in the mean (x[k]) and, with the option xvar=, in the variance (v[k]).

Sources beside each check: statsmodels OLS (the constant-variance Gaussian model with
regressors: its conditional ML coefficients are the OLS ones and its ML variance SSR/n); the
recursions written out in this file; central differences of the log-likelihood; the recovery of
known parameters from seeded simulations written out here (within three standard errors).
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLBACKTEST, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLRISK, VOLSERIES, VOLSIM, VOLTESTS
from xlfuncs.core import fit, get_distribution, parse_model
from xlfuncs.core.errors import InputError
from xlfuncs.core.likelihood import Likelihood

from helpers import family_models

sm = pytest.importorskip("statsmodels.api")


@pytest.fixture(scope="module")
def design(dmbp):
    """Two regressors beside the DEM/GBP returns: last period's absolute return (its first row at
    the sample mean of |r|) and a seeded standard normal column."""
    lag_abs = np.concatenate([[np.mean(np.abs(dmbp))], np.abs(dmbp[:-1])])
    noise = np.random.default_rng(11).standard_normal(len(dmbp))
    return np.column_stack([lag_abs, noise])


# ---------------------------------------------------------------------------------------------
# the constant-variance mean with regressors is OLS
def test_const_mean_with_regressors_is_ols(dmbp, design):
    f = fit(dmbp, "CONST", "normal", "se=hessian", X=design)
    assert f.names == ("mu", "x[1]", "x[2]", "omega")
    ols = sm.OLS(dmbp, sm.add_constant(design)).fit()  # statsmodels as reference
    assert_allclose(f.params[:3], ols.params, rtol=1e-7, atol=1e-10)
    assert_allclose(f.value("omega"), ols.ssr / ols.nobs, rtol=1e-7)  # the ML variance, SSR/n
    assert_allclose(f.loglik, ols.llf, rtol=1e-11)
    # the inverse Hessian of the Gaussian likelihood is OLS's covariance with SSR/n for SSR/(n-k)
    n, k = ols.nobs, len(ols.params)
    assert_allclose(f.std_errors[:3], ols.bse * math.sqrt((n - k) / n), rtol=1e-4)


def test_ar1_with_regressors_drop_is_ols(dmbp, design):
    """presample=drop: the first return is a lag only, so the likelihood is that of the OLS
    regression of r[t] on 1, r[t-1] and the regressors' row t, t >= 2 (statsmodels)."""
    f = fit(dmbp, "AR(1)", "normal", "presample=drop", X=design)
    assert f.names == ("mu", "phi[1]", "x[1]", "x[2]", "omega") and f.nobs == len(dmbp) - 1
    Xo = sm.add_constant(np.column_stack([dmbp[:-1], design[1:]]))
    ols = sm.OLS(dmbp[1:], Xo).fit()
    assert_allclose(f.params[:4], ols.params, rtol=1e-7, atol=1e-10)
    assert_allclose(f.value("omega"), ols.ssr / ols.nobs, rtol=1e-7)
    assert_allclose(f.loglik, ols.llf, rtol=1e-11)


def test_variance_regressor_in_the_constant_variance(dmbp, design):
    """CONST with xvar=1: sigma2[t] = omega + v[1] |r[t-1]|, the Gaussian likelihood written out
    with SciPy's normal density."""
    spec = parse_model("CONST").with_regressors(2, xvar=(1,))
    lik = Likelihood(dmbp, spec, get_distribution("normal"), "mean", design)
    assert lik.names == ("mu", "x[2]", "omega", "v[1]")
    theta = np.array([0.01, 0.02, 0.1, 0.3])
    s2 = 0.1 + 0.3 * design[:, 0]
    ref = np.sum(stats.norm.logpdf(dmbp - 0.01 - 0.02 * design[:, 1], scale=np.sqrt(s2)))
    assert_allclose(lik.loglik(theta), ref, rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# variance regressors written out
def test_garch_x_likelihood_written_out(dmbp, design):
    """AR(1)-GJR-GARCH(1,1) with x[2] in the mean and v[1] in the variance, t shocks:
    sigma2[t] = omega + v Z[t] + (alpha + gamma 1(e<0)) e[t-1]^2 + beta sigma2[t-1], presample at
    the mean squares (means of e^2 and of 1(e<0) e^2), SciPy's t density."""
    spec = parse_model("AR(1)-GJR-GARCH(1,1)").with_regressors(2, xvar=(1,))
    nu = 6.0
    theta = np.array([0.01, 0.03, 0.05, 0.004, 0.04, 0.03, 0.85, 0.02, nu])
    mu, phi, x2, omega, alpha, gamma, beta, v1, _ = theta
    lag = np.concatenate([[dmbp.mean()], dmbp[:-1]])
    e = dmbp - mu - phi * lag - x2 * design[:, 1]
    sbar, nbar = np.mean(e * e), np.mean(np.where(e < 0, e * e, 0.0))
    s2, prev_e2, prev_n2, prev_s2 = [], sbar, nbar, sbar
    for t in range(len(e)):
        s = omega + v1 * design[t, 0] + alpha * prev_e2 + gamma * prev_n2 + beta * prev_s2
        s2.append(s)
        prev_e2, prev_n2, prev_s2 = e[t] ** 2, (e[t] ** 2 if e[t] < 0 else 0.0), s
    s2 = np.array(s2)
    scale = np.sqrt(s2 * (nu - 2) / nu)
    ref = np.sum(stats.t.logpdf(e, nu, scale=scale))
    lik = Likelihood(dmbp, spec, get_distribution("t"), "mean", design)
    assert_allclose(lik.series(theta)[1], s2, rtol=1e-12)
    assert_allclose(lik.loglik(theta), ref, rtol=1e-12)


def test_egarch_x_adds_to_the_log_variance_intercept(dmbp, design):
    """EGARCH(1,1) with v[1]: ln sigma2[t] = omega + v Z[t] + alpha(|z| - E|z|) + gamma z +
    beta ln sigma2[t-1] (Nelson 1991; E|z| = sqrt(2/pi) for normal shocks)."""
    spec = parse_model("ZERO-EGARCH(1,1)").with_regressors(1, xvar=(1,))
    theta = np.array([-0.05, 0.15, -0.05, 0.95, 0.1])
    omega, alpha, gamma, beta, v1 = theta
    lv, z, out = math.log(np.mean(dmbp ** 2)), None, []
    for t, x in enumerate(dmbp):
        news = 0.0 if z is None else alpha * (abs(z) - math.sqrt(2 / math.pi)) + gamma * z
        lv = omega + v1 * design[t, 0] + news + beta * lv
        out.append(math.exp(lv))
        z = x / math.sqrt(out[-1])
    lik = Likelihood(dmbp, spec, get_distribution("normal"), "mean", design[:, :1])
    assert_allclose(lik.series(theta)[1], out, rtol=1e-11)


@pytest.mark.parametrize("model, presample", [("GARCH(1,1)", "mean"), ("GJR-GARCH(2,1)", "drop"),
                                              ("ARMA(1,1)-IGARCH(1,1)", "mean"), ("CONST", "mean"),
                                              ("AR(1)-EGARCH(1,1)", "mean"), ("EGARCH(2,1)", "drop")])
def test_analytic_scores_with_variance_regressors(dmbp, design, model, presample):
    """Scores and the adjoint gradient (the total of the scores for EGARCH, which has no adjoint)
    against central differences of the log-likelihood; EGARCH's v[1] rows come from its compiled
    derivative loop, its nu row through E|z|."""
    spec = parse_model(model).with_regressors(2, xvar=(1,))
    d = get_distribution("t")
    lik = Likelihood(dmbp, spec, d, presample, design)
    rng = np.random.default_rng(4)
    theta = []
    for n in lik.names:
        theta.append({"mu": 0.01, "omega": 0.02, "nu": 7.0}.get(n, 0.0))
    theta = np.array(theta)
    fam = spec.family
    vp = fam.starts(0.2)[0]
    theta[lik._vs] = vp
    theta[lik.idx["omega"]] = 0.02
    theta[lik.idx["v[1]"]] = 0.01
    theta[lik.idx["x[2]"]] = 0.01
    for n in lik.names:
        if n.startswith(("phi", "theta")):
            theta[lik.idx[n]] = 0.1 * rng.uniform(0.5, 1)
    _, G = lik.scores(theta)
    val, g = lik.gradient(theta)
    num = np.empty(lik.k)
    for j in range(lik.k):
        h = 1e-6 * max(1.0, abs(theta[j]))
        up, dn = theta.copy(), theta.copy()
        up[j] += h
        dn[j] -= h
        num[j] = (lik.loglik(up) - lik.loglik(dn)) / (2 * h)
    assert_allclose(G.sum(axis=0), num, rtol=1e-5, atol=1e-5)
    assert_allclose(g, G.sum(axis=0), rtol=1e-9, atol=1e-9)
    assert_allclose(val, lik.loglik(theta), rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# recovery on a simulated GARCH-X series
def simulate_garch_x(n, seed, mu, x1, omega, alpha, beta, v2):
    """r[t] = mu + x1 X[t] + e[t], sigma2[t] = omega + v2 Z[t] + alpha e[t-1]^2 + beta sigma2[t-1],
    normal shocks, X standard normal and Z = |N(0,1)| (a non-negative regressor), written out here
    with a burn-in of 500 periods."""
    rng = np.random.default_rng(seed)
    total = n + 500
    X = rng.standard_normal(total)
    Z = np.abs(rng.standard_normal(total))
    z = rng.standard_normal(total)
    s2 = (omega + v2 * np.mean(Z)) / (1 - alpha - beta)
    e_prev, r = 0.0, np.empty(total)
    for t in range(total):
        s2 = omega + v2 * Z[t] + alpha * e_prev ** 2 + beta * s2
        e_prev = math.sqrt(s2) * z[t]
        r[t] = mu + x1 * X[t] + e_prev
    return r[500:], np.column_stack([X, Z])[500:]


def test_variance_regressor_recovered_on_a_simulated_garch_x_series():
    true = np.array([0.02, 0.5, 0.05, 0.08, 0.85, 0.3])  # mu, x[1], omega, alpha, beta, v[2]
    r, X = simulate_garch_x(3000, 20240612, *true)
    f = fit(r, "GARCH(1,1)", "normal", "xvar=2", X=X)
    assert f.names == ("mu", "x[1]", "omega", "alpha[1]", "beta[1]", "v[2]")
    assert f.converged
    se = f.std_errors
    assert np.all(np.isfinite(se)) and se[-1] < 0.15  # v[2] identified, not just covered
    assert np.all(np.abs(f.params - true) < 3 * se), (f.params, se)
    assert f.uncond_variance is None  # the long-run variance moves with the regressor


# ---------------------------------------------------------------------------------------------
# core refusals
def test_core_refusals(dmbp, design):
    with pytest.raises(InputError, match="xvar=1 sends regressor columns to the variance, but no regressors"):
        fit(dmbp, "GARCH(1,1)", "normal", "xvar=1")
    with pytest.raises(InputError, match="xvar=3 names column 3, but the regressors range has 2 columns"):
        fit(dmbp, "GARCH(1,1)", "normal", "xvar=3", X=design)
    with pytest.raises(InputError, match="xvar= adds variance regressors to omega, which EWMA does not take"):
        fit(dmbp, "EWMA", "normal", "xvar=1", X=design)
    with pytest.raises(InputError, match="target=yes cannot be combined with variance regressors"):
        fit(dmbp, "GARCH(1,1)", "normal", "xvar=1; target=yes", X=design)
    with pytest.raises(InputError, match="rows but there are 1974 returns"):
        fit(dmbp, "GARCH(1,1)", "normal", X=design[:-1])
    with pytest.raises(InputError, match="a fit with regressors .* cannot be simulated from scratch"):
        from xlfuncs.core.simulate import simulate

        simulate(parse_model("GARCH(1,1)").with_regressors(1), get_distribution("normal"),
                 [0.0, 0.1, 0.1, 0.1, 0.8], 10)


# ---------------------------------------------------------------------------------------------
# worksheet functions
@pytest.fixture(scope="module")
def cells():
    r, X = simulate_garch_x(500, 5, 0.02, 0.5, 0.05, 0.08, 0.85, 0.3)
    return [[float(v)] for v in r], X.tolist(), r, X


@pytest.fixture(scope="module")
def table(cells):
    ret, reg, _, _ = cells
    return VOLFIT(ret, "GARCH(1,1)", "normal", "xvar=2", reg)


def _rows(table):
    return {row[0]: row for row in table}


def test_volfit_with_regressors_round_trips(cells, table):
    ret, reg, r, X = cells
    rows = _rows(table)
    assert rows["options"][1] == "presample=mean; se=robust; xvar=2"
    assert [row[0] for row in table[4:10]] == ["mu", "x[1]", "omega", "alpha[1]", "beta[1]", "v[2]"]
    assert rows["converged"][1] is True and rows["uncond_variance"][1] is None
    ll = rows["loglik"][1]
    assert_allclose(VOLLOGLIK(ret, table, reg)[0][0], ll, rtol=1e-12)
    # a typed table: no options row, the regressors named by their rows (case, spacing free)
    typed = [["model", "GARCH(1,1)"], ["MU", rows["mu"][1]], ["x1", rows["x[1]"][1]], ["omega", rows["omega"][1]],
             ["alpha[1]", rows["alpha[1]"][1]], ["beta[1]", rows["beta[1]"][1]], ["V[2]", rows["v[2]"][1]]]
    assert_allclose(VOLLOGLIK(ret, typed, reg)[0][0], ll, rtol=1e-12)
    # the same as the core fit on the same numbers
    assert_allclose(fit(r, "GARCH(1,1)", "normal", "xvar=2", X=X).loglik, ll, rtol=1e-12)
    series = VOLSERIES(ret, table, "variance", reg)
    assert len(series) == len(ret) and series[0][0] > 0
    tests = VOLTESTS(ret, table, None, reg)
    assert tests[0] == ["test", "statistic", "df", "p_value", "reading"]


def test_volforecast_with_future_values(cells, table):
    """Mean: mu + x[1] X_future (no ARMA); variance step 1 written out from the last residual and
    variance, later steps omega + v[2] Z_future[h] + (alpha + beta) variance[h-1]."""
    ret, reg, r, X = cells
    rows = _rows(table)
    mu, x1, omega, alpha, beta, v2 = (rows[n][1] for n in ("mu", "x[1]", "omega", "alpha[1]", "beta[1]", "v[2]"))
    future = [[0.5, 0.2], [-1.0, 1.5], [0.0, 0.7]]
    out = VOLFORECAST(ret, table, 3, "table", reg, future)
    assert out[0] == ["step", "mean", "variance", "vol", "cumvar"]
    resid = VOLSERIES(ret, table, "resid", reg)[-1][0]
    var = VOLSERIES(ret, table, "variance", reg)[-1][0]
    v = [omega + v2 * 0.2 + alpha * resid ** 2 + beta * var]
    v.append(omega + v2 * 1.5 + (alpha + beta) * v[-1])
    v.append(omega + v2 * 0.7 + (alpha + beta) * v[-1])
    assert_allclose([row[2] for row in out[1:]], v, rtol=1e-12)
    assert_allclose([row[1] for row in out[1:]], [mu + x1 * f[0] for f in future], rtol=1e-12)
    # more future rows than steps: the first ones are used; blank rows after them are not steps
    assert VOLFORECAST(ret, table, 2, "variance", reg, future + [[None, None]]) == [[v[0]], [v[1]]]


def test_variance_forecast_of_mean_regressors_needs_no_future(cells):
    ret, reg, _, _ = cells
    t = VOLFIT(ret, "GARCH(1,1)", "normal", None, [[row[0]] for row in reg])
    assert [row[0] for row in t[4:9]] == ["mu", "x[1]", "omega", "alpha[1]", "beta[1]"]
    one = [[row[0]] for row in reg]
    var = VOLFORECAST(ret, t, 4, "variance", one)
    assert len(var) == 4 and all(isinstance(v[0], float) for v in var)
    msg = VOLFORECAST(ret, t, 4, "mean", one)[0][0]
    assert msg == ("ERROR: this fit has 1 regressor (x[1]); the mean forecast needs their values over the next 4 "
                   "periods: give them as the last argument, future (4 rows, one per step, and 1 column)")


ERRORS = [
    # (call, fragment of the one ERROR cell)
    (lambda ret, reg, t: VOLSERIES(ret, t),
     "this fit has 2 regressors (x[1], v[2]); give their columns as the last argument (one row per returns row)"),
    (lambda ret, reg, t: VOLFORECAST(ret, t, 3),
     "this fit has 2 regressors (x[1], v[2]); give their columns as the fifth argument, regressors"),
    (lambda ret, reg, t: VOLFORECAST(ret, t, 3, "variance", reg),
     "the variance forecast needs their values over the next 3 periods: give them as the last argument, future"),
    (lambda ret, reg, t: VOLFORECAST(ret, t, 3, "variance", reg, [[0.1, 0.2]]),
     "the variance forecast needs future regressor values for 3 steps, got 1 row; give one row per step"),
    (lambda ret, reg, t: VOLFORECAST(ret, t, 2, "variance", reg, [[0.1], [0.2]]),
     "the future regressor values have 1 column but the fit has 2 regressors (x[1], v[2])"),
    (lambda ret, reg, t: VOLFORECAST(ret, t, 2, "variance", reg, [[0.1, None], [0.2, 0.3]]),
     "future row 1, column 2 is blank; give a value for every step and regressor"),
    (lambda ret, reg, t: VOLRISK(ret, t, 0.99, 2, reg),
     "VOLRISK needs their values over the next 2 periods"),
    (lambda ret, reg, t: VOLLOGLIK(ret, t, reg[:-3]),
     "regressors must have one row per returns row so that they line up: returns has 500 rows, regressors 497"),
    (lambda ret, reg, t: VOLLOGLIK(ret, t, [row[:1] for row in reg]),
     "regressors has 1 column but this fit has 2 regressors (x[1], v[2])"),
    (lambda ret, reg, t: VOLLOGLIK(ret, t, reg[:13] + [[0.1, "n/a"]] + reg[14:]),
     'regressors row 14, column 2 holds text "n/a"; numbers only'),
    (lambda ret, reg, t: VOLLOGLIK(ret, t, reg[:6] + [[None, 0.3]] + reg[7:]),
     "regressors row 7, column 1 is blank where returns has a number; the rows must line up"),
    (lambda ret, reg, t: VOLFIT(ret, "GARCH(1,1)", "normal", "xvar=2"),
     "xvar=2 sends regressor columns to the variance, but no regressors are given; give their range as the last"),
    (lambda ret, reg, t: VOLFIT(ret, "EWMA", "normal", "xvar=2", reg),
     "xvar= adds variance regressors to omega, which EWMA does not take"),
    (lambda ret, reg, t: VOLFIT(ret, "GARCH", "normal", "xvar=2,x", reg),
     "xvar must list regressor column numbers"),
    (lambda ret, reg, t: VOLLOGLIK(ret, [["model", "GARCH(1,1)"], ["mu", 0], ["omega", 0.1], ["alpha", 0.1],
                                         ["beta", 0.8]], reg),
     "regressors are given but this fit has none (no x[k] or v[k] rows); leave them out"),
    (lambda ret, reg, t: VOLLOGLIK(ret, [["model", "GARCH(1,1)"], ["mu", 0], ["x[1]", 0.1], ["x[3]", 0.1],
                                         ["omega", 0.1], ["alpha", 0.1], ["beta", 0.8]], reg),
     "there is no x[2] or v[2] for column 2"),
    (lambda ret, reg, t: VOLLOGLIK(ret, [["model", "GARCH(1,1)"], ["options", "xvar=1"], ["mu", 0], ["x[1]", 0.1],
                                         ["omega", 0.1], ["alpha", 0.1], ["beta", 0.8], ["v[2]", 0.1]], reg),
     "the options row says xvar=1, but the table's variance regressor rows are v[2]"),
    (lambda ret, reg, t: VOLLOGLIK(ret, [["model", "GARCH(1,1)"], ["mu", 0], ["x[1]", 0.1], ["omega", 0.05],
                                         ["alpha", 0.1], ["beta", 0.8], ["v[2]", -0.5]], reg),
     "the variance intercept omega + v[2] x (regressor) is not above zero at returns row"),
    (lambda ret, reg, t: VOLSIM(t, 10),
     "a fit with regressors (x[1], v[2]) cannot be simulated from scratch"),
    (lambda ret, reg, t: VOLFORECAST(ret, [["model", "GARCH(1,1)"], ["mu", 0], ["omega", 0.1], ["alpha", 0.1],
                                           ["beta", 0.8]], 2, "mean", None, [[1.0], [2.0]]),
     "future regressor values are given but this fit has no regressors; leave them out"),
]


@pytest.mark.parametrize("call, fragment", ERRORS)
def test_clear_errors(cells, table, call, fragment):
    ret, reg, _, _ = cells
    out = call(ret, reg, table)
    assert len(out) == 1 and len(out[0]) == 1 and out[0][0].startswith("ERROR: ")
    assert fragment in out[0][0], out[0][0]


def test_intercept_row_is_named(cells):
    ret, reg, _, X = cells
    typed = [["model", "GARCH(1,1)"], ["mu", 0], ["x[1]", 0.1], ["omega", 0.05], ["alpha", 0.1], ["beta", 0.8],
             ["v[2]", -0.5]]
    first = int(np.flatnonzero(0.05 - 0.5 * X[:, 1] <= 0)[0]) + 1
    out = VOLLOGLIK(ret, typed, reg)[0][0]
    assert f"returns row {first} " in out


def test_regressor_rows_follow_the_returns_blanks(cells):
    """Blank returns (leading, trailing, and inside under missing=skip) leave their regressor
    rows out with them, whatever those rows hold; the fit equals the fit on the kept rows."""
    ret, reg, r, X = cells
    keep = np.ones(len(r), dtype=bool)
    keep[100] = False
    ret2 = [[None], [None]] + [[None] if i == 100 else row for i, row in enumerate(ret)] + [[None]]
    reg2 = [["note", None], [None, None]] + [["skipped", "x"] if i == 100 else row for i, row in enumerate(reg)] + [[None, None]]
    a = _rows(VOLFIT(ret2, "GARCH(1,1)", "normal", "missing=skip; xvar=2", reg2))
    b = fit(r[keep], "GARCH(1,1)", "normal", "xvar=2", X=X[keep])
    assert_allclose(a["loglik"][1], b.loglik, rtol=1e-10)


def test_volrisk_and_volbacktest_with_regressors(cells, table):
    ret, reg, r, X = cells
    rk = VOLRISK(ret, table, 0.99, 1, reg, [[0.3, 0.5]])
    assert rk[0] == ["measure", "value"] and rk[1][0] == "VaR"
    rows = _rows(table)
    fc = VOLFORECAST(ret, table, 1, "table", reg, [[0.3, 0.5]])[1]
    assert_allclose(rk[1][1], -(fc[1] + fc[3] * stats.norm.ppf(0.01)), rtol=1e-12)  # one period: exact
    assert dict((row[0], row[1]) for row in rk)["mean"] == pytest.approx(fc[1], rel=1e-12)  # the mean forecast
    assert rows["x[1]"][1] != 0
    # a walk forward from the table: each forecast reads its own return's regressor row
    bt = VOLBACKTEST(ret, table, 450, 0.99, "what=series", reg)
    assert bt[0][:5] == ["index", "variance", "VaR", "return", "exception"] and len(bt) == 51
    first = VOLFORECAST(ret[:450], table, 1, "variance", reg[:450], [reg[450]])[0][0]
    assert_allclose(bt[1][1], first, rtol=1e-12)
    # from a model string, re-estimated every 25 periods
    out = VOLBACKTEST(ret, "GARCH(1,1)", 450, 0.99, "refit=25; xvar=2", reg)
    assert out[0] == ["measure", "value"] and dict((row[0], row[1]) for row in out)["estimations"] == 2


def test_in_mean_with_regressors_written_out(dmbp, design):
    """GARCH(1,1)-M with x[2] in the mean and v[1] in the variance:
    r[t] = mu + x2 X[t,2] + lam sigma[t] + e[t], sigma2[t] = omega + v1 Z[t,1] + alpha e[t-1]^2 +
    beta sigma2[t-1], presample at the mean square of u = r - mu - x2 X[.,2]; and with lam = 0 it
    is the model without the in-mean term (LRE >= 10)."""
    spec = parse_model("GARCH(1,1)-M").with_regressors(2, xvar=(1,))
    theta = np.array([0.01, 0.02, 0.2, 0.004, 0.08, 0.85, 0.02])
    mu, x2, lam, omega, alpha, beta, v1 = theta
    u = dmbp - mu - x2 * design[:, 1]
    sbar = np.mean(u * u)
    prev_e2, prev_s2, e, s2 = sbar, sbar, [], []
    for t in range(len(u)):
        s = omega + v1 * design[t, 0] + alpha * prev_e2 + beta * prev_s2
        x = u[t] - lam * math.sqrt(s)
        e.append(x)
        s2.append(s)
        prev_e2, prev_s2 = x * x, s
    lik = Likelihood(dmbp, spec, get_distribution("normal"), "mean", design)
    eg, sg = lik.series(theta)
    assert_allclose(eg, e, rtol=1e-12, atol=1e-14)
    assert_allclose(sg, s2, rtol=1e-12)
    plain = Likelihood(dmbp, parse_model("GARCH(1,1)").with_regressors(2, xvar=(1,)), get_distribution("normal"),
                       "mean", design)
    zero = theta.copy()
    zero[2] = 0.0
    a, b = plain.loglik(np.delete(zero, 2)), lik.loglik(zero)
    assert -math.log10(abs(a - b) / abs(a)) >= 10 if a != b else True


def test_a_constant_regressor_beside_mu_is_refused(dmbp):
    X = np.column_stack([np.ones(len(dmbp)), np.arange(len(dmbp)) % 5])
    with pytest.raises(InputError, match="regressors column 1 holds the same number in every row; with mu"):
        fit(dmbp, "GARCH(1,1)", "normal", X=X)


@pytest.mark.parametrize("model", family_models((1, 1)))
def test_every_family_answers_the_shift_hook(dmbp, model):
    """Protocol: a family that takes an intercept series gives, with a zero series, exactly what
    it gives without one (variances, forecasts, a simulation step), and moves with a non-zero
    one; a family that does not take one says so in words."""
    from xlfuncs.core.families import History

    fam = parse_model(model).family
    d = get_distribution("t")
    eta = np.array([7.0])
    vp = [s for s in fam.starts(0.5) if fam.admissible(s, eta, d, held=fam.integrated)][0]
    e = dmbp - dmbp.mean()
    if not fam.takes_shift:
        with pytest.raises(InputError, match="does not take"):
            fam.variance(vp, e, "mean", eta, d, shift=np.zeros(len(e)))
        return
    base = fam.variance(vp, e, "mean", eta, d)
    assert_allclose(fam.variance(vp, e, "mean", eta, d, shift=np.zeros(len(e))), base, rtol=0, atol=0)
    moved = fam.variance(vp, e, "mean", eta, d, shift=np.full(len(e), 0.01))
    assert np.all(moved > base)
    hist = History(e, base, 0)
    f0, _ = fam.forecast(vp, eta, d, hist, 3, np.random.default_rng(1), 200)
    f1, _ = fam.forecast(vp, eta, d, hist, 3, np.random.default_rng(1), 200, shift=np.zeros(3))
    assert_allclose(f1, f0, rtol=0, atol=0)
    s_a, _ = fam.sim_step(fam.sim_continue(vp, eta, d, hist), vp, eta, d, np.ones(2))
    s_b, _ = fam.sim_step(fam.sim_continue(vp, eta, d, hist), vp, eta, d, np.ones(2), shift=0.0)
    assert_allclose(s_b, s_a, rtol=0, atol=0)
    assert fam.bad_shift(vp, np.zeros(3)).shape == (3,) and not fam.bad_shift(vp, np.zeros(3)).any()


@pytest.mark.parametrize("second,xvar", [(lambda a: a, ()), (lambda a: 2.0 * a + 1.0, ()), (lambda a: 3.0 * a, (1, 2))],
                         ids=["copy", "affine-with-mu", "variance-copy"])
def test_collinear_regressors_are_refused(dmbp, second, xvar):
    """Two regressor columns that are a combination of each other (and the constant, where mu or
    omega is in the model): their coefficients cannot be told apart (common practice: a design
    matrix of full column rank), and the fit stopped with the optimiser's own words and blank
    standard errors; now refused, naming the columns."""
    a = np.sin(np.arange(len(dmbp)) / 7.0) + 1.5
    X = np.column_stack([a, second(a)])
    opts = f"xvar={','.join(map(str, xvar))}" if xvar else None
    with pytest.raises(InputError, match="regressors columns 1, 2 are collinear"):
        fit(dmbp, "GARCH(1,1)", "normal", opts, X=X)
