"""CGARCH(1,1), the component model of Engle & Lee (1999), against its two-component recursion
written out here, against the GARCH(2,2) it restricts, and against SciPy and simulation.

The component form (Engle & Lee 1999, from memory): with e2 = e^2 and s2 the variance,

    q[t]         = omega + rho (q[t-1] - omega) + psi (e2[t-1] - s2[t-1])
    s2[t] - q[t] = alpha (e2[t-1] - q[t-1]) + beta (s2[t-1] - q[t-1]).

Presample (the project's GARCH(2,2) convention, DESIGN.md presample=mean, made a component
state): the two periods before the first likelihood position have variance sbar, the mean
squared residual, and squared residual sbar (presample=mean) or the observed one (drop: the
first two residuals are lags only); the long-run component of those two periods is whatever the
recursion needs for that, solved here as a 2 x 2 linear system.  The data are the public
DEM/GBP series (conftest) and seeded simulations.
"""

import math
import re

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import (VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLNEWS, VOLRISK,
                     VOLSERIES, VOLSIM)
from xlfuncs.core import evaluate, fit, forecast, get_distribution, parse_model, parse_options
from xlfuncs.core.families import History, family_for
from xlfuncs.core.families.cgarch import RHO_CAP, weights_nonnegative
from xlfuncs.core.likelihood import Likelihood
from xlfuncs.core.simulate import simulate_forward

from helpers import column, lre

NAMES = ("mu", "omega", "alpha[1]", "beta[1]", "rho", "psi")
P0 = dict(mu=0.01, omega=0.25, alpha=0.12, beta=0.6, rho=0.97, psi=0.05)


def garch22(omega, alpha, beta, rho, psi):
    """The GARCH(2,2) of a CGARCH(1,1): multiply out (1 - rho L)(q - omega) = psi L v and
    (1 - (alpha + beta) L)(s2 - q) = alpha L v with v = e2 - s2 (Engle & Lee 1999 state the
    restriction; the coefficients derived by hand): (omega_g, alpha1, alpha2, beta1, beta2)."""
    d = alpha + beta
    return ((1 - rho) * (1 - d) * omega, alpha + psi, -(psi * d + alpha * rho), rho + beta - psi,
            psi * d - rho * beta)


def components(r, mu, omega, alpha, beta, rho, psi, presample="mean"):
    """The two-component recursion as a plain loop: (s2, q, e) on the likelihood positions, and
    the next period's (s2, q) after the last observation."""
    e = [float(x) - mu for x in r]
    sbar = sum(x * x for x in e) / len(e)
    if presample == "mean":
        pre, start = [sbar, sbar], 0
    else:
        pre, start = [e[0] ** 2, e[1] ** 2], 2
    # the two presample periods: variance sbar at both; solve for their long-run components
    # q1 = omega + rho (q0 - omega) + psi (pre0 - sbar);  sbar - q1 = alpha (pre0 - q0) + beta (sbar - q0)
    A = np.array([[-rho, 1.0], [-(alpha + beta), 1.0]])
    b = np.array([omega * (1 - rho) + psi * (pre[0] - sbar), sbar - alpha * pre[0] - beta * sbar])
    _, q_prev = np.linalg.solve(A, b)
    s2_prev, e2_prev = sbar, pre[1]
    s2s, qs = [], []
    for t in range(start, len(e) + 1):
        q = omega + rho * (q_prev - omega) + psi * (e2_prev - s2_prev)
        s2 = q + alpha * (e2_prev - q_prev) + beta * (s2_prev - q_prev)
        if t == len(e):
            return np.array(s2s), np.array(qs), e, (s2, q)
        s2s.append(s2)
        qs.append(q)
        q_prev, s2_prev, e2_prev = q, s2, e[t] * e[t]


def normal_loglik(r, *params, presample="mean"):
    s2, _, e, _ = components(r, *params, presample=presample)
    es = np.array(e[len(e) - len(s2):])
    return float(np.sum(-0.5 * (math.log(2 * math.pi) + np.log(s2) + es * es / s2)))


def t_loglik(r, *params, nu):
    """Student t shocks of variance 1: SciPy's t with scale sqrt(s2 (nu - 2) / nu)."""
    s2, _, e, _ = components(r, *params)
    return float(np.sum(stats.t.logpdf(e, nu, scale=np.sqrt(s2 * (nu - 2) / nu))))


def typed(dist="normal", model="CGARCH(1,1)", **kw):
    p = dict(P0, **kw)
    rows = [["model", model], ["dist", dist], ["mu", p["mu"]], ["omega", p["omega"]], ["alpha[1]", p["alpha"]],
            ["beta[1]", p["beta"]], ["rho", p["rho"]], ["psi", p["psi"]]]
    if dist == "t":
        rows.append(["nu", 6.0])
    return rows


