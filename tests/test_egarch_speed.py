"""EGARCH's compiled recursion, its analytic scores and its exact multi-step forecasts.

Outside references: the recursion of Nelson (1991) written out in this file; central differences
of the log-likelihood; SciPy's quadrature over scipy.stats densities (``norm``, ``gennorm``: the
GED of unit variance is gennorm with scale sqrt(Gamma(1/nu)/Gamma(3/nu)), from memory); seeded
simulations from :mod:`xlfuncs.core.simulate`; SciPy's optimisers for the maximum checks.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, optimize, special, stats

from helpers import egarch11_product_forecast
from xlfuncs import VOLFORECAST, VOLRISK
from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.estimate import evaluate, fit
from xlfuncs.core.families import History
from xlfuncs.core.families import egarch as eg
from xlfuncs.core.forecast import forecast, in_sample
from xlfuncs.core.likelihood import Likelihood
from xlfuncs.core.risk import risk
from xlfuncs.core.simulate import simulate_forward

ROOT = Path(__file__).resolve().parents[1]
ETA = {"normal": [], "t": [6.0], "skewt": [6.0, -0.2], "ged": [1.4]}


def _theta(lik, values):
    return np.array([values[n] for n in lik.names], dtype=float)


def _written_out(e, omega, alpha, gamma, beta, kappa, presample):
    """Nelson's (1991) recursion in plain Python: news |z| - E|z| and z zero before the start,
    log-variance lags at the log mean square; presample=drop keeps the first p residuals as lags
    standardised by the root mean square (the project's presample convention, DESIGN.md)."""
    p, q = len(alpha), len(beta)
    sbar = sum(x * x for x in e) / len(e)
    start = p if presample == "drop" else 0
    zs = [0.0] * p + [e[t] / math.sqrt(sbar) for t in range(start)]
    news = [0.0] * p + [abs(z) - kappa for z in zs[p:]]
    lv = [math.log(sbar)] * q
    out = []
    for t in range(start, len(e)):
        v = omega
        for i in range(1, p + 1):
            v += alpha[i - 1] * news[-i] + gamma[i - 1] * zs[-i]
        for j in range(1, q + 1):
            v += beta[j - 1] * lv[-j]
        lv.append(v)
        zs.append(e[t] / math.exp(0.5 * v))
        news.append(abs(zs[-1]) - kappa)
        out.append(math.exp(v))
    return np.array(out)


@pytest.mark.parametrize("orders", [(1, 1), (2, 1), (1, 2), (1, 0)])
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_compiled_recursion_is_nelsons(dmbp, orders, presample):
    p, q = orders
    fam = eg.Egarch(p, q)
    alpha = [0.2, 0.05][:p]
    gamma = [-0.06, 0.03][:p]
    beta = [0.9, 0.05][:q]
    vp = np.array([-0.05] + alpha + gamma + beta)
    d = get_distribution("t")
    e = dmbp - dmbp.mean()
    got = fam.variance(vp, e, presample, [6.0], d)
    want = _written_out(list(e), -0.05, alpha, gamma, beta, d.abs_moment([6.0]), presample)
    assert_allclose(got, want, rtol=1e-12)  # the recursion written out above


def test_plain_python_kernels_give_the_compiled_numbers(dmbp, monkeypatch):
    """VOLCAST_NO_JIT=1 runs the same kernels as plain Python: the same variances and scores."""
    spec, d = parse_model("AR(1)-EGARCH(2,1)"), get_distribution("skewt")
    lik = Likelihood(dmbp[:400], spec, d, "drop")
    th = _theta(lik, {"mu": 0.01, "phi[1]": 0.05, "omega": -0.1, "alpha[1]": 0.15, "alpha[2]": 0.05,
                      "gamma[1]": -0.05, "gamma[2]": 0.02, "beta[1]": 0.9, "nu": 6.0, "lambda": -0.1})
    fast = lik.scores(th)
    assert eg._log_variance_derivatives.compiled
    monkeypatch.setenv("VOLCAST_NO_JIT", "1")
    slow = lik.scores(th)
    assert_allclose(slow[0], fast[0], rtol=1e-13)
    assert_allclose(slow[1], fast[1], rtol=1e-11, atol=1e-13)


SCORE_CASES = [(m, dist, pre) for dist in ("normal", "t", "skewt", "ged") for pre in ("mean", "drop")
               for m in ("EGARCH(1,1)", "ARMA(1,1)-EGARCH(1,2)")]


@pytest.mark.parametrize("model,dist,presample", SCORE_CASES)
def test_scores_are_central_differences_of_the_loglik(dmbp, model, dist, presample):
    """The compiled forward pass's scores, the shape parameters' rows (through E|z|) included,
    against central differences of the log-likelihood (common practice)."""
    spec, d = parse_model(model), get_distribution(dist)
    lik = Likelihood(dmbp[:800], spec, d, presample)
    values = {"mu": -0.01, "phi[1]": 0.1, "theta[1]": -0.05, "omega": -0.15, "alpha[1]": 0.25, "gamma[1]": -0.04,
              "beta[1]": 0.8, "beta[2]": 0.1, "nu": ETA[dist][0] if ETA[dist] else None, "lambda": -0.2}
    th = _theta(lik, values)
    l, G = lik.scores(th)
    assert_allclose(l.sum(), lik.loglik(th), rtol=1e-13)
    num = np.empty(len(th))
    for j in range(len(th)):
        h = 1e-6 * max(1.0, abs(th[j]))
        up, dn = th.copy(), th.copy()
        up[j] += h
        dn[j] -= h
        num[j] = (lik.loglik(up) - lik.loglik(dn)) / (2 * h)
    assert_allclose(G.sum(axis=0), num, rtol=1e-6, atol=1e-5)
    val, g = lik.gradient(th)
    assert_allclose(g, G.sum(axis=0), rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("model,dist,options", [("EGARCH(1,1)", "t", "presample=mean"),
                                                ("EGARCH(1,1)", "ged", "presample=drop"),
                                                ("ZERO-EGARCH(1,2)", "skewt", "presample=mean"),
                                                ("EGARCH(1,1)", "normal", "presample=mean")])
def test_the_estimate_is_the_maximum(dmbp, model, dist, options):
    """The fit is the maximum: along each parameter its gradient is ~0, or the log-likelihood
    has a kink there (|z| at a zero residual) with the slopes either side falling away from it;
    and independent optimisers restarted from it (SciPy's Nelder-Mead, and L-BFGS-B with its own
    numerical gradient) gain less than 1e-6."""
    f = fit(dmbp, model, dist, options)
    assert f.converged, f.message
    lik = Likelihood(dmbp, f.spec, f.dist, f.options.presample)
    l0 = lik.loglik(f.params)
    assert_allclose(l0, f.loglik, rtol=1e-13)
    _, g = lik.gradient(f.params)
    for j in range(len(g)):
        h = 1e-7 * max(1.0, abs(f.params[j]))
        step = np.eye(len(g))[j] * h
        left, right = (l0 - lik.loglik(f.params - step)) / h, (lik.loglik(f.params + step) - l0) / h
        assert abs(g[j]) < 1e-3 or left > 0 > right, (f.names[j], g[j], left, right)

    def neg(t):
        v = lik.loglik(t)
        return -v if math.isfinite(v) else 1e10

    nm = optimize.minimize(neg, f.params, method="Nelder-Mead",
                           options={"xatol": 1e-9, "fatol": 1e-11, "maxfev": 6000})
    lb = optimize.minimize(neg, f.params, method="L-BFGS-B", options={"ftol": 1e-15, "gtol": 1e-10})
    assert -nm.fun - l0 < 1e-6 and -lb.fun - l0 < 1e-6


def test_numba_loads_only_when_an_egarch_recursion_runs():
    """The command line's start-up does not pay for numba; the first EGARCH recursion does."""
    code = ("import sys, numpy as np\nimport xlfuncs.cli\nfrom xlfuncs.core import parse_model\n"
            "spec = parse_model('EGARCH(1,1)')\nprint('numba' in sys.modules)\n"
            "from xlfuncs.core.estimate import fit\nfit(np.random.default_rng(1).standard_normal(300), 'EGARCH(1,1)')\n"
            "print('numba' in sys.modules)\n")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    env.pop("VOLCAST_NO_JIT", None)
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["False", "True"]


def test_kernels_run_where_no_cache_directory_is_writable(dmbp):
    """numba raises at decoration when none of its cache locators applies; the kernel then
    compiles in memory (no locator listed here applies to an ordinary module file)."""
    code = ("import numpy as np\nfrom xlfuncs.core.families import egarch as eg\nfrom xlfuncs.core import get_distribution\n"
            "e = np.sin(np.arange(500.0))\n"
            "v = eg.Egarch(1, 1).variance([-0.1, 0.2, -0.05, 0.9], e, 'mean', [], get_distribution('normal'))\n"
            "print(eg._log_variance_loop.compiled, repr(float(v.sum())))\n")
    env = dict(os.environ, PYTHONPATH=str(ROOT), NUMBA_CACHE_LOCATOR_CLASSES="ZipCacheLocator")
    env.pop("VOLCAST_NO_JIT", None)
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    compiled, total = out.stdout.split()
    e = np.sin(np.arange(500.0))
    want = _written_out(list(e), -0.1, [0.2], [-0.05], [0.9], math.sqrt(2 / math.pi), "mean")
    assert compiled == "True"
    assert_allclose(float(total), want.sum(), rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# E exp(a|z| + c z): closed form (normal) and quadrature (GED) against SciPy's quadrature

def _quad_mgf(a, c, logpdf):
    f = lambda z: math.exp(a * abs(z) + c * z + logpdf(z))  # noqa: E731
    lo = integrate.quad(f, -np.inf, 0, epsabs=0, epsrel=2e-14, limit=500)[0]
    hi = integrate.quad(f, 0, np.inf, epsabs=0, epsrel=2e-14, limit=500)[0]
    return lo + hi


def _lre(x, ref):
    return -math.log10(abs(x - ref) / abs(ref)) if x != ref else 16.0


PAIRS = [(0.2, -0.06), (0.02, 0.01), (-0.1, 0.05), (0.9, 0.4), (1e-4, -3e-5)]


@pytest.mark.parametrize("a,c", PAIRS)
def test_normal_moment_generating_value(a, c):
    """exp(u^2/2) Phi(u) + exp(w^2/2) Phi(w) with u = a + c, w = a - c (Nelson 1991) against
    quadrature over scipy.stats.norm: LRE >= 10."""
    got = math.exp(eg._log_mgf(np.array([a]), np.array([c]), [], get_distribution("normal"))[0])
    assert _lre(got, _quad_mgf(a, c, stats.norm.logpdf)) >= 10


@pytest.mark.parametrize("nu", [1.0, 1.2, 1.5, 2.0, 3.0])
@pytest.mark.parametrize("a,c", PAIRS)
def test_ged_moment_generating_value(nu, a, c):
    """The vectorised quadrature (closed form 1/(1 - b s) at nu = 1) against SciPy's quad over
    scipy.stats.gennorm with the unit-variance scale: LRE >= 9."""
    s = math.sqrt(special.gamma(1 / nu) / special.gamma(3 / nu))
    got = math.exp(eg._log_mgf(np.array([a]), np.array([c]), [nu], get_distribution("ged"))[0])
    ref = _quad_mgf(a, c, lambda z: stats.gennorm.logpdf(z, nu, scale=s))
    assert _lre(got, ref) >= 9


def test_moment_generating_values_that_do_not_exist():
    """E exp(b z 1(z > 0)) is infinite for b > 0 against a polynomial tail (t, skewed t) or a GED
    tail of shape below 1; at shape 1 (Laplace, tail exp(-sqrt(2)|z|)) for b >= sqrt(2)
    (from memory; the t's tail ~ |z|^-(nu+1) is in any handbook)."""
    a = np.array([0.1, -0.1, 0.0, -0.2, 1.5])
    c = np.array([0.0, 0.15, 0.0, 0.1, 0.0])  # second: -0.1|z| + 0.15z rises on z > 0
    for name, eta in (("t", [6.0]), ("skewt", [6.0, 0.3]), ("ged", [0.8])):
        assert eg._mgf_finite(a, c, eta, get_distribution(name)).tolist() == [False, False, True, True, False]
    assert eg._mgf_finite(a, c, [1.0], get_distribution("ged")).tolist() == [True, True, True, True, False]
    assert eg._mgf_finite(a, c, [], get_distribution("normal")).all()
    # nonpositive exponents: finite for the t too, by quadrature over its density (scipy.stats.t
    # with 6 degrees of freedom rescaled to unit variance by sqrt(6/4))
    d = get_distribution("t")
    got = math.exp(eg._log_mgf(np.array([-0.2]), np.array([0.1]), [6.0], d)[0])
    assert _lre(got, _quad_mgf(-0.2, 0.1, lambda z: stats.t.logpdf(z * math.sqrt(1.5), 6.0) + 0.5 * math.log(1.5))) >= 9


# ---------------------------------------------------------------------------------------------
# exact forecasts

E11 = {"mu": 0.01, "omega": -0.02, "alpha[1]": 0.2, "gamma[1]": -0.08, "beta[1]": 0.95}


def _given(r, model, dist, params, options=None):
    spec, d = parse_model(model), get_distribution(dist)
    names = list(spec.param_names) + list(d.param_names)
    return evaluate(r, spec, d, names, [params[n] for n in names],
                    None if options is None else __import__("xlfuncs.core.spec", fromlist=["x"]).parse_options(options))


@pytest.mark.parametrize("dist,eta", [("normal", {}), ("ged", {"nu": 1.5}), ("ged", {"nu": 1.0})])
def test_egarch11_forecast_is_nelsons_product(dmbp, dist, eta):
    """E_T sigma2_{T+h} = sigma2_{T+1}^(beta^(h-1)) exp(omega sum_{i<h-1} beta^i)
    prod_{i=1}^{h-1} E exp(beta^(i-1) (alpha (|z| - E|z|) + gamma z)) (Nelson 1991), each factor
    by SciPy's quad over the scipy.stats density: LRE >= 8 at every step."""
    f = _given(dmbp, "EGARCH(1,1)", dist, {**E11, **eta})
    fc = forecast(f, dmbp, 40)
    assert fc.method == "analytic" and fc.finite_steps is None
    e, s2, _ = in_sample(f, dmbp)
    want = egarch11_product_forecast(E11, eta, e[-1], s2[-1], f.dist.abs_moment(list(eta.values())), 40)
    for h in range(1, 41):
        assert _lre(fc.variance[h - 1], want[h - 1]) >= 8, h


@pytest.mark.parametrize("model,dist,params", [
    ("EGARCH(1,1)", "normal", E11),
    ("EGARCH(2,1)", "normal", {"mu": 0.01, "omega": -0.03, "alpha[1]": 0.15, "alpha[2]": 0.1, "gamma[1]": -0.08,
                               "gamma[2]": 0.03, "beta[1]": 0.93}),
    ("AR(1)-EGARCH(1,2)", "ged", {"mu": 0.01, "phi[1]": 0.1, "omega": -0.02, "alpha[1]": 0.25, "gamma[1]": -0.05,
                                  "beta[1]": 0.6, "beta[2]": 0.35, "nu": 1.3}),
])
def test_exact_forecast_agrees_with_a_long_simulation(dmbp, model, dist, params):
    """The exact forecasts (any orders, through the impulse responses) against the mean variance
    of 300,000 seeded simulated paths, within 4.5 Monte Carlo standard errors at every step."""
    f = _given(dmbp, model, dist, params)
    H = 15
    fc = forecast(f, dmbp, H)
    _, s2 = simulate_forward(f, dmbp, H, 300_000, np.random.default_rng(2024), return_variance=True)
    se = s2.std(axis=1) / math.sqrt(s2.shape[1])
    assert_allclose(s2[0], fc.variance[0], rtol=1e-12)
    assert np.all(np.abs(s2.mean(axis=1) - fc.variance) <= 4.5 * se + 1e-14)


@pytest.mark.parametrize("dist,eta", [("normal", []), ("ged", [1.3])])
def test_exact_forecast_with_a_future_intercept_series(dmbp, dist, eta):
    """Variance regressors: a known future series adds to each step's log-variance intercept, so
    the exact forecast moves only through m_{T+h}.  Step 1 against the recursion written out;
    every step against the mean variance of 200,000 seeded paths stepped by the family's own
    simulation with the same series, within 4.5 Monte Carlo standard errors."""
    fam = parse_model("EGARCH(1,2)").family
    d = get_distribution(dist)
    vp = np.array([-0.02, 0.2, -0.06, 0.55, 0.4])
    e = dmbp - dmbp.mean()
    shift_in = 0.05 * np.sin(np.arange(len(e)) / 7.0)
    s2 = fam.variance(vp, e, "mean", eta, d, shift=shift_in)
    hist = History(e, s2, 0)
    H = 12
    shift = 0.3 * np.cos(np.arange(H))  # a strong, changing series
    fc, simulated = fam.forecast(vp, eta, d, hist, H, shift=shift)
    assert not simulated
    kappa = d.abs_moment(eta)
    z = e[-1] / math.sqrt(s2[-1])
    one = math.exp(vp[0] + shift[0] + vp[1] * (abs(z) - kappa) + vp[2] * z + vp[3] * math.log(s2[-1])
                   + vp[4] * math.log(s2[-2]))
    assert _lre(fc[0], one) >= 10
    plain, _ = fam.forecast(vp, eta, d, hist, H)
    assert np.all(np.abs(fc - plain) > 1e-3 * plain)  # the series moves every step
    rng = np.random.default_rng(77)
    state = fam.sim_continue(vp, eta, d, hist)
    n = 200_000
    sims = np.empty((H, n))
    for h in range(H):
        sims[h], _ = fam.sim_step(state, vp, eta, d, d.rvs(n, eta, rng), shift=shift[h])
    se = sims.std(axis=1) / math.sqrt(n)
    assert_allclose(sims[0], fc[0], rtol=1e-12)
    assert np.all(np.abs(sims.mean(axis=1) - fc) <= 4.5 * se + 1e-14)


def test_unconditional_variance_is_the_forecasts_limit(dmbp):
    """E[sigma^2] (the fit table's uncond_variance) is where the exact forecast settles."""
    f = _given(dmbp, "EGARCH(1,1)", "ged", {**E11, "beta[1]": 0.9, "nu": 1.6})
    fam, vp = f.spec.family, np.array([f.value(n) for n in f.spec.variance_names])
    e, s2, lik = in_sample(f, dmbp)
    far = fam.forecast(vp, [1.6], f.dist, History(e[lik.a:], s2[lik.a + lik.s0:], lik.s0), 600)[0]
    assert_allclose(f.uncond_variance, far[-1], rtol=1e-11)


@pytest.mark.parametrize("dist,eta", [("t", {"nu": 7.0}), ("skewt", {"nu": 7.0, "lambda": -0.2}), ("ged", {"nu": 0.8})])
def test_heavy_tailed_shocks_have_no_variance_forecast_beyond_one_step(dmbp, dist, eta):
    """With Student-t, skewed-t or GED (shape < 1) shocks E exp(c|z|) is infinite, so
    E_T sigma2_{T+h} is infinite for h >= 2: the forecast says so in its cells, while VaR (a
    quantile) is still simulated and ES and sd (expectations) say why they are infinite."""
    f = _given(dmbp, "EGARCH(1,1)", dist, {**E11, **eta})
    fc = forecast(f, dmbp, 5)
    assert fc.finite_steps == 1 and np.isfinite(fc.variance[0]) and np.all(np.isinf(fc.variance[1:]))
    assert "does not exist beyond one step" in fc.why and dist in fc.why
    assert np.all(np.isinf(fc.cumvar[1:]))
    table = [["model", "EGARCH(1,1)"], ["dist", dist]] + [[k, v] for k, v in {**E11, **eta}.items()]
    cells = [[x] for x in dmbp]
    col = VOLFORECAST(cells, table, 4)
    assert isinstance(col[0][0], float)
    assert all(isinstance(c[0], str) and c[0].startswith("infinite: E[sigma^2] does not exist") for c in col[1:])
    tab = VOLFORECAST(cells, table, 3, "table")
    assert isinstance(tab[2][1], float) and tab[2][2].startswith("infinite") and tab[2][4].startswith("infinite")
    rows = dict((r[0], r[1]) for r in VOLRISK(cells, table, 0.99, 10))
    assert isinstance(rows["VaR"], float) and rows["VaR"] > 0
    assert rows["ES"].startswith("infinite: ES needs E[sigma]") and rows["sd"].startswith("infinite")
    one = dict((r[0], r[1]) for r in VOLRISK(cells, table, 0.99, 1))
    assert all(isinstance(one[k], float) for k in ("VaR", "ES", "sd"))
    rk = risk(f, dmbp, 0.99, 10)
    assert math.isinf(rk.es) and math.isfinite(rk.var) and rk.es_note


def test_an_in_mean_term_at_an_infinite_volatility_forecast(dmbp):
    """EGARCH(1,1)-M with t shocks: the mean forecast mu + lambda_m E[sigma_{T+h}] (the model's
    definition) has no finite value beyond one step when lambda_m != 0, and the cells say so; with
    lambda_m = 0 it is mu at every step (no 0 x inf)."""
    cells = [[x] for x in dmbp]
    for lam in (0.1, -0.1, 0.0):
        table = [["model", "EGARCH(1,1)-M"], ["dist", "t"], ["mu", 0.01], ["lambda_m", lam], ["omega", -0.02],
                 ["alpha[1]", 0.2], ["gamma[1]", -0.05], ["beta[1]", 0.95], ["nu", 7.0]]
        col = VOLFORECAST(cells, table, 3, "mean")
        tab = VOLFORECAST(cells, table, 3, "table")
        rows = dict((r[0], r[1]) for r in VOLRISK(cells, table, 0.99, 3))
        assert isinstance(col[0][0], float) and col[0][0] == tab[1][1]
        assert isinstance(rows["VaR"], float) and rows["VaR"] > 0
        if lam:
            for c in (col[1][0], col[2][0], tab[2][1], tab[3][1], rows["mean"]):
                assert c.startswith("infinite: the in-mean term needs the volatility forecast"), c
        else:
            assert [c[0] for c in col] == [0.01] * 3 and [r[1] for r in tab[1:]] == [0.01] * 3
            assert_allclose(rows["mean"], 0.03, rtol=1e-12)


def test_normal_shocks_keep_every_figure_finite(dmbp):
    f = _given(dmbp, "EGARCH(1,1)", "normal", E11)
    rk = risk(f, dmbp, 0.99, 10)
    assert rk.es_note is None and rk.sd_note is None and math.isfinite(rk.es) and rk.es > rk.var
    fc = forecast(f, dmbp, 10)
    assert_allclose(rk.sd, math.sqrt(fc.cumvar[-1]), rtol=1e-14)
