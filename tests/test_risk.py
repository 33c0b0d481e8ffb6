"""Value-at-Risk and expected shortfall (core ``risk``) and forward simulation (``simulate_forward``).

Outside references: standard-normal VaR and ES multipliers from the usual tables (common
practice), SciPy's distributions (``scipy.stats.norm``, ``t``, ``gennorm``) and their numerical
tail expectations (``expect(..., conditional=True)``, a quad integral).  Simulated figures are
checked against closed forms within their Monte Carlo standard errors, estimated from the
simulated sample itself, at 4.5 standard errors unless a test says otherwise (the chance of a
false failure of any one check is below 1e-5).

Fits are built from given parameters (``evaluate``) on seeded simulated series, so no test waits
for an optimiser and every number is reproducible.
"""

import math
import os

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import special, stats

from xlfuncs.core import forecast, get_distribution, in_sample, parse_model, parse_options
from xlfuncs.core.errors import InputError
from xlfuncs.core.estimate import evaluate
from xlfuncs.core.forecast import DEFAULT_SEED, MAX_HORIZON
from xlfuncs.core.risk import DEFAULT_PATHS, RISK_PATHS, Risk, risk
from xlfuncs.core.simulate import simulate_forward

Z_TOL = 4.5  # Monte Carlo tolerance, in standard errors


# tests that compare the compiled route with the step-by-step one, or ask which served
needs_jit = pytest.mark.skipif(os.environ.get("VOLCAST_NO_JIT", "") not in ("", "0"),
                               reason="VOLCAST_NO_JIT=1 turns the compiled route off")


def _fit(model, dist, params, r, options=None):
    """A fit of ``model`` with the given {name: value} parameters, on returns ``r``."""
    spec = parse_model(model)
    d = get_distribution(dist)
    return evaluate(r, spec, d, list(params), list(params.values()), parse_options(options))


def _eta(f):
    nd = len(f.dist.param_names)
    return f.params[len(f.params) - nd:]


@pytest.fixture(scope="module")
def series():
    """A seeded GARCH(1,1) series of 1500 returns, the sample every fit below ends on."""
    from xlfuncs.core.simulate import simulate

    spec = parse_model("GARCH(1,1)")
    r = simulate(spec, get_distribution("normal"), np.array([0.02, 0.05, 0.1, 0.85]), 1500,
                 rng=np.random.default_rng(101))[:, 0]
    return r


def _se_quantile(a, density_at_q, n):
    """Asymptotic standard error of the sample a-quantile, sqrt(a(1-a)) / (f(q) sqrt(n))
    (common practice; the normal approximation to the order statistic)."""
    return math.sqrt(a * (1 - a)) / (density_at_q * math.sqrt(n))


def _se_variance(x):
    """Standard error of the sample variance, sqrt((m4 - s^4) / n) (common practice)."""
    d = x - x.mean()
    m2 = np.mean(d * d)
    m4 = np.mean(d ** 4)
    return math.sqrt((m4 - m2 * m2) / len(x))


def _se_es(cum, var, a):
    """Standard error of the sample expected shortfall at tail probability a,
    sqrt((Var[L | L >= VaR] + (1 - a) (ES - VaR)^2) / (n a)) with L the loss: the variance of the
    estimator's influence function VaR - ES + (L - VaR)^+ / a (common practice; derived here)."""
    tail = -cum[cum <= -var]
    es = tail.mean()
    return math.sqrt((tail.var() + (1 - a) * (es - var) ** 2) / (len(cum) * a))


# --------------------------------------------------------------------------------------
# horizon 1: exact

@pytest.mark.parametrize("level,z,es_mult", [
    # standard-normal VaR and ES multipliers, phi(z)/(1 - level) (common practice; normal tables)
    (0.95, 1.6449, 2.0627),
    (0.975, 1.9600, 2.3378),
    (0.99, 2.3263, 2.6652),
])
def test_constant_normal_matches_handbook_multipliers(series, level, z, es_mult):
    f = _fit("CONST", "normal", {"mu": 0.1, "omega": 4.0}, series)
    rk = risk(f, series, level)
    # VaR = -(mu + sigma * (-z)) = 2 z - 0.1; the tables carry four decimals, doubled by sigma = 2
    assert_allclose(rk.var, 2 * z - 0.1, atol=1.01e-4)
    assert_allclose(rk.es, 2 * es_mult - 0.1, atol=1.01e-4)
    # and to full precision against SciPy: the quantile of N(0.1, 2^2) and its tail mean by quadrature
    q = stats.norm.ppf(1 - level, loc=0.1, scale=2.0)
    assert_allclose(rk.var, -q, rtol=1e-12)
    tail_mean = stats.norm.expect(lambda x: x, loc=0.1, scale=2.0, ub=q, conditional=True)
    assert_allclose(rk.es, -tail_mean, rtol=1e-8)
    assert rk.mean == 0.1 and rk.sd == 2.0
    assert (rk.level, rk.horizon) == (level, 1)
    assert rk.method == "exact (fitted normal distribution)"
    assert isinstance(rk, Risk)


@settings(max_examples=40, deadline=None)
@given(mu=st.floats(-5, 5), omega=st.floats(1e-4, 100), level=st.floats(0.5, 0.9999))
def test_constant_normal_is_the_normal_quantile(series, mu, omega, level):
    """Any CONST-normal fit: VaR is minus the 1 - level quantile of N(mu, omega) (SciPy)."""
    f = _fit("CONST", "normal", {"mu": mu, "omega": omega}, series)
    rk = risk(f, series, level)
    sd = math.sqrt(omega)
    assert_allclose(rk.var, -stats.norm.ppf(1 - level, loc=mu, scale=sd), rtol=1e-10, atol=1e-12 * sd)
    # ES: -mu + sd * phi(z) / (1 - level) (common practice)
    z = stats.norm.ppf(level)
    assert_allclose(rk.es, -mu + sd * stats.norm.pdf(z) / (1 - level), rtol=1e-10, atol=1e-12 * sd)
    assert rk.es >= rk.var - 1e-12 * sd