def p0():
    return [P0[k] for k in ("mu", "omega", "alpha", "beta", "rho", "psi")]


# ----------------------------------------------------------------------------------------
def test_model_strings():
    for text, canonical in [("CGARCH", "CGARCH(1,1)"), (" cgarch(1, 1) ", "CGARCH(1,1)"),
                            ("AR(1)-CGARCH", "AR(1)-CGARCH(1,1)"), ("ZERO-CGARCH(1,1)", "ZERO-CGARCH(1,1)")]:
        spec = parse_model(text)
        assert spec.canonical == canonical
        assert parse_model(spec.canonical) == spec
    assert parse_model("CGARCH").param_names == NAMES
    for bad in ("CGARCH(2,1)", "CGARCH(1,2)", "CGARCH(0,1)"):
        with pytest.raises(ValueError, match=r"order \(1,1\) only"):
            parse_model(bad)
    with pytest.raises(ValueError, match="takes 2 whole-number orders"):
        parse_model("CGARCH(1)")
    assert parse_options("rho=0.99; psi=0.05").fixed == (("rho", 0.99), ("psi", 0.05))


@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_variances_follow_the_two_component_recursion(dmbp, presample):
    """The family's variances (run as a GARCH(2,2) filter) against the loop above, and the
    long-run component VOLSERIES shows against the loop's q."""
    s2, q, _, _ = components(dmbp, *p0(), presample=presample)
    spec = parse_model("CGARCH")
    lik = Likelihood(dmbp, spec, get_distribution("normal"), presample)
    e, sig2 = lik.series(np.array(p0()))
    assert len(sig2) == len(dmbp) - (2 if presample == "drop" else 0)
    assert_allclose(sig2, s2, rtol=1e-11)
    got = spec.family.long_run(p0()[1:], e, presample)
    assert_allclose(got, q, rtol=1e-11)
    rows = [["model", "CGARCH(1,1)"], ["dist", "normal"], ["options", f"presample={presample}"]] + typed()[2:]
    cells = [c[0] for c in VOLSERIES(column(dmbp), rows, "longrun")]
    head = 2 if presample == "drop" else 0
    assert cells[:head] == [None] * head
    assert_allclose(cells[head:], q, rtol=1e-11)


@pytest.mark.parametrize("dist", ["normal", "t", "skewt", "ged"])
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_loglik_is_the_restricted_garch22(dmbp, dist, presample):
    """Engle & Lee (1999): CGARCH(1,1) is a GARCH(2,2) with restricted coefficients.  The
    GARCH(2,2) likelihood is called directly: its alpha[2] and beta[2] are negative here, which a
    GARCH(2,2) fit table rightly refuses.  LRE >= 10 at given parameters."""
    d = get_distribution(dist)
    eta = {"normal": [], "t": [6.0], "skewt": [6.0, -0.1], "ged": [1.4]}[dist]
    mu, *vp = p0()
    cg = evaluate(dmbp, parse_model("CGARCH"), d, NAMES + tuple(d.param_names), p0() + eta,
                  parse_options(f"presample={presample}"))
    g22 = Likelihood(dmbp, parse_model("GARCH(2,2)"), d, presample)
    ref = g22.loglik(np.array([mu, *garch22(*vp)] + eta))
    assert math.isfinite(ref)
    assert lre(cg.loglik, ref) >= 10, (cg.loglik, ref)
    assert cg.nobs == g22.nobs


def test_loglik_against_scipy_densities(dmbp):
    """The loop's variances with SciPy's normal and Student t densities (t rescaled to variance 1)."""
    d = get_distribution("t")
    got = evaluate(dmbp, parse_model("CGARCH"), d, NAMES + ("nu",), p0() + [6.0], parse_options(""))
    assert lre(got.loglik, t_loglik(dmbp, *p0(), nu=6.0)) >= 10
    assert lre(VOLLOGLIK(column(dmbp), typed())[0][0], normal_loglik(dmbp, *p0())) >= 10


def test_garch11_is_the_case_without_a_transitory_component(dmbp):
    """alpha = beta = 0 leaves s2 = q: a GARCH(1,1) with alpha_g = psi, beta_g = rho - psi and
    omega_g = (1 - rho) omega (from the component form above), presample and all."""
    w, a, b = 0.02, 0.09, 0.88
    g = evaluate(dmbp, parse_model("GARCH(1,1)"), get_distribution("t"), ("mu", "omega", "alpha[1]", "beta[1]", "nu"),
                 [0.01, w, a, b, 5.0])
    c = evaluate(dmbp, parse_model("CGARCH"), get_distribution("t"), NAMES + ("nu",),
                 [0.01, w / (1 - a - b), 0.0, 0.0, a + b, a, 5.0])
    assert lre(c.loglik, g.loglik) >= 10


