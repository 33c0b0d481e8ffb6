"""Second derivatives: the shock densities' and the closed-form Hessian of the log-likelihood.

References: SciPy's densities (``scipy.stats.norm``, ``scipy.stats.t`` rescaled to unit variance)
differenced twice for the densities; for the likelihood, differences of the analytic gradient
(itself checked against differences of the log-likelihood in ``tests/test_likelihood.py``)
extrapolated by Richardson's rule (common practice).  The 40-digit check on the DEM/GBP
benchmark is in ``tests/test_benchmark_dmbp.py``.
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs.core import fit, get_distribution
from xlfuncs.core.likelihood import Likelihood

Z = np.array([-3.1, -1.2, -0.4, -0.02, 0.03, 0.5, 1.7, 4.0])


def _second_difference(f, x, h):
    """d2 f / dx2 by central differences at steps h and h/2, Richardson-extrapolated."""
    d1 = (f(x + h) - 2 * f(x) + f(x - h)) / h ** 2
    d2 = (f(x + h / 2) - 2 * f(x) + f(x - h / 2)) / (h / 2) ** 2
    return (4 * d2 - d1) / 3


@pytest.mark.parametrize("name, eta", [("normal", []), ("t", [4.5]), ("t", [30.0])])
def test_density_second_derivatives_against_scipy(name, eta):
    dist = get_distribution(name)
    zz, zp, pp = dist.d2logpdf(Z, np.array(eta))
    if name == "normal":
        ref = lambda z, *e: stats.norm.logpdf(z)  # noqa: E731
    else:
        ref = lambda z, e: stats.t.logpdf(z, e, scale=math.sqrt((e - 2) / e))  # noqa: E731
    assert_allclose(zz, _second_difference(lambda z: ref(z, *eta), Z, 1e-3), rtol=1e-6, atol=1e-7)
    if eta:
        nu = eta[0]
        assert_allclose(pp[0, 0], _second_difference(lambda v: ref(Z, v), nu, 1e-2 * nu), rtol=1e-5, atol=1e-9)
        h = 1e-4
        cross = ((ref(Z + h, nu + h) - ref(Z + h, nu - h)) - (ref(Z - h, nu + h) - ref(Z - h, nu - h))) / (4 * h * h)
        assert_allclose(zp[0], cross, rtol=1e-5, atol=1e-6)


@pytest.mark.parametrize("name, eta", [("skewt", [5.0, -0.3]), ("skewt", [9.0, 0.25]), ("ged", [1.3]), ("ged", [2.6])])
def test_density_second_derivatives_against_differences(name, eta):
    """The skewed t and the GED against second differences of their own log density (which
    tests/test_distributions.py checks against integrals and SciPy); points next to the skewed
    t's mode, where its second derivative jumps, are kept out of the differences."""
    dist = get_distribution(name)
    eta = np.array(eta)
    zz, zp, pp = dist.d2logpdf(Z, eta)
    f = lambda z, e: dist.logpdf(z, e)  # noqa: E731
    assert_allclose(zz, _second_difference(lambda z: f(z, eta), Z, 1e-3), rtol=1e-6, atol=1e-7)
    for i in range(len(eta)):
        def along(v, i=i):
            e = eta.copy()
            e[i] = v
            return f(Z, e)
        assert_allclose(pp[i, i], _second_difference(along, eta[i], 1e-3), rtol=1e-5, atol=1e-8)
        h = 1e-4
        up, dn = eta.copy(), eta.copy()
        up[i] += h
        dn[i] -= h
        cross = ((f(Z + h, up) - f(Z + h, dn)) - (f(Z - h, up) - f(Z - h, dn))) / (4 * h * h)
        far = np.abs(Z) > 0.05  # away from the GED's cusp at zero (no sample point sits at the skewed t's mode)
        assert_allclose(zp[i][far], cross[far], rtol=1e-5, atol=1e-6)


MODELS = [
    ("GARCH(1,1)", "t", ""),
    ("GJR-GARCH(1,1)", "skewt", ""),
    ("AR(1)-GJR-GARCH(2,1)", "ged", ""),
    ("ARCH(2)", "normal", "presample=drop"),
    ("AR(2)-GARCH(1,2)", "t", "presample=drop"),
    ("IGARCH(1,1)", "ged", ""),
    ("GARCH(1,1)", "skewt", "xvar=1"),
    ("MA(1)-GARCH(1,1)", "normal", ""),
    ("ARMA(1,1)-GJR-GARCH(1,1)", "t", ""),
    ("ARMA(2,2)-GJR-GARCH(2,1)", "skewt", "presample=drop"),
]


