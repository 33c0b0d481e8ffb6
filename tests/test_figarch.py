"""FIGARCH(1,d,1) (Baillie, Bollerslev & Mikkelsen 1996) against outside references.

* The ARCH(inf) weights lambda(L) = 1 - (1 - beta L)^-1 (1 - varphi L)(1 - L)^d against a direct
  expansion written here: SciPy's binomial coefficients of (1 - L)^d (gamma functions), the
  product with (1 - varphi L) and the geometric series of (1 - beta L)^-1, each cut at lag 1,000
  (the truncation of common practice).
* The likelihood against that truncated sum written out as a loop, and against the recursion form
  s2[t] = omega + beta s2[t-1] + [(1 - beta L) lambda_K(L)] e2[t] (the form of BBM 1996) started
  from the mean squared residual; densities from SciPy.
* d = 0 is GARCH(1,1) with alpha[1] = varphi - beta[1] (BBM 1996: the model nests GARCH), all four
  distributions, LRE >= 10 (McCullough 1998).
* The positivity conditions of BBM (1996) keep every truncated weight non-negative.
* Scores against central differences, forecasts against a seeded simulation and against the
  forecast recursion written out, parameter recovery on a seeded simulation, and the fits on the
  public DEM/GBP series (conftest) ordered against GARCH(1,1).
"""

import math
import re

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import special, stats

from xlfuncs import (VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLNEWS, VOLRISK,
                     VOLSERIES, VOLSIM, VOLTESTS)
from xlfuncs.core import evaluate, fit, forecast, get_distribution, parse_model, parse_options
from xlfuncs.core.families.figarch import TRUNCATION, weights
from xlfuncs.core.likelihood import Likelihood
from xlfuncs.core.simulate import simulate, simulate_forward

from helpers import column, lre

K = 1000


def direct_weights(d, phi=0.0, beta=0.0):
    """lambda_1..lambda_K by direct expansion: (1 - L)^d = sum_k binom(d, k) (-L)^k (SciPy's
    binom), times (1 - phi L), times 1 / (1 - beta L) = sum_k beta^k L^k; lambda = 1 - the product."""
    k = np.arange(K + 1)
    frac = special.binom(d, k) * (-1.0) ** k
    a = np.convolve(frac, [1.0, -phi])[: K + 1]
    b = np.convolve(a, beta ** k.astype(float))[: K + 1]
    return -b[1:]  # b_0 = 1: lambda(L) = 1 - b(L) has no constant


def figarch_sum(e, omega, d, phi, beta, presample="mean"):
    """The variances as the truncated ARCH(inf) sum, a loop over t.

    mean: squares before the sample at sbar = mean(e^2), plus the presample variance's term
    beta^(t+1) (sbar (1 - sum lambda) - omega/(1 - beta)), so that s2[-1] = sbar;
    drop: the first K residuals are lags only, no presample value.
    """
    lam = direct_weights(d, phi, beta)
    e2 = e * e
    sbar = e2.mean()
    c0 = omega / (1.0 - beta)
    if presample == "mean":
        X = np.concatenate([np.full(K, sbar), e2])
        R = sbar * (1.0 - lam.sum()) - c0
        return np.array([c0 + lam @ X[K + t - 1:: -1][:K] + beta ** (t + 1) * R for t in range(len(e))])
    return np.array([c0 + lam @ e2[t - 1:: -1][:K] for t in range(K, len(e))])


def figarch_recursion(e, omega, d, phi, beta):
    """The recursion form (1 - beta L) s2[t] = omega + (1 - beta L) lambda_K(L) e2[t] as a loop,
    squares and variance before the sample at the mean squared residual."""
    lam = direct_weights(d, phi, beta)
    c = np.convolve(np.concatenate([[0.0], lam]), [1.0, -beta])  # lags 0..K+1
    e2 = e * e
    sbar = e2.mean()
    X = np.concatenate([np.full(K + 1, sbar), e2])
    out = np.empty(len(e))
    prev = sbar
    for t in range(len(e)):
        prev = omega + beta * prev + c[1:] @ X[K + t:: -1][: K + 1]
        out[t] = prev
    return out


