"""APARCH(p,q), the asymmetric power ARCH of Ding, Granger & Engle (1993), against outside references:

- its restrictions: delta = 2 with gamma = 0 is GARCH (Bollerslev 1986), delta = 2 is GJR-GARCH
  (Glosten, Jagannathan & Runkle 1993) after the reparametrisation worked out in
  ``test_the_gjr_reparametrisation_algebra`` (as Ding, Granger & Engle 1993 note, the model nests both);
- its likelihood against the recursion written out in this file with SciPy's densities (normal,
  Student t, generalised normal) and Hansen's (1994) skewed-t density written out here, under
  DESIGN.md's presample conventions;
- E(|z| - gamma z)^delta against SciPy quadrature of those densities (the normal closed form is
  Ding, Granger & Engle's 1993);
- analytic scores and gradient against central differences;
- parameter recovery on a seeded simulation, convergence and nested likelihoods on the public
  DEM/GBP series (conftest), forecasts against a brute-force simulation written out here;
- the worksheet functions end to end, as the EWMA tests do.
"""

import math
import re

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, special, stats

from xlfuncs import (VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLNEWS, VOLRISK,
                     VOLSERIES, VOLSIM)
from xlfuncs.core import evaluate, fit, forecast, get_distribution, parse_model, parse_options
from xlfuncs.core.forecast import in_sample
from xlfuncs.core.likelihood import Likelihood
from xlfuncs.core.simulate import simulate_forward

from helpers import column, lre

DISTS = [("normal", []), ("t", [6.0]), ("skewt", [6.0, -0.2]), ("ged", [1.3])]


def rows(table):
    return {row[0]: row for row in table}


# ----------------------------------------------------------------------------------------
# densities and the recursion, written out independently of the package

def hansen_pdf(z, nu, lam):
    """Hansen's (1994) skewed t with unit variance: c = Gamma((nu+1)/2) / (sqrt(pi (nu-2)) Gamma(nu/2)),
    a = 4 lam c (nu-2)/(nu-1), b^2 = 1 + 3 lam^2 - a^2, g(z) = b c (1 + ((b z + a)/(1 -/+ lam))^2/(nu-2))^(-(nu+1)/2)."""
    c = math.gamma((nu + 1) / 2) / (math.sqrt(math.pi * (nu - 2)) * math.gamma(nu / 2))
    a = 4 * lam * c * (nu - 2) / (nu - 1)
    b = math.sqrt(1 + 3 * lam * lam - a * a)
    z = np.asarray(z, dtype=float)
    d = np.where(b * z + a < 0, 1 - lam, 1 + lam)
    return b * c * (1 + ((b * z + a) / d) ** 2 / (nu - 2)) ** (-(nu + 1) / 2)


def std_pdf(dist, z, shape):
    """The standardised (variance 1) densities: SciPy's norm, t with scale sqrt((nu-2)/nu), gennorm
    with scale sqrt(Gamma(1/nu)/Gamma(3/nu)), and Hansen's skewed t above."""
    if dist == "normal":
        return stats.norm.pdf(z)
    if dist == "t":
        return stats.t.pdf(z, shape[0], scale=math.sqrt((shape[0] - 2) / shape[0]))
    if dist == "ged":
        return stats.gennorm.pdf(z, shape[0], scale=math.sqrt(special.gamma(1 / shape[0]) / special.gamma(3 / shape[0])))
    return hansen_pdf(z, *shape)


def logdensity(dist, e, s2, shape):
    """log f(e) of shocks e with variances s2: log(std_pdf(e / s) / s)."""
    s = np.sqrt(s2)
    return np.log(std_pdf(dist, e / s, shape)) - np.log(s)


