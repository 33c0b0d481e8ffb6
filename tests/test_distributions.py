"""Tests of the standardised shock distributions.

Outside references: SciPy's distributions (``scipy.stats``) and numerical
integration (``scipy.integrate.quad``), Hansen (1994)'s skewed-t density written
out from the published formula, and standard normal tables.
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, special, stats

from xlfuncs.core.distributions import (
    DISTRIBUTIONS,
    Distribution,
    get_distribution,
)
from xlfuncs.core.errors import InputError

# (family, params) pairs used throughout: light and heavy tails, both skews
CASES = [
    ("normal", ()),
    ("t", (4.0,)),
    ("t", (12.0,)),
    ("skewt", (5.0, -0.4)),
    ("skewt", (8.0, 0.3)),
    ("skewt", (3.5, 0.7)),
    ("ged", (0.8,)),
    ("ged", (1.5,)),
    ("ged", (3.0,)),
]
IDS = [f"{n}{list(p)}" for n, p in CASES]

GRID = np.linspace(-5.0, 5.0, 41)


def _dist(name, params):
    return get_distribution(name), np.array(params, dtype=float)


def _pdf(d, p):
    return lambda z: float(np.exp(d.logpdf(np.array([z]), p))[0])


def _quad(f, lo, hi, breaks=()):
    """quad over [lo, hi], split at the given interior points."""
    edges = [lo] + [b for b in sorted(breaks) if lo < b < hi] + [hi]
    return sum(
        integrate.quad(f, a, b, limit=200, epsabs=1e-12, epsrel=1e-11)[0]
        for a, b in zip(edges[:-1], edges[1:])
    )


def _breaks(name, p):
    """Points where a density has a kink: Hansen's split point, the GED cusp."""
    if name == "skewt":
        nu, lam = p
        c = special.gamma((nu + 1) / 2) / (math.sqrt(math.pi * (nu - 2)) * special.gamma(nu / 2))
        a = 4 * lam * c * (nu - 2) / (nu - 1)
        b = math.sqrt(1 + 3 * lam**2 - a**2)
        return (-a / b, 0.0)
    return (0.0,)


def _hansen_pdf(z, nu, lam):
    """Hansen (1994), eq. (10)-(11), written out literally from the published formula."""
    c = special.gamma((nu + 1) / 2) / (math.sqrt(math.pi * (nu - 2)) * special.gamma(nu / 2))
    a = 4 * lam * c * (nu - 2) / (nu - 1)
    b = math.sqrt(1 + 3 * lam**2 - a**2)
    z = np.asarray(z, dtype=float)
    out = np.empty_like(z)
    lo = z < -a / b
    out[lo] = b * c * (1 + ((b * z[lo] + a) / (1 - lam)) ** 2 / (nu - 2)) ** (-(nu + 1) / 2)
    hi = ~lo
    out[hi] = b * c * (1 + ((b * z[hi] + a) / (1 + lam)) ** 2 / (nu - 2)) ** (-(nu + 1) / 2)
    return out


# ---------------------------------------------------------------------------
# agreement with SciPy


def test_normal_matches_scipy_norm():
    # source: scipy.stats.norm
    d, p = _dist("normal", ())
    assert_allclose(d.logpdf(GRID, p), stats.norm.logpdf(GRID), rtol=1e-13, atol=1e-13)
    assert_allclose(d.cdf(GRID, p), stats.norm.cdf(GRID), rtol=1e-13, atol=1e-15)
    q = np.array([1e-10, 0.001, 0.025, 0.3, 0.5, 0.9, 0.999])
    assert_allclose(d.ppf(q, p), stats.norm.ppf(q), rtol=1e-13)


@pytest.mark.parametrize("nu", [2.2, 3.0, 5.0, 8.0, 30.0, 200.0])
def test_t_matches_scaled_scipy_t(nu):
    # source: scipy.stats.t with scale sqrt((nu-2)/nu), the unit-variance rescaling
    d, p = _dist("t", (nu,))
    ref = stats.t(df=nu, scale=math.sqrt((nu - 2) / nu))
    assert_allclose(ref.var(), 1.0, rtol=1e-12)
    assert_allclose(d.logpdf(GRID, p), ref.logpdf(GRID), rtol=1e-12, atol=1e-12)
    assert_allclose(d.cdf(GRID, p), ref.cdf(GRID), rtol=1e-10, atol=1e-15)
    q = np.array([1e-6, 0.01, 0.05, 0.5, 0.8, 0.99])
    assert_allclose(d.ppf(q, p), ref.ppf(q), rtol=1e-10, atol=1e-14)