def logdensity(dist, e, s2, shape=None):
    """log f(e) for a shock of variance s2: normal; t as SciPy's t with scale sqrt(s2 (nu-2)/nu)."""
    if dist == "normal":
        return stats.norm.logpdf(e, scale=np.sqrt(s2))
    return stats.t.logpdf(e, shape, scale=np.sqrt(s2 * (shape - 2) / shape))


def table(model="FIGARCH(1,d,1)", dist="normal", **params):
    return [["model", model], ["dist", dist]] + [[k.replace("beta", "beta[1]"), v] for k, v in params.items()]


BBM = dict(mu=0.0, omega=0.02, d=0.45, varphi=0.2, beta=0.5)


# ----------------------------------------------------------------------------------------
def test_model_strings_and_names():
    for text, canonical, names in [
        ("FIGARCH(1,d,1)", "FIGARCH(1,d,1)", ("mu", "omega", "d", "varphi", "beta[1]")),
        (" figarch ( 1 , D , 1 ) ", "FIGARCH(1,d,1)", ("mu", "omega", "d", "varphi", "beta[1]")),
        ("FIGARCH", "FIGARCH(1,d,1)", ("mu", "omega", "d", "varphi", "beta[1]")),
        ("ZERO-FIGARCH(0,d,1)", "ZERO-FIGARCH(0,d,1)", ("omega", "d", "beta[1]")),
        ("AR(1)-FIGARCH(1,d,0)", "AR(1)-FIGARCH(1,d,0)", ("mu", "phi[1]", "omega", "d", "varphi")),
        ("FIGARCH(0,d,0)", "FIGARCH(0,d,0)", ("mu", "omega", "d")),
    ]:
        spec = parse_model(text)
        assert (spec.canonical, spec.param_names) == (canonical, names)
        assert parse_model(spec.canonical) == spec
    for bad in ("FIGARCH(1,1)", "FIGARCH(2,d,1)", "FIGARCH(1,0.4,1)", "FIGARCH(1,d)"):
        with pytest.raises(ValueError, match="FIGARCH takes the orders"):
            parse_model(bad)
    assert parse_options("d=0.4; varphi=0.1").fixed == (("d", 0.4), ("varphi", 0.1))
    assert TRUNCATION == K


def test_too_short_a_series_says_why():
    r = column(np.random.default_rng(3).standard_normal(600))
    msg = VOLFIT(r, "FIGARCH(1,d,1)")[0][0]
    assert msg.startswith("ERROR: FIGARCH(1,d,1) needs at least 1021 returns, got 600")
    assert "1,000 lagged squares" in msg


# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("d, phi, beta", [(0.45, 0.2, 0.5), (0.1, -0.3, 0.0), (0.8, 0.1, 0.85),
                                          (0.0, 0.95, 0.9), (1.0, 0.2, 0.6), (0.3, 0.0, 0.0)])
def test_weights_are_the_direct_expansion(d, phi, beta):
    lam, _ = weights(d, phi, beta)
    ref = direct_weights(d, phi, beta)
    assert_allclose(lam, ref, rtol=1e-9, atol=1e-14)
    assert_allclose(lam[0], phi - beta + d, rtol=1e-12, atol=1e-15)  # lambda_1 (BBM 1996)


