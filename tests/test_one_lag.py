"""The compiled loops of the one-lag linear recursion (GARCH(1,1), IGARCH(1,1)) against SciPy's
filter and against the NumPy path they stand in for.

Outside reference: ``scipy.signal.lfilter`` runs the recursion sigma2[t] = omega + alpha e2[t-1]
+ beta sigma2[t-1] written out here (lagged square and variance before the start at the mean
square, ``presample=mean``); the NumPy path is the same module with ``VOLCAST_NO_JIT=1``.
"""

from __future__ import annotations

import importlib.util

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.signal import lfilter

from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.estimate import fit
from xlfuncs.core.families import _linear
from xlfuncs.core.likelihood import Likelihood

pytestmark = pytest.mark.skipif(importlib.util.find_spec("numba") is None, reason="numba is not installed")


@pytest.fixture(autouse=True)
def _numba_loaded():
    """The one-lag kernels run only once numba is loaded in the process (compiled_loaded)."""
    from xlfuncs.core.families import _compiled

    _compiled._load_numba()
    assert _compiled.compiled_loaded()

POINTS = [  # (mu, omega, alpha, beta): the DEM/GBP estimate's neighbourhood and farther out
    (-0.0062, 0.0108, 0.153, 0.806),
    (0.01, 0.05, 0.05, 0.9),
    (-0.03, 0.2, 0.3, 0.3),
]


def _scipy_variance(r, mu, omega, alpha, beta):
    e = r - mu
    e2 = e * e
    sbar = e2.mean()
    lagged = np.concatenate([[sbar], e2[:-1]])
    return lfilter([1.0], [1.0, -beta], omega + alpha * lagged, zi=[beta * sbar])[0]


@pytest.mark.parametrize("point", POINTS)
def test_variance_is_scipys_filter(dmbp, point):
    lik = Likelihood(dmbp, parse_model("GARCH(1,1)"), get_distribution("normal"))
    _, sig2 = lik.series(np.array(point))
    assert_allclose(sig2, _scipy_variance(dmbp, *point), rtol=1e-14)


@pytest.mark.parametrize("model,dist", [("GARCH(1,1)", "normal"), ("AR(1)-GARCH(1,1)", "t"),
                                        ("ZERO-GARCH(1,1)", "ged"), ("IGARCH(1,1)", "normal")])
def test_compiled_loops_give_the_numpy_numbers(dmbp, model, dist, monkeypatch):
    """Variances, scores, log-likelihood and Hessian to the last bit (the Hessian's sums are the
    filters' own on both routes)."""
    spec, d = parse_model(model), get_distribution(dist)
    lik = Likelihood(dmbp, spec, d)
    est = fit(dmbp, spec, d).params
    rng = np.random.default_rng(3)
    for theta in (est, est * (1 + 0.03 * rng.standard_normal(len(est)))):
        monkeypatch.setenv("VOLCAST_NO_JIT", "0")
        l1, G1, H1 = lik.hessian(theta)
        g1 = lik.gradient(theta)[1]
        ll1 = lik.loglik(theta)
        monkeypatch.setenv("VOLCAST_NO_JIT", "1")
        l0, G0, H0 = lik.hessian(theta)
        g0 = lik.gradient(theta)[1]
        ll0 = lik.loglik(theta)
        assert np.array_equal(l1, l0) and np.array_equal(G1, G0) and ll1 == ll0
        assert_allclose(g1, g0, rtol=1e-13)
        assert np.array_equal(H1, H0)


def test_fit_is_the_numpy_paths(dmbp, monkeypatch):
    monkeypatch.setenv("VOLCAST_NO_JIT", "0")
    a = fit(dmbp, "GARCH(1,1)")
    monkeypatch.setenv("VOLCAST_NO_JIT", "1")
    b = fit(dmbp, "GARCH(1,1)")
    assert a.converged and b.converged
    assert np.array_equal(a.params, b.params) and np.array_equal(a.std_errors, b.std_errors)
    assert a.loglik == b.loglik


def test_garch_never_loads_numba_but_uses_it_once_loaded():
    """Scoring given parameters and a GARCH(1,1) estimation stay with SciPy's filter and never
    import numba; once an EGARCH fit has loaded it, a GARCH(1,1) estimation runs the one-lag
    kernels, and gives the same estimate and standard errors, bit for bit."""
    import os
    import subprocess
    import sys
    from pathlib import Path

    code = ("import sys, numpy as np\nfrom xlfuncs.core import get_distribution, parse_model\n"
            "from xlfuncs.core.estimate import evaluate, fit\nr = np.random.default_rng(1).standard_normal(400)\n"
            "evaluate(r, parse_model('GARCH(1,1)'), get_distribution('normal'), ('mu', 'omega', 'alpha[1]', 'beta[1]'),"
            " [0.0, 0.1, 0.1, 0.8])\nprint('numba' in sys.modules)\na = fit(r, 'GARCH(1,1)')\n"
            "print('numba' in sys.modules)\nfit(r, 'EGARCH(1,1)')\nfrom xlfuncs.core.families import _linear\n"
            "calls = []\nf0 = _linear._one_lag_forward\n"
            "_linear._one_lag_forward = lambda *x: calls.append(1) or f0(*x)\nb = fit(r, 'GARCH(1,1)')\n"
            "print('numba' in sys.modules, bool(calls), bool(np.array_equal(a.params, b.params) and np.array_equal(a.std_errors, b.std_errors)))\n")
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    env.pop("VOLCAST_NO_JIT", None)
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["False", "False", "True", "True", "True"]