@pytest.mark.parametrize("nu", [0.5, 0.8, 1.0, 1.5, 2.0, 3.0, 8.0])
def test_ged_matches_rescaled_scipy_gennorm(nu):
    # source: scipy.stats.gennorm(beta=nu); its variance is scale^2 Gamma(3/nu)/Gamma(1/nu)
    # (SciPy documentation), so scale = sqrt(Gamma(1/nu)/Gamma(3/nu)) gives unit variance
    d, p = _dist("ged", (nu,))
    scale = math.sqrt(special.gamma(1 / nu) / special.gamma(3 / nu))
    ref = stats.gennorm(nu, scale=scale)
    assert_allclose(ref.var(), 1.0, rtol=1e-10)
    assert_allclose(d.logpdf(GRID, p), ref.logpdf(GRID), rtol=1e-12, atol=1e-12)
    assert_allclose(d.cdf(GRID, p), ref.cdf(GRID), rtol=1e-10, atol=1e-15)
    q = np.array([1e-6, 0.01, 0.05, 0.5, 0.8, 0.99])
    assert_allclose(d.ppf(q, p), ref.ppf(q), rtol=1e-9, atol=1e-14)


def test_ged_special_cases_are_normal_and_laplace():
    # source: scipy.stats.norm (shape 2) and scipy.stats.laplace with scale 1/sqrt(2),
    # the unit-variance Laplace (shape 1)
    d = get_distribution("ged")
    assert_allclose(d.logpdf(GRID, [2.0]), stats.norm.logpdf(GRID), rtol=1e-12)
    lap = stats.laplace(scale=1 / math.sqrt(2))
    assert_allclose(d.logpdf(GRID, [1.0]), lap.logpdf(GRID), rtol=1e-12, atol=1e-12)
    assert_allclose(d.cdf(GRID, [1.0]), lap.cdf(GRID), rtol=1e-12, atol=1e-15)


# ---------------------------------------------------------------------------
# Hansen's skewed t


@pytest.mark.parametrize("nu", [2.5, 5.0, 20.0])
def test_skewt_with_zero_lambda_is_the_standardised_t(nu):
    # source: Hansen (1994): with lambda = 0, a = 0 and b = 1, leaving the unit-variance t;
    # reference values from scipy.stats.t with scale sqrt((nu-2)/nu)
    s, t = get_distribution("skewt"), get_distribution("t")
    ref = stats.t(df=nu, scale=math.sqrt((nu - 2) / nu))
    assert_allclose(s.logpdf(GRID, [nu, 0.0]), ref.logpdf(GRID), rtol=1e-12, atol=1e-12)
    assert_allclose(s.cdf(GRID, [nu, 0.0]), ref.cdf(GRID), rtol=1e-10, atol=1e-15)
    q = np.array([0.001, 0.2, 0.5, 0.7, 0.999])
    assert_allclose(s.ppf(q, [nu, 0.0]), ref.ppf(q), rtol=1e-10, atol=1e-14)
    assert_allclose(s.dlogpdf_dz(GRID, [nu, 0.0]), t.dlogpdf_dz(GRID, [nu]), rtol=1e-12)
    assert_allclose(
        s.dlogpdf_dparams(GRID, [nu, 0.0])[0], t.dlogpdf_dparams(GRID, [nu])[0], rtol=1e-9
    )


@pytest.mark.parametrize("nu,lam", [(2.5, -0.8), (4.0, 0.5), (10.0, -0.2), (50.0, 0.9)])
def test_skewt_density_matches_hansen_formula(nu, lam):
    # source: Hansen (1994) density, written out independently in _hansen_pdf
    d = get_distribution("skewt")
    # compared on the log scale: far-tail densities near 1e-42 lose digits through exp
    assert_allclose(d.logpdf(GRID, [nu, lam]), np.log(_hansen_pdf(GRID, nu, lam)), atol=1e-11)
    assert_allclose(d.pdf(GRID, [nu, lam]), _hansen_pdf(GRID, nu, lam), rtol=1e-10)