def test_weight_derivatives_are_central_differences():
    _, D = weights(0.45, 0.2, 0.5)
    h = 1e-6
    for row, (dd, dp, db) in enumerate([(h, 0, 0), (0, h, 0), (0, 0, h)]):
        num = (direct_weights(0.45 + dd, 0.2 + dp, 0.5 + db) - direct_weights(0.45 - dd, 0.2 - dp, 0.5 - db)) / (2 * h)
        assert_allclose(D[row], num, rtol=1e-6, atol=1e-10)
    for d in (0.0, 1.0):  # the closed forms at the ends of [0, 1], one-sided differences
        _, D = weights(d, 0.2, 0.5)
        s = 1e-7 if d == 0 else -1e-7
        num = (direct_weights(d + s, 0.2, 0.5) - direct_weights(d, 0.2, 0.5)) / s
        assert_allclose(D[0], num, rtol=1e-5, atol=1e-8)


def bbm_conditions(d, phi, beta):
    """The sufficient positivity conditions of BBM (1996) for FIGARCH(1,d,1), as the paper states
    them (from memory; re-derived in the module's docstring): beta - d <= phi <= (2 - d)/3 and
    d (phi - (1 - d)/2) <= beta (phi - beta + d)."""
    return beta - d <= phi <= (2 - d) / 3 and d * (phi - (1 - d) / 2) <= beta * (phi - beta + d)


def test_positivity_conditions_keep_every_truncated_weight_non_negative():
    """Seeded points of the region: every one of the 1,000 weights (direct expansion) is >= 0,
    and the family admits them; points that break a condition are refused."""
    rng = np.random.default_rng(5)
    fam = parse_model("ZERO-FIGARCH(1,d,1)").family
    inside = outside = 0
    while inside < 150:
        d, phi, beta = rng.uniform(0.01, 1.0), rng.uniform(-1, 1), rng.uniform(0, 0.99)
        ok = bbm_conditions(d, phi, beta)
        assert fam.admissible([0.1, d, phi, beta]) == ok
        if ok:
            inside += 1
            assert direct_weights(d, phi, beta).min() >= -1e-15, (d, phi, beta)
        else:
            outside += 1
    assert outside > 100  # the draws did reach past the region
    # the first two weights are the first two conditions (BBM 1996)
    lam = direct_weights(0.4, 0.25, 0.55)
    assert_allclose(lam[:2], [0.25 - 0.55 + 0.4, 0.55 * (0.25 - 0.55 + 0.4) - 0.4 * (0.25 - 0.3)], rtol=1e-12)


@pytest.mark.parametrize("params, message", [
    (dict(omega=0.02, d=0.3, varphi=0.1, beta=0.5), "first ARCH\\(inf\\) weight varphi - beta\\[1\\] \\+ d must not be negative"),
    (dict(omega=0.02, d=0.6, varphi=0.6, beta=0.5), "varphi must be at most \\(2 - d\\)/3 = 0.466667"),
    (dict(omega=0.02, d=0.5, varphi=0.45, beta=0.05), "second ARCH\\(inf\\) weight"),
    (dict(omega=0.02, d=1.2, varphi=0.1, beta=0.5), "d \\(the fractional differencing order\\) must be from 0 to 1"),
    (dict(omega=0.0, d=0.4, varphi=0.1, beta=0.4), "omega must be greater than 0"),
    (dict(omega=0.02, d=0.4, varphi=0.1, beta=1.0), "beta\\[1\\] must be at least 0 and below 1"),
])
def test_typed_table_outside_the_region_is_refused(dmbp, params, message):
    out = VOLLOGLIK(column(dmbp[:1100]), table(mu=0.0, **params))[0][0]
    assert out.startswith("ERROR: fit: FIGARCH(1,d,1): ")
    assert re.search(message, out), out


# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("presample", ["mean", "drop"])
@pytest.mark.parametrize("dist, shape", [("normal", None), ("t", 6.0)])
def test_loglik_is_the_truncated_sum_written_out(dmbp, presample, dist, shape):
    mu, omega, d, phi, beta = 0.01, 0.02, 0.45, 0.2, 0.5
    e = dmbp - mu
    s2 = figarch_sum(e, omega, d, phi, beta, presample)
    es = e[K:] if presample == "drop" else e
    ref = float(np.sum(logdensity(dist, es, s2, shape)))
    dd = get_distribution(dist)
    got = evaluate(dmbp, parse_model("FIGARCH(1,d,1)"), dd, ("mu", "omega", "d", "varphi", "beta[1]") + dd.param_names,
                   [mu, omega, d, phi, beta] + ([shape] if shape else []), parse_options(f"presample={presample}"))
    assert got.nobs == len(dmbp) - (K if presample == "drop" else 0)
    assert lre(got.loglik, ref) >= 10, (got.loglik, ref)