@pytest.mark.parametrize("nu", [4.5, 8.0])
@pytest.mark.parametrize("level", [0.95, 0.99])
def test_constant_t_matches_scaled_scipy_t(series, nu, level):
    """Unit-variance t: VaR = -(m + s t.ppf(1 - level, nu) sqrt((nu-2)/nu)) (SciPy ``stats.t``)."""
    m, s = 0.05, 1.5
    f = _fit("CONST", "t", {"mu": m, "omega": s * s, "nu": nu}, series)
    rk = risk(f, series, level)
    scale = s * math.sqrt((nu - 2) / nu)
    q = m + scale * stats.t.ppf(1 - level, nu)
    assert_allclose(rk.var, -q, rtol=1e-10)
    tail_mean = stats.t.expect(lambda x: x, args=(nu,), loc=m, scale=scale, ub=q, conditional=True)
    assert_allclose(rk.es, -tail_mean, rtol=1e-7)
    assert rk.method == "exact (fitted t distribution)"


def test_garch_ged_one_step_uses_the_one_step_forecast(series):
    """GARCH(1,1) with GED shocks: m = mu, s^2 = omega + alpha e_T^2 + beta s^2_T (Bollerslev 1986),
    and the unit-variance GED quantile is SciPy's ``gennorm`` with scale sqrt(Gamma(1/nu)/Gamma(3/nu))."""
    nu = 1.3
    p = {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.85, "nu": nu}
    f = _fit("GARCH(1,1)", "ged", p, series)
    e, s2, _ = in_sample(f, series)
    s = math.sqrt(p["omega"] + p["alpha[1]"] * e[-1] ** 2 + p["beta[1]"] * s2[-1])
    rk = risk(f, series, 0.99)
    scale = s * math.sqrt(special.gamma(1 / nu) / special.gamma(3 / nu))
    q = 0.02 + stats.gennorm.ppf(0.01, nu, scale=scale)
    assert_allclose(rk.var, -q, rtol=1e-9)
    tail_mean = stats.gennorm.expect(lambda x: x, args=(nu,), loc=0.0, scale=scale, ub=q - 0.02, conditional=True)
    assert_allclose(rk.es, -(0.02 + tail_mean), rtol=1e-7)
    assert_allclose([rk.mean, rk.sd], [0.02, s], rtol=1e-12)


@pytest.mark.parametrize("model,dist,params", [
    ("AR(1)-GJR-GARCH(1,1)", "skewt",
     {"mu": 0.01, "phi[1]": 0.2, "omega": 0.05, "alpha[1]": 0.05, "gamma[1]": 0.1, "beta[1]": 0.85,
      "nu": 6.0, "lambda": -0.3}),
    ("EGARCH(1,1)", "t",
     {"mu": 0.0, "omega": -0.02, "alpha[1]": 0.2, "gamma[1]": -0.08, "beta[1]": 0.95, "nu": 7.0}),
])
@pytest.mark.parametrize("level", [0.95, 0.99])
def test_exact_one_step_agrees_with_one_step_simulation(series, model, dist, params, level):
    """Exact horizon-1 VaR and ES against 400,000 simulated one-step returns, within Monte Carlo error."""
    f = _fit(model, dist, params, series)
    rk = risk(f, series, level)
    n = 400_000
    x = simulate_forward(f, series, 1, n, np.random.default_rng(7))[0]
    a = 1 - level
    sim_var = -np.quantile(x, a)
    zq = float(f.dist.ppf(a, _eta(f)))
    dens = float(f.dist.pdf(np.array([zq]), _eta(f))[0]) / rk.sd
    assert abs(sim_var - rk.var) < Z_TOL * _se_quantile(a, dens, n)
    sim_es = -x[x <= -sim_var].mean()
    assert abs(sim_es - rk.es) < Z_TOL * _se_es(x, sim_var, a)


# --------------------------------------------------------------------------------------
# several periods: simulation

@pytest.mark.parametrize("level", [0.95, 0.99])
def test_iid_normal_cumulative_var_is_the_normal_quantile(series, level):
    """CONST-normal returns are iid N(mu, omega), so their h-period sum is N(h mu, h omega)
    (common practice); the simulated VaR and ES match its quantile and tail mean within MC error."""
    mu, omega, h, n = 0.1, 4.0, 10, 200_000
    f = _fit("CONST", "normal", {"mu": mu, "omega": omega}, series)
    rk = risk(f, series, level, h, paths=n)
    S = math.sqrt(h * omega)
    a = 1 - level
    exact_var = -stats.norm.ppf(a, loc=h * mu, scale=S)
    dens = stats.norm.pdf(stats.norm.ppf(a)) / S
    assert abs(rk.var - exact_var) < Z_TOL * _se_quantile(a, dens, n)
    exact_es = -h * mu + S * stats.norm.pdf(stats.norm.ppf(a)) / a
    # the standard error of the tail mean from the closed-form tail: Var[X | X <= q] of a normal
    zq = stats.norm.ppf(a)
    lam = stats.norm.pdf(zq) / a
    tail_var = S * S * (1 - zq * lam - lam * lam)  # truncated-normal variance (common practice)
    se_es = math.sqrt((tail_var + (1 - a) * (exact_es - exact_var) ** 2) / (n * a))  # as in _se_es
    assert abs(rk.es - exact_es) < Z_TOL * se_es
    # mean and sd come from the analytic forecast, exactly
    assert_allclose([rk.mean, rk.sd], [h * mu, S], rtol=1e-12)
    assert rk.method == f"simulation ({n} paths, seed {DEFAULT_SEED}; scrambled Sobol points, importance sampling, last step exact)"


GARCH = {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.85}
CASES = [
    ("GARCH(1,1)", "normal", GARCH, None),
    ("AR(1)-GARCH(1,1)", "normal", {"mu": 0.02, "phi[1]": 0.4, **{k: v for k, v in GARCH.items() if k != "mu"}}, None),
    ("ARMA(1,1)-GARCH(1,1)", "t",
     {"mu": 0.0, "phi[1]": 0.5, "theta[1]": -0.2, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.85, "nu": 10.0}, None),
    ("AR(1)-ARCH(2)", "normal", {"mu": 0.01, "phi[1]": -0.3, "omega": 0.3, "alpha[1]": 0.2, "alpha[2]": 0.1},
     "presample=drop"),
    ("GJR-GARCH(1,1)", "skewt",
     {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.03, "gamma[1]": 0.15, "beta[1]": 0.85, "nu": 10.0, "lambda": -0.4}, None),
    ("IGARCH(1,1)", "normal", {"mu": 0.0, "omega": 0.01, "alpha[1]": 0.1, "beta[1]": 0.9}, None),
]