def aparch_loop(r, mu, omega, alpha, gamma, beta, delta, presample="mean"):
    """The APARCH recursion as a plain loop: S = s^delta, S[t] = omega + sum alpha_i (|e[t-i]| -
    gamma_i e[t-i])^delta + sum beta_j S[t-j].  presample=mean: a lagged news term before the start is
    its sample mean, a lagged S is mean(e^2)^(delta/2); presample=drop: the first p residuals are lags
    only (DESIGN.md).  Returns (variances s^2, residuals) on the likelihood positions."""
    e = [float(x) - mu for x in r]
    n, p, q = len(e), len(alpha), len(beta)

    def news(i, x):
        return (abs(x) - gamma[i] * x) ** delta

    sbar = sum(x * x for x in e) / n
    nbar = [sum(news(i, x) for x in e) / n for i in range(p)]
    c0 = sbar ** (delta / 2)
    start = p if presample == "drop" else 0
    S, out = {}, []
    for t in range(start, n):
        v = omega
        for i in range(1, p + 1):
            v += alpha[i - 1] * (news(i - 1, e[t - i]) if t - i >= 0 else nbar[i - 1])
        for j in range(1, q + 1):
            v += beta[j - 1] * (S[t - j] if t - j >= start else c0)
        S[t] = v
        out.append(v ** (2 / delta))
    return np.array(out), np.array(e[start:])


def loop_loglik(r, dist, shape, *args, presample="mean"):
    s2, e = aparch_loop(r, *args, presample=presample)
    return float(np.sum(logdensity(dist, e, s2, shape)))


def names_of(model, dist):
    return tuple(parse_model(model).param_names) + tuple(get_distribution(dist).param_names)


# ----------------------------------------------------------------------------------------
def test_model_strings():
    for text, canonical, names in [
        ("APARCH", "APARCH(1,1)", ("mu", "omega", "alpha[1]", "gamma[1]", "beta[1]", "delta")),
        (" aparch(2,1) ", "APARCH(2,1)", ("mu", "omega", "alpha[1]", "alpha[2]", "gamma[1]", "gamma[2]", "beta[1]", "delta")),
        ("ZERO-APARCH(1,0)", "ZERO-APARCH(1,0)", ("omega", "alpha[1]", "gamma[1]", "delta")),
        ("AR(1)-APARCH", "AR(1)-APARCH(1,1)", ("mu", "phi[1]", "omega", "alpha[1]", "gamma[1]", "beta[1]", "delta")),
    ]:
        spec = parse_model(text)
        assert (spec.canonical, spec.param_names) == (canonical, names)
    with pytest.raises(ValueError, match="APARCH needs at least one ARCH term"):
        parse_model("APARCH(0,1)")
    assert parse_options("delta=2").fixed == (("delta", 2.0),)


def test_the_gjr_reparametrisation_algebra():
    """For e >= 0, |e| - g e = (1 - g) e; for e < 0, |e| - g e = -(1 + g) e.  Squared:
    (1 - g)^2 e^2 and (1 + g)^2 e^2 = (1 - g)^2 e^2 + 4 g e^2.  So with delta = 2,
        alpha (|e| - g e)^2 = alpha (1 - g)^2 e^2 + 4 alpha g 1(e < 0) e^2,
    the GJR news term with alpha_gjr = alpha (1 - g)^2 and gamma_gjr = 4 alpha g (worked out here;
    the same map holds for the presample means, which are means of the same terms)."""
    e = np.random.default_rng(0).standard_normal(1000) * 2.0
    for alpha, g in [(0.1, 0.3), (0.07, -0.6), (0.2, 0.95)]:
        lhs = alpha * (np.abs(e) - g * e) ** 2
        rhs = alpha * (1 - g) ** 2 * e ** 2 + 4 * alpha * g * (e < 0) * e ** 2
        assert_allclose(lhs, rhs, rtol=1e-13, atol=1e-15)


@pytest.mark.parametrize("dist, shape", DISTS)
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_delta_two_gamma_zero_is_garch(dmbp, dist, shape, presample):
    """Ding, Granger & Engle (1993): delta = 2, gamma = 0 gives GARCH(p,q) (Bollerslev 1986)."""
    opts = parse_options(f"presample={presample}")
    d = get_distribution(dist)
    ap = evaluate(dmbp, parse_model("APARCH(1,1)"), d, names_of("APARCH", dist),
                  [-0.01, 0.02, 0.12, 0.0, 0.8, 2.0] + shape, opts)
    ga = evaluate(dmbp, parse_model("GARCH(1,1)"), d, names_of("GARCH", dist), [-0.01, 0.02, 0.12, 0.8] + shape, opts)
    assert lre(ap.loglik, ga.loglik) >= 10, (ap.loglik, ga.loglik)
    ap2 = evaluate(dmbp, parse_model("APARCH(2,2)"), d, names_of("APARCH(2,2)", dist),
                   [0.0, 0.02, 0.08, 0.04, 0.0, 0.0, 0.5, 0.3, 2.0] + shape, opts)
    ga2 = evaluate(dmbp, parse_model("GARCH(2,2)"), d, names_of("GARCH(2,2)", dist),
                   [0.0, 0.02, 0.08, 0.04, 0.5, 0.3] + shape, opts)
    assert lre(ap2.loglik, ga2.loglik) >= 10, (ap2.loglik, ga2.loglik)