@pytest.mark.parametrize("dist", ["normal", "t"])
def test_analytic_gradient_against_central_differences(dmbp, dist):
    """The adjoint gradient and the sum of the forward scores against central differences of
    the loop's log-likelihood (SciPy's t density for t shocks), at an interior point."""
    d = get_distribution(dist)
    theta = np.array(p0() + ([6.0] if dist == "t" else []))
    lik = Likelihood(dmbp, parse_model("CGARCH"), d, "mean")

    def ll(th):
        return normal_loglik(dmbp, *th) if dist == "normal" else t_loglik(dmbp, *th[:6], nu=th[6])

    h = 1e-6
    num = np.array([(ll(theta + h * u) - ll(theta - h * u)) / (2 * h) for u in np.eye(len(theta))])
    _, g = lik.gradient(theta)
    _, G = lik.scores(theta)
    assert_allclose(g, num, rtol=2e-6, atol=1e-5)
    assert_allclose(G.sum(axis=0), num, rtol=2e-6, atol=1e-5)


def test_positivity_region():
    """weights_nonnegative against the ARCH(inf) weights of the GARCH(2,2) computed to lag 3,000
    (Nelson & Cao 1992: the variance is positive for every past iff they are all >= 0), on
    random draws with alpha + beta < rho; and Engle & Lee's sufficient conditions (from memory:
    rho > alpha + beta, beta > psi > 0) lie inside the region."""
    def direct(a1, a2, b1, b2):
        w = np.zeros(3000)
        w[0], w[1] = a1, a2 + b1 * a1
        for k in range(2, 3000):
            w[k] = b1 * w[k - 1] + b2 * w[k - 2]
        # the exact sign (complex roots turn a weight negative only after it has decayed by
        # decades), short of the subnormal numbers where rounding leaves the sign to chance
        return bool(w[np.abs(w) > 1e-250].min() >= 0)

    rng = np.random.default_rng(5)
    seen = {True: 0, False: 0}
    for _ in range(3000):
        a, b, r, p = rng.uniform(0, 1, 4)
        if not a + b < r:
            continue
        coefs = garch22(1.0, a, b, r, p)[1:]
        ok = direct(*coefs)
        assert weights_nonnegative(*coefs) == ok, (a, b, r, p)
        seen[ok] += 1
        if b > p:
            assert ok
    assert min(seen.values()) > 100  # both sides of the boundary were visited
    # and on stationary GARCH(2,2) coefficients at large, where theta_2 >= 0 is not enough
    seen = {True: 0, False: 0}
    for _ in range(1500):
        a1, b1 = rng.uniform(0, 1, 2)
        a2, b2 = rng.uniform(-0.5, 0.5, 2)
        if not (abs(b1) + abs(b2) < 1 and a1 + a2 > 0):
            continue
        ok = direct(a1, a2, b1, b2)
        assert weights_nonnegative(a1, a2, b1, b2) == ok, (a1, a2, b1, b2)
        seen[ok] += 1
    assert min(seen.values()) > 100


@pytest.mark.parametrize("change, message", [
    ({"omega": 0.0}, "omega .* must be greater than 0"),
    ({"rho": 1.0}, "rho .* must be between 0 and 1"),
    ({"psi": -0.01}, "psi must be 0 or more"),
    ({"alpha": 0.3, "beta": 0.7}, "alpha\\[1\\] \\+ beta\\[1\\] must be below rho"),
    ({"alpha": 0.3, "beta": 0.0, "rho": 0.5, "psi": 0.4}, "psi 0.4 is too large"),
])
def test_typed_tables_outside_the_region_are_refused(dmbp, change, message):
    out = VOLLOGLIK(column(dmbp[:300]), typed(**change))[0][0]
    assert out.startswith("ERROR:")
    assert re.search(message, out), out