@pytest.mark.parametrize("model,dist,params,options", CASES, ids=[c[0] + "-" + c[1] for c in CASES])
def test_simulated_paths_match_the_analytic_forecast(series, model, dist, params, options):
    """The forward paths' step variances average to the analytic variance forecast, their sums have
    the analytic mean and cumulative variance (with the ARMA psi-weight propagation), within MC
    error.  The analytic recursions are the ones tested against their closed forms in test_forecast."""
    f = _fit(model, dist, params, series, options)
    h, n = 15, 100_000
    fc = forecast(f, series, h)
    x, s2 = simulate_forward(f, series, h, n, np.random.default_rng(11), return_variance=True)
    # E[sigma^2_{T+k}] = variance forecast k, every step
    se_step = s2.std(axis=1) / math.sqrt(n)
    assert np.all(np.abs(s2.mean(axis=1) - fc.variance) < Z_TOL * se_step + 1e-12 * fc.variance)
    cum = x.sum(axis=0)
    assert abs(cum.mean() - fc.mean.sum()) < Z_TOL * cum.std() / math.sqrt(n)
    assert abs(cum.var() - fc.cumvar[-1]) < Z_TOL * _se_variance(cum)
    if f.spec.ar or f.spec.ma:
        # the propagation matters here: the plain sum of the step variances is far off
        assert abs(fc.variance.sum() - fc.cumvar[-1]) > 10 * _se_variance(cum)


def test_gjr_skewt_needs_its_own_negative_moment(series):
    """With skewed-t shocks E[z^2 1(z<0)] is not 1/2 (Hansen 1994; left skew puts more below zero):
    the simulated variances follow the forecast with the distribution's own kappa and reject 1/2."""
    model, dist, params, options = CASES[4]
    f = _fit(model, dist, params, series, options)
    h, n = 30, 100_000
    fc = forecast(f, series, h)
    _, s2 = simulate_forward(f, series, h, n, np.random.default_rng(12), return_variance=True)
    kappa = f.dist.neg_sq_moment(_eta(f))
    assert kappa > 0.5 + 0.05
    # the same recursion with kappa = 1/2: VL + pers^(k-1) (sigma^2_1 - VL)
    pers_half = params["alpha[1]"] + 0.5 * params["gamma[1]"] + params["beta[1]"]
    VL = params["omega"] / (1 - pers_half)
    k = np.arange(1, h + 1)
    wrong = VL + pers_half ** (k - 1) * (fc.variance[0] - VL)
    se = s2[-1].std() / math.sqrt(n)
    assert abs(s2[-1].mean() - fc.variance[-1]) < Z_TOL * se
    assert abs(s2[-1].mean() - wrong[-1]) > 3 * Z_TOL * se


EGARCH = {"mu": 0.01, "omega": -0.02, "alpha[1]": 0.2, "gamma[1]": -0.08, "beta[1]": 0.95}


@pytest.mark.parametrize("dist,extra", [("normal", {}), ("ged", {"nu": 1.5})])
def test_egarch_paths_match_the_exact_forecast(series, dist, extra):
    """EGARCH's multi-step forecast is Nelson's (1991) exact product; seeded paths (the ones VaR
    and ES beyond one period use) agree with it within their MC error, and the variance of the
    paths' cumulative return with cumvar."""
    f = _fit("EGARCH(1,1)", dist, {**EGARCH, **extra}, series)
    h, n = 12, 60_000
    fc = forecast(f, series, h)
    assert fc.method == "analytic"
    x, s2 = simulate_forward(f, series, h, n, np.random.default_rng(13), return_variance=True)
    se = s2.std(axis=1) / math.sqrt(n)
    assert np.all(np.abs(s2.mean(axis=1) - fc.variance) < Z_TOL * se + 1e-12 * fc.variance)
    cum = x.sum(axis=0)
    assert abs(cum.var() - fc.cumvar[-1]) < Z_TOL * math.hypot(_se_variance(cum), se.sum())


# --------------------------------------------------------------------------------------
# the first simulated step, reproducibility

FIRST_STEP = [
    ("CONST", "normal", {"mu": 0.1, "omega": 2.0}, None),
    ("ZERO-ARCH(2)", "t", {"omega": 0.3, "alpha[1]": 0.2, "alpha[2]": 0.1, "nu": 6.0}, None),
    ("GARCH(2,2)", "normal", {"mu": 0.0, "omega": 0.05, "alpha[1]": 0.05, "alpha[2]": 0.05, "beta[1]": 0.5,
                              "beta[2]": 0.3}, None),
    ("MA(2)-GJR-GARCH(1,1)", "skewt", {"mu": 0.01, "theta[1]": 0.2, "theta[2]": -0.1, "omega": 0.05,
                                       "alpha[1]": 0.05, "gamma[1]": 0.1, "beta[1]": 0.85, "nu": 6.0,
                                       "lambda": 0.2}, None),
    ("AR(2)-IGARCH(1,1)", "ged", {"mu": 0.01, "phi[1]": 0.3, "phi[2]": -0.1, "omega": 0.01, "alpha[1]": 0.08,
                                  "beta[1]": 0.92, "nu": 1.4}, "presample=drop"),
    ("ARMA(1,1)-EGARCH(2,1)", "t", {"mu": 0.0, "phi[1]": 0.3, "theta[1]": 0.1, "omega": -0.03, "alpha[1]": 0.1,
                                    "alpha[2]": 0.05, "gamma[1]": -0.05, "gamma[2]": 0.02, "beta[1]": 0.95,
                                    "nu": 8.0}, None),
]