@pytest.mark.parametrize("dist, shape", DISTS)
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_delta_two_is_gjr_after_the_reparametrisation(dmbp, dist, shape, presample):
    """Ding, Granger & Engle (1993): delta = 2 gives GJR-GARCH with alpha_gjr = alpha (1 - g)^2,
    gamma_gjr = 4 alpha g (algebra in the test above)."""
    opts = parse_options(f"presample={presample}")
    d = get_distribution(dist)
    for model, ap, (alpha, gam, beta) in [
        ("APARCH(1,1)", [0.03, 0.1], ([0.1], [0.35], [0.8])),
        ("APARCH(2,1)", [0.03, 0.1], ([0.06, 0.05], [-0.4, 0.7], [0.75])),
    ]:
        mu, omega = ap
        a = evaluate(dmbp, parse_model(model), d, names_of(model, dist),
                     [mu, omega] + alpha + gam + beta + [2.0] + shape, opts)
        gjr_model = model.replace("APARCH", "GJR-GARCH")
        a_gjr = [x * (1 - g) ** 2 for x, g in zip(alpha, gam)]
        g_gjr = [4 * x * g for x, g in zip(alpha, gam)]
        j = evaluate(dmbp, parse_model(gjr_model), d, names_of(gjr_model, dist),
                     [mu, omega] + a_gjr + g_gjr + beta + shape, opts)
        assert lre(a.loglik, j.loglik) >= 10, (model, a.loglik, j.loglik)


@pytest.mark.parametrize("dist, shape", DISTS)
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_loglik_equals_the_recursion_written_out(dmbp, dist, shape, presample):
    """At a power away from 2 and with asymmetry: the loop above with the outside densities."""
    opts = parse_options(f"presample={presample}")
    d = get_distribution(dist)
    got = evaluate(dmbp, parse_model("APARCH(1,1)"), d, names_of("APARCH", dist),
                   [0.01, 0.03, 0.11, 0.4, 0.82, 1.3] + shape, opts)
    ref = loop_loglik(dmbp, dist, shape, 0.01, 0.03, [0.11], [0.4], [0.82], 1.3, presample=presample)
    assert lre(got.loglik, ref) >= 10, (got.loglik, ref)
    assert got.nobs == len(dmbp) - (1 if presample == "drop" else 0)
    # higher orders, a power below one, a negative asymmetry and returns that are exactly zero
    r = np.where(np.abs(dmbp) < 0.05, 0.0, dmbp)
    got = evaluate(r, parse_model("ZERO-APARCH(2,2)"), d, names_of("ZERO-APARCH(2,2)", dist),
                   [0.02, 0.06, 0.03, -0.3, 0.5, 0.4, 0.45, 0.8] + shape, opts)
    ref = loop_loglik(r, dist, shape, 0.0, 0.02, [0.06, 0.03], [-0.3, 0.5], [0.4, 0.45], 0.8, presample=presample)
    assert lre(got.loglik, ref) >= 10, (got.loglik, ref)


# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("dist, shape", DISTS)
def test_power_news_moment_against_quadrature(dist, shape):
    """kappa = E(|z| - gamma z)^delta against SciPy's quad of the densities above."""
    fam = parse_model("ZERO-APARCH(1,1)").family
    d = get_distribution(dist)
    for g, delta in [(0.0, 2.0), (0.3, 1.4), (-0.5, 0.7), (0.8, 3.1), (0.2, 1.0)]:
        def f(z):
            return (abs(z) - g * z) ** delta * float(std_pdf(dist, z, shape))

        ref = integrate.quad(f, -np.inf, 0, epsabs=0, epsrel=1e-12, limit=400)[0] + \
            integrate.quad(f, 0, np.inf, epsabs=0, epsrel=1e-12, limit=400)[0]
        vp = np.array([0.1, 0.1, g, 0.8, delta])
        kappa = (fam.persistence(vp, shape, d) - 0.8) / 0.1  # persistence = alpha kappa + beta
        assert_allclose(kappa, ref, rtol=1e-8, err_msg=f"{dist} gamma={g} delta={delta}")
    if dist == "normal":
        # Ding, Granger & Engle (1993): E|z|^d = 2^(d/2) Gamma((d+1)/2) / sqrt(pi) for the normal;
        # with gamma, ((1-g)^d + (1+g)^d)/2 times it (a symmetric density)
        kappa = (fam.persistence(np.array([0.1, 0.1, 0.3, 0.8, 1.4]), [], d) - 0.8) / 0.1
        closed = 0.5 * (0.7 ** 1.4 + 1.3 ** 1.4) * 2 ** 0.7 * math.gamma(1.2) / math.sqrt(math.pi)
        assert_allclose(kappa, closed, rtol=1e-13)


@pytest.mark.parametrize("dist, shape", [("t", [3.5]), ("skewt", [3.5, 0.3])])
def test_persistence_is_blank_where_the_moment_is_infinite(dist, shape):
    """E|z|^delta of a t with nu degrees of freedom is infinite for delta >= nu (common practice)."""
    fam = parse_model("APARCH(1,1)").family
    d = get_distribution(dist)
    assert fam.persistence([0.1, 0.1, 0.2, 0.8, 3.6], shape, d) is None
    assert fam.half_life([0.1, 0.1, 0.2, 0.8, 3.6], shape, d) is None
    assert not fam.admissible([0.1, 0.1, 0.2, 0.8, 3.6], shape, d)
    assert fam.persistence([0.1, 0.1, 0.2, 0.8, 3.4], shape, d) > 0.8


# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("model, theta, dist, shape", [
    ("AR(1)-APARCH(2,1)", [0.01, 0.05, 0.03, 0.07, 0.04, 0.3, -0.2, 0.8, 1.3], "normal", []),
    ("MA(1)-APARCH(1,2)", [0.01, 0.05, 0.03, 0.1, 0.4, 0.5, 0.3, 2.4], "skewt", [6.0, -0.15]),
    ("ZERO-APARCH(1,1)", [0.04, 0.15, 0.25, 0.8, 0.7], "t", [5.0]),
])
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_analytic_scores_against_central_differences(dmbp, model, theta, dist, shape, presample):
    """Per-observation scores (forward derivatives) and the total gradient (adjoint) against central
    differences of the log-likelihood terms; returns exactly zero included (ZERO mean)."""
    r = np.where(np.abs(dmbp) < 0.02, 0.0, dmbp) if model.startswith("ZERO") else dmbp
    lik = Likelihood(r, parse_model(model), get_distribution(dist), presample)
    th = np.array(theta + shape)
    _, G = lik.scores(th)
    val, g = lik.gradient(th)
    num = np.empty_like(G)
    total = np.empty(len(th))
    for j in range(len(th)):
        h = 1e-6 * max(1.0, abs(th[j]))
        up, dn = th.copy(), th.copy()
        up[j] += h
        dn[j] -= h
        num[:, j] = (lik.terms(up) - lik.terms(dn)) / (2 * h)
        total[j] = (lik.loglik(up) - lik.loglik(dn)) / (2 * h)
    assert_allclose(G, num, rtol=1e-5, atol=1e-6 * np.abs(num).max())
    assert_allclose(g, total, rtol=1e-6, atol=1e-4)
    assert_allclose(g, G.sum(axis=0), rtol=1e-10, atol=1e-9)
    assert lre(val, lik.loglik(th)) >= 12


# ----------------------------------------------------------------------------------------
TRUE = {"mu": 0.02, "omega": 0.03, "alpha[1]": 0.08, "gamma[1]": 0.4, "beta[1]": 0.88, "delta": 1.5, "nu": 8.0}


def test_parameter_recovery_on_a_simulated_series(simulated):
    """3000 seeded APARCH(1,1)-t returns: every estimate within 3 robust standard errors of the truth."""
    r = simulated("APARCH(1,1)", "t", list(TRUE.values()), 3000, 2024)
    f = fit(r, "APARCH(1,1)", "t")
    assert f.converged, f.message
    for name, true in TRUE.items():
        est, se = f.value(name), f.std_errors[f.names.index(name)]
        assert 0 < se < 0.5 * max(abs(true), 0.1) + 1.0, (name, se)
        assert abs(est - true) < 3 * se, (name, true, est, se)


