"""The walk-forward's one-pass forecasts: between refits the parameters are fixed, and for the
families linear in lagged squares the one-step variance after each window comes from one filter
over the series plus a correction for the window's own presample.  Each forecast must be the
number re-filtering that window alone gives: checked here against the family's variance run on
each window directly and the next step of the recursion written out in the test (the GARCH
recursion of Bollerslev 1986, the GJR news term of Glosten, Jagannathan & Runkle 1993)."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.backtest import backtest
from xlfuncs.core.estimate import fit
from xlfuncs.core.families.base import History
from xlfuncs.core.mean import layout
from xlfuncs.core.spec import parse_options


def _garch_next(omega, alpha, gamma, beta, e_last, s2_last, shift=0.0):
    """sigma2[t] = omega + shift + (alpha + gamma 1(e<0)) e[t-1]^2 + beta sigma2[t-1], written out."""
    return omega + shift + (alpha + (gamma if e_last < 0 else 0.0)) * e_last ** 2 + beta * s2_last


def _by_window(r, window, scheme, steps, resid, vp, coefs, fam, presample, shift=None, a=0):
    """The one-step variance after each window: the family's variance on the window's residuals
    alone, then one step of the recursion written out."""
    out = []
    s0 = fam.arch_lags if presample == "drop" else 0
    for t in range(window, window + steps):
        start = t - window if scheme == "rolling" else 0
        e = resid(r[start:t])  # the window's residuals, its own lags dropped
        kw = {} if shift is None else {"shift": shift(start + a + s0, t)}
        s2 = fam.variance(vp, e, presample, **kw)
        out.append(_garch_next(*coefs, e[-1], s2[-1], 0.0 if shift is None else shift(t, t + 1)[0]))
    return np.array(out)


def _no_refilter(monkeypatch):
    """Make re-filtering a window fail, so that a result proves the one-pass route was taken."""
    import xlfuncs.core.backtest as bt

    def refuse(*args, **kwargs):
        raise AssertionError("a window was re-filtered")

    monkeypatch.setattr(bt, "evaluate", refuse)
    return lambda: monkeypatch.undo()


def test_rolling_garch_t_with_refits_equals_refiltering_each_window(simulated, monkeypatch):
    """GARCH(1,1)-t, rolling window 300, refit every 7 steps: variances and VaR equal to 1e-12 the
    re-filtered windows; VaR = -(mu + sigma t_nu^-1(0.01) sqrt((nu-2)/nu)) (SciPy's t, the
    standardised t's quantile, common practice)."""
    r = simulated("GARCH(1,1)", "t", [0.05, 0.05, 0.1, 0.85, 6.0], 340, 3)
    spec, dist, opts = parse_model("GARCH(1,1)"), get_distribution("t"), parse_options("")
    undo = _no_refilter(monkeypatch)
    new = backtest(r, spec, dist, opts, 300, 0.99, "rolling", refit=7)
    undo()
    old = backtest(r, spec, dist, opts, 300, 0.99, "rolling", refit=7, refilter=True)
    assert new.fits == old.fits == 6
    assert_allclose(new.variance, old.variance, rtol=1e-12)
    assert_allclose(new.var, old.var, rtol=1e-12)
    assert_allclose(new.es, old.es, rtol=1e-12)
    assert_allclose(new.mean, old.mean, rtol=1e-12, atol=1e-14)
    # the family's variance on each window, refit by refit, with that block's parameters
    fam = spec.family
    for b in range(6):
        theta = fit(r[b * 7: 300 + b * 7], spec, dist, opts).params
        mu, omega, alpha, beta, nu = theta
        k = min(7, 40 - 7 * b)
        want = _by_window(r[b * 7:], 300, "rolling", k, lambda x: x - mu, theta[1:4], (omega, alpha, 0.0, beta),
                          fam, "mean")
        assert_allclose(new.variance[7 * b: 7 * b + k], want, rtol=1e-12)
        q = stats.t.ppf(0.01, nu) * np.sqrt((nu - 2) / nu)
        assert_allclose(new.var[7 * b: 7 * b + k], -(mu + np.sqrt(want) * q), rtol=1e-12)


@pytest.mark.parametrize("scheme", ["rolling", "expanding"])
def test_given_gjr_with_ar_drop_and_variance_regressor(simulated, scheme, monkeypatch):
    """AR(1)-GJR-GARCH(1,1), presample=drop, a mean regressor and a variance regressor, given
    parameters: every window's forecast equals re-filtering it (1e-12), rolling and expanding."""
    rng = np.random.default_rng(5)
    T, window = 260, 200
    r = simulated("GJR-GARCH(1,1)", "normal", [0.02, 0.04, 0.05, 0.08, 0.85], T, 8)
    X = np.column_stack([rng.standard_normal(T), rng.uniform(0.0, 1.0, T)])
    opts = parse_options("presample=drop; xvar=2")
    spec = parse_model("AR(1)-GJR-GARCH(1,1)")
    dist = get_distribution("normal")
    names = layout(spec, X, opts.xvar).param_names
    values = {"mu": 0.03, "phi[1]": 0.1, "x[1]": 0.2, "omega": 0.04, "alpha[1]": 0.05, "gamma[1]": 0.08,
              "beta[1]": 0.85, "v[2]": 0.03}
    theta = np.array([values[n] for n in names])
    undo = _no_refilter(monkeypatch)
    new = backtest(r, spec, dist, opts, window, 0.95, scheme, params=theta, X=X)
    undo()
    old = backtest(r, spec, dist, opts, window, 0.95, scheme, params=theta, X=X, refilter=True)
    assert new.fits == 0
    assert_allclose(new.variance, old.variance, rtol=1e-12)
    assert_allclose(new.var, old.var, rtol=1e-12)
    assert_allclose(new.mean, old.mean, rtol=1e-12, atol=1e-14)

    fam = spec.family
    want = []
    for t in range(window, T):
        start = t - window if scheme == "rolling" else 0
        # the window's residuals, its first return kept as the AR lag only (presample=drop)
        e = r[start + 1:t] - 0.03 - 0.1 * r[start:t - 1] - 0.2 * X[start + 1:t, 0]
        s2 = fam.variance([0.04, 0.05, 0.08, 0.85], e, "drop", shift=0.03 * X[start + 2:t, 1])
        want.append(_garch_next(0.04, 0.05, 0.08, 0.85, e[-1], s2[-1], 0.03 * X[t, 1]))
    assert_allclose(new.variance, want, rtol=1e-12)
    mean = 0.03 + 0.1 * r[window - 1:T - 1] + 0.2 * X[window:, 0]
    assert_allclose(new.var, -(mean + np.sqrt(want) * stats.norm.ppf(0.05)), rtol=1e-12)


@pytest.mark.parametrize("model, vp", [
    ("GARCH(2,2)", [0.05, 0.05, 0.04, 0.5, 0.3]),
    ("ARCH(3)", [0.3, 0.2, 0.15, 0.1]),
    ("GARCH(1,3)", [0.05, 0.1, 0.3, 0.2, 0.3]),
    ("GJR-GARCH(2,1)", [0.05, 0.03, 0.02, 0.06, 0.04, 0.8]),
    ("EWMA", [0.94]),
    ("IGARCH(1,1)", [0.02, 0.1, 0.9]),
    ("CGARCH(1,1)", None),
])
@pytest.mark.parametrize("presample", ["mean", "drop"])
def test_window_forecast_equals_the_variance_of_each_window(model, vp, presample):
    """Windows of many lengths and starts (the shortest just longer than the recursion's lags, as
the one-step forecast reads them from the window):
    the family's one-pass answer equals its variance on the window followed by its own one-step
    forecast (1e-12), for every family that says it can (``window_forecasts``)."""
    fam = parse_model(model).family
    assert fam.window_forecasts
    if vp is None:  # the component model's own start values
        vp = fam.starts(1.0)[0]
    vp = np.asarray(vp, dtype=float)
    e = np.random.default_rng(2).standard_normal(700) * 1.4
    s0 = fam.arch_lags if presample == "drop" else 0
    starts = np.array([0, 0, 4, 19, 100, 333, 600])
    ends = np.array([s0 + 4, 450, 8 + s0, 420, 699, 699, 650])
    got = fam.window_forecast(vp, e, starts, ends, presample)
    dist = get_distribution("normal")
    want = []
    for s, t in zip(starts, ends):
        s2 = fam.variance(vp, e[s:t], presample)
        want.append(fam.forecast(vp, (), dist, History(e[s:t], s2, s0), 1)[0][0])
    assert_allclose(got, want, rtol=1e-12)


@pytest.mark.parametrize("model, params", [
    ("EGARCH(1,1)", [0.0, 0.02, 0.1, -0.05, 0.95]),
    ("MA(1)-GARCH(1,1)", [0.0, 0.2, 0.05, 0.1, 0.85]),
])
def test_models_without_the_shortcut_still_refilter(simulated, model, params):
    """A family with no one-pass forecasts (EGARCH) and a mean whose residuals restart in each
    window (MA): the walk-forward re-filters every window, as the direct route does."""
    r = simulated("GARCH(1,1)", "normal", [0.0, 0.05, 0.1, 0.85], 230, 4)
    spec, dist, opts = parse_model(model), get_distribution("normal"), parse_options("")
    assert not spec.family.window_forecasts or spec.ma
    new = backtest(r, spec, dist, opts, 220, 0.99, params=np.array(params))
    old = backtest(r, spec, dist, opts, 220, 0.99, params=np.array(params), refilter=True)
    assert_allclose(new.variance, old.variance, rtol=0, atol=0)
    assert np.all(new.variance > 0)


def test_a_variance_regressor_leaving_the_domain_is_an_error(simulated):
    """Given parameters whose intercept omega + v[1] x turns negative inside the walk: a clear
    message naming the row, on both routes."""
    r = simulated("GARCH(1,1)", "normal", [0.0, 0.05, 0.1, 0.85], 240, 6)
    X = np.random.default_rng(1).uniform(0.0, 1.0, (240, 1))
    X[230, 0] = -5.0  # omega + 0.02 x = 0.05 - 0.1 < 0 at return row 231
    spec, dist, opts = parse_model("GARCH(1,1)"), get_distribution("normal"), parse_options("xvar=1")
    from xlfuncs.core.errors import InputError
    for refilter in (False, True):
        with pytest.raises(InputError, match="not above zero"):
            backtest(r, spec, dist, opts, 220, 0.99, params=np.array([0.0, 0.05, 0.1, 0.85, 0.02]), X=X,
                     refilter=refilter)
    with pytest.raises(InputError, match="row 231"):
        backtest(r, spec, dist, opts, 220, 0.99, params=np.array([0.0, 0.05, 0.1, 0.85, 0.02]), X=X)