@pytest.mark.parametrize("model,dist,params,options", FIRST_STEP, ids=[c[0] for c in FIRST_STEP])
def test_first_simulated_step_is_the_one_step_forecast(series, model, dist, params, options):
    """Step one is deterministic up to its shock: sigma^2_{T+1} is forecast()'s, on every path, and
    r_{T+1} = mean forecast + sigma_{T+1} z with z the first draw from the same generator."""
    f = _fit(model, dist, params, series, options)
    fc = forecast(f, series, 3)
    n = 500
    x, s2 = simulate_forward(f, series, 3, n, np.random.default_rng(5), return_variance=True)
    assert x.shape == s2.shape == (3, n)
    assert_allclose(s2[0], np.full(n, fc.variance[0]), rtol=1e-12)
    z = f.dist.rvs(n, _eta(f), np.random.default_rng(5))
    assert_allclose(x[0], fc.mean[0] + math.sqrt(fc.variance[0]) * z, rtol=1e-12, atol=1e-14)
    assert np.all(np.isfinite(x)) and np.all(s2 > 0)


@needs_jit
def test_risk_is_reproducible_and_uses_the_seeded_paths(series):
    f = _fit(*CASES[1][:3], series)
    a = risk(f, series, 0.99, 10)
    b = risk(f, series, 0.99, 10)
    assert a == b
    # an AR(1) mean: the compiled route, every default path, as a constant mean's (risk_paths)
    assert a.method == f"simulation ({RISK_PATHS} paths, seed {DEFAULT_SEED}; scrambled Sobol points, importance sampling, last step exact)"
    g = _fit(*CASES[0][:3], series)  # a constant mean: the compiled route, every default path
    assert risk(g, series, 0.99, 10).method.startswith(f"simulation ({RISK_PATHS} paths, ")
    # an in-mean term: the step-by-step route, where a path costs about twice as much: half the paths
    m = _fit("GARCH(1,1)-M", "normal", {"mu": 0.01, "lambda_m": 0.05, **{k: v for k, v in GARCH.items() if k != "mu"}},
             series)
    assert risk(m, series, 0.99, 10).method.startswith(f"simulation ({RISK_PATHS // 2} paths, ")
    c = risk(f, series, 0.99, 10, paths=5000, seed=3)
    assert c.var != a.var and c.method == "simulation (5000 paths, seed 3; scrambled Sobol points, importance sampling, last step exact)"
    # (the accuracy of the estimator against long plain simulations: tests/test_risk_accuracy.py)
    # analytic mean and sd do not depend on the paths
    assert (c.mean, c.sd) == (a.mean, a.sd)
    assert c.es > c.var > 0
    # a horizon typed as a whole float is the same horizon
    assert risk(f, series, 0.99, 10.0, paths=5000, seed=3) == c


def test_simulate_forward_is_reproducible(series):
    f = _fit(*CASES[4][:3], series)
    x1 = simulate_forward(f, series, 5, 300, np.random.default_rng(9))
    x2 = simulate_forward(f, series, 5, 300, np.random.default_rng(9))
    x3 = simulate_forward(f, series, 5, 300, np.random.default_rng(10))
    assert_allclose(x1, x2, rtol=0, atol=0)
    assert not np.allclose(x1, x3)


# --------------------------------------------------------------------------------------
# bad input

@pytest.mark.parametrize("kwargs,message", [
    ({"level": 0.3}, r"level must be between 0\.5 and 1, e\.g\. 0\.99, got 0\.3"),
    ({"level": 1.0}, r"level must be between 0\.5 and 1, e\.g\. 0\.99, got 1$"),
    ({"level": 1}, r"level must be between 0\.5 and 1"),
    ({"level": 0.4999}, r"level must be between 0\.5 and 1"),
    ({"level": 99}, r"got 99"),
    ({"level": float("nan")}, r"level must be between 0\.5 and 1"),
    ({"level": "0.99"}, r"level must be between 0\.5 and 1, e\.g\. 0\.99, got \"0\.99\""),
    ({"level": True}, r"level must be between 0\.5 and 1"),
    ({"horizon": 0}, rf"horizon must be a whole number from 1 to {MAX_HORIZON}, got 0"),
    ({"horizon": MAX_HORIZON + 1}, rf"horizon must be a whole number from 1 to {MAX_HORIZON}, got {MAX_HORIZON + 1}"),
    ({"horizon": 2.5}, r"horizon must be a whole number from 1 to 600, got 2\.5"),
    ({"horizon": "3"}, r"horizon must be a whole number"),
    ({"horizon": True}, r"horizon must be a whole number"),
    ({"horizon": 2, "paths": 999}, r"paths must be a whole number from 1000 to 1000000, got 999"),
    ({"horizon": 2, "paths": 1_000_001}, r"paths must be a whole number from 1000 to 1000000"),
    ({"horizon": 2, "paths": 5000.5}, r"paths must be a whole number"),
    ({"horizon": 2, "seed": -1}, r"seed must be a whole number from 0 to 2147483647, got -1"),
])
def test_bad_arguments_raise_input_error(series, kwargs, message):
    f = _fit("CONST", "normal", {"mu": 0.0, "omega": 1.0}, series)
    with pytest.raises(InputError, match=message):
        risk(f, series, **kwargs)


def test_level_edges_are_accepted(series):
    f = _fit("CONST", "normal", {"mu": 0.0, "omega": 1.0}, series)
    assert risk(f, series, 0.5).var == pytest.approx(0.0, abs=1e-15)  # the median of N(0, 1)
    assert risk(f, series, np.float64(0.999)).var == pytest.approx(3.090232, abs=1e-6)  # normal tables
    assert risk(f, series, 0.99, MAX_HORIZON, paths=1000).horizon == MAX_HORIZON


@pytest.mark.parametrize("horizon,paths", [(0, 10), (2.0, 10), (2, 0), (2, 10.0)])
def test_simulate_forward_rejects_bad_sizes(series, horizon, paths):
    f = _fit("CONST", "normal", {"mu": 0.0, "omega": 1.0}, series)
    with pytest.raises(InputError):
        simulate_forward(f, series, horizon, paths, np.random.default_rng(0))


# ---------------------------------------------------------------------------
# the two-pass solve of the conditional VaR/ES and the default paths