@pytest.mark.parametrize("dist", ["normal", "t", "skewt", "ged"])
def test_dem_gbp_converges_and_nests(dmbp, dist):
    """On DEM/GBP (Bollerslev & Ghysels 1996) with each distribution: APARCH converges, and its
    maximum is at least GJR-GARCH's, which is at least GARCH's (nested models, Ding, Granger &
    Engle 1993), up to the optimiser's tolerance."""
    a = fit(dmbp, "APARCH(1,1)", dist)
    j = fit(dmbp, "GJR-GARCH(1,1)", dist)
    g = fit(dmbp, "GARCH(1,1)", dist)
    assert a.converged and j.converged and g.converged, (a.message, j.message, g.message)
    assert a.loglik >= j.loglik - 1e-6 >= g.loglik - 2e-6, (a.loglik, j.loglik, g.loglik)
    assert 0.5 < a.value("delta") < 3.0 and np.all(np.isfinite(a.std_errors))
    assert 0 < a.persistence < 1 and a.uncond_variance is None


def test_delta_fixed_at_two_fits_like_gjr(dmbp):
    """delta=2 in the options: the maximum is GJR-GARCH's and the estimates map by the
    reparametrisation (alpha_gjr = alpha (1-g)^2, gamma_gjr = 4 alpha g)."""
    a = fit(dmbp, "APARCH(1,1)", "normal", "delta=2")
    j = fit(dmbp, "GJR-GARCH(1,1)", "normal")
    assert a.converged and a.status[a.names.index("delta")] == "fixed" and a.n_free == 5
    assert abs(a.loglik - j.loglik) < 1e-6
    al, g = a.value("alpha[1]"), a.value("gamma[1]")
    assert_allclose([al * (1 - g) ** 2, 4 * al * g, a.value("beta[1]"), a.value("omega")],
                    [j.value("alpha[1]"), j.value("gamma[1]"), j.value("beta[1]"), j.value("omega")], rtol=2e-3)
    # with delta = 2 the variance is the power variance: the unconditional variance is GJR's
    assert_allclose(a.uncond_variance, j.uncond_variance, rtol=5e-3)
    assert_allclose(a.persistence, j.persistence, rtol=1e-4)


def test_a_maximum_on_the_stationarity_bound_is_held_there(simulated):
    """A seeded IGARCH(1,1)-t series (alpha + beta = 1): GARCH's maximum lies on the stationarity
    bound, so APARCH's (which nests it) does too; the fit is held at persistence 1 with the
    last beta implied, and its maximum is at least GARCH's (nested models)."""
    r = simulated("IGARCH(1,1)", "t", [0.0, 0.01, 0.08, 0.92, 6.0], 2500, 1)
    g = fit(r, "GARCH(1,1)", "t")
    a = fit(r, "APARCH(1,1)", "t")
    assert a.converged and "held at the stationarity bound" in a.message, a.message
    assert_allclose(a.persistence, 1.0, rtol=1e-12)
    i = a.names.index("beta[1]")
    assert a.status[i] == "implied" and 0 < a.std_errors[i] < 0.05  # by the delta method
    assert a.loglik >= g.loglik - 1e-6, (a.loglik, g.loglik)


@pytest.mark.parametrize("model", ["APARCH(2,1)", "APARCH(2,0)"])
@pytest.mark.parametrize("dist, shape", DISTS)
def test_the_held_weight_and_its_gradient(model, dist, shape):
    """hold() sets the implied weight so that the persistence is the target, and its gradient
    agrees with central differences of the weight it sets."""
    fam = parse_model(model).family
    d = get_distribution(dist)
    vp = np.array([0.1, 0.05, 0.04, 0.3, -0.2] + ([0.8] if fam.q else []) + [1.4])
    x = 5 if fam.q else 2
    full = np.concatenate([vp, shape])

    def implied(f):
        v = f[: fam.n_params].copy()
        fam.hold(v, 0.99, f[fam.n_params:], d)
        return v[x]

    v = vp.copy()
    grad = fam.hold(v, 0.99, shape, d)
    assert_allclose(fam.persistence(v, shape, d), 0.99, rtol=1e-13)
    num = [(implied(full + 1e-6 * e) - implied(full - 1e-6 * e)) / 2e-6 for e in np.eye(len(full))]
    assert_allclose(grad, num, atol=1e-8)


