"""Maximum likelihood across the model families: recovery, convergence, constraints, inference."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from xlfuncs.core import InputError, fit

TRUE_GJR_T = {"mu": 0.05, "phi[1]": 0.2, "omega": 0.05, "alpha[1]": 0.04, "gamma[1]": 0.1, "beta[1]": 0.85, "nu": 6.0}


@pytest.fixture(scope="module")
def realistic(simulated):
    """A daily-like series with clustering, leverage and fat tails (seeded simulation)."""
    return simulated("AR(1)-GJR-GARCH(1,1)", "t", list(TRUE_GJR_T.values()), 2000, 2024)


def test_recovery_ar1_gjr_garch_t(simulated):
    """Parameters of a simulated AR(1)-GJR-GARCH(1,1)-t are recovered within 3 standard errors
    (consistency of ML; common practice)."""
    r = simulated("AR(1)-GJR-GARCH(1,1)", "t", list(TRUE_GJR_T.values()), 4000, 7)
    f = fit(r, "AR(1)-GJR-GARCH(1,1)", "t")
    assert f.converged, f.message
    true = np.array([TRUE_GJR_T[n] for n in f.names])
    z = (f.params - true) / f.std_errors
    assert np.all(np.abs(z) < 3), dict(zip(f.names, z))


MODELS = ["CONST", "AR(1)", "ARCH(1)", "GARCH(1,1)", "GJR-GARCH(1,1)", "EGARCH(1,1)", "IGARCH(1,1)",
          "AR(1)-GARCH(1,1)", "MA(1)-GJR-GARCH(1,1)", "ZERO-EGARCH(1,1)", "ARMA(1,1)-ARCH(2)"]
DISTS = ["normal", "t", "skewt", "ged"]


@pytest.fixture(scope="module")
def all_fits(realistic):
    return {(m, d): fit(realistic, m, d) for m in MODELS for d in DISTS}


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("dist", DISTS)
def test_every_family_and_distribution_converges(all_fits, model, dist):
    f = all_fits[(model, dist)]
    assert f.converged, f.message
    assert np.isfinite(f.loglik)
    assert np.all(np.isfinite(f.std_errors[[s == "free" for s in f.status]]))


NESTED = [  # (smaller, larger): the larger model contains the smaller one
    ("CONST", "ARCH(1)"), ("ARCH(1)", "GARCH(1,1)"), ("GARCH(1,1)", "GJR-GARCH(1,1)"),
    ("IGARCH(1,1)", "GARCH(1,1)"), ("GARCH(1,1)", "AR(1)-GARCH(1,1)"), ("CONST", "AR(1)"),
]


@pytest.mark.parametrize("dist", DISTS)
def test_nested_models_are_ordered(all_fits, dist):
    for small, large in NESTED:
        assert all_fits[(large, dist)].loglik >= all_fits[(small, dist)].loglik - 1e-6, (small, large)


@pytest.mark.parametrize("model", MODELS)
def test_nested_distributions_are_ordered(all_fits, model):
    """normal is t with nu -> infinity, and t is skewt with lambda = 0; GED nests the normal (nu = 2)."""
    ll = {d: all_fits[(model, d)].loglik for d in DISTS}
    assert ll["skewt"] >= ll["t"] - 1e-6
    assert ll["t"] >= ll["normal"] - 1e-3  # nu is capped at 300 in the search
    assert ll["ged"] >= ll["normal"] - 1e-6


def test_fixed_parameter_is_held_and_not_counted(realistic):
    free = fit(realistic, "GARCH(1,1)", "t")
    held = fit(realistic, "GARCH(1,1)", "t", "nu=8")
    assert held.value("nu") == 8.0
    assert np.isnan(held.std_errors[held.names.index("nu")])
    assert held.n_free == free.n_free - 1
    assert held.loglik <= free.loglik + 1e-9
    assert_allclose(held.aic, -2 * held.loglik + 2 * held.n_free)
    assert_allclose(held.bic, -2 * held.loglik + held.n_free * np.log(held.nobs))


def test_fixed_parameter_the_model_lacks(realistic):
    with pytest.raises(InputError, match="gamma\\[1\\] is not a parameter"):
        fit(realistic, "GARCH(1,1)", "normal", "gamma1=0.1")


def test_variance_targeting(realistic):
    """target=yes: omega = mean squared residual x (1 - persistence)."""
    f = fit(realistic, "GARCH(1,1)", "normal", "target=yes")
    from xlfuncs.core import in_sample

    e, _, _ = in_sample(f, realistic)
    assert_allclose(f.value("omega"), np.mean(e ** 2) * (1 - f.persistence), rtol=1e-10)
    assert f.status[f.names.index("omega")] == "target"
    assert f.n_free == 3


def test_igarch_weights_sum_to_one(realistic):
    f = fit(realistic, "IGARCH(1,1)", "t")
    assert_allclose(f.value("alpha[1]") + f.value("beta[1]"), 1.0, rtol=0, atol=1e-12)
    assert f.persistence == pytest.approx(1.0)
    assert f.uncond_variance is None and f.half_life is None
    # the implied beta's standard error equals alpha's (delta method on 1 - alpha)
    assert_allclose(f.std_errors[f.names.index("beta[1]")], f.std_errors[f.names.index("alpha[1]")], rtol=1e-12)


def test_stationarity_enforced(all_fits):
    for (m, d), f in all_fits.items():
        if f.spec.variance in ("arch", "garch", "gjr"):
            assert f.persistence < 1.0
        if f.spec.variance == "egarch":
            assert abs(f.value("beta[1]")) < 1.0


def test_half_life(all_fits):
    f = all_fits[("GARCH(1,1)", "normal")]
    assert_allclose(f.half_life, np.log(0.5) / np.log(f.persistence))
    assert_allclose(f.uncond_variance, f.value("omega") / (1 - f.persistence))


def test_sandwich_is_hessian_opg_hessian(realistic):
    """se=robust is H^-1 (G'G) H^-1 (Bollerslev-Wooldridge 1992); check it against the other two."""
    rob = fit(realistic, "GARCH(1,1)", "normal", "se=robust")
    hes = fit(realistic, "GARCH(1,1)", "normal", "se=hessian")
    opg = fit(realistic, "GARCH(1,1)", "normal", "se=opg")
    assert_allclose(rob.params, hes.params, rtol=1e-9)
    Vh, Vo = hes.cov, opg.cov
    # G'G = inv(Vo), H^-1 = -Vh  =>  robust = Vh inv(Vo) Vh
    assert_allclose(rob.cov, Vh @ np.linalg.inv(Vo) @ Vh, rtol=1e-6)
    # under correct specification (normal shocks here would be wrong: the series is t) they differ
    assert not np.allclose(rob.std_errors, hes.std_errors, rtol=0.05)


def test_too_few_observations():
    with pytest.raises(InputError, match="needs at least"):
        fit(np.random.default_rng(0).standard_normal(8), "GARCH(1,1)")


def test_constant_series():
    with pytest.raises(InputError, match="constant series"):
        fit(np.ones(100), "GARCH(1,1)")