@pytest.mark.parametrize("model, dist, opts", MODELS)
def test_closed_form_hessian_against_differenced_gradient(dmbp, model, dist, opts):
    X = None
    if "xvar" in opts:
        X = np.abs(np.random.default_rng(3).standard_normal((len(dmbp), 1)))
    f = fit(dmbp, model, dist, opts, X=X)
    lik = Likelihood(dmbp, f.spec, f.dist, f.options.presample, X)
    assert lik.has_hessian
    theta = np.array([f.param_dict[n] for n in lik.names])
    l, G, H = lik.hessian(theta)
    l0, G0 = lik.scores(theta)
    assert_allclose(l, l0, rtol=1e-13)
    assert_allclose(G, G0, rtol=1e-10, atol=1e-12)
    ref = np.empty_like(H)
    for j in range(len(theta)):
        # Richardson's extrapolation of central differences; a step of 1e-5 of the value (the
        # ARMA(2,2)-GJR-GARCH(2,1)-skewt maximum on DEM/GBP has nearly cancelling AR and MA roots,
        # where 1e-4 leaves truncation errors of 1e-3 and 1e-5 of 1.4e-7)
        h = 1e-5 * max(abs(theta[j]), 1e-2)

        def diff(s):
            up, dn = theta.copy(), theta.copy()
            up[j] += s
            dn[j] -= s
            return (lik.gradient(up)[1] - lik.gradient(dn)[1]) / (2 * s)

        ref[:, j] = (4 * diff(h / 2) - diff(h)) / 3
    ref = 0.5 * (ref + ref.T)
    assert_allclose(H, ref, rtol=1e-7, atol=1e-8 * np.abs(ref).max())


def test_families_without_closed_form_go_by_differences(dmbp):
    """A family with a Jacobian of its own (EWMA, the component model) is not served by the
    closed form; its standard errors still come out."""
    for model in ("EWMA", "CGARCH(1,1)"):
        f = fit(dmbp, model, "normal")
        lik = Likelihood(dmbp, f.spec, f.dist, "mean")
        assert not lik.has_hessian
        assert np.all(np.isfinite(f.std_errors[[i for i, s in enumerate(f.status) if s == "free"]]))


# ---------------------------------------------------------------------------------- EGARCH
# EGARCH's Hessian comes from a compiled second-order pass through the log-variance recursion
# (xlfuncs/core/families/egarch.py).  Its news |z| kinks the likelihood where a residual crosses
# zero; the closed form holds between the kinks, so the references below difference only over
# steps that leave every residual's sign as it is.  (The skewed t's own second derivative jumps at
# its mode, which the variance parameters move the z across, so differences with it are rougher
# than with the other laws: it is checked on one model, whose steps happen to cross no mode.)
EGARCH_MODELS = [
    ("EGARCH(1,1)", "t", "mean", False),
    ("EGARCH(1,1)", "normal", "mean", False),
    ("AR(1)-EGARCH(1,1)", "ged", "drop", False),
    ("ARMA(1,1)-EGARCH(1,1)", "skewt", "mean", False),
    ("MA(1)-EGARCH(2,1)", "t", "drop", False),
    ("ARMA(2,1)-EGARCH(2,2)", "ged", "drop", False),
    ("EGARCH(1,2)", "t", "mean", True),
]
EGARCH_AT = {"mu": 0.01, "phi[1]": 0.08, "phi[2]": -0.04, "theta[1]": -0.05, "omega": -0.02,
             "alpha[1]": 0.2, "alpha[2]": 0.04, "gamma[1]": -0.05, "gamma[2]": 0.02, "beta[1]": 0.9,
             "beta[2]": 0.05, "v[1]": 0.03, "nu": 6.0, "lambda": -0.1}


def _egarch_point(dmbp, model, dist, presample, xvar):
    from xlfuncs.core.mean import layout
    from xlfuncs.core.spec import parse_model

    X = np.abs(np.random.default_rng(3).standard_normal((len(dmbp), 1))) if xvar else None
    spec = layout(parse_model(model), X, (1,) if xvar else ())
    lik = Likelihood(dmbp, spec, get_distribution(dist), presample, X)
    theta = np.array([EGARCH_AT[n] for n in lik.names])
    if dist == "ged":
        theta[lik.idx["nu"]] = 1.4
    return lik, theta