# ----------------------------------------------------------------------------------------
def _given(r, model, dist, params, options=None):
    return evaluate(r, parse_model(model), get_distribution(dist), names_of(model, dist), params,
                    parse_options(options))


def test_forecast_with_delta_two_is_the_analytic_gjr_forecast(dmbp):
    ap = _given(dmbp, "APARCH(1,1)", "skewt", [0.0, 0.02, 0.1, 0.3, 0.85, 2.0, 6.0, -0.1])
    gj = _given(dmbp, "GJR-GARCH(1,1)", "skewt", [0.0, 0.02, 0.1 * 0.49, 0.12, 0.85, 6.0, -0.1])
    fa, fg = forecast(ap, dmbp, 30), forecast(gj, dmbp, 30)
    assert fa.method == "analytic" == fg.method
    assert_allclose(fa.variance, fg.variance, rtol=1e-11)
    assert_allclose(fa.cumvar, fg.cumvar, rtol=1e-11)


def test_forecast_first_step_exact_later_steps_simulated(dmbp):
    """Step 1: s[T+1]^delta from the loop (known at T).  Later steps: E_T[s^2] is not a function
    of E_T[s^delta] (delta != 2), so they are seeded simulations, checked here against a
    brute-force simulation of 400,000 paths written out in the test (its own generator)."""
    params = [0.0, 0.02, 0.1, 0.3, 0.85, 1.4, 6.0]
    f = _given(dmbp, "APARCH(1,1)", "t", params)
    mu, om, a, g, b, d, nu = params
    s2, e = aparch_loop(dmbp, mu, om, [a], [g], [b], d)
    S1 = om + a * (abs(e[-1]) - g * e[-1]) ** d + b * s2[-1] ** (d / 2)
    fc = forecast(f, dmbp, 8)
    assert fc.method == "simulation (20000 paths, seed 20240531)"
    assert lre(fc.variance[0], S1 ** (2 / d)) >= 12
    assert forecast(f, dmbp, 1).method == "analytic"  # one step alone is exact
    rng = np.random.default_rng(99)
    P = 400_000
    S = np.full(P, S1)
    ref = []
    for _ in range(8):
        v = S ** (2 / d)
        ref.append(v.mean())
        x = np.sqrt(v) * rng.standard_t(nu, P) * math.sqrt((nu - 2) / nu)
        S = om + a * (np.abs(x) - g * x) ** d + b * S
    assert_allclose(fc.variance, ref, rtol=4e-3)
    # the same seed gives the same numbers; another seed other (close) ones
    assert_allclose(forecast(f, dmbp, 8).variance, fc.variance, rtol=0)
    other = forecast(f, dmbp, 8, seed=1).variance
    assert other[0] == fc.variance[0] and not np.array_equal(other[1:], fc.variance[1:])


def test_power_forecast_recursion(dmbp):
    """E_T[s^delta_{T+h}] = omega + (alpha kappa + beta) E_T[s^delta_{T+h-1}] for h >= 2 (Ding,
    Granger & Engle 1993), with kappa the normal closed form of the paper."""
    params = [0.0, 0.02, 0.1, 0.3, 0.85, 1.4]
    mu, om, a, g, b, d = params
    f = _given(dmbp, "APARCH(1,1)", "normal", params)
    resid, var, lik = in_sample(f, dmbp)
    fam = f.spec.family
    from xlfuncs.core.families import History

    ES = fam._power_forecast(np.array(params[1:]), np.array([]), f.dist, History(resid, var), 6)
    kappa = 0.5 * ((1 - g) ** d + (1 + g) ** d) * 2 ** (d / 2) * math.gamma((d + 1) / 2) / math.sqrt(math.pi)
    ref = [om + a * (abs(resid[-1]) - g * resid[-1]) ** d + b * var[-1] ** (d / 2)]
    for _ in range(5):
        ref.append(om + (a * kappa + b) * ref[-1])
    assert_allclose(ES, ref, rtol=1e-12)
    assert_allclose(fam.power_mean(params[1:], [], f.dist), om / (1 - a * kappa - b), rtol=1e-12)