def test_presample_mean_is_the_recursion_started_at_the_mean_square(dmbp):
    """The ARCH(inf) sum with its presample term equals the recursion form of BBM (1996) started
    from e2 = s2 = mean(e^2) before the sample (the project's presample convention)."""
    e = dmbp[:1300] - 0.01
    got = VOLSERIES(column(dmbp[:1300]), table(mu=0.01, omega=0.02, d=0.45, varphi=0.2, beta=0.5))
    assert_allclose([c[0] for c in got], figarch_recursion(e, 0.02, 0.45, 0.2, 0.5), rtol=1e-11)
    assert_allclose(figarch_sum(e, 0.02, 0.45, 0.2, 0.5), figarch_recursion(e, 0.02, 0.45, 0.2, 0.5), rtol=1e-11)


@pytest.mark.parametrize("dist", ["normal", "t", "skewt", "ged"])
def test_d_zero_is_garch11(dmbp, dist):
    """BBM (1996): d = 0 gives GARCH(1,1) with alpha = varphi - beta and the same omega; the
    truncation drops weights alpha beta^k for k >= 1,000 (beta = 0.806: beta^1000 ~ 1e-94)."""
    dd = get_distribution(dist)
    eta = list(dd.start())
    mu, omega, alpha, beta = -0.006, 0.011, 0.154, 0.806  # near the DEM/GBP GARCH(1,1) estimate
    fig = Likelihood(dmbp, parse_model("FIGARCH(1,d,1)"), dd, "mean").loglik(np.array([mu, omega, 0.0, alpha + beta, beta] + eta))
    garch = Likelihood(dmbp, parse_model("GARCH(1,1)"), dd, "mean").loglik(np.array([mu, omega, alpha, beta] + eta))
    assert lre(fig, garch) >= 10, (fig, garch)
    # through the worksheet: typed tables (varphi = 0.96 > 2/3 is admitted at d = 0)
    extra = dict(zip(dd.param_names, eta))
    a = VOLLOGLIK(column(dmbp), table(dist=dist, mu=mu, omega=omega, d=0.0, varphi=alpha + beta, beta=beta, **extra))
    g = VOLLOGLIK(column(dmbp), [["model", "GARCH(1,1)"], ["dist", dist], ["mu", mu], ["omega", omega],
                                 ["alpha[1]", alpha], ["beta[1]", beta]] + [[k, v] for k, v in extra.items()])
    assert lre(a[0][0], g[0][0]) >= 10


def test_d_zero_summary_figures_are_garch11s(dmbp):
    rows = {r[0]: r[1] for r in VOLFIT(column(dmbp), "FIGARCH(1,d,1)", "normal", "d=0")}
    g = {r[0]: r[1] for r in VOLFIT(column(dmbp), "GARCH(1,1)", "normal")}
    assert lre(rows["loglik"], g["loglik"]) >= 9  # the same maximum, reached in other coordinates
    assert_allclose(rows["varphi"] - rows["beta[1]"], g["alpha[1]"], rtol=1e-4)
    assert_allclose([rows["persistence"], rows["uncond_variance"], rows["half_life"]],
                    [g["persistence"], g["uncond_variance"], g["half_life"]], rtol=1e-4)


# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_scores_and_gradient_are_central_differences(dmbp, presample):
    spec, dd = parse_model("AR(1)-FIGARCH(1,d,1)"), get_distribution("t")
    lik = Likelihood(dmbp, spec, dd, presample)
    theta = np.array([0.01, 0.05, 0.02, 0.45, 0.2, 0.5, 6.0])
    _, G = lik.scores(theta)
    num = np.empty_like(G)
    for j in range(len(theta)):
        h = 1e-6 * max(1.0, abs(theta[j]))
        up, dn = theta.copy(), theta.copy()
        up[j] += h
        dn[j] -= h
        num[:, j] = (lik.terms(up) - lik.terms(dn)) / (2 * h)
    assert_allclose(G, num, rtol=1e-5, atol=1e-7 * np.abs(num).max())
    val, g = lik.gradient(theta)  # the adjoint
    assert_allclose(g, num.sum(axis=0), rtol=1e-6, atol=1e-8 * np.abs(num.sum(axis=0)).max())
    assert lre(val, lik.loglik(theta)) >= 12


def test_robust_standard_errors_are_the_sandwich_by_differences(dmbp):
    """Bollerslev-Wooldridge (1992) H^-1 (G'G) H^-1, with H and G by differences of the likelihood."""
    f = fit(dmbp, "FIGARCH(1,d,1)", "t")
    assert f.converged, f.message
    lik = Likelihood(dmbp, f.spec, f.dist, "mean")
    theta, k = f.params.copy(), len(f.params)
    steps = 1e-4 * np.maximum(np.abs(theta), 1e-2)
    G = np.empty((lik.nobs, k))
    for j in range(k):
        up, dn = theta.copy(), theta.copy()
        up[j] += steps[j] * 1e-2
        dn[j] -= steps[j] * 1e-2
        G[:, j] = (lik.terms(up) - lik.terms(dn)) / (2e-2 * steps[j])
    H = np.empty((k, k))
    for i in range(k):
        for j in range(k):
            vals = []
            for si, sj in ((1, 1), (1, -1), (-1, 1), (-1, -1)):
                t = theta.copy()
                t[i] += si * steps[i]
                t[j] += sj * steps[j]
                vals.append(lik.loglik(t))
            H[i, j] = (vals[0] - vals[1] - vals[2] + vals[3]) / (4 * steps[i] * steps[j])
    Hinv = np.linalg.inv(-H)
    robust = np.sqrt(np.diag(Hinv @ (G.T @ G) @ Hinv))
    assert np.all(np.isfinite(f.std_errors)) and np.all(f.std_errors > 0)
    assert_allclose(f.std_errors, robust, rtol=2e-3)


# ----------------------------------------------------------------------------------------
def test_forecast_is_the_arch_inf_sum_with_future_squares_at_their_forecasts(dmbp):
    """Written out: s2[n-1+h] = c0 + sum_k lambda_k X[n-1+h-k] + beta^(n+h) R, X observed squares
    (presample at sbar) and, in the future, the forecasts themselves (E e2 = s2)."""
    mu, omega, d, phi, beta = 0.0, 0.02, 0.45, 0.2, 0.5
    r = dmbp[:1500]
    e = r - mu
    lam = direct_weights(d, phi, beta)
    sbar, c0 = float(np.mean(e * e)), omega / (1 - beta)
    R = sbar * (1 - lam.sum()) - c0
    X = list(np.concatenate([np.full(K, sbar), e * e]))
    n, H = len(e), 30
    ref = []
    for h in range(1, H + 1):
        s2 = c0 + lam @ np.array(X[::-1][:K]) + beta ** (n + h) * R
        ref.append(s2)
        X.append(s2)
    dd = get_distribution("normal")
    f = evaluate(r, parse_model("FIGARCH(1,d,1)"), dd, ("mu", "omega", "d", "varphi", "beta[1]"), [mu, omega, d, phi, beta])
    fc = forecast(f, r, H)
    assert fc.method == "analytic"
    assert_allclose(fc.variance, ref, rtol=1e-11)
    assert_allclose(fc.cumvar, np.cumsum(ref), rtol=1e-11)  # constant mean: no ARMA propagation


