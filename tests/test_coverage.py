"""VOLCOVERAGE, VOLSIM and VOLNEWS against their published definitions and closed forms."""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from xlfuncs import VOLCOVERAGE, VOLNEWS, VOLSIM
from xlfuncs.core.coverage import christoffersen, kupiec, zone


def test_kupiec_formula():
    """Kupiec (1995): LR_uc = -2 ln[(1-p)^(n-x) p^x] + 2 ln[(1-x/n)^(n-x) (x/n)^x]."""
    n, x, p = 250, 7, 0.01
    ref = -2 * ((n - x) * math.log(1 - p) + x * math.log(p)) + 2 * ((n - x) * math.log(1 - x / n) + x * math.log(x / n))
    lr, pv = kupiec(n, x, p)
    assert_allclose(lr, ref, rtol=1e-12)
    assert_allclose(pv, stats.chi2.sf(ref, 1), rtol=1e-12)


@pytest.mark.parametrize("n,lo,hi", [(510, 2, 10), (1000, 5, 16)])
def test_kupiec_non_rejection_regions(n, lo, hi):
    """Kupiec's 95% non-rejection regions at p = 1% (reproduced in Jorion, Value at Risk; from
    memory): 1 < N < 11 for 510 days, 4 < N < 17 for 1000 days."""
    inside = [x for x in range(60) if kupiec(n, x, 0.01)[1] > 0.05]
    assert (inside[0], inside[-1]) == (lo, hi)


def test_christoffersen_on_a_hand_built_sequence():
    """Christoffersen (1998): transitions n00, n01, n10, n11 of the hit sequence."""
    hits = [0] * 20 + [1, 1, 0, 0, 1, 1, 1, 0] + [0] * 70 + [1, 0]
    h = np.array(hits)
    t = list(zip(h[:-1], h[1:]))
    n00, n01, n10, n11 = (t.count((0, 0)), t.count((0, 1)), t.count((1, 0)), t.count((1, 1)))
    assert (n00, n01, n10, n11) == (90, 3, 3, 3)  # counted by hand: 99 transitions
    pi, pi01, pi11 = (n01 + n11) / len(t), n01 / (n00 + n01), n11 / (n10 + n11)
    l0 = (n00 + n10) * math.log(1 - pi) + (n01 + n11) * math.log(pi)
    l1 = n00 * math.log(1 - pi01) + n01 * math.log(pi01) + n10 * math.log(1 - pi11) + n11 * math.log(pi11)
    lr, p = christoffersen(hits)
    assert_allclose(lr, -2 * (l0 - l1), rtol=1e-12)
    assert p < 0.01  # clustered hits reject independence


def test_traffic_light_boundaries():
    """Basel Committee (1996): 250 forecasts at 99%: green 0-4, yellow 5-9, red 10 or more."""
    assert [zone(250, x, 0.01) for x in (0, 4, 5, 9, 10, 15)] == ["green", "green", "yellow", "yellow", "red", "red"]


def test_volcoverage_rows_and_alignment():
    rng = np.random.default_rng(4)
    r = rng.standard_normal(300)
    var = np.full(300, stats.norm.ppf(0.99))
    cells_r = [[float(v)] for v in r]
    cells_v = [[None]] * 50 + [[float(v)] for v in var[50:]]  # a VaR series that starts later
    out = VOLCOVERAGE(cells_r, cells_v, 0.99)
    d = {k: v for k, v in out}
    assert d["forecasts"] == 250
    x = int(np.sum(r[50:] < -var[50:]))
    assert d["exceptions"] == x
    assert_allclose(d["Kupiec LR"], kupiec(250, x, 0.01)[0], rtol=1e-12)
    assert d["zone"] == zone(250, x, 0.01)
    assert VOLCOVERAGE(cells_r, cells_v[:-1], 0.99)[0][0].startswith("ERROR: returns and var must cover the same rows")


def test_simulated_garch_matches_its_closed_forms():
    """GARCH(1,1), normal shocks: variance omega/(1-a-b) and kurtosis
    3(1-(a+b)^2)/(1-(a+b)^2-2a^2) (Bollerslev 1986)."""
    w, a, b = 0.1, 0.1, 0.8
    fit = [["model", "GARCH(1,1)"], ["dist", "normal"], ["mu", 0.0], ["omega", w], ["alpha1", a], ["beta1", b]]
    paths = np.array(VOLSIM(fit, 2000, 500, 11))
    assert paths.shape == (2000, 500)
    x = paths.ravel()
    assert_allclose(x.var(), w / (1 - a - b), rtol=0.03)
    k = 3 * (1 - (a + b) ** 2) / (1 - (a + b) ** 2 - 2 * a ** 2)
    assert_allclose(stats.kurtosis(x, fisher=False), k, rtol=0.05)
    assert VOLSIM(fit, 2000, 500, 11) == paths.tolist()  # reproducible by seed
    assert VOLSIM(fit, 10, 2, 12) != VOLSIM(fit, 10, 2, 13)


def test_news_impact_curve_formula():
    """Engle & Ng (1993): sigma^2 = omega + (alpha + gamma 1(e<0)) e^2 + beta * sigma_bar^2."""
    w, a, g, b = 0.05, 0.05, 0.1, 0.85
    fit = [["model", "GJR-GARCH(1,1)"], ["dist", "normal"], ["mu", 0], ["omega", w], ["alpha1", a],
           ["gamma1", g], ["beta1", b]]
    shocks = [-3.0, -1.0, 0.0, 1.0, 3.0]
    got = [r[0] for r in VOLNEWS(fit, [[s] for s in shocks])]
    s2 = w / (1 - a - g / 2 - b)
    expect = [w + (a + g * (e < 0)) * e * e + b * s2 for e in shocks]
    assert_allclose(got, expect, rtol=1e-12)
    assert got[0] > got[-1]  # bad news raises variance more


def test_bad_inputs_are_error_cells():
    fit = [["model", "GARCH(1,1)"], ["mu", 0], ["omega", 0.1], ["alpha1", 0.1], ["beta1", 0.8]]
    for out in (VOLSIM(fit, 0), VOLSIM(fit, 2000, 1000), VOLSIM("x", 10), VOLNEWS(fit, [["a"]]),
                VOLCOVERAGE([[1.0]], [[1.0]], 1.5)):
        assert len(out) == 1 and out[0][0].startswith("ERROR:"), out