@pytest.mark.parametrize("model,dist,params", [
    ("GARCH(1,1)", "t", {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.88, "nu": 5.0}),
    ("GJR-GARCH(1,1)", "skewt",
     {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.03, "gamma[1]": 0.15, "beta[1]": 0.85, "nu": 8.0, "lambda": -0.3}),
    ("EGARCH(1,1)", "ged", {"mu": 0.02, "omega": 0.01, "alpha[1]": 0.15, "gamma[1]": -0.06, "beta[1]": 0.96, "nu": 1.3}),
])
@pytest.mark.parametrize("horizon", [2, 10, 70])
def test_two_pass_solve_is_the_iterated_root(series, model, dist, params, horizon, monkeypatch):
    """risk() solves mean(w F((x - a)/s)) = 1 - level in two passes (a quadratic step, then one
    Newton step with the tail mean moved to first order); the safeguarded Newton iteration to
    1e-10 and the direct tail mean at its root (the fallback route) give the same VaR and ES
    (internal consistency; the accuracy against plain simulation is tests/test_risk_accuracy.py)."""
    import xlfuncs.core.risk as rmod

    f = _fit(model, dist, params, series)
    used = []
    fast = rmod._tail_solve
    monkeypatch.setattr(rmod, "_tail_solve", lambda *a: used.append(fast(*a)) or used[-1])
    a = risk(f, series, 0.99, horizon, paths=4096, seed=11)
    assert used and used[-1] is not None  # the two-pass route served
    monkeypatch.setattr(rmod, "_tail_solve", lambda *a: None)
    b = risk(f, series, 0.99, horizon, paths=4096, seed=11)
    assert_allclose([a.var, a.es], [b.var, b.es], rtol=1e-8)


def test_weighted_quantile_partial_sort_is_the_full_sort():
    """The weighted quantile from the lowest values only equals the one from a full sort (its definition)."""
    from xlfuncs.core.risk import _weighted_quantile

    rng = np.random.default_rng(3)
    for n in (50, 3000, 40_000):
        x = rng.standard_t(4, n)
        w = np.exp(0.5 * rng.standard_normal(n) - 0.4 * x)
        order = np.argsort(x, kind="stable")
        cw = np.cumsum(w[order]) / n
        for alpha in (0.001, 0.01, 0.05, 0.5):
            i = min(int(np.searchsorted(cw, alpha)), n - 1)
            assert _weighted_quantile(x, w, alpha) == x[order[i]]


def test_default_paths_stay_within_the_worksheet_draws_bound():
    """Default paths x horizon stay within the worksheet's bound on draws at every horizon (252, 600 included)."""
    from xlfuncs.core.risk import RISK_LONG, risk_paths
    from xlfuncs.sheet.bounds import SIM_DRAWS

    assert risk_paths(22) == RISK_PATHS and risk_paths(RISK_LONG + 1) == RISK_PATHS // 2
    assert risk_paths(2 * RISK_LONG) == RISK_PATHS // 2 and risk_paths(2 * RISK_LONG + 1) == RISK_PATHS // 4
    assert all(risk_paths(h) * h <= SIM_DRAWS for h in range(2, MAX_HORIZON + 1))
    assert risk_paths(252) * 252 <= SIM_DRAWS and risk_paths(600) * 600 <= SIM_DRAWS


@pytest.mark.parametrize("dist,eta", [("normal", ()), ("t", (4.2,)), ("t", (12.0,)), ("ged", (1.3,)),
                                      ("ged", (0.8,)), ("skewt", (6.0, -0.3)), ("skewt", (4.5, 0.4))])
def test_last_step_interpolants_match_scipy(dist, eta):
    """The last step's F, f and partial first moment M(k) = E[z 1(z <= k)] come from cubic Hermite
    interpolants (risk._LastLaw); at points inside and beyond their grid they agree with SciPy's
    distributions (t: scipy.stats.t scaled to unit variance; GED: scipy.stats.gennorm scaled to unit
    variance; normal: scipy.stats.norm) and, for every law, with SciPy's quad integrals of the
    density (F) and of z times it (M), to 5e-9 (the cubic's error beside a GED's mode, where the
    density moves as |z|^nu; elsewhere it is below 1e-10)."""
    from scipy import integrate

    from xlfuncs.core.risk import _LastLaw

    d = get_distribution(dist)
    law = _LastLaw(d, np.array(eta, dtype=float))
    rng = np.random.default_rng(5)
    k = np.concatenate([rng.uniform(-70.0, 70.0, 40), rng.uniform(-1.0, 1.0, 40), [-80.0, 0.0, 1e-3, 90.0]])
    F, f, M = law.values(k, ("F", "f", "M"))
    if dist == "t":
        nu = eta[0]
        c = math.sqrt(nu / (nu - 2.0))
        ref = stats.t(nu, scale=1.0 / c)
    elif dist == "ged":
        nu = eta[0]
        ref = stats.gennorm(nu, scale=math.sqrt(math.gamma(1.0 / nu) / math.gamma(3.0 / nu)))
    elif dist == "normal":
        ref = stats.norm()
    else:
        ref = None
    if ref is not None:
        assert_allclose(F, ref.cdf(k), rtol=0, atol=5e-9)
        assert_allclose(f, ref.pdf(k), rtol=1e-6, atol=1e-12)
    pdf = lambda z: float(d.pdf(np.array([z]), eta)[0])  # noqa: E731
    def quad(g, kk):  # split at 0, so that quad's map of the infinite interval keeps the mass
        kw = dict(epsabs=1e-13, epsrel=1e-12, limit=400)
        lo = integrate.quad(g, -np.inf, min(kk, 0.0), **kw)[0]
        return lo + (integrate.quad(g, 0.0, kk, **kw)[0] if kk > 0 else 0.0)

    for kk, FF, MM in zip(k[::4], F[::4], M[::4]):
        assert abs(FF - quad(pdf, kk)) < 5e-9, kk
        assert abs(MM - quad(lambda z: z * pdf(z), kk)) < 5e-9, kk