def test_one_step_forecast_is_the_next_variance_under_drop(dmbp):
    """presample=drop has no presample value: the one-step forecast at the end of r[:n] is the
    variance the recursion gives at position n of r[:n+1]."""
    typed = table(mu=0.01, omega=0.02, d=0.45, varphi=0.2, beta=0.5) + [["options", "presample=drop"]]
    for n in (1100, 1500):
        fc = VOLFORECAST(column(dmbp[:n]), typed, 1)[0][0]
        nxt = VOLSERIES(column(dmbp[: n + 1]), typed)[-1][0]
        assert_allclose(fc, nxt, rtol=1e-12)
        assert VOLSERIES(column(dmbp[:n]), typed)[K - 1][0] is None  # the lags have no variance


def test_forecast_matches_a_seeded_simulation(dmbp):
    """The mean over 20,000 seeded paths of each step's variance (and squared shock) against the
    analytic forecast, within four Monte Carlo standard errors; the first step is exact."""
    dd = get_distribution("t")
    f = evaluate(dmbp, parse_model("FIGARCH(1,d,1)"), dd, ("mu", "omega", "d", "varphi", "beta[1]", "nu"),
                 [0.0, 0.02, 0.45, 0.2, 0.5, 6.0])
    H = 12
    fc = forecast(f, dmbp, H).variance
    rets, s2 = simulate_forward(f, dmbp, H, 20000, np.random.default_rng(8), return_variance=True)
    assert_allclose(s2[0], fc[0], rtol=1e-12)
    for x in (s2, rets ** 2):
        m, se = x.mean(axis=1), x.std(axis=1) / math.sqrt(x.shape[1])
        assert np.all(np.abs(m - fc) <= 4 * se + 1e-12), (m, fc, se)


def test_simulated_paths_follow_the_recursion():
    """Fresh paths (no burn-in): every lagged square starts at the truncated model's level
    c0 / (1 - sum lambda); the sum written out here recovers the generator's draws as the
    standardised shocks, over more steps than the 1,000 lags."""
    omega, d, phi, beta = 0.02, 0.45, 0.2, 0.5
    lam = direct_weights(d, phi, beta)
    c0 = omega / (1 - beta)
    level = c0 / (1 - lam.sum())
    n, paths = 1300, 2
    dd = get_distribution("normal")
    x = simulate(parse_model("ZERO-FIGARCH(1,d,1)"), dd, np.array([omega, d, phi, beta]), n, paths,
                 rng=np.random.default_rng(4), burn=0)
    draws = dd.rvs((n, paths), np.array([]), np.random.default_rng(4)).reshape(n, paths)
    X = np.concatenate([np.full((K, paths), level), x ** 2])
    s2 = np.array([c0 + lam @ X[K + t - 1:: -1][:K] for t in range(n)])
    assert_allclose(x / np.sqrt(s2), draws, rtol=1e-9)
    out = VOLSIM(table(mu=0.0, omega=omega, d=d, varphi=phi, beta=beta), 50, 3, 7)
    assert np.array(out).shape == (50, 3) and out == VOLSIM(table(mu=0.0, omega=omega, d=d, varphi=phi, beta=beta), 50, 3, 7)


# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("dist, params, seed", [("normal", [0.02, 0.05, 0.45, 0.2, 0.5], 21),
                                                ("t", [0.02, 0.05, 0.45, 0.2, 0.5, 6.0], 22)])
def test_simulated_series_recovers_the_parameters(dist, params, seed):
    """4,000 seeded returns after a burn-in of 3,000 (three times the memory): every estimate
    within 3 standard errors."""
    r = simulate(parse_model("FIGARCH(1,d,1)"), get_distribution(dist), np.array(params), 4000, 1,
                 rng=np.random.default_rng(seed), burn=3000)[:, 0]
    f = fit(r, "FIGARCH(1,d,1)", dist)
    assert f.converged, f.message
    assert np.all(np.isfinite(f.std_errors)) and f.std_errors[f.names.index("d")] < 0.1
    z = (f.params - np.array(params)) / f.std_errors
    assert np.all(np.abs(z) < 3), dict(zip(f.names, z))


