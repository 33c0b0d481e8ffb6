"""Likelihood conventions against direct implementations and a reference library."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import optimize, stats

from xlfuncs import VOLFIT, VOLLOGLIK
from xlfuncs.core import fit, get_distribution, parse_model
from xlfuncs.core.likelihood import Likelihood


def arch1_conditional_loglik(r, mu, a0, a1):
    """Engle's (1982) conditional Gaussian ARCH(1) likelihood, written out directly:
    the product starts at t = 2, with h_t = a0 + a1 e_{t-1}^2 and e_t = r_t - mu."""
    e = r - mu
    h = a0 + a1 * e[:-1] ** 2
    return float(np.sum(-0.5 * np.log(2 * np.pi) - 0.5 * np.log(h) - 0.5 * e[1:] ** 2 / h))


def garch11_mean_presample_loglik(r, mu, w, a, b):
    """The benchmark convention written as a plain loop: e^2_0 = s^2_0 = mean(e^2)."""
    e = r - mu
    s = np.mean(e * e)
    e2_prev = s
    ll = 0.0
    for x in e:
        s = w + a * e2_prev + b * s
        ll += -0.5 * (np.log(2 * np.pi) + np.log(s) + x * x / s)
        e2_prev = x * x
    return ll


def test_arch1_conditional_likelihood_matches_direct(dmbp):
    f = fit(dmbp, "ARCH(1)", "normal", "presample=drop")
    mu, a0, a1 = f.params
    assert f.nobs == len(dmbp) - 1
    assert_allclose(f.loglik, arch1_conditional_loglik(dmbp, mu, a0, a1), rtol=1e-12)
    # and our maximiser is the maximiser of the direct likelihood (Nelder-Mead, tight)
    res = optimize.minimize(lambda x: -arch1_conditional_loglik(dmbp, *x) if x[1] > 0 and x[2] >= 0 else 1e10,
                            [0.0, 0.15, 0.3], method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000, "maxfev": 40000})
    assert_allclose(f.params, res.x, rtol=2e-5, atol=1e-7)
    assert f.loglik >= -res.fun - 1e-9


def test_garch_mean_presample_matches_loop(dmbp):
    lik = Likelihood(dmbp, parse_model("GARCH(1,1)"), get_distribution("normal"), "mean")
    theta = np.array([0.01, 0.02, 0.1, 0.85])
    assert_allclose(lik.loglik(theta), garch11_mean_presample_loglik(dmbp, *theta), rtol=1e-12)


def test_ar1_constant_variance_drop_is_ols(dmbp):
    """With presample=drop the AR(1) likelihood is maximised by OLS (statsmodels as reference)."""
    sm = pytest.importorskip("statsmodels.api")
    f = fit(dmbp, "AR(1)", "normal", "presample=drop")
    X = sm.add_constant(dmbp[:-1])
    ols = sm.OLS(dmbp[1:], X).fit()
    assert_allclose(f.params[:2], ols.params, rtol=1e-6, atol=1e-9)
    assert_allclose(f.value("omega"), ols.ssr / ols.nobs, rtol=1e-6)  # the ML variance
    assert_allclose(f.loglik, ols.llf, rtol=1e-10)


def test_constant_mean_normal_is_sample_moments(dmbp):
    """CONST-normal: the ML estimates are the sample mean and the ML variance (common practice)."""
    f = fit(dmbp, "CONST", "normal")
    assert_allclose(f.params, [dmbp.mean(), dmbp.var()], rtol=1e-7)
    assert_allclose(f.loglik, np.sum(stats.norm.logpdf(dmbp, dmbp.mean(), dmbp.std())), rtol=1e-12)


def test_t_likelihood_against_scipy(dmbp):
    """Student-t shocks: the likelihood equals scipy.stats.t with scale sigma*sqrt((nu-2)/nu)."""
    lik = Likelihood(dmbp, parse_model("GARCH(1,1)"), get_distribution("t"), "mean")
    theta = np.array([0.0, 0.02, 0.1, 0.85, 5.0])
    e, sig2 = lik.series(theta)
    nu = 5.0
    ref = np.sum(stats.t.logpdf(e, nu, scale=np.sqrt(sig2 * (nu - 2) / nu)))
    assert_allclose(lik.loglik(theta), ref, rtol=1e-12)


CASES = [
    ("GARCH(1,1)", "normal", "mean"),
    ("AR(1)-GJR-GARCH(1,1)", "t", "mean"),
    ("ARMA(1,1)-GARCH(2,1)", "skewt", "drop"),
    ("MA(2)-GJR-GARCH(2,2)", "ged", "drop"),
    ("AR(2)-ARCH(2)", "t", "drop"),
    ("ZERO-IGARCH(1,1)", "normal", "mean"),
    ("ARMA(2,1)", "skewt", "mean"),
]


@pytest.mark.parametrize("model,dist,presample", CASES)
def test_analytic_scores_match_numerical_derivatives(dmbp, model, dist, presample):
    spec = parse_model(model)
    d = get_distribution(dist)
    lik = Likelihood(dmbp[:600], spec, d, presample)
    rng = np.random.default_rng(3)
    theta = []
    for n in lik.names:
        base = {"mu": 0.01, "omega": 0.03, "nu": 6.0, "lambda": -0.2}.get(n)
        if base is None:
            if n.startswith("beta"):
                base = 0.7 / spec.q
            elif n.startswith(("alpha", "gamma")):
                base = 0.08 / spec.p
            else:
                base = 0.1
        theta.append(base * (1 + 0.1 * rng.standard_normal()))
    theta = np.array(theta)
    l, G = lik.scores(theta)
    assert_allclose(l.sum(), lik.loglik(theta), rtol=1e-12)
    num = np.empty(len(theta))
    for j in range(len(theta)):
        h = 1e-6 * max(abs(theta[j]), 1e-2)
        up, dn = theta.copy(), theta.copy()
        up[j] += h
        dn[j] -= h
        num[j] = (lik.loglik(up) - lik.loglik(dn)) / (2 * h)
    assert_allclose(G.sum(axis=0), num, rtol=1e-5, atol=1e-4)


def test_worksheet_loglik_scores_a_typed_table(dmbp):
    """A person types parameters; VOLLOGLIK returns the benchmark-convention likelihood."""
    table = [["model", "GARCH(1,1)"], ["dist", "normal"], ["alpha0", 0.02], ["alpha1", 0.1],
             ["beta[1]", 0.85], ["mu", 0.01]]
    cells = [[v] for v in dmbp]
    assert_allclose(VOLLOGLIK(cells, table)[0][0], garch11_mean_presample_loglik(dmbp, 0.01, 0.02, 0.1, 0.85), rtol=1e-12)
    # a fit table's own log-likelihood is what VOLLOGLIK gives back
    fitted = VOLFIT(cells, "ARCH(1)", "normal", "presample=drop")
    ll_row = [r for r in fitted if r[0] == "loglik"][0]
    assert_allclose(VOLLOGLIK(cells, fitted)[0][0], ll_row[1], rtol=1e-12)


def test_ar2_mean_on_sunspots_against_statsmodels_autoreg():
    """AR(2) on the yearly sunspot numbers (public dataset shipped with statsmodels): the
    conditional likelihood's maximiser is conditional least squares, as statsmodels' AutoReg
    estimates it (reference library)."""
    sm = pytest.importorskip("statsmodels.api")
    from statsmodels.tsa.ar_model import AutoReg

    y = sm.datasets.sunspots.load_pandas().data["SUNACTIVITY"].to_numpy(dtype=float)
    f = fit(y, "AR(2)", "normal", "presample=drop")
    ref = AutoReg(y, lags=2, trend="c").fit()
    assert_allclose(f.params[:3], ref.params, rtol=1e-6)
    assert_allclose(f.value("omega"), ref.sigma2, rtol=1e-6)  # ML variance: SSR / (T - 2)
    assert_allclose(f.loglik, ref.llf, rtol=1e-9)