@pytest.mark.parametrize("nu,lam", [(3.0, -0.6), (6.0, 0.4), (30.0, 0.8)])
def test_skewt_cdf_is_integral_of_density(nu, lam):
    # source: scipy.integrate.quad of the published density
    d = get_distribution("skewt")
    f = lambda z: float(_hansen_pdf(np.array([z]), nu, lam)[0])
    brk = _breaks("skewt", (nu, lam))
    for x in (-3.0, -0.5, brk[0], 0.4, 2.5):
        ref = _quad(f, -np.inf, x, brk)
        assert_allclose(d.cdf(x, [nu, lam]), ref, rtol=1e-8, atol=1e-12)


# ---------------------------------------------------------------------------
# standardisation: every family integrates to 1 with mean 0 and variance 1


@pytest.mark.parametrize("name,params", CASES, ids=IDS)
def test_unit_mass_zero_mean_unit_variance(name, params):
    # source: scipy.integrate.quad of the density
    d, p = _dist(name, params)
    f = _pdf(d, p)
    brk = _breaks(name, params)
    mass = _quad(f, -np.inf, np.inf, brk)
    mean = _quad(lambda z: z * f(z), -np.inf, np.inf, brk)
    var = _quad(lambda z: z * z * f(z), -np.inf, np.inf, brk)
    assert_allclose(mass, 1.0, rtol=1e-9)
    assert_allclose(mean, 0.0, atol=1e-8)
    assert_allclose(var, 1.0, rtol=1e-7)


@pytest.mark.parametrize("name,params", CASES, ids=IDS)
def test_abs_and_negative_square_moments(name, params):
    # source: scipy.integrate.quad of |z| f(z) and z^2 f(z) 1(z < 0)
    d, p = _dist(name, params)
    f = _pdf(d, p)
    brk = _breaks(name, params)
    absm = _quad(lambda z: abs(z) * f(z), -np.inf, np.inf, brk)
    negsq = _quad(lambda z: z * z * f(z), -np.inf, 0.0, brk)
    assert_allclose(d.abs_moment(p), absm, rtol=1e-8)
    assert_allclose(d.neg_sq_moment(p), negsq, rtol=1e-8)


def test_normal_abs_moment_is_sqrt_two_over_pi():
    # source: E|Z| = sqrt(2/pi) for a standard normal (common practice)
    assert_allclose(get_distribution("normal").abs_moment([]), math.sqrt(2 / math.pi), rtol=1e-15)


def test_symmetric_families_have_half_negative_square_moment():
    # source: symmetry of a unit-variance density (common practice)
    for name, params in [("normal", ()), ("t", (5.0,)), ("ged", (1.2,)), ("skewt", (5.0, 0.0))]:
        d, p = _dist(name, params)
        assert_allclose(d.neg_sq_moment(p), 0.5, rtol=1e-12)


def test_skewt_left_skew_puts_more_variance_below_zero():
    # source: Hansen (1994): lambda < 0 skews to the left; checked by quad in the test above,
    # here only the direction
    d = get_distribution("skewt")
    assert d.neg_sq_moment([6.0, -0.5]) > 0.5 > d.neg_sq_moment([6.0, 0.5])


# ---------------------------------------------------------------------------
# quantiles and tail measures


@pytest.mark.parametrize("name,params", CASES, ids=IDS)
def test_ppf_and_cdf_invert_each_other(name, params):
    # source: definition of the quantile function (common practice)
    d, p = _dist(name, params)
    u = d.cdf(GRID, p)
    # far in a light upper tail the cdf is 1 - (something below 1e-10), which a float
    # holds only to a few digits; the round trip is asked only where it is well posed
    ok = np.minimum(u, 1.0 - u) > 1e-9
    assert ok.sum() >= 30
    assert_allclose(d.ppf(u[ok], p), GRID[ok], rtol=1e-9, atol=1e-9)
    q = np.array([1e-8, 1e-4, 0.01, 0.1, 0.37, 0.5, 0.63, 0.9, 0.99, 0.9999])
    assert_allclose(d.cdf(d.ppf(q, p), p), q, rtol=1e-9)


