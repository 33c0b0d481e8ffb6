"""Multi-step forecasts against their closed forms and published recursions."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from xlfuncs import VOLFIT, VOLFORECAST
from xlfuncs.core import fit, forecast, in_sample


@pytest.fixture(scope="module")
def cells(dmbp):
    return [[v] for v in dmbp]


def _rows(table):
    return {r[0]: r[1] for r in table}


def test_arch1_forecast_recursion(dmbp, cells):
    """Engle (1982): Var[u+1] = a0 + a1 (r_u - mu)^2, Var[u+h] = a0 + a1 Var[u+h-1]."""
    table = VOLFIT(cells, "ARCH(1)", "normal", "presample=drop")
    p = _rows(table)
    mu, a0, a1 = p["mu"], p["omega"], p["alpha[1]"]
    expect = [a0 + a1 * (dmbp[-1] - mu) ** 2]
    for _ in range(9):
        expect.append(a0 + a1 * expect[-1])
    got = [row[0] for row in VOLFORECAST(cells, table, 10)]
    assert_allclose(got, expect, rtol=1e-12)


@pytest.mark.parametrize("model,dist", [("GARCH(1,1)", "normal"), ("GJR-GARCH(1,1)", "t"), ("GJR-GARCH(1,1)", "skewt")])
def test_garch_closed_form(dmbp, model, dist):
    """sigma^2[u+h] = VL + (persistence)^(h-1) (sigma^2[u+1] - VL), VL = omega / (1 - persistence);
    at persistence 1 (GJR-t and GJR-skewt on this series are held on the stationarity bound) its
    limit, sigma^2[u+1] + (h-1) omega; for GJR the persistence is alpha + kappa gamma + beta with
    kappa = E[z^2 1(z<0)] (1/2 when the shock is symmetric, not for the skewed t) -- common practice."""
    f = fit(dmbp, model, dist)
    fc = forecast(f, dmbp, 30)
    pers = f.persistence
    if dist == "skewt":
        kappa = f.dist.neg_sq_moment(np.array([f.value("nu"), f.value("lambda")]))
        assert abs(kappa - 0.5) > 1e-3
        assert_allclose(pers, f.value("alpha[1]") + kappa * f.value("gamma[1]") + f.value("beta[1]"), rtol=1e-12)
    h = np.arange(1, 31)
    if abs(pers - 1.0) < 1e-12:
        assert f.uncond_variance is None and f.half_life is None
        assert_allclose(fc.variance, fc.variance[0] + (h - 1) * f.value("omega"), rtol=1e-10)
    else:
        VL = f.value("omega") / (1 - pers)
        assert_allclose(fc.variance, VL + pers ** (h - 1) * (fc.variance[0] - VL), rtol=1e-10)
    # one step ahead from the last in-sample residual and variance
    e, s2, _ = in_sample(f, dmbp)
    one = f.value("omega") + f.value("alpha[1]") * e[-1] ** 2 + f.value("beta[1]") * s2[-1]
    if model.startswith("GJR"):
        one += f.value("gamma[1]") * e[-1] ** 2 * (e[-1] < 0)
    assert_allclose(fc.variance[0], one, rtol=1e-12)
    assert_allclose(fc.cumvar, np.cumsum(fc.variance), rtol=1e-12)  # constant mean: no propagation


def test_igarch_forecast_grows_linearly(dmbp):
    """IGARCH(1,1): sigma^2[u+h] = sigma^2[u+1] + (h-1) omega (common practice)."""
    f = fit(dmbp, "IGARCH(1,1)", "normal")
    fc = forecast(f, dmbp, 12)
    assert_allclose(fc.variance, fc.variance[0] + np.arange(12) * f.value("omega"), rtol=1e-10)


def test_ar1_mean_and_cumulative_variance(dmbp):
    """AR(1): mean[h] = mu (1 + phi + ... + phi^(h-1)) + phi^h r_T; the variance of the sum of
    the next h returns weights each shock by (1 + phi + ... + phi^(h-m))^2 (Box-Jenkins psi weights)."""
    f = fit(dmbp, "AR(1)-GARCH(1,1)", "normal")
    mu, phi = f.value("mu"), f.value("phi[1]")
    fc = forecast(f, dmbp, 6)
    expect_mean = [mu * sum(phi ** i for i in range(h)) + phi ** h * dmbp[-1] for h in range(1, 7)]
    assert_allclose(fc.mean, expect_mean, rtol=1e-10)
    for h in range(1, 7):
        w = [sum(phi ** i for i in range(h - m + 1)) for m in range(1, h + 1)]
        assert_allclose(fc.cumvar[h - 1], np.sum(np.array(w) ** 2 * fc.variance[:h]), rtol=1e-12)


def test_ma1_mean_forecast(dmbp):
    """MA(1): mean[1] = mu + theta e_T, mean[h>1] = mu."""
    f = fit(dmbp, "MA(1)-GARCH(1,1)", "normal")
    e, _, _ = in_sample(f, dmbp)
    fc = forecast(f, dmbp, 3)
    assert_allclose(fc.mean, [f.value("mu") + f.value("theta[1]") * e[-1], f.value("mu"), f.value("mu")], rtol=1e-12)


def test_egarch_forecast_is_exact(dmbp):
    """EGARCH: step 1 is the recursion's next value; later steps are Nelson's (1991) exact product
    (tests/test_egarch_speed.py checks it against quadrature and simulation), the same whatever
    the seed, and far out at the model's unconditional variance."""
    f = fit(dmbp, "EGARCH(1,1)", "normal")
    a = forecast(f, dmbp, 600, seed=11, paths=20000)
    b = forecast(f, dmbp, 600, seed=12, paths=5000)
    assert_allclose(a.variance, b.variance, rtol=0)
    e, s2, _ = in_sample(f, dmbp)
    z = e[-1] / np.sqrt(s2[-1])
    one = np.exp(f.value("omega") + f.value("alpha[1]") * (abs(z) - np.sqrt(2 / np.pi)) + f.value("gamma[1]") * z
                 + f.value("beta[1]") * np.log(s2[-1]))
    assert_allclose(a.variance[0], one, rtol=1e-10)
    assert_allclose(a.variance[-1], f.uncond_variance, rtol=1e-8)
    assert a.method == "analytic"