#: ARMA means over the variance families with compiled paths (risk_sums)
ARMA_CASES = [
    ("AR(1)-GARCH(1,1)", "t",
     {"mu": 0.02, "phi[1]": 0.3, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.88, "nu": 5.0}),
    ("MA(1)-GJR-GARCH(1,1)", "skewt", {"mu": 0.02, "theta[1]": -0.25, "omega": 0.05, "alpha[1]": 0.03,
                                       "gamma[1]": 0.15, "beta[1]": 0.85, "nu": 8.0, "lambda": -0.3}),
    ("ARMA(1,1)-EGARCH(1,1)", "ged", {"mu": 0.02, "phi[1]": 0.5, "theta[1]": -0.2, "omega": 0.01, "alpha[1]": 0.15,
                                      "gamma[1]": -0.06, "beta[1]": 0.96, "nu": 1.3}),
    ("AR(1)-EGARCH(1,1)", "normal", {"mu": 0.01, "phi[1]": -0.3, "omega": 0.01, "alpha[1]": 0.15,
                                     "gamma[1]": -0.06, "beta[1]": 0.96}),
    ("ARMA(1,1)-GJR-GARCH(1,1)", "normal", {"mu": 0.0, "phi[1]": 0.5, "theta[1]": -0.2, "omega": 0.05,
                                            "alpha[1]": 0.05, "gamma[1]": 0.1, "beta[1]": 0.85}),
    ("ARMA(2,2)-GARCH(2,1)", "t", {"mu": 0.02, "phi[1]": 0.3, "phi[2]": -0.1, "theta[1]": -0.1, "theta[2]": 0.05,
                                   "omega": 0.05, "alpha[1]": 0.05, "alpha[2]": 0.04, "beta[1]": 0.85, "nu": 7.0}),
    ("ARMA(2,1)-EGARCH(2,1)", "t",
     {"mu": 0.02, "phi[1]": 0.3, "phi[2]": -0.1, "theta[1]": -0.1, "omega": 0.01, "alpha[1]": 0.1, "alpha[2]": 0.05,
      "gamma[1]": -0.06, "gamma[2]": 0.02, "beta[1]": 0.95, "nu": 6.0}),
]


@needs_jit
@pytest.mark.parametrize("h", [22, 80], ids=["h22", "h80-padded"])
@pytest.mark.parametrize("model,dist,params", ARMA_CASES, ids=[c[0] + "-" + c[1] for c in ARMA_CASES])
def test_compiled_arma_paths_are_the_step_by_step_paths_bit_for_bit(series, model, dist, params, h):
    """An ARMA mean's paths in the family's compiled kernels (_compiled_sums: the AR and MA lags
    starting from the sample's last returns and residuals, the terms added in the step-by-step
    route's order) against the step-by-step route (forward_steps, whose paths the tests above check
    against the analytic forecast) from the same scores: the sums (cum), the sum before the last step
    plus its mean (a_last) and the last volatility (s_last) are the same numbers to the last bit
    (internal consistency), and so are the paths' weights.  At 80 periods the 16 steps beyond
    QMC_STEPS take pseudo-random scores, drawn a block at a time in the compiled route and a step
    at a time in the other: the same numbers."""
    import xlfuncs.core.risk as rmod
    from xlfuncs.core.families import _compiled
    from xlfuncs.core.simulate import forward_steps

    if not _compiled._load_numba():
        pytest.skip("numba is not importable")
    f = _fit(model, dist, params, series)
    assert rmod.compiled_route(f.spec, h)
    to_shock = f.dist.normal_scores(_eta(f))
    n = rmod.BLOCK + 900  # two blocks of scores, the second a short one
    assert (h > rmod.QMC_STEPS) == (h == 80)
    compiled = rmod._Scores(h, n, 7, 0.01)
    out = rmod._compiled_sums(f, series, h, compiled, to_shock)
    assert out is not None
    steps = rmod._Scores(h, n, 7, 0.01)
    last = []

    def draw(k):
        z = to_shock(steps.step(k))
        if k == h - 1:
            last.append(z)
        return z

    cum = np.zeros(n)
    for k, (ret, s2) in enumerate(forward_steps(f, series, h, n, None, draw=draw)):
        if k == h - 1:
            s_last = np.sqrt(s2)
            a_last = cum + (ret - s_last * last[0])
        cum += ret
    for got, want in zip(out, (cum, a_last, s_last)):
        assert np.array_equal(got, want)
    assert np.array_equal(compiled.logw, steps.logw)


@needs_jit
@pytest.mark.parametrize("model,dist,params", [
    ("GARCH(1,1)", "t", {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.1, "beta[1]": 0.88, "nu": 5.0}),
    ("GJR-GARCH(1,1)", "skewt",
     {"mu": 0.02, "omega": 0.05, "alpha[1]": 0.03, "gamma[1]": 0.15, "beta[1]": 0.85, "nu": 8.0, "lambda": -0.3}),
    ("ZERO-GARCH(2,2)", "normal",
     {"omega": 0.05, "alpha[1]": 0.05, "alpha[2]": 0.04, "beta[1]": 0.5, "beta[2]": 0.35}),
    ("EGARCH(1,1)", "ged", {"mu": 0.02, "omega": 0.01, "alpha[1]": 0.15, "gamma[1]": -0.06, "beta[1]": 0.96, "nu": 1.3}),
    ("EGARCH(2,1)", "t",
     {"mu": 0.02, "omega": 0.01, "alpha[1]": 0.1, "alpha[2]": 0.05, "gamma[1]": -0.06, "gamma[2]": 0.02,
      "beta[1]": 0.95, "nu": 6.0}),
] + ARMA_CASES)
def test_compiled_paths_are_the_step_by_step_paths(series, model, dist, params, monkeypatch):
    """Beyond one period, a GARCH-type or EGARCH fit's paths with a constant or ARMA mean run in the
    family's compiled kernels (risk_sums); with VOLCAST_NO_JIT=1 they are simulated step by step
    (forward_steps, whose paths the tests above check against closed forms and SciPy).  The two
    routes give the same VaR and ES from the same scores (internal consistency)."""
    import xlfuncs.core.risk as rmod

    f = _fit(model, dist, params, series)
    used = []
    fast = rmod._compiled_sums
    monkeypatch.setattr(rmod, "_compiled_sums", lambda *a: used.append(fast(*a)) or used[-1])
    for h in (22, 70):  # 70: six steps beyond QMC_STEPS, pseudo-random
        monkeypatch.delenv("VOLCAST_NO_JIT", raising=False)
        a = risk(f, series, 0.99, h, paths=4096 + 1000, seed=7)
        assert used and used[-1] is not None  # the compiled route served
        monkeypatch.setenv("VOLCAST_NO_JIT", "1")
        b = risk(f, series, 0.99, h, paths=4096 + 1000, seed=7)
        assert used[-1] is None
        assert_allclose([a.var, a.es], [b.var, b.es], rtol=1e-12)
        assert a.method == b.method