def test_cdf_and_ppf_keep_shape_and_scalars():
    d = get_distribution("skewt")
    assert isinstance(d.cdf(0.3, [5.0, 0.2]), float)
    assert isinstance(d.ppf(0.3, [5.0, 0.2]), float)
    assert d.ppf(np.full((3, 2), 0.4), [5.0, 0.2]).shape == (3, 2)


@pytest.mark.parametrize("name,params", CASES, ids=IDS)
@pytest.mark.parametrize("level", [0.9, 0.975, 0.99])
def test_expected_shortfall_matches_integral_of_quantile(name, params, level):
    # source: ES = -(1/(1-level)) * integral_0^{1-level} ppf(u) du, evaluated by scipy quad
    d, p = _dist(name, params)
    alpha = 1.0 - level
    integral = integrate.quad(lambda u: d.ppf(u, p), 0.0, alpha, limit=200, epsrel=1e-10)[0]
    assert_allclose(d.expected_shortfall(level, p), -integral / alpha, rtol=1e-7)


def test_normal_expected_shortfall_handbook_value():
    # source: handbook value, common practice: phi(1.95996)/0.025 = 2.33780
    es = get_distribution("normal").expected_shortfall(0.975, [])
    assert_allclose(es, 2.3378, atol=5e-5)
    assert_allclose(es, stats.norm.pdf(1.959964) / 0.025, rtol=1e-6)


def test_normal_var_multipliers_from_tables():
    # source: standard normal tables: 1.6449, 1.9600, 2.3263 at 95%, 97.5%, 99%
    d = get_distribution("normal")
    assert_allclose(-d.ppf(np.array([0.05, 0.025, 0.01]), []), [1.6449, 1.9600, 2.3263], atol=5e-5)
    assert_allclose(d.value_at_risk(np.array([0.95, 0.975, 0.99]), []),
                    [1.6449, 1.9600, 2.3263], atol=5e-5)


def test_t_expected_shortfall_exceeds_normal_at_same_level():
    # source: fatter tails under unit variance give a larger 99% shortfall (common practice)
    n = get_distribution("normal").expected_shortfall(0.99, [])
    t = get_distribution("t").expected_shortfall(0.99, [5.0])
    assert t > n


def test_expected_shortfall_accepts_arrays_and_rejects_bad_levels():
    d = get_distribution("t")
    es = d.expected_shortfall(np.array([0.95, 0.99]), [6.0])
    assert es.shape == (2,) and es[1] > es[0] > 0
    assert isinstance(d.expected_shortfall(0.99, [6.0]), float)
    for bad in (0.0, 1.0, 1.5, -0.2, float("nan")):
        with pytest.raises(InputError, match="level must be between 0 and 1"):
            d.expected_shortfall(bad, [6.0])


# ---------------------------------------------------------------------------
# derivatives against central finite differences


def _fd_z(d, z, p, h=1e-6):
    return (d.logpdf(z + h, p) - d.logpdf(z - h, p)) / (2 * h)


def _fd_params(d, z, p):
    out = []
    for i in range(p.size):
        h = 1e-6 * max(1.0, abs(p[i]))
        up, dn = p.copy(), p.copy()
        up[i] += h
        dn[i] -= h
        out.append((d.logpdf(z, up) - d.logpdf(z, dn)) / (2 * h))
    return np.array(out).reshape((p.size,) + z.shape)


# points that avoid the GED cusp at 0 and Hansen's split point
ZPTS = np.array([-4.1, -2.3, -1.05, -0.61, -0.27, 0.13, 0.52, 1.37, 2.9, 6.2])


@pytest.mark.parametrize("name,params", CASES, ids=IDS)
def test_dlogpdf_dz_matches_finite_differences(name, params):
    # source: central finite differences of logpdf (common practice)
    d, p = _dist(name, params)
    assert_allclose(d.dlogpdf_dz(ZPTS, p), _fd_z(d, ZPTS, p), rtol=1e-6, atol=1e-7)


@pytest.mark.parametrize(
    "name,params",
    CASES + [("t", (2.05,)), ("t", (150.0,)), ("skewt", (2.3, -0.9)), ("ged", (0.4,))],
)
def test_dlogpdf_dparams_matches_finite_differences(name, params):
    # source: central finite differences of logpdf (common practice)
    d, p = _dist(name, params)
    g = d.dlogpdf_dparams(ZPTS, p)
    assert g.shape == (len(d.param_names), ZPTS.size)
    assert_allclose(g, _fd_params(d, ZPTS, p), rtol=1e-6, atol=1e-7)