def test_summary_figures_in_the_fit_table(dmbp):
    """persistence is rho (the long-run component's, the slowest decay), uncond_variance is
    omega, half_life ln(1/2)/ln(rho); a fit table read back scores the same log-likelihood."""
    r = column(dmbp)
    table = VOLFIT(r, "CGARCH")
    rows = {row[0]: row for row in table}
    assert rows["model"][1] == "CGARCH(1,1)" and rows["converged"][1] is True, rows["converged"]
    rho, omega = rows["rho"][1], rows["omega"][1]
    assert rows["persistence"][1] == rho
    assert rows["uncond_variance"][1] == omega
    assert_allclose(rows["half_life"][1], math.log(0.5) / math.log(rho), rtol=1e-12)
    assert rows["alpha[1]"][1] + rows["beta[1]"][1] < rho
    assert lre(VOLLOGLIK(r, table)[0][0], rows["loglik"][1]) >= 10
    params = [rows[n][1] for n in NAMES]
    assert lre(rows["loglik"][1], normal_loglik(dmbp, *params)) >= 10


def test_forecasts_follow_the_component_forecast_recursion(dmbp):
    """From the loop's next (s2, q), the expected components ahead, step by step with
    E[e2] = s2 ahead (so the news has mean zero): E q' = omega + rho (E q - omega),
    E s2' = E q' + (alpha + beta)(E s2 - E q).  Also the GARCH(2,2) forecast of the mapped
    coefficients (the linear family's own recursion) and the worksheet's cells."""
    mu, omega, alpha, beta, rho, psi = p0()
    _, _, _, (s2, q) = components(dmbp, *p0())
    want_v, want_q = [], []
    for _ in range(30):
        want_v.append(s2)
        want_q.append(q)
        q, s2 = omega + rho * (q - omega), omega + rho * (q - omega) + (alpha + beta) * (s2 - q)
    f = evaluate(dmbp, parse_model("CGARCH"), get_distribution("normal"), NAMES, p0())
    fc = forecast(f, dmbp, 30)
    assert_allclose(fc.variance, want_v, rtol=1e-11)
    assert_allclose(fc.longrun, want_q, rtol=1e-11)
    e = np.asarray(dmbp) - mu
    s2_in, _, _, _ = components(dmbp, *p0())
    g22, _ = family_for("garch", 2, 2).forecast(list(garch22(omega, alpha, beta, rho, psi)), [], None,
                                                History(e, s2_in, 0), 30)
    assert_allclose(fc.variance, g22, rtol=1e-11)
    cells = VOLFORECAST(column(dmbp), typed(), 30, "longrun")
    assert_allclose([c[0] for c in cells], want_q, rtol=1e-11)
    cells = VOLFORECAST(column(dmbp), typed(), 30)
    assert_allclose([c[0] for c in cells], want_v, rtol=1e-11)
    assert fc.cumvar[-1] == pytest.approx(sum(want_v), rel=1e-11)  # constant mean: the sum


def test_forecasts_against_a_long_seeded_simulation(dmbp):
    """The closed-form forecasts against the mean variance of 200,000 simulated continuations
    (t shocks), within 4 Monte Carlo standard errors at each of 12 steps."""
    f = evaluate(dmbp, parse_model("CGARCH"), get_distribution("t"), NAMES + ("nu",), p0() + [6.0])
    fc = forecast(f, dmbp, 12)
    _, v = simulate_forward(f, dmbp, 12, 200_000, np.random.default_rng(8), return_variance=True)
    se = v.std(axis=1) / math.sqrt(v.shape[1])
    assert np.all(np.abs(v.mean(axis=1) - fc.variance) < 4 * se + 1e-12)
    assert v[0].std() < 1e-12 * v[0].mean()  # the first step is known at the end of the sample


@pytest.mark.parametrize("dist, params, seed", [
    ("normal", [0.05, 1.0, 0.08, 0.75, 0.98, 0.04], 11),
    ("t", [0.05, 1.0, 0.08, 0.75, 0.98, 0.04, 6.0], 12),
])
def test_simulated_series_recovers_the_parameters(simulated, dist, params, seed):
    """4,000 seeded CGARCH returns: every estimate within 3 (robust) standard errors."""
    r = simulated("CGARCH", dist, params, 4000, seed)
    f = fit(r, "CGARCH", dist)
    assert f.converged, f.message
    assert np.all(np.isfinite(f.std_errors)) and np.all(f.std_errors > 0)
    z = (f.params - np.array(params)) / f.std_errors
    assert np.all(np.abs(z) < 3), dict(zip(f.names, np.round(z, 2)))


@pytest.mark.parametrize("dist", ["normal", "t", "skewt", "ged"])
def test_converges_on_dmbp_and_nests_garch11(dmbp, dist):
    """Every distribution converges on DEM/GBP, and the fit is at least as good as GARCH(1,1)'s,
    which is CGARCH with alpha = beta = 0 (the test above).  Where the likelihood keeps rising
    towards an integrated long-run component the fit stops at rho = RHO_CAP and says so."""
    c = fit(dmbp, "CGARCH", dist)
    g = fit(dmbp, "GARCH(1,1)", dist)
    assert c.converged, c.message
    assert c.loglik >= g.loglik - 1e-6, (c.loglik, g.loglik)
    rho = c.value("rho")
    assert 0 < rho <= RHO_CAP
    if rho == RHO_CAP:
        assert "at a bound: rho" in c.message


