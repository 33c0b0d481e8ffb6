"""EWMA against its recursion written out here, against IGARCH(1,1) with omega = 0, and
against SciPy's densities and optimisers.

The EWMA of common practice: s2[t] = decay * s2[t-1] + (1 - decay) * e2[t-1]; with the
project's presample convention (DESIGN.md, presample=mean, the convention of the published
GARCH benchmark) the lagged square and variance before the first observation are the mean
squared residual.  The data are the public DEM/GBP series (conftest) and seeded simulations.
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import optimize, special, stats

from xlfuncs import (VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLNEWS, VOLRISK,
                     VOLSERIES, VOLSIM)
from xlfuncs.core import evaluate, fit, forecast, get_distribution, parse_model, parse_options
from xlfuncs.core.likelihood import Likelihood

from helpers import column, lre


def logdensity(dist, e, s2, shape=None):
    """log f(e) of a shock e with variance s2 under a standardised distribution.

    normal: the Gaussian formula; t: SciPy's Student t rescaled to variance 1, scale
    sqrt(s2 (nu - 2) / nu); ged: SciPy's generalised normal (gennorm) with shape nu and scale
    sqrt(s2 Gamma(1/nu) / Gamma(3/nu)), the variance-1 generalised error distribution.
    """
    if dist == "normal":
        return -0.5 * (math.log(2 * math.pi) + math.log(s2) + e * e / s2)
    if dist == "t":
        return float(stats.t.logpdf(e, shape, scale=math.sqrt(s2 * (shape - 2) / shape)))
    if dist == "ged":
        scale = math.sqrt(s2 * special.gamma(1 / shape) / special.gamma(3 / shape))
        return float(stats.gennorm.logpdf(e, shape, scale=scale))
    raise ValueError(dist)


def ewma_terms(r, mu, decay, dist="normal", shape=None, presample="mean"):
    """The EWMA log-likelihood terms and variances as a plain loop (common practice definition).

    presample=mean: e2[-1] = s2[-1] = mean(e^2), every observation in the likelihood;
    presample=drop: the first observation is a lag only and s2 before it is mean(e^2).
    """
    e = [float(x) - mu for x in r]
    sbar = sum(x * x for x in e) / len(e)
    s2_prev, e2_prev = sbar, sbar
    start = 0
    if presample == "drop":
        e2_prev = e[0] * e[0]
        start = 1
    terms, s2s = [], []
    for t in range(start, len(e)):
        s2 = decay * s2_prev + (1.0 - decay) * e2_prev
        terms.append(logdensity(dist, e[t], s2, shape))
        s2s.append(s2)
        s2_prev, e2_prev = s2, e[t] * e[t]
    return np.array(terms), np.array(s2s), e


def ewma_loglik(r, mu, decay, dist="normal", shape=None, presample="mean"):
    return float(np.sum(ewma_terms(r, mu, decay, dist, shape, presample)[0]))


# ----------------------------------------------------------------------------------------
def test_model_strings():
    for text, canonical, names in [("EWMA", "EWMA", ("mu", "decay")), (" ewma ", "EWMA", ("mu", "decay")),
                                   ("ZERO-EWMA", "ZERO-EWMA", ("decay",)),
                                   ("AR(1)-EWMA", "AR(1)-EWMA", ("mu", "phi[1]", "decay"))]:
        spec = parse_model(text)
        assert (spec.canonical, spec.param_names) == (canonical, names)
    with pytest.raises(ValueError, match="EWMA takes no order"):
        parse_model("EWMA(1,1)")
    assert parse_options("decay=0.94").fixed == (("decay", 0.94),)


@pytest.mark.parametrize("dist, shape", [("normal", None), ("t", 6.0), ("ged", 1.3)])
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_loglik_equals_the_recursion_written_out(dmbp, dist, shape, presample):
    """evaluate() at given parameters against the loop above (SciPy densities for t and GED)."""
    mu, decay = 0.01, 0.94
    d = get_distribution(dist)
    names = ("mu", "decay") + tuple(d.param_names)
    params = [mu, decay] + ([shape] if shape is not None else [])
    got = evaluate(dmbp, parse_model("EWMA"), d, names, params, parse_options(f"presample={presample}"))
    ref = ewma_loglik(dmbp, mu, decay, dist, shape, presample)
    assert lre(got.loglik, ref) >= 10, (got.loglik, ref)
    assert got.nobs == len(dmbp) - (1 if presample == "drop" else 0)


@pytest.mark.parametrize("dist", ["normal", "t", "skewt", "ged"])
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_ewma_is_igarch_with_zero_omega(dmbp, dist, presample):
    """EWMA(decay) is IGARCH(1,1) with omega = 0, alpha = 1 - decay, beta = decay.  The IGARCH
    likelihood is called directly: evaluate() refuses omega = 0 for IGARCH, rightly."""
    d = get_distribution(dist)
    eta = list(d.start())
    mu, decay = -0.02, 0.93
    ewma = evaluate(dmbp, parse_model("EWMA"), d, ("mu", "decay") + tuple(d.param_names), [mu, decay] + eta,
                    parse_options(f"presample={presample}"))
    igarch = Likelihood(dmbp, parse_model("IGARCH(1,1)"), d, presample)
    ref = igarch.loglik(np.array([mu, 0.0, 1.0 - decay, decay] + eta))
    assert lre(ewma.loglik, ref) >= 10


def test_estimate_is_the_maximiser_of_the_loop(dmbp):
    """ZERO-EWMA: one free parameter; SciPy's bounded scalar search of the loop's likelihood."""
    f = fit(dmbp, "ZERO-EWMA", "normal")
    assert f.converged, f.message
    res = optimize.minimize_scalar(lambda d: -ewma_loglik(dmbp, 0.0, d), bounds=(0.5, 0.9999),
                                   method="bounded", options={"xatol": 1e-10})
    assert 0.5 + 1e-3 < res.x < 0.9999 - 1e-3  # an interior maximum
    assert_allclose(f.value("decay"), res.x, atol=1e-6)
    assert lre(f.loglik, -res.fun) >= 10


def test_estimate_with_t_shocks_and_fixed_nu_is_the_maximiser_of_the_loop(dmbp):
    f = fit(dmbp, "ZERO-EWMA", "t", "nu=6")
    assert f.converged, f.message
    res = optimize.minimize_scalar(lambda d: -ewma_loglik(dmbp, 0.0, d, "t", 6.0), bounds=(0.5, 0.9999),
                                   method="bounded", options={"xatol": 1e-10})
    assert_allclose(f.value("decay"), res.x, atol=1e-6)


def test_fixed_decay_estimates_the_mean_only(dmbp):
    """decay=0.94 in the options: decay held, mu the maximiser of the loop over mu."""
    f = fit(dmbp, "EWMA", "normal", "decay=0.94")
    assert f.value("decay") == 0.94 and f.status[f.names.index("decay")] == "fixed"
    assert f.n_free == 1
    res = optimize.minimize_scalar(lambda m: -ewma_loglik(dmbp, m, 0.94), bounds=(-0.2, 0.2),
                                   method="bounded", options={"xatol": 1e-10})
    assert_allclose(f.value("mu"), res.x, atol=1e-6)


def test_fit_table_says_persistence_one_and_leaves_the_rest_blank(dmbp):
    """DESIGN.md: persistence, uncond_variance and half_life, blank where undefined."""
    table = VOLFIT(column(dmbp), "EWMA")
    rows = {row[0]: row[1] for row in table}
    assert rows["model"] == "EWMA" and rows["converged"] is True
    assert rows["persistence"] == 1.0
    assert rows["uncond_variance"] is None and rows["half_life"] is None
    assert 0 < rows["decay"] < 1
    assert "omega" not in rows  # an EWMA has no omega


def test_scores_and_robust_errors_agree_with_the_loop(dmbp):
    """Analytic per-observation scores against central differences of the loop's terms, and
    the Bollerslev-Wooldridge (1992) sandwich built here from the loop by differences."""
    f = fit(dmbp, "EWMA", "normal")
    theta = f.params.copy()
    lik = Likelihood(dmbp, f.spec, f.dist, "mean")
    _, G = lik.scores(theta)
    h = np.array([1e-6, 1e-6])
    num = np.empty_like(G)
    for j in range(2):
        up, dn = theta.copy(), theta.copy()
        up[j] += h[j]
        dn[j] -= h[j]
        num[:, j] = (ewma_terms(dmbp, *up)[0] - ewma_terms(dmbp, *dn)[0]) / (2 * h[j])
    assert_allclose(G, num, rtol=1e-5, atol=1e-7 * np.abs(num).max())
    # Hessian of the loop's log-likelihood by second differences (step 1e-4)
    H = np.empty((2, 2))
    s = 1e-4
    for i in range(2):
        for j in range(2):
            vals = []
            for si, sj in ((1, 1), (1, -1), (-1, 1), (-1, -1)):
                t = theta.copy()
                t[i] += si * s
                t[j] += sj * s
                vals.append(ewma_loglik(dmbp, *t))
            H[i, j] = (vals[0] - vals[1] - vals[2] + vals[3]) / (4 * s * s)
    Hinv = np.linalg.inv(-H)
    robust = np.sqrt(np.diag(Hinv @ (num.T @ num) @ Hinv))
    assert_allclose(f.std_errors, robust, rtol=1e-3)


def test_forecast_is_flat_and_cumulative_variance_linear(dmbp):
    """Every future period's variance is the next one's; with a constant mean the variance of
    the sum of h returns is h times it (common practice)."""
    f = fit(dmbp, "EWMA", "normal")
    mu, decay = f.params
    _, s2, e = ewma_terms(dmbp, mu, decay)
    nxt = decay * s2[-1] + (1 - decay) * e[-1] ** 2
    fc = forecast(f, dmbp, 24)
    assert_allclose(fc.variance, np.full(24, nxt), rtol=1e-12)
    assert_allclose(fc.cumvar, nxt * np.arange(1, 25), rtol=1e-12)
    cells = VOLFORECAST(column(dmbp), VOLFIT(column(dmbp), "EWMA"), 5, "cumvar")
    assert_allclose([c[0] for c in cells], nxt * np.arange(1, 6), rtol=1e-9)


def test_series_and_loglik_from_a_typed_table(dmbp):
    """A table a person types: model, dist and the parameters."""
    typed = [["model", "EWMA"], ["dist", "t"], ["mu", 0.0], ["decay", 0.95], ["nu", 7]]
    terms, s2, _ = ewma_terms(dmbp, 0.0, 0.95, "t", 7.0)
    assert lre(VOLLOGLIK(column(dmbp), typed)[0][0], float(terms.sum())) >= 10
    assert_allclose([c[0] for c in VOLSERIES(column(dmbp), typed)], s2, rtol=1e-12)
    zero = [["model", "ZERO-EWMA"], ["dist", "normal"], ["decay", 0.94]]
    assert lre(VOLLOGLIK(column(dmbp), zero)[0][0], ewma_loglik(dmbp, 0.0, 0.94)) >= 10
    bad = VOLLOGLIK(column(dmbp), [["model", "ZERO-EWMA"], ["decay", 1.0]])
    assert bad[0][0].startswith("ERROR:") and "decay must be between 0 and 1" in bad[0][0]


def test_one_period_risk_is_the_normal_quantile(dmbp):
    """VaR and ES at horizon 1 from the next variance, SciPy's normal quantile and the normal
    ES formula phi(z)/(1 - level) (common practice)."""
    typed = [["model", "EWMA"], ["dist", "normal"], ["mu", 0.01], ["decay", 0.94]]
    _, s2, e = ewma_terms(dmbp, 0.01, 0.94)
    sd = math.sqrt(0.94 * s2[-1] + 0.06 * e[-1] ** 2)
    rows = {r[0]: r[1] for r in VOLRISK(column(dmbp), typed, 0.99, 1)}
    assert_allclose(rows["VaR"], -(0.01 + sd * stats.norm.ppf(0.01)), rtol=1e-10)
    assert_allclose(rows["ES"], -0.01 + sd * stats.norm.pdf(stats.norm.ppf(0.99)) / 0.01, rtol=1e-8)


def test_backtest_one_step_variances_restart_the_recursion_in_each_window(dmbp):
    """Walk-forward with given parameters: each forecast is the next variance of the loop run
    on that window alone (presample at the window's mean square)."""
    r = dmbp[:206]
    typed = [["model", "EWMA"], ["dist", "normal"], ["mu", 0.0], ["decay", 0.94]]
    out = VOLBACKTEST(column(r), typed, 200, 0.99, "what=series")
    assert out[0] == ["index", "variance", "VaR", "return", "exception"]
    for row, t in zip(out[1:], range(200, 206)):
        _, s2, e = ewma_terms(r[t - 200: t], 0.0, 0.94)
        assert_allclose(row[1], 0.94 * s2[-1] + 0.06 * e[-1] ** 2, rtol=1e-12)
        assert row[0] == t + 1


def test_news_impact_is_the_news_term(dmbp):
    """An EWMA fixes no level for the lagged variance; its curve is the recursion's news term
    (1 - decay) e^2 (common practice definition of the recursion)."""
    typed = [["model", "ZERO-EWMA"], ["decay", 0.9]]
    shocks = [-2.0, -0.5, 0.0, 1.0, 3.0]
    got = [c[0] for c in VOLNEWS(typed, column(shocks))]
    assert_allclose(got, [0.1 * x * x for x in shocks], rtol=1e-12)


@pytest.mark.parametrize("dist, params, seed", [("normal", [0.0, 0.94], 11), ("t", [0.05, 0.97, 6.0], 12)])
def test_simulated_series_recovers_decay(simulated, dist, params, seed):
    """A seeded EWMA simulation of 4000 returns: the estimate within 3 standard errors."""
    r = simulated("EWMA", dist, params, 4000, seed)
    f = fit(r, "EWMA", dist)
    assert f.converged, f.message
    d, se = f.value("decay"), f.std_errors[f.names.index("decay")]
    assert 0 < se < 0.02
    assert abs(d - params[1]) < 3 * se, (d, se)


def test_simulated_paths_follow_the_recursion():
    """VOLSIM of an EWMA: running the recursion written out here from a unit start over the
    simulated returns recovers, as standardised shocks, the draws of the same seeded generator."""
    table = [["model", "ZERO-EWMA"], ["dist", "normal"], ["decay", 0.9]]
    paths = np.array(VOLSIM(table, 50, 3, 7))
    assert paths.shape == (50, 3) and np.all(np.isfinite(paths))
    # reconstruct the standardised shocks from the recursion; they must be the generator's draws
    z = np.empty_like(paths)
    s2 = np.ones(3)
    e2 = np.ones(3)
    for t in range(50):
        s2 = 0.9 * s2 + 0.1 * e2
        z[t] = paths[t] / np.sqrt(s2)
        e2 = paths[t] ** 2
    draws = get_distribution("normal").rvs((50, 3), np.array([]), np.random.default_rng(7)).reshape(50, 3)
    assert_allclose(z, draws, rtol=1e-10)


def test_compare_accepts_ewma(dmbp):
    r = column(dmbp)
    out = VOLCOMPARE(r, [["GARCH(1,1)", "EWMA"]])
    rows = {row[0]: row for row in out[1:]}
    assert set(rows) == {"GARCH(1,1)", "EWMA"}
    ew = rows["EWMA"]
    assert ew[1] == "normal" and ew[3] == 2 and ew[6] == 1.0 and ew[7] is True and ew[8] in (1, 2)
    table = {row[0]: row[1] for row in VOLFIT(r, "EWMA")}
    assert lre(ew[2], ewma_loglik(dmbp, table["mu"], table["decay"])) >= 10
    assert_allclose(ew[5], -2 * ew[2] + 2 * math.log(len(dmbp)), rtol=1e-12)  # BIC, two free parameters