def test_ged_derivatives_at_zero_are_finite():
    # the cusp of the GED at 0: the z-derivative is taken as 0 there
    d = get_distribution("ged")
    for nu in (0.5, 1.0, 2.0):
        assert d.dlogpdf_dz(np.array([0.0]), [nu])[0] == 0.0
        assert np.isfinite(d.dlogpdf_dparams(np.array([0.0]), [nu])).all()


def test_normal_has_no_parameter_derivatives():
    d = get_distribution("normal")
    assert d.dlogpdf_dparams(ZPTS, np.empty(0)).shape == (0, ZPTS.size)


# ---------------------------------------------------------------------------
# random draws


@pytest.mark.parametrize("name,params", CASES[::2] + [("skewt", (5.0, -0.4))])
def test_rvs_moments_and_ks(name, params):
    # source: sample moments and scipy.stats.kstest against the family's own cdf,
    # which is itself checked against SciPy and quad above
    d, p = _dist(name, params)
    rng = np.random.default_rng(20240601)
    x = d.rvs(200_000, p, rng)
    assert x.shape == (200_000,)
    assert abs(x.mean()) < 0.015
    assert abs(x.var() - 1.0) < 0.06  # generous: t(4) has an infinite fourth moment
    assert stats.kstest(x, lambda v: d.cdf(v, p)).pvalue > 1e-3


def test_rvs_is_reproducible_and_shaped():
    d = get_distribution("ged")
    a = d.rvs((4, 3), [1.3], np.random.default_rng(7))
    b = d.rvs((4, 3), [1.3], np.random.default_rng(7))
    assert a.shape == (4, 3)
    assert_allclose(a, b, rtol=0)


# ---------------------------------------------------------------------------
# parameters, checking and look-up


def test_param_names_bounds_and_start():
    expected = {
        "normal": ((), []),
        "t": (("nu",), [(2.0, math.inf)]),
        "skewt": (("nu", "lambda"), [(2.0, math.inf), (-1.0, 1.0)]),
        "ged": (("nu",), [(0.0, math.inf)]),
    }
    assert DISTRIBUTIONS == ("normal", "t", "skewt", "ged")
    for name in DISTRIBUTIONS:
        d = get_distribution(name)
        assert isinstance(d, Distribution) and d.name == name
        names, bounds = expected[name]
        assert d.param_names == names
        assert d.bounds() == bounds
        s = d.start()
        assert s.shape == (len(names),)
        d.check(s)
        assert d.in_domain(s)


@pytest.mark.parametrize(
    "name,params,message",
    [
        ("t", [1.5], "nu must be greater than 2 for the t distribution, got 1.5"),
        ("t", [2.0], "nu must be greater than 2 for the t distribution, got 2"),
        ("t", [float("nan")], "nu must be greater than 2 for the t distribution, got not a number"),
        ("t", [float("inf")], "nu must be greater than 2 for the t distribution, got infinity"),
        ("skewt", [1.0, 0.0], "nu must be greater than 2 for the skewt distribution, got 1"),
        ("skewt", [5.0, 1.0], "lambda must be between -1 and 1 for the skewt distribution, got 1"),
        ("skewt", [5.0, -1.2], "lambda must be between -1 and 1 for the skewt distribution, got -1.2"),
        ("ged", [0.0], "nu must be greater than 0 for the ged distribution, got 0"),
        ("ged", [-0.5], "nu must be greater than 0 for the ged distribution, got -0.5"),
        ("t", [], r"the t distribution takes 1 parameter \(nu\), got 0"),
        ("skewt", [5.0], r"the skewt distribution takes 2 parameters \(nu, lambda\), got 1"),
        ("normal", [3.0], "the normal distribution takes no shape parameters, got 1"),
    ],
)
def test_check_rejects_out_of_domain(name, params, message):
    d = get_distribution(name)
    with pytest.raises(InputError, match=f"^{message}$"):
        d.check(params)
    assert not d.in_domain(params)


def test_input_error_is_a_value_error():
    with pytest.raises(ValueError):
        get_distribution("t").check([1.0])