@pytest.mark.parametrize("dist", ["normal", "t", "skewt", "ged"])
def test_dmbp_fit_converges_and_is_not_below_garch11(dmbp, dist):
    """FIGARCH nests GARCH(1,1) at d = 0 up to the truncated weights alpha beta^k, k >= 1,000
    (below 1e-60 here), so its maximum is not below GARCH(1,1)'s by more than that."""
    f = fit(dmbp, "FIGARCH(1,d,1)", dist)
    g = fit(dmbp, "GARCH(1,1)", dist)
    assert f.converged and g.converged, (f.message, g.message)
    assert f.loglik >= g.loglik - 1e-6, (f.loglik, g.loglik)
    assert 0 < f.value("d") < 1 and f.persistence == 1.0


@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_demo_daily_series_converges(presample):
    """The bundled daily demo series (2,609 levels, synthetic): an interior estimate, converged."""
    from pathlib import Path

    rows = (Path(__file__).resolve().parents[1] / "demo_data" / "commodity_basket_daily.csv").read_text().split()[1:]
    r = 100 * np.diff(np.log([float(row.split(",")[1]) for row in rows]))
    f = fit(r, "FIGARCH(1,d,1)", "t", f"presample={presample}")
    assert f.converged, f.message
    d, phi, beta = (f.value(n) for n in ("d", "varphi", "beta[1]"))
    assert 0 < d < 1 and bbm_conditions(d, phi, beta) and phi < (2 - d) / 3 - 1e-3  # off the bound


# ----------------------------------------------------------------------------------------
def test_fit_table_round_trips_through_the_worksheet(dmbp):
    r = column(dmbp)
    out = VOLFIT(r, "FIGARCH(1,d,1)", "t")
    rows = {row[0]: row for row in out}
    assert rows["model"][1] == "FIGARCH(1,d,1)" and rows["converged"][1] is True
    assert rows["persistence"][1] == 1.0  # the weights sum to one for d > 0
    assert rows["uncond_variance"][1] is None and rows["half_life"][1] is None
    assert all(isinstance(rows[n][2], float) and rows[n][2] > 0 for n in ("omega", "d", "varphi", "beta[1]", "nu"))
    # the table read back: the same log-likelihood, variances and forecasts
    assert lre(VOLLOGLIK(r, out)[0][0], rows["loglik"][1]) >= 10
    f = fit(dmbp, "FIGARCH(1,d,1)", "t")
    series = VOLSERIES(r, out)
    assert_allclose([c[0] for c in series], Likelihood(dmbp, f.spec, f.dist).series(f.params)[1], rtol=1e-10)
    fc = VOLFORECAST(r, out, 10, "table")
    assert fc[0] == ["step", "mean", "variance", "vol", "cumvar"] and len(fc) == 11
    assert_allclose([row[2] for row in fc[1:]], forecast(f, dmbp, 10).variance, rtol=1e-10)
    tests = VOLTESTS(r, out)
    assert tests[0] == ["test", "statistic", "df", "p_value"] and len(tests) > 3