def test_normal_scores_interpolant_is_scipy_ndtri():
    """The inverse normal behind the quasi-random scores (two cubic Hermite interpolants, in r and in
    sqrt(-2 ln r)) against SciPy's ndtri, over the whole range of the uniforms it is given (the
    centres (2k + 1) 2^-53 of cells of width 2^-52, so down to 2^-53 and up to 1 - 2^-53)."""
    from xlfuncs.core.risk import _normal_table

    rng = np.random.default_rng(3)
    k = np.concatenate([np.arange(0, 5000), rng.integers(0, 2 ** 52, 200_000),
                        (2.0 ** 52 * np.logspace(-15.5, 0, 20_000)).astype(np.int64)])
    k = np.clip(k, 0, 2 ** 52 - 1)
    u = k.astype(float) * 2.0 ** -52 + 2.0 ** -53
    u = np.concatenate([u, 1.0 - u])
    exact = special.ndtri(u)
    got = _normal_table()(u)
    assert np.max(np.abs(got - exact) / np.maximum(1.0, np.abs(exact))) < 1e-12
    assert np.array_equal(got[: len(k)], -got[len(k):])  # symmetric to the last bit


def test_scrambled_sobol_points_are_a_net_and_the_compiled_scores_the_numpy_ones(monkeypatch):
    """The randomised Sobol' points (Matousek's linear scramble and a digital shift of SciPy's
    direction numbers): unscrambled, the generator gives SciPy's own Sobol' points; scrambled, the
    first 2^m points keep the net property (each coordinate has one point in every interval of
    width 2^-m, and the first two coordinates one point in every elementary box of area 2^-m:
    Sobol's first two coordinates form a (0, m, 2)-net, Niederreiter 1992); and the compiled
    kernel's normal scores and weights are the NumPy route's."""
    from scipy.stats import qmc

    import xlfuncs.core.risk as rmod

    m, dims = 10, 5
    v = rmod._sobol_directions(dims, m)
    u = rmod._sobol_uniforms(v, np.zeros(dims, dtype=np.uint64), 2 ** m)
    ref = qmc.Sobol(dims, scramble=False).random(2 ** m)
    assert np.array_equal(np.floor(u * 2 ** 30), np.floor(ref * 2 ** 30))

    vs, shift = rmod._scrambled_directions(dims, m, np.random.default_rng(11))
    u = rmod._sobol_uniforms(vs, shift, 2 ** m)
    assert not np.array_equal(np.floor(u * 2 ** 30), np.floor(ref * 2 ** 30))
    for j in range(dims):
        assert np.array_equal(np.sort(np.floor(u[:, j] * 2 ** m)), np.arange(2 ** m))
    for a in range(m + 1):
        box = np.floor(u[:, 0] * 2 ** a) * 2 ** (m - a) + np.floor(u[:, 1] * 2 ** (m - a))
        assert np.array_equal(np.sort(box), np.arange(2 ** m))

    a = rmod._Scores(22, 3000, 5, 0.01)
    monkeypatch.setenv("VOLCAST_NO_JIT", "1")
    b = rmod._Scores(22, 3000, 5, 0.01)
    assert_allclose(a.y, b.y, rtol=1e-13, atol=1e-13)
    assert_allclose(a.logw, b.logw, rtol=1e-12, atol=1e-12)


def test_sobol_directions_are_scipys_own(monkeypatch):
    """The direction numbers made from Joe and Kuo's table by Bratley and Fox's recurrence equal
    SciPy's own (reference: scipy.stats.qmc.Sobol's unscrambled generator, bits=64), bit for bit,
    over 70 coordinates; and the fallbacks through scipy.stats.qmc (no table file; no private
    attribute) give the same numbers for the bits a double holds."""
    from scipy.stats import qmc

    import xlfuncs.core.risk as rmod

    poly, vinit = rmod._joe_kuo_table()
    ref = qmc.Sobol(70, scramble=False, bits=64)._sv
    assert np.array_equal(rmod._bratley_fox_directions(poly, vinit, 70), ref)
    m = 16
    ours = rmod._sobol_directions(70, m)
    monkeypatch.setattr(rmod, "_DIRECTIONS", {})
    monkeypatch.setattr(rmod, "_joe_kuo_table", lambda: None)
    assert np.array_equal(rmod._sobol_directions(70, m), ours)
    monkeypatch.setattr(rmod, "_DIRECTIONS", {})
    monkeypatch.setattr(qmc.Sobol, "_sv", None, raising=False)  # SciPy without the attribute
    top = np.uint64(0xFFFFFFFFFFFFF800)  # the 53 leading bits that the points' doubles carry
    assert np.array_equal(rmod._sobol_directions(70, m) & top, ours & top)