@pytest.mark.parametrize(
    "alias,name",
    [
        ("normal", "normal"), ("Gaussian", "normal"), ("NORM", "normal"), (" normal ", "normal"),
        ("t", "t"), ("T", "t"), ("student", "t"), ("StudentT", "t"), ("student-t", "t"),
        ("Student t", "t"),
        ("skewt", "skewt"), ("skewed-t", "skewt"), ("Skew-T", "skewt"), ("skewstudent", "skewt"),
        ("skew t", "skewt"),
        ("ged", "ged"), ("GED", "ged"), ("generalized-error", "ged"), ("generalised-error", "ged"),
        ("Generalised Error", "ged"),
    ],
)
def test_get_distribution_aliases(alias, name):
    assert get_distribution(alias).name == name


def test_get_distribution_passes_instances_through():
    d = get_distribution("t")
    assert get_distribution(d) is d


@pytest.mark.parametrize("bad", ["xyz", "cauchy", "", "t3"])
def test_get_distribution_unknown_name(bad):
    with pytest.raises(
        InputError, match=f'^unknown distribution "{bad}"; use normal, t, skewt or ged$'
    ):
        get_distribution(bad)


def test_get_distribution_rejects_non_text():
    with pytest.raises(InputError, match="distribution must be a name"):
        get_distribution(3.0)


@pytest.mark.parametrize("name,params,ref", [
    ("normal", [], lambda law: law),
    # source: SciPy's Student t, rescaled to unit variance
    ("t", [4.5], lambda law: law(stats.t(4.5, scale=math.sqrt(2.5 / 4.5)))),
    # source: SciPy's gennorm (beta = nu), rescaled to unit variance; nu < 1 has a cusp at 0
    ("ged", [1.4], lambda law: law(stats.gennorm(1.4, scale=math.sqrt(math.gamma(1 / 1.4) / math.gamma(3 / 1.4))))),
    ("ged", [0.8], lambda law: law(stats.gennorm(0.8, scale=math.sqrt(math.gamma(1 / 0.8) / math.gamma(3 / 0.8))))),
    # Hansen's skewed t has no SciPy counterpart: its own ppf, itself checked against its cdf above
    ("skewt", [5.0, -0.3], None),
])
def test_normal_scores_map_is_the_quantile_of_the_normal_cdf(name, params, ref):
    """G(x) = F^-1(Phi(x)), the map behind the multi-period VaR/ES's quasi-random draws."""
    d = get_distribution(name)
    x = np.concatenate([np.linspace(-9.5, 9.5, 2001), np.random.default_rng(3).normal(0, 2.5, 5000)])
    if ref is None:
        keep = np.abs(x) <= 5.0  # beyond, 1 - Phi(x) in the upper half loses the digits the check needs
        want = d.ppf(special.ndtr(x[keep]), params)
    else:  # the upper half through the reference's isf of the upper tail's probability
        keep = np.ones(len(x), dtype=bool)
        law = ref(stats.norm) if name == "normal" else ref(lambda frozen: frozen)
        want = np.where(x <= 0, law.ppf(special.ndtr(x)), law.isf(special.ndtr(-x)))
    # GED's density has a kink at 0 (|z|^nu), so the cubic pieces beside x = 0 are a little less exact
    assert_allclose(d.normal_scores(params)(x)[keep], want, rtol=1e-7, atol=1e-6 if name == "ged" else 1e-8)


@pytest.mark.parametrize("name,params", [("t", [4.5]), ("ged", [0.8]), ("skewt", [5.0, -0.3])])
def test_normal_scores_map_compiled_and_numpy_routes_agree(name, params, monkeypatch):
    """The compiled pass of the score map (long inputs, numba) and its NumPy form give the same numbers
    (the same cubic pieces; internal consistency, the accuracy is checked against SciPy above)."""
    d = get_distribution(name)
    x = np.concatenate([np.random.default_rng(5).normal(0, 3.0, 6000), [-8.0, 8.0, -9.0, 12.0, 0.0]])
    g = d.normal_scores(params)
    a = g(x)
    monkeypatch.setenv("VOLCAST_NO_JIT", "1")
    assert_allclose(a, g(x), rtol=1e-14, atol=1e-15)