def test_longrun_needs_a_component_model(dmbp):
    r = column(dmbp[:300])
    for model in ("GARCH(1,1)", "EWMA", "CONST"):
        table = VOLFIT(r, model)
        for out in (VOLSERIES(r, table, "longrun"), VOLFORECAST(r, table, 5, "longrun")):
            assert out == [[f"ERROR: what=longrun needs a component model such as CGARCH(1,1); {model} has no "
                            "long-run component"]]
    assert VOLSERIES(r, typed(), "LongRun")[5][0] > 0  # what is case-insensitive


def test_target_sets_omega_to_the_mean_square(dmbp):
    """target=yes: omega is the unconditional variance, so it is the mean squared residual."""
    f = fit(dmbp, "CGARCH", "normal", "target=yes")
    assert f.converged, f.message
    e = dmbp - f.value("mu")
    assert_allclose(f.value("omega"), np.mean(e * e), rtol=1e-12)


def test_news_impact_with_both_components_at_omega():
    """Lagged variance and both components at omega: the loop's next variance is
    omega + psi (e2 - omega) + alpha (e2 - omega)."""
    shocks = [-3.0, -1.0, 0.0, 0.5, 2.0]
    got = [c[0] for c in VOLNEWS(typed(), column(shocks))]
    mu, omega, alpha, beta, rho, psi = p0()
    want = []
    for x in shocks:
        q = omega + rho * (omega - omega) + psi * (x * x - omega)
        want.append(q + alpha * (x * x - omega) + beta * (omega - omega))
    assert_allclose(got, want, rtol=1e-12)


def test_simulated_paths_follow_the_recursion():
    """VOLSIM: the loop run from the start of fresh paths (both components and the lagged square
    at omega) over the burn-in and the kept periods recovers the generator's draws."""
    rows = typed(mu=0.0)
    paths = np.array(VOLSIM(rows, 40, 3, 9))
    assert paths.shape == (40, 3)
    mu, omega, alpha, beta, rho, psi = p0()
    burn = 500
    draws = get_distribution("normal").rvs((burn + 40, 3), np.array([]), np.random.default_rng(9)).reshape(-1, 3)
    z = []
    q_prev, s2_prev, e2_prev = np.full(3, omega), np.full(3, omega), np.full(3, omega)
    for t in range(burn + 40):
        q = omega + rho * (q_prev - omega) + psi * (e2_prev - s2_prev)
        s2 = q + alpha * (e2_prev - q_prev) + beta * (s2_prev - q_prev)
        e = np.sqrt(s2) * draws[t]
        if t >= burn:
            z.append(paths[t - burn] / np.sqrt(s2))
            e = paths[t - burn]
        q_prev, s2_prev, e2_prev = q, s2, e * e
    assert_allclose(np.array(z), draws[burn:], rtol=1e-8)


def test_one_period_risk_backtest_and_compare(dmbp):
    """VOLRISK at horizon 1 from the loop's next variance (SciPy's normal quantile); VOLBACKTEST
    of a typed table: each one-step forecast is the loop's next variance on its window; VOLCOMPARE
    lists CGARCH with its six free parameters and persistence rho."""
    _, _, _, (s2, _) = components(dmbp, *p0())
    risk = {row[0]: row[1] for row in VOLRISK(column(dmbp), typed(), 0.99, 1)}
    assert_allclose(risk["VaR"], -(P0["mu"] + math.sqrt(s2) * stats.norm.ppf(0.01)), rtol=1e-10)
    r = dmbp[:405]
    out = VOLBACKTEST(column(r), typed(), 400, 0.99, "what=series")
    for row, t in zip(out[1:], range(400, 405)):
        _, _, _, (nxt, _) = components(r[t - 400: t], *p0())
        assert_allclose(row[1], nxt, rtol=1e-11)
    cmp_rows = {row[0]: row for row in VOLCOMPARE(column(dmbp), "GARCH(1,1), CGARCH")[1:]}
    cg = cmp_rows["CGARCH(1,1)"]
    assert cg[3] == 6 and cg[7] is True
    table = {row[0]: row[1] for row in VOLFIT(column(dmbp), "CGARCH")}
    assert cg[6] == table["rho"] and lre(cg[2], table["loglik"]) >= 10