def test_forecast_what_options(dmbp, cells):
    table = VOLFIT(cells, "GARCH(1,1)")
    var = np.array([r[0] for r in VOLFORECAST(cells, table, 5)])
    assert_allclose([r[0] for r in VOLFORECAST(cells, table, 5, "vol")], np.sqrt(var), rtol=1e-14)
    assert_allclose([r[0] for r in VOLFORECAST(cells, table, 5, "cumvar")], np.cumsum(var), rtol=1e-12)
    assert_allclose([r[0] for r in VOLFORECAST(cells, table, 5, "cumvol")], np.sqrt(np.cumsum(var)), rtol=1e-12)
    tab = VOLFORECAST(cells, table, 5, "table")
    assert tab[0] == ["step", "mean", "variance", "vol", "cumvar"]
    assert [r[0] for r in tab[1:]] == [1, 2, 3, 4, 5]
    assert_allclose([r[2] for r in tab[1:]], var, rtol=1e-14)


def test_kept_ged_factors_are_the_quadratures_and_cannot_be_altered():
    """EGARCH's GED forecast factors are kept between forecasts of one fit: a kept answer is the
    quadrature's own (reference: the same function with its store emptied), and altering a returned
    array leaves the kept one as it was."""
    from xlfuncs.core.families import egarch as E

    cs = np.array([0.1, -0.3, 0.25, 0.0])
    E._ged_log_half_kept.cache_clear()
    first = E._ged_log_half(cs, 1.4)
    first[:] = 99.0  # a caller that writes into its result
    again = E._ged_log_half(cs, 1.4)
    E._ged_log_half_kept.cache_clear()
    fresh = E._ged_log_half(cs, 1.4)
    assert np.array_equal(again, fresh) and not np.any(again == 99.0)
    assert fresh[3] == 0.0 or abs(fresh[3]) < 1e-13  # c = 0: the density integrates to one