def test_simulated_paths_continue_the_recursion(dmbp):
    """simulate_forward: the variances of the simulated shocks follow the recursion written out
    here from the end of the sample, and the shocks are the generator's draws times the vol."""
    params = [0.01, 0.02, 0.1, 0.3, 0.85, 1.4]
    mu, om, a, g, b, d = params
    f = _given(dmbp, "APARCH(1,1)", "normal", params)
    rets, vars_ = simulate_forward(f, dmbp, 5, 4, np.random.default_rng(7), return_variance=True)
    s2, e = aparch_loop(dmbp, mu, om, [a], [g], [b], d)
    z = np.random.default_rng(7).standard_normal((5, 4))
    S, last = s2[-1] ** (d / 2), e[-1]
    for t in range(5):
        S = om + a * (np.abs(last) - g * last) ** d + b * S
        assert_allclose(vars_[t], S ** (2 / d), rtol=1e-12)
        last = np.sqrt(S ** (2 / d)) * z[t]
        assert_allclose(rets[t], mu + last, rtol=1e-12)


# ----------------------------------------------------------------------------------------
def test_worksheet_round_trip(dmbp):
    """VOLFIT's table read back by the other functions; figures against the loop above."""
    r = column(dmbp)
    table = VOLFIT(r, "APARCH", "t")
    rw = rows(table)
    assert rw["model"][1] == "APARCH(1,1)" and rw["converged"][1] is True
    p = {n: rw[n][1] for n in ("mu", "omega", "alpha[1]", "gamma[1]", "beta[1]", "delta", "nu")}
    assert all(isinstance(rw[n][2], float) and rw[n][2] > 0 for n in p)  # standard errors
    assert rw["uncond_variance"][1] is None  # delta != 2: blank
    kappa = integrate.quad(lambda z: (abs(z) - p["gamma[1]"] * z) ** p["delta"] * float(std_pdf("t", z, [p["nu"]])),
                           -np.inf, np.inf, epsabs=0, epsrel=1e-12)[0]
    pers = p["alpha[1]"] * kappa + p["beta[1]"]
    assert_allclose(rw["persistence"][1], pers, rtol=1e-8)
    assert_allclose(rw["half_life"][1], math.log(0.5) / math.log(pers), rtol=1e-6)
    args = (p["mu"], p["omega"], [p["alpha[1]"]], [p["gamma[1]"]], [p["beta[1]"]], p["delta"])
    ref = loop_loglik(dmbp, "t", [p["nu"]], *args)
    assert lre(VOLLOGLIK(r, table)[0][0], ref) >= 10
    assert lre(rw["loglik"][1], ref) >= 10
    s2, e = aparch_loop(dmbp, *args)
    assert_allclose([c[0] for c in VOLSERIES(r, table)], s2, rtol=1e-10)
    # the forecast table: step 1 exact, mean constant
    fc = VOLFORECAST(r, table, 3, "table")
    S1 = p["omega"] + p["alpha[1]"] * (abs(e[-1]) - p["gamma[1]"] * e[-1]) ** p["delta"] + p["beta[1]"] * s2[-1] ** (p["delta"] / 2)
    assert fc[0] == ["step", "mean", "variance", "vol", "cumvar"]
    assert_allclose(fc[1][2], S1 ** (2 / p["delta"]), rtol=1e-10) and fc[1][1] == fc[3][1] == p["mu"]
    # one-period risk: exact, from the next variance and SciPy's t quantile
    risk = {row[0]: row[1] for row in VOLRISK(r, table, 0.99, 1)}
    sd = S1 ** (1 / p["delta"])
    q = stats.t.ppf(0.01, p["nu"]) * math.sqrt((p["nu"] - 2) / p["nu"])
    assert_allclose(risk["VaR"], -(p["mu"] + sd * q), rtol=1e-8)
    assert risk["method"].startswith("exact")
    assert VOLRISK(r, table, 0.99, 5)[-1][1].startswith("simulation")
    # a hand-typed table is a valid fit
    typed = [["model", "APARCH"], ["dist", "t"]] + [[n, v] for n, v in p.items()]
    assert lre(VOLLOGLIK(r, typed)[0][0], ref) >= 10
    # the news-impact curve: (omega + alpha (|e| - g e)^delta + beta E[s^delta])^(2/delta)
    shocks = [-2.0, -0.5, 0.0, 1.0, 3.0]
    level = p["omega"] / (1 - pers)
    want = [(p["omega"] + p["alpha[1]"] * (abs(x) - p["gamma[1]"] * x) ** p["delta"] + p["beta[1]"] * level)
            ** (2 / p["delta"]) for x in shocks]
    assert_allclose([c[0] for c in VOLNEWS(typed, column(shocks))], want, rtol=1e-8)
    sims = np.array(VOLSIM(table, 200, 3, 5))
    assert sims.shape == (200, 3) and np.all(np.isfinite(sims))