def test_typed_table_risk_news_and_backtest(dmbp):
    """A hand-typed table: VaR from the next variance and SciPy's normal quantile; the news-impact
    curve c0 + lambda_1 e^2 + (sum lambda - lambda_1) L, L = c0 / (1 - sum lambda); the backtest's
    one-step variances are the sum written out on each window."""
    mu, omega, d, phi, beta = 0.01, 0.02, 0.45, 0.2, 0.5
    typed = table(mu=mu, omega=omega, d=d, varphi=phi, beta=beta)
    r = dmbp[:1100]
    e = r - mu
    lam = direct_weights(d, phi, beta)
    c0 = omega / (1 - beta)
    sbar = np.mean(e * e)
    nxt = c0 + lam @ np.concatenate([np.full(K, sbar), e * e])[::-1][:K] + beta ** (len(e) + 1) * (sbar * (1 - lam.sum()) - c0)
    risk = {row[0]: row[1] for row in VOLRISK(column(r), typed, 0.99, 1)}
    assert_allclose(risk["VaR"], -(mu + math.sqrt(nxt) * stats.norm.ppf(0.01)), rtol=1e-10)
    multi = {row[0]: row[1] for row in VOLRISK(column(r), typed, 0.99, 5)}
    assert multi["VaR"] > risk["VaR"] and "simulation" in multi["method"]
    shocks = [-2.0, 0.0, 1.5]
    level = c0 / (1 - lam.sum())
    assert_allclose([c[0] for c in VOLNEWS(typed, column(shocks))],
                    [c0 + lam[0] * x * x + (lam.sum() - lam[0]) * level for x in shocks], rtol=1e-10)
    # d = 0: the GARCH(1,1) curve omega + alpha e^2 + beta omega / (1 - alpha - beta) (Engle & Ng 1993)
    g0 = table(mu=0.0, omega=0.02, d=0.0, varphi=0.95, beta=0.85)
    assert_allclose([c[0] for c in VOLNEWS(g0, column(shocks))],
                    [0.02 + 0.1 * x * x + 0.85 * 0.02 / 0.05 for x in shocks], rtol=1e-10)
    assert VOLNEWS(table(mu=0.0, omega=0.02, d=1.0, varphi=0.2, beta=0.6), column(shocks))[0][0].startswith("ERROR:")
    out = VOLBACKTEST(column(dmbp[:1031]), typed, 1021, 0.99, "what=series")
    assert len(out) == 11
    for row, t in zip(out[1:], range(1021, 1031)):
        w = dmbp[t - 1021: t] - mu
        sb = np.mean(w * w)
        ref = c0 + lam @ np.concatenate([np.full(K, sb), w * w])[::-1][:K] + beta ** (1022) * (sb * (1 - lam.sum()) - c0)
        assert_allclose(row[1], ref, rtol=1e-10)
    refit = {row[0]: row[1] for row in VOLBACKTEST(column(dmbp[:1031]), "FIGARCH(1,d,1)", 1021, 0.99, "refit=5")}
    assert refit["estimations"] == 2 and refit["forecasts"] == 10


def test_compare_lists_figarch_and_its_nested_forms_in_order(dmbp):
    """(0,d,0) is (0,d,1) with beta = 0 and (1,d,0) with varphi = 0, both of which are (1,d,1)
    with one parameter at zero, inside the same positivity region: the maxima are ordered."""
    r = column(dmbp)
    out = VOLCOMPARE(r, "GARCH(1,1), FIGARCH(1,d,1), FIGARCH(0,d,1), FIGARCH(1,d,0), FIGARCH(0,d,0)", "t")
    rows = {row[0]: row for row in out[1:]}
    fig = rows["FIGARCH(1,d,1)"]
    assert fig[6] == 1.0 and fig[3] == 6
    assert all(row[7] is True for row in out[1:])
    assert lre(fig[2], {row[0]: row[1] for row in VOLFIT(r, "FIGARCH(1,d,1)", "t")}["loglik"]) >= 10
    ll = {m: row[2] for m, row in rows.items()}
    tol = 1e-6
    assert ll["FIGARCH(0,d,0)"] <= min(ll["FIGARCH(0,d,1)"], ll["FIGARCH(1,d,0)"]) + tol
    assert max(ll["FIGARCH(0,d,1)"], ll["FIGARCH(1,d,0)"]) <= ll["FIGARCH(1,d,1)"] + tol
    assert ll["GARCH(1,1)"] <= ll["FIGARCH(1,d,1)"] + tol