def test_multi_period_risk_does_not_import_scipy_stats():
    """A multi-period VaR reads the direction numbers' table file, not scipy.stats (0.6-0.8 s CPU
    to import), in a fresh process."""
    import subprocess
    import sys

    code = ("import sys, numpy as np; from xlfuncs.core import fit; from xlfuncs.core.risk import risk; "
            "r = np.random.default_rng(3).standard_normal(500); f = fit(r, 'GARCH(1,1)', 't'); "
            "rk = risk(f, r, 0.99, 10); print(np.isfinite(rk.var), 'scipy.stats' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert out == ["True", "False"]


@pytest.mark.parametrize("k", [2, 5, 20, 63])
def test_radius_interpolant_is_scipy_chi_quantile(k):
    """The radius of the scores across the sum direction (its own quasi-random coordinate): the chi
    law's quantile with k degrees of freedom at the normal score's probability, against SciPy's
    chi.ppf / chi.isf, over the scores' whole range (|g| <= 8.13)."""
    from xlfuncs.core.risk import _radius_table

    g = np.linspace(-8.13, 8.13, 100_001)
    exact = np.where(g <= 0, stats.chi.ppf(special.ndtr(g), k), stats.chi.isf(special.ndtr(-g), k))
    assert np.max(np.abs(_radius_table(k)(g) / exact - 1)) < 1e-7


@pytest.mark.parametrize("dist,eta", [("t", (5.0,)), ("skewt", (6.0, -0.3)), ("ged", (1.3,))])
def test_shared_hermite_row_is_the_score_map(dist, eta):
    """The device function the compiled path kernels share (hermite_row, through hermite_cell) maps
    normal scores to the law's shocks as the score map's NumPy form does, to the last bit, both as
    plain Python and compiled; beyond the map's nodes it reports False (the caller then maps those
    exactly).  The map itself is checked against SciPy's quantiles in tests/test_distributions.py;
    here: the kernels' copy of it (internal consistency)."""
    from xlfuncs.core.distributions import score_map_arrays
    from xlfuncs.core.families._compiled import _load_numba, hermite_row

    smap = get_distribution(dist).normal_scores(np.array(eta, dtype=float))
    ident, g, d, half, step = score_map_arrays(smap)
    assert not ident
    y = np.random.default_rng(5).uniform(-half, half, 1000)  # under 1,024 points: the NumPy form
    y[:3] = [-half, half, 0.0]
    expect = smap(y)
    for fn in ([hermite_row.py, hermite_row.jit] if _load_numba() else [hermite_row.py]):
        out = np.empty(len(y))
        assert fn(y, g, d, half, step, out)
        assert np.array_equal(out, expect)
        assert not fn(np.array([0.5, half + 0.01]), g, d, half, step, np.empty(2))


def test_kernels_with_shared_cells_compiled_and_as_python(series):
    """The path kernels and the score kernel, which call the shared device functions, give the same
    numbers compiled and as plain Python (VOLCAST_NO_JIT's form of the same function): the device
    functions reach the compiled kernels compiled and stay plain Python functions in their module."""
    import xlfuncs.core.risk as rmod
    from xlfuncs.core.distributions import score_map_arrays
    from xlfuncs.core.families import _compiled, _linear, egarch

    if not _compiled._load_numba():
        pytest.skip("numba is not importable")
    assert isinstance(_linear.hermite_row, _compiled.Device) and isinstance(rmod.hermite_cell, _compiled.Device)
    s = rmod._Scores(22, 1500, 3, 0.01)
    vs, shift, d, first_shift, scale, log_scale, v, vw = s._args
    t, rt = rmod._normal_table(), s._radius
    outs = []
    for fn in (rmod._score_kernel, rmod._score_kernel.py):
        Y, logw = np.empty((22, 700)), np.empty(700)
        fn(800, vs, shift, d, True, first_shift, scale, log_scale, v, vw, t.cvd, rmod._R0, 1.0 / t.cstep, t.CCELLS,
           t.tv, t.td, t.t0, 1.0 / t.TSTEP, rt.v, rt.d, rt.HALF, 1.0 / rt.STEP, Y, logw)
        outs.append((Y, logw))
    assert np.array_equal(outs[0][0], outs[1][0]) and np.array_equal(outs[0][1], outs[1][1])
    Y = outs[0][0]
    smap = get_distribution("t").normal_scores(np.array([5.0]))
    _, g, dd, half, step = score_map_arrays(smap)
    none = (np.zeros(0),) * 4  # a constant mean: no AR or MA terms
    cases = [(_linear._risk_sum_loop, (0.02, 0.05, np.array([0.1]), np.array([0.05]), np.array([0.85]),
                                       np.array([0.3]), np.array([0.0]), np.array([1.1])) + none),
             (_linear._risk_sum_loop, (0.02, 0.05, np.array([0.05, 0.04]), np.zeros(2), np.array([0.5, 0.35]),
                                       np.array([0.3, 0.2]), np.zeros(2), np.array([1.1, 0.9])) + none),
             (_linear._risk_sum_loop, (0.02, 0.05, np.array([0.1]), np.array([0.05]), np.array([0.85]),
                                       np.array([0.3]), np.array([0.0]), np.array([1.1]), np.array([0.4]),
                                       np.array([-0.2]), np.array([0.7]), np.array([-0.5]))),
             (_linear._risk_sum_loop, (0.02, 0.05, np.array([0.05, 0.04]), np.zeros(2), np.array([0.5, 0.35]),
                                       np.array([0.3, 0.2]), np.zeros(2), np.array([1.1, 0.9]), np.array([0.3, -0.1]),
                                       np.zeros(0), np.array([0.2, 0.7]), np.zeros(0))),
             (egarch._risk_log_variance_loop, (0.01, np.array([0.15]), np.array([-0.06]), np.array([0.96]), 0.8,
                                               np.array([0.1]), np.array([-0.4]), np.array([0.2]))),
             (egarch._risk_log_variance_loop, (0.01, np.array([0.1, 0.05]), np.array([-0.06, 0.02]), np.array([0.95]),
                                               0.8, np.array([0.1, -0.3]), np.array([-0.4, 0.5]), np.array([0.2])))]
    for kern, args in cases:
        res = []
        for fn in (kern, kern.py):
            out = (np.empty(700), np.empty(700), np.empty(700)) if kern is _linear._risk_sum_loop else \
                (np.empty(Y.shape), np.empty(Y.shape))
            assert fn(Y, g, dd, half, step, False, *args, *out) == 1
            res.append(out)
        for a, b in zip(*res):
            assert np.array_equal(a, b)
    Z, S = Y[:, :300], 1.0 + np.abs(Y[:, 300:600])  # shocks and volatilities for the sums of EGARCH's paths
    for args in (none, (np.array([0.4]), np.array([-0.2]), np.array([0.7]), np.array([-0.5])),
                 (np.array([0.3, -0.1]), np.array([0.1]), np.array([0.2, 0.7]), np.array([-0.5]))):
        res = []
        for fn in (egarch._risk_sum_loop, egarch._risk_sum_loop.py):
            out = (np.empty(300), np.empty(300), np.empty(300))
            assert fn(np.ascontiguousarray(Z), np.ascontiguousarray(S), 0.02, *args, *out) == 1
            res.append(out)
        for a, b in zip(*res):
            assert np.array_equal(a, b)
