"""GARCH-in-mean (model strings ending in -M): the risk premium lambda_m * sigma[t] in the mean
(Engle, Lilien & Robins 1987).

Sources beside each check: the restriction lambda_m = 0 (the model without the term, exactly);
the in-mean recursions written out step by step in this file; SciPy's densities; the recovery of
known parameters from seeded simulations (within three standard errors).
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLRISK, VOLSERIES, VOLSIM
from xlfuncs.core import fit, get_distribution, parse_model
from xlfuncs.core.errors import InputError
from xlfuncs.core.families import VarianceFamily
from xlfuncs.core.forecast import forecast
from xlfuncs.core.likelihood import Likelihood
from xlfuncs.core.risk import risk
from xlfuncs.core.simulate import simulate

from helpers import family_models

DISTS = {"normal": [], "t": [6.0], "ged": [1.4], "skewt": [6.0, -0.1]}


def lre(value, reference):
    """Log relative error, the number of agreeing significant digits (McCullough 1998)."""
    if value == reference:
        return 16.0
    return -math.log10(abs(value - reference) / abs(reference))


# ---------------------------------------------------------------------------------------------
# model strings
@pytest.mark.parametrize("typed, canonical", [
    ("GARCH(1,1)-M", "GARCH(1,1)-M"), ("garch - m", "GARCH(1,1)-M"), ("CONST-GARCH(1,1)-M", "GARCH(1,1)-M"),
    ("AR(1)-GJR-GARCH(1,1)-M", "AR(1)-GJR-GARCH(1,1)-M"), ("EGARCH(1,1)-M", "EGARCH(1,1)-M"),
    ("zero-ewma-m", "ZERO-EWMA-M"), ("ARCH-M", "ARCH(1)-M"),
])
def test_model_strings_end_in_m(typed, canonical):
    spec = parse_model(typed)
    assert spec.in_mean and spec.canonical == canonical
    assert parse_model(spec.canonical) == spec
    # lambda_m follows the mean's parameters and precedes the variance's
    names = spec.param_names
    assert names.index("lambda_m") == len(spec.mean_names) - 1


@pytest.mark.parametrize("typed, fragment", [
    ("CONST-M", "needs a variance part"), ("AR(1)-M", "needs a variance part"),
    ("GARCH-M-M", "goes last"), ("M-GARCH", "goes last"), ("GARCH(1,1)-M(1)", "takes no order"),
])
def test_bad_in_mean_strings(typed, fragment):
    with pytest.raises(InputError, match=fragment):
        parse_model(typed)


# ---------------------------------------------------------------------------------------------
# lambda_m = 0 is the model without the term, exactly
MODELS = ["GARCH(1,1)", "GJR-GARCH(1,1)", "EGARCH(1,1)", "ARCH(2)", "IGARCH(1,1)", "EWMA", "AR(1)-GARCH(1,2)",
          "MA(1)-GJR-GARCH(2,1)", "ZERO-EGARCH(2,1)", "APARCH(1,1)", "AR(1)-APARCH(2,1)", "CGARCH"]


def _params(spec, dist, rng):
    """Admissible parameters of ``spec`` for the test (a family start value, a small mean)."""
    fam = spec.family
    vp = fam.starts(0.5)[0]
    mean = [0.02 if n == "mu" else 0.1 for n in spec.mean_names]
    return np.concatenate([mean, vp, DISTS[dist.name]])


@pytest.mark.parametrize("dist", list(DISTS))
@pytest.mark.parametrize("model", MODELS)
def test_zero_lambda_reproduces_the_plain_model(dmbp, model, dist):
    """Restriction (the in-mean term vanishes): log-likelihood and series agree, LRE >= 10."""
    plain, inm = parse_model(model), parse_model(model + "-M")
    d = get_distribution(dist)
    theta = _params(plain, d, None)
    nm = len(plain.mean_names)
    theta_m = np.concatenate([theta[:nm], [0.0], theta[nm:]])
    for presample in ("mean", "drop"):
        a = Likelihood(dmbp, plain, d, presample)
        b = Likelihood(dmbp, inm, d, presample)
        la, lb = a.loglik(theta), b.loglik(theta_m)
        assert np.isfinite(la)
        assert lre(lb, la) >= 10, (presample, la, lb)
        ea, sa = a.series(theta)
        eb, sb = b.series(theta_m)
        assert_allclose(eb, ea, rtol=1e-10, atol=1e-13)
        assert_allclose(sb, sa, rtol=1e-10)


@pytest.mark.parametrize("model", ["GARCH(1,1)", "GJR-GARCH(2,1)", "EGARCH(1,2)", "ARCH(1)"])
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_fast_loops_equal_the_generic_one(dmbp, model, presample):
    """The families' own one-observation loops against the protocol's generic loop (which runs
    the simulation hooks on one path), at lambda_m = 0.4: the same numbers."""
    fam = parse_model(model).family
    d = get_distribution("t")
    eta = np.array([6.0])
    vp = fam.starts(0.5)[0]
    u = dmbp - dmbp.mean()

    def step(t, s2):
        return u[t] - 0.4 * math.sqrt(s2)

    e1, s1 = fam.filter(vp, u, step, presample, eta, d)
    e2, s2 = VarianceFamily._filter(fam, vp, u, step, presample, eta, d)
    assert_allclose(e1, e2, rtol=1e-12, atol=1e-14)
    assert_allclose(s1, s2, rtol=1e-12)


def test_a_family_without_the_step_hook_says_so():
    class Bare(VarianceFamily):
        key = "bare"
        words = ("BARE",)

        def _names(self):
            return ("omega",)

    fam = Bare(1, 1)
    with pytest.raises(InputError, match="GARCH-in-mean .* is not available for BARE"):
        fam.filter([1.0], np.ones(5), lambda t, s2: 0.0)


# ---------------------------------------------------------------------------------------------
# the in-mean recursions written out step by step
def garch_m_written_out(r, mu, phi, lam, omega, alpha, gamma, beta, presample="mean"):
    """AR(1)-GJR-GARCH(1,1)-M by hand: r[t] = mu + phi r[t-1] + lam sigma[t] + e[t],
    sigma2[t] = omega + (alpha + gamma 1(e[t-1] < 0)) e[t-1]^2 + beta sigma2[t-1].
    Presample (the convention under test): the AR lag before the start at the sample mean;
    the lagged square, its negative part and the lagged variance at their means over the
    residuals without the in-mean term (u = r - mu - phi r[t-1])."""
    r = list(r)
    rbar = sum(r) / len(r)
    lag = [rbar] + r[:-1]
    u = [r[t] - mu - phi * lag[t] for t in range(len(r))]
    sbar = sum(x * x for x in u) / len(u)
    nbar = sum(x * x for x in u if x < 0) / len(u)
    e2_prev, n2_prev, s2_prev = sbar, nbar, sbar
    start = 0
    e, s2 = [], []
    if presample == "drop":  # the first residual is a lag only; its in-mean term at sqrt(sbar)
        x = u[0] - lam * math.sqrt(sbar)
        e.append(x)
        e2_prev, n2_prev = x * x, (x * x if x < 0 else 0.0)
        start = 1
    for t in range(start, len(r)):
        s = omega + alpha * e2_prev + gamma * n2_prev + beta * s2_prev
        x = u[t] - lam * math.sqrt(s)
        e.append(x)
        s2.append(s)
        e2_prev, n2_prev, s2_prev = x * x, (x * x if x < 0 else 0.0), s
    return np.array(e), np.array(s2)


@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_gjr_in_mean_against_the_recursion_written_out(dmbp, presample):
    spec = parse_model("AR(1)-GJR-GARCH(1,1)-M")
    # presample=drop drops the AR lag as well: written out on r[1:] with r[0] as the first lag
    theta = np.array([-0.02, 0.05, 0.3, 0.02, 0.05, 0.06, 0.85])
    mu, phi, lam, omega, alpha, gamma, beta = theta
    d = get_distribution("normal")
    lik = Likelihood(dmbp, spec, d, presample)
    e, s2 = lik.series(theta)
    if presample == "mean":
        e_ref, s2_ref = garch_m_written_out(dmbp, *theta)
    else:
        # AR lags are observed: u[t] = r[t] - mu - phi r[t-1] for t >= 1
        r = dmbp
        u = r[1:] - mu - phi * r[:-1]
        e_ref, s2_ref = garch_m_written_out(u, 0.0, 0.0, lam, omega, alpha, gamma, beta, "drop")
    assert_allclose(e, e_ref, rtol=1e-12, atol=1e-14)
    assert_allclose(s2, s2_ref, rtol=1e-12)
    # the Gaussian log-likelihood on the likelihood positions (SciPy's normal density)
    es = e_ref[len(e_ref) - len(s2_ref):]
    ref = np.sum(stats.norm.logpdf(es, scale=np.sqrt(s2_ref)))
    assert_allclose(lik.loglik(theta), ref, rtol=1e-12)


def test_egarch_in_mean_with_ma_and_t_shocks_written_out(dmbp):
    """MA(1)-EGARCH(1,1)-M with t shocks: e[t] = r[t] - mu - theta e[t-1] - lam sigma[t],
    ln sigma2[t] = omega + alpha (|z[t-1]| - E|z|) + gamma z[t-1] + beta ln sigma2[t-1] (Nelson
    1991), presample news zero and log-variance at the log mean of u^2, with u the residuals
    without the in-mean term; E|z| of the standardised t from SciPy by quadrature."""
    spec = parse_model("MA(1)-EGARCH(1,1)-M")
    nu = 7.0
    theta = np.array([0.01, 0.1, 0.25, -0.05, 0.15, -0.04, 0.97, nu])
    mu, th, lam, omega, alpha, gamma, beta, _ = theta
    d = get_distribution("t")
    scale = math.sqrt((nu - 2) / nu)
    from scipy import integrate

    eabs = 2 * integrate.quad(lambda z: z * stats.t.pdf(z, nu, scale=scale), 0, np.inf)[0]
    u, prev = [], 0.0
    for x in dmbp:
        prev = x - mu - th * prev
        u.append(prev)
    sbar = float(np.mean(np.square(u)))
    lv_prev, z_prev, e_prev = math.log(sbar), None, 0.0
    e, s2 = [], []
    for x in dmbp:
        news = 0.0 if z_prev is None else alpha * (abs(z_prev) - eabs) + gamma * z_prev
        lv = omega + news + beta * lv_prev
        sig = math.exp(0.5 * lv)
        ex = x - mu - th * e_prev - lam * sig
        e.append(ex)
        s2.append(sig * sig)
        z_prev, lv_prev, e_prev = ex / sig, lv, ex
    lik = Likelihood(dmbp, spec, d, "mean")
    eg, sg = lik.series(theta)
    assert_allclose(eg, e, rtol=1e-10, atol=1e-10)  # E|z| by quadrature here, closed form there
    assert_allclose(sg, s2, rtol=1e-10)
    ref = np.sum(stats.t.logpdf(np.array(e), nu, scale=np.sqrt(np.array(s2)) * scale))
    assert_allclose(lik.loglik(theta), ref, rtol=1e-10)


# ---------------------------------------------------------------------------------------------
# recovery on a simulated GARCH-M series
def test_in_mean_parameter_recovered_on_a_simulated_series():
    """Seeded GARCH(1,1)-M with lambda_m = 0.25 (2,000 periods, normal shocks): every
    estimate within three standard errors of the value simulated."""
    true = np.array([0.02, 0.25, 0.05, 0.08, 0.9])
    spec, d = parse_model("GARCH(1,1)-M"), get_distribution("normal")
    r = simulate(spec, d, true, 2000, 1, rng=np.random.default_rng(20240611))[:, 0]
    f = fit(r, spec, d)
    assert f.converged
    se = f.std_errors
    assert np.all(np.isfinite(se)) and se[1] < 0.2  # lambda_m is identified, not just covered
    assert np.all(np.abs(f.params - true) < 3 * se), (f.params, se)
    # the in-mean fit beats the model without the term on these data (nested: it cannot lose)
    plain = fit(r, "GARCH(1,1)", d)
    assert f.loglik >= plain.loglik - 1e-8


# ---------------------------------------------------------------------------------------------
# forecasts, risk and simulation
def test_mean_forecast_reads_the_volatility_forecast(dmbp):
    """h = 1: mu + lambda_m sigma[T+1] (exact); h >= 2: the plug-in sqrt of the variance
    forecast; the variance forecast itself is the GARCH one (lambda_m does not enter it)."""
    spec = parse_model("GARCH(1,1)-M")
    theta = np.array([-0.01, 0.2, 0.02, 0.1, 0.85])
    from xlfuncs.core.estimate import evaluate

    res = evaluate(dmbp, spec, get_distribution("normal"), spec.param_names, theta)
    fc = forecast(res, dmbp, 5)
    e, s2 = Likelihood(dmbp, spec, get_distribution("normal")).series(theta)
    mu, lam, omega, alpha, beta = theta
    v = [omega + alpha * e[-1] ** 2 + beta * s2[-1]]  # written out: E e^2 = sigma^2 beyond
    for _ in range(4):
        v.append(omega + (alpha + beta) * v[-1])
    assert_allclose(fc.variance, v, rtol=1e-12)
    assert_allclose(fc.mean, mu + lam * np.sqrt(v), rtol=1e-12)
    # one-period risk is exact: R = m + s z
    rk = risk(res, dmbp, 0.99, 1)
    assert_allclose(rk.var, -(fc.mean[0] + math.sqrt(v[0]) * stats.norm.ppf(0.01)), rtol=1e-12)


def test_simulated_paths_carry_the_premium():
    """The simulator draws the same shocks for GARCH(1,1)-M and GARCH(1,1) from the same seed, and
    the variance does not read the mean, so the two paths differ by lambda_m sigma[t] exactly;
    sigma[t] written out here from the plain path's shocks (started anywhere: after 300 periods
    the start is forgotten to machine precision, beta^300 ~ 1e-29)."""
    d = get_distribution("t")
    plain = simulate(parse_model("GARCH(1,1)"), d, [0.03, 0.1, 0.1, 0.8, 6.0], 1000, 1,
                     rng=np.random.default_rng(7))[:, 0]
    inm = simulate(parse_model("GARCH(1,1)-M"), d, [0.03, 0.5, 0.1, 0.1, 0.8, 6.0], 1000, 1,
                   rng=np.random.default_rng(7))[:, 0]
    e = plain - 0.03
    s2 = [1.0]
    for x in e[:-1]:
        s2.append(0.1 + 0.1 * x * x + 0.8 * s2[-1])
    assert_allclose((inm - plain)[300:], 0.5 * np.sqrt(s2)[300:], rtol=1e-9)


# ---------------------------------------------------------------------------------------------
# worksheet functions
@pytest.fixture(scope="module")
def sample():
    spec, d = parse_model("GARCH(1,1)-M"), get_distribution("t")
    r = simulate(spec, d, [0.02, 0.2, 0.05, 0.08, 0.9, 8.0], 400, 1, rng=np.random.default_rng(3))[:, 0]
    return [[float(v)] for v in r]


def test_worksheet_round_trip(sample):
    table = VOLFIT(sample, "GARCH(1,1)-M", "t")
    rows = {row[0]: row for row in table}
    assert rows["model"][1] == "GARCH(1,1)-M" and rows["converged"][1] is True
    names = [row[0] for row in table[4:10]]
    assert names == ["mu", "lambda_m", "omega", "alpha[1]", "beta[1]", "nu"]
    # a table typed from the estimates scores the same log-likelihood
    typed = [["model", "garch(1,1)-m"], ["dist", "t"]] + [[row[0], row[1]] for row in table[4:10]]
    assert_allclose(VOLLOGLIK(sample, typed)[0][0], rows["loglik"][1], rtol=1e-12)
    series = VOLSERIES(sample, table, "resid")
    assert len(series) == len(sample) and all(isinstance(v[0], float) for v in series)
    fc = VOLFORECAST(sample, table, 3, "table")
    assert fc[0] == ["step", "mean", "variance", "vol", "cumvar"] and len(fc) == 4
    mu, lam = rows["mu"][1], rows["lambda_m"][1]
    assert_allclose([row[1] for row in fc[1:]], [mu + lam * row[3] for row in fc[1:]], rtol=1e-12)
    rk = VOLRISK(sample, table, 0.99, 5)
    assert rk[0] == ["measure", "value"] and rk[1][1] > 0
    sim = VOLSIM(table, 20, 3, 1)
    assert len(sim) == 20 and len(sim[0]) == 3
    # a walk forward from the table: each step's forecast is VOLFORECAST's on the returns so far
    bt = VOLBACKTEST(sample, table, 380, 0.99, "what=series")
    assert bt[0] == ["index", "variance", "VaR", "return", "exception"] and len(bt) == 21
    first = VOLFORECAST(sample[:380], table, 1, "table")[1]
    assert_allclose(bt[1][1], first[2], rtol=1e-12)
    comp = VOLCOMPARE(sample, [["GARCH(1,1)-M"], ["GARCH(1,1)"]], "t")
    assert comp[1][0] == "GARCH(1,1)-M" and comp[1][2] >= comp[2][2] - 1e-8  # nested log-likelihoods


def test_worksheet_refuses_in_mean_without_a_variance():
    out = VOLFIT([[0.1], [0.2]] * 20, "CONST-M")
    assert out[0][0].startswith("ERROR:") and "needs a variance part" in out[0][0]


def test_lambda_fixed_at_zero_is_the_plain_fit(dmbp):
    """Restriction by the options: GARCH(1,1)-M with lambda_m=0 fixed is estimated as GARCH(1,1)
    (the same maximum, to the estimator's tolerance)."""
    plain = fit(dmbp, "GARCH(1,1)", "normal")
    held = fit(dmbp, "GARCH(1,1)-M", "normal", "lambda_m=0")
    assert held.status[held.names.index("lambda_m")] == "fixed"
    assert lre(held.loglik, plain.loglik) >= 10
    assert_allclose(np.delete(held.params, 1), plain.params, rtol=1e-5)


def test_the_mean_module_names_no_family():
    """The mean side reaches the variance only through the family protocol (as
    tests/test_families.py checks for the modules above the families)."""
    import ast
    from pathlib import Path

    from xlfuncs.core.families import FAMILIES

    src = Path(__file__).resolve().parents[1] / "xlfuncs" / "core" / "mean.py"
    tree = ast.parse(src.read_text(encoding="utf-8"))
    named = [node.value for node in ast.walk(tree)
             if isinstance(node, ast.Constant) and isinstance(node.value, str) and node.value.lower() in FAMILIES]
    assert named == []


@pytest.mark.parametrize("model", family_models(constant=False))
def test_every_family_runs_the_in_mean_filter_or_says_why_not(dmbp, model):
    """Protocol: each registered family either runs the one-observation filter (returning, with
    the residuals left as they are, exactly its own variances under both presample conventions)
    or refuses an in-mean model in words."""
    fam = parse_model(model).family
    d = get_distribution("ged")
    eta = np.array([1.3])
    vp = [s for s in fam.starts(0.5) if fam.admissible(s, eta, d, held=fam.integrated)][0]
    u = dmbp - dmbp.mean()
    try:
        for presample in ("mean", "drop"):
            e, s2 = fam.filter(vp, u, lambda t, v: u[t], presample, eta, d)
            assert_allclose(e, u, rtol=0, atol=0)
            assert_allclose(s2, fam.variance(vp, u, presample, eta, d), rtol=1e-12)
    except InputError as exc:
        assert "GARCH-in-mean (-M) is not available" in str(exc)


@pytest.mark.parametrize("model, dist, fragment", [
    ("GARCH(2,2)-M", "normal", "has 4 variance lags; a worksheet call estimates in-mean (-M) models with at most 2"),
    ("AR(2)-GJR-GARCH(1,1)-M", "t", "has 9 parameters; a worksheet call estimates in-mean (-M) models of at most 8"),
    ("EGARCH(1,1)-M", "t", "has 7 parameters; a worksheet call estimates EGARCH models of at most 6"),
])
def test_worksheet_bounds_on_in_mean_fits(model, dist, fragment):
    """Common practice of this project: a worksheet call answers in about ten seconds or refuses
    (xlfuncs/sheet/bounds.py, measured by benchmarks/bounds_timing.py)."""
    out = VOLFIT([[0.1], [-0.2], [0.3]] * 40, model, dist)
    assert out[0][0].startswith("ERROR:") and fragment in out[0][0], out[0][0]