def test_compare_and_backtest(dmbp):
    r = column(dmbp)
    out = VOLCOMPARE(r, "GARCH(1,1), GJR-GARCH(1,1), APARCH(1,1)")
    got = {row[0]: row for row in out[1:]}
    assert set(got) == {"GARCH(1,1)", "GJR-GARCH(1,1)", "APARCH(1,1)"}
    ap = got["APARCH(1,1)"]
    assert ap[3] == 6 and ap[7] is True and ap[2] >= got["GJR-GARCH(1,1)"][2] - 1e-6
    assert lre(ap[2], rows(VOLFIT(r, "APARCH(1,1)"))["loglik"][1]) >= 10
    # walk-forward with given parameters: each forecast is the next variance of the loop on its window
    w = dmbp[:306]
    typed = [["model", "APARCH"], ["dist", "normal"], ["mu", 0.0], ["omega", 0.02], ["alpha[1]", 0.1],
             ["gamma[1]", 0.2], ["beta[1]", 0.85], ["delta", 1.5]]
    bt = VOLBACKTEST(column(w), typed, 300, 0.99, "what=series")
    assert len(bt) == 7
    for row, t in zip(bt[1:], range(300, 306)):
        s2, e = aparch_loop(w[t - 300: t], 0.0, 0.02, [0.1], [0.2], [0.85], 1.5)
        S1 = 0.02 + 0.1 * (abs(e[-1]) - 0.2 * e[-1]) ** 1.5 + 0.85 * s2[-1] ** 0.75
        assert_allclose(row[1], S1 ** (2 / 1.5), rtol=1e-10)


@pytest.mark.parametrize("table, pattern", [
    ([["model", "APARCH"], ["mu", 0], ["omega", 0.02], ["alpha[1]", 0.1], ["gamma[1]", 1.0], ["beta[1]", 0.8],
      ["delta", 1.5]], r"gamma\[1\] must be between -1 and 1"),
    ([["model", "APARCH"], ["mu", 0], ["omega", 0.02], ["alpha[1]", 0.1], ["gamma[1]", 0.1], ["beta[1]", 0.8],
      ["delta", 0]], "delta must be greater than 0"),
    ([["model", "APARCH"], ["mu", 0], ["omega", -0.02], ["alpha[1]", 0.1], ["gamma[1]", 0.1], ["beta[1]", 0.8],
      ["delta", 1]], "omega must be greater than 0"),
    ([["model", "APARCH"], ["mu", 0], ["omega", 0.02], ["alpha[1]", 0.1], ["gamma[1]", 0.1], ["beta[1]", 0.8]],
     "delta"),
])
def test_typed_tables_outside_the_domain_are_refused(dmbp, table, pattern):
    out = VOLLOGLIK(column(dmbp), table)
    assert len(out) == 1 and out[0][0].startswith("ERROR:"), out
    assert re.search(pattern, out[0][0]), out[0][0]


@pytest.mark.parametrize("options, pattern", [
    ("delta=-1", "options: delta must be greater than 0"),
    ("gamma=1.5", r"options: gamma\[1\] must be between -1 and 1"),
    ("target=yes", "target=yes works with"),
])
def test_bad_options_are_refused(dmbp, options, pattern):
    out = VOLFIT(column(dmbp[:300]), "APARCH", "normal", options)
    assert len(out) == 1 and out[0][0].startswith("ERROR:") and re.search(pattern, out[0][0]), out
