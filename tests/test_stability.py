"""VOLSTABILITY: the Nyblom (1989) test in Hansen's (1992) form against a direct computation from
per-observation scores written out here, its critical values against the limiting distribution,
its behaviour under stable and broken parameters, and its refusals."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from xlfuncs import VOLFIT, VOLSTABILITY
from xlfuncs.core import fit, get_distribution, parse_model
from xlfuncs.core.simulate import simulate
from xlfuncs.core.stability import HANSEN_5PCT, nyblom, stability


def _column(x):
    return [[float(v)] for v in x]


def _garch_terms(r, theta):
    """Per-observation log-likelihood terms of a constant-mean GARCH(1,1) with normal shocks and
    the presample of DESIGN.md (e^2_0 = s^2_0 = mean squared residual), written out as a loop."""
    mu, omega, alpha, beta = theta
    e = r - mu
    e2bar = float(np.mean(e * e))
    s2_prev, e2_prev = e2bar, e2bar
    out = np.empty(len(r))
    for t in range(len(r)):
        s2 = omega + alpha * e2_prev + beta * s2_prev
        out[t] = -0.5 * (np.log(2 * np.pi) + np.log(s2) + e[t] ** 2 / s2)
        s2_prev, e2_prev = s2, e[t] ** 2
    return out


def _direct_scores(r, theta, rel=1e-5):
    """Central differences of each observation's term, one parameter at a time."""
    theta = np.asarray(theta, dtype=float)
    G = np.empty((len(r), len(theta)))
    for j in range(len(theta)):
        h = rel * max(abs(theta[j]), 1e-3)
        up, dn = theta.copy(), theta.copy()
        up[j] += h
        dn[j] -= h
        G[:, j] = (_garch_terms(r, up) - _garch_terms(r, dn)) / (2 * h)
    return G


def _hansen(f):
    """Hansen (1992): S_t = sum_{j<=t} f_j, V = sum_t f_t f_t', L_i = sum_t S_it^2 / (n V_ii),
    L_c = (1/n) sum_t S_t' V^-1 S_t; written out with a loop over t."""
    n, m = f.shape
    V = np.zeros((m, m))
    for t in range(n):
        V += np.outer(f[t], f[t])
    Vinv = np.linalg.inv(V)
    S = np.zeros(m)
    ind = np.zeros(m)
    joint = 0.0
    for t in range(n):
        S = S + f[t]
        ind += S ** 2
        joint += S @ Vinv @ S
    return ind / (n * np.diag(V)), joint / n


def test_dmbp_garch_statistics_equal_the_direct_computation(dmbp):
    """DEM/GBP (Bollerslev & Ghysels 1996, open data), GARCH(1,1) with normal shocks: every
    statistic equals Hansen's (1992) formulas applied to scores differentiated here."""
    cells = _column(dmbp)
    table = VOLFIT(cells, "GARCH(1,1)")
    out = VOLSTABILITY(cells, table)
    assert out[0] == ["parameter", "statistic", "crit_5pct", "reject", "reading"]
    rows = {row[0]: row for row in out[1:]}
    assert list(rows) == ["mu", "omega", "alpha[1]", "beta[1]", "joint"]
    theta = [dict((r[0], r[1]) for r in table)[k] for k in ("mu", "omega", "alpha[1]", "beta[1]")]
    ind, joint = _hansen(_direct_scores(dmbp, theta))
    # numerical scores here, analytic in the package: agreement to about six digits
    assert_allclose([rows[k][1] for k in ("mu", "omega", "alpha[1]", "beta[1]")], ind, rtol=1e-5)
    assert_allclose(rows["joint"][1], joint, rtol=1e-5)
    # 5% critical values: 0.470 for each parameter, Hansen (1992) Table 1's row m = 4 jointly (from memory)
    assert all(rows[k][2] == 0.470 for k in ("mu", "omega", "alpha[1]", "beta[1]"))
    assert rows["joint"][2] == 1.24
    for k in rows:
        assert rows[k][3] is (rows[k][1] > rows[k][2])
    # the same numbers from the core on the core's own fit
    st = stability(dmbp, fit(dmbp, "GARCH(1,1)"))
    assert_allclose(st.statistics, ind, rtol=1e-5)
    assert st.score_stat < 1e-12  # S_n = 0 at the maximum


def test_nyblom_formula_on_random_scores():
    """The vectorised statistic against the loop above on arbitrary scores (not at a maximum)."""
    f = np.random.default_rng(3).standard_normal((300, 3)) + [0.1, 0.0, -0.05]
    ind, joint, lm = nyblom(f)
    ref_ind, ref_joint = _hansen(f)
    assert_allclose(ind, ref_ind, rtol=1e-12)
    assert_allclose(joint, ref_joint, rtol=1e-12)
    s = f.sum(axis=0)
    assert_allclose(lm, s @ np.linalg.solve(f.T @ f, s), rtol=1e-12)