def _sign_keeping_step(lik, theta, j, h):
    """h, halved until no residual changes sign over theta +- h e_j (a step that crosses no kink)."""
    s0 = np.sign(lik.residuals(theta)[0])
    for _ in range(60):
        ok = True
        for s in (h, -h):
            t = theta.copy()
            t[j] += s
            ok &= bool(np.array_equal(np.sign(lik.residuals(t)[0]), s0))
        if ok:
            return h
        h /= 2
    raise AssertionError("no step keeps the residuals' signs")


@pytest.mark.parametrize("model, dist, presample, xvar", EGARCH_MODELS)
def test_egarch_hessian_against_differenced_gradient(dmbp, model, dist, presample, xvar):
    """The compiled second-order pass against Richardson-extrapolated central differences of the
    analytic gradient (itself checked against differences of the log-likelihood in
    tests/test_egarch_speed.py; common practice), mean, variance, variance-regressor and shape
    rows alike, both presample conventions, MA parts (whose residuals' own second derivatives go
    through the backward pass's weights) included."""
    lik, theta = _egarch_point(dmbp, model, dist, presample, xvar)
    assert lik.has_hessian
    l, G, H = lik.hessian(theta)
    l0, G0 = lik.scores(theta)
    assert_allclose(l, l0, rtol=1e-13)
    assert_allclose(G, G0, rtol=1e-10, atol=1e-12)
    ref = np.empty_like(H)
    for j in range(len(theta)):
        h = _sign_keeping_step(lik, theta, j, 1e-4 * max(abs(theta[j]), 1e-2))

        def diff(s):
            up, dn = theta.copy(), theta.copy()
            up[j] += s
            dn[j] -= s
            return (lik.gradient(up)[1] - lik.gradient(dn)[1]) / (2 * s)

        ref[:, j] = (4 * diff(h / 2) - diff(h)) / 3
    ref = 0.5 * (ref + ref.T)
    assert_allclose(H, ref, rtol=1e-6, atol=1e-8 * np.abs(ref).max())


@pytest.mark.parametrize("model, dist, presample, xvar", [EGARCH_MODELS[0], EGARCH_MODELS[3], EGARCH_MODELS[6]])
def test_egarch_hessian_against_statsmodels(dmbp, model, dist, presample, xvar):
    """Outside reference: statsmodels' ``approx_hess3`` (statsmodels.tools.numdiff: second
    differences of the log-likelihood itself, no gradient used) over the variance and shape
    parameters, along which the residuals and so the kinks do not move."""
    from statsmodels.tools.numdiff import approx_hess3

    lik, theta = _egarch_point(dmbp, model, dist, presample, xvar)
    idx = np.arange(lik.n_mean, lik.k)

    def ll(x):
        t = theta.copy()
        t[idx] = x
        return lik.loglik(t)

    ref = approx_hess3(theta[idx], ll, epsilon=1e-4 * np.maximum(np.abs(theta[idx]), 0.1))
    H = lik.hessian(theta)[2][np.ix_(idx, idx)]
    # second differences of a log-likelihood near -2,000 keep about five digits of the largest
    # entry (rounding over the step squared, and the long memory of beta near one in the error)
    assert_allclose(H, ref, rtol=1e-5, atol=1e-5 * np.abs(ref).max())


@pytest.mark.parametrize("model, dist, opts", [("EGARCH(1,1)", "t", ""), ("AR(1)-EGARCH(1,1)", "ged", "presample=drop"),
                                               ("MA(1)-EGARCH(1,1)", "skewt", "se=robust"),
                                               ("EGARCH(1,1)", "normal", "mu=0.02")])
def test_egarch_fit_matches_the_differenced_route(dmbp, monkeypatch, model, dist, opts):
    """A fit through the closed form (the mean parameters' columns still differenced across the
    kinks) against the same fit with the Hessian differenced in every column, the route EGARCH
    took before it had second derivatives (a consistency check, common practice): the same
    maximum and standard errors to about eight digits.  With every mean parameter fixed
    (``mu=0.02``) no column is differenced and the closed form serves the Newton steps too."""
    from xlfuncs.core.families.egarch import Egarch

    f = fit(dmbp, model, dist, opts)
    monkeypatch.setattr(Egarch, "has_second", False)
    g = fit(dmbp, model, dist, opts)
    assert f.converged and g.converged
    free = np.array([s == "free" for s in f.status])
    assert abs(f.loglik - g.loglik) < 1e-8
    assert np.all(np.abs(f.params - g.params)[free] < 1e-5 * f.std_errors[free])
    assert_allclose(f.std_errors[free], g.std_errors[free], rtol=1e-6)