def test_hansen_critical_values_match_the_limiting_distribution():
    """Under constancy L_c converges to the integral of the squared norm of an m-dimensional
    Brownian bridge (Nyblom 1989; Hansen 1992), i.e. sum_k chi2_m,k / (k pi)^2 (the Karhunen-Loeve
    expansion of the bridge, Anderson & Darling 1952).  Hansen's simulated 5% values (recalled from
    memory in the package) lie within 2.5% of its 95% quantile, here from 40,000 draws."""
    rng = np.random.default_rng(11)
    K = 40
    w = 1.0 / (np.arange(1, K + 1) * np.pi) ** 2
    tail = 1.0 / 6.0 - w.sum()  # sum over k > K of 1/(k pi)^2, whole sum pi^2/6 / pi^2
    for m in (1, 2, 3, 4, 5, 7, 10, 15, 20):
        draws = rng.chisquare(m, size=(40_000, K)) @ w + m * tail
        assert_allclose(HANSEN_5PCT[m], np.quantile(draws, 0.95), rtol=0.025, err_msg=f"m = {m}")


_SPEC = parse_model("GARCH(1,1)")
_NORMAL = get_distribution("normal")


def test_mean_break_is_rejected():
    """A GARCH(1,1) whose mean jumps from -0.15 to +0.15 halfway (returns of variance about 1):
    mu's statistic and the joint one exceed their 5% values, and the readings say so."""
    a = simulate(_SPEC, _NORMAL, [-0.15, 0.05, 0.1, 0.85], 600, rng=np.random.default_rng(77))[:, 0]
    b = simulate(_SPEC, _NORMAL, [0.15, 0.05, 0.1, 0.85], 600, rng=np.random.default_rng(177))[:, 0]
    cells = _column(np.r_[a, b])
    rows = {row[0]: row for row in VOLSTABILITY(cells, VOLFIT(cells, "GARCH(1,1)"))[1:]}
    assert rows["mu"][3] is True and rows["mu"][4] == "mu unstable at 5%"
    assert rows["joint"][3] is True and rows["joint"][4].startswith("parameters unstable at 5%: mostly mu")


def test_stable_garch_rejects_near_the_nominal_rate():
    """60 simulated stable GARCH(1,1) paths of 1,000 returns: the joint test rejects at most 12% of
    them at its nominal 5% (binomial(60, 0.05) exceeds 7 rejections with probability 0.003); in
    GARCH samples this size the test is somewhat undersized (about 2% in 100 paths when measured)."""
    joint, each = 0, 0
    for s in range(60):
        r = simulate(_SPEC, _NORMAL, [0.0, 0.05, 0.1, 0.85], 1000, rng=np.random.default_rng(1000 + s))[:, 0]
        st = stability(r, fit(r, _SPEC, _NORMAL))
        joint += bool(st.joint_reject)
        each += int(st.reject.sum())
    assert joint <= 7
    assert each <= 0.12 * 4 * 60


def test_fixed_and_held_parameters_are_not_tested(dmbp):
    """A parameter fixed by the options is no row; a fit held at the stationarity bound (DEM/GBP
    GARCH(1,1) with t shocks) leaves its implied beta out, and the joint value is m = 4's."""
    cells = _column(dmbp)
    rows = VOLSTABILITY(cells, VOLFIT(cells, "GARCH(1,1)", "normal", "mu=0"))
    assert [r[0] for r in rows[1:]] == ["omega", "alpha[1]", "beta[1]", "joint"] and rows[-1][2] == 1.01
    table = VOLFIT(cells, "GARCH(1,1)", "t")
    assert "held at the stationarity bound" in table[-1][2]
    rows = VOLSTABILITY(cells, table)
    assert [r[0] for r in rows[1:]] == ["mu", "omega", "alpha[1]", "nu", "joint"] and rows[-1][2] == 1.24
    assert all(r[1] is not None and r[1] >= 0 for r in rows[1:])


def test_typed_parameters_at_the_maximum_are_tested_with_a_caveat(dmbp):
    """The DEM/GBP GARCH(1,1) estimate typed to 7 digits: computed, and the joint reading says the
    test assumes the typed values are the maximum-likelihood estimate."""
    cells = _column(dmbp)
    est = {r[0]: r[1] for r in VOLFIT(cells, "GARCH(1,1)")}
    typed = [["model", "GARCH(1,1)"]] + [[k, float(f"{est[k]:.7g}")] for k in ("mu", "omega", "alpha[1]", "beta[1]")]
    out = VOLSTABILITY(cells, typed)
    assert out[-1][0] == "joint" and "parameters given, not estimated" in out[-1][4]


def test_parameters_away_from_the_maximum_are_refused(dmbp):
    cells = _column(dmbp)
    typed = [["model", "GARCH(1,1)"], ["mu", 0.0], ["omega", 0.02], ["alpha[1]", 0.2], ["beta[1]", 0.7]]
    out = VOLSTABILITY(cells, typed)
    assert len(out) == 1 and out[0][0].startswith("ERROR: the fit's parameters are not the maximum of the likelihood")


@pytest.mark.parametrize("fit_arg,pattern", [
    ("not a table", "fit is not a fit table"),
    ([["model", "GARCH(1,1)"], ["mu", 0.0], ["omega", 0.02], ["alpha[1]", 0.1], ["beta[1]", 0.8], ["options", "mu=0; omega=0.02; alpha[1]=0.1; beta[1]=0.8"]],
     "every parameter of the fit is fixed"),
])
def test_bad_inputs(dmbp, fit_arg, pattern):
    out = VOLSTABILITY(_column(dmbp[:300]), fit_arg)
    assert len(out) == 1 and out[0][0].startswith("ERROR:") and pattern in out[0][0], out
