"""scipy.special and scipy.linalg.lapack as the core reads them (xlfuncs/core/_lazy.py).

The stand-ins serve a fit's functions from the subpackages' compiled modules without importing the
subpackages.  Reference: SciPy itself (the installed version) -- each function served must be the
subpackage's own object, or (polygamma, SciPy's three lines over the same ufuncs) give its numbers
bit for bit.  A fit in a fresh process must not import either subpackage, and must give the same
fit table as one run with both subpackages imported first.
"""

import subprocess
import sys

import numpy as np
import pytest

from xlfuncs.core import _lazy


def _fresh_special():
    return _lazy._CompiledFirst("scipy.special", *_lazy._COMPILED_FIRST["scipy.special"])


def test_special_functions_are_scipys_own():
    import scipy.special as sp

    from scipy.special import _basic, _ufuncs

    core = _lazy._load_extension("scipy.special._special_ufuncs")
    for name, inner in _lazy._SPECIAL_UFUNCS.items():
        assert getattr(core, inner) is getattr(sp, name), name
    # the ufuncs SciPy's polygamma calls (scipy/special/_basic.py; zeta(x, q) is _ufuncs._zeta)
    assert _basic.gamma is core.gamma and _basic.psi is core.psi and _ufuncs._zeta is core._zeta
    # once scipy.special is imported, every read goes to it
    stand_in = _fresh_special()
    assert stand_in.gammaln is sp.gammaln and stand_in.stdtrit is sp.stdtrit


def test_lapack_functions_are_scipys_own():
    import scipy.linalg.lapack as lapack

    core = _lazy._load_extension("scipy.linalg._flapack")
    for name, inner in _lazy._COMPILED_FIRST["scipy.linalg.lapack"][1].items():
        assert getattr(core, inner) is getattr(lapack, name), name


@pytest.mark.parametrize("n", [0, 1, 2, 3])
def test_polygamma_bit_for_bit(n):
    import scipy.special as sp

    rng = np.random.default_rng(5)
    x = np.concatenate([rng.uniform(0.01, 50.0, 400), [0.5, 1.0, 2.0, 2.05, 3.5, 1e-3, 1e3, 1e8]])
    ours = _lazy._polygamma(n, x)
    theirs = sp.polygamma(n, x)
    assert ours.dtype == theirs.dtype and np.array_equal(ours, theirs)
    # scalars as the t distribution passes them
    for v in (2.5, 4.0, 30.0):
        a, b = _lazy._polygamma(n, v), sp.polygamma(n, v)
        assert type(a) is type(b) and a == b


_FIT = r"""
import sys, json
pre = sys.argv[1] == "pre"
if pre:
    import scipy.special, scipy.linalg.lapack
import numpy as np
from xlfuncs.core import fit, get_distribution, parse_model
from xlfuncs.core.simulate import simulate
r = simulate(parse_model("GARCH(1,1)"), get_distribution("t"), np.array([0.03, 0.02, 0.07, 0.9, 6.0]), 1500,
             rng=np.random.default_rng(3))
out = []
for model, dist in (("GARCH(1,1)", "t"), ("GJR-GARCH(1,1)", "normal"), ("GARCH(1,1)", "ged")):
    res = fit(np.asarray(r, dtype=float).ravel(), model, dist)
    out.append([float(v).hex() for v in np.atleast_1d(res.params)] + [float(res.loglik).hex()])
print(json.dumps({"fits": out, "special": "scipy.special" in sys.modules and not pre,
                  "linalg": "scipy.linalg" in sys.modules and not pre}))
"""


def test_fit_without_the_subpackages_is_the_same_fit():
    import json

    runs = {}
    for how in ("pre", "lazy"):
        got = subprocess.run([sys.executable, "-c", _FIT, how], capture_output=True, text=True, check=True)
        runs[how] = json.loads(got.stdout)
    assert runs["lazy"]["special"] is False and runs["lazy"]["linalg"] is False
    assert runs["lazy"]["fits"] == runs["pre"]["fits"]


def test_the_subpackages_imported_afterwards_are_whole_and_the_same():
    """Served first, imported later (a VOLTESTS after a VOLFIT): SciPy's subpackages load and use
    the very compiled modules the stand-ins loaded (reference: SciPy's own functions)."""
    code = r"""
from xlfuncs.core._lazy import special, lazy_module
g, pg = special.gammaln, special.polygamma(1, 3.5)
f = lazy_module("scipy.linalg.lapack").dpotrf
import scipy.stats, scipy.special, scipy.linalg.lapack
assert g is scipy.special.gammaln and f is scipy.linalg.lapack.dpotrf
assert pg == scipy.special.polygamma(1, 3.5)
assert special.stdtrit is scipy.special.stdtrit  # a name not served: the subpackage's own
print("ok")
"""
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "ok"


_QUAD_CASES = [(-np.inf, -2.3), (-np.inf, np.inf), (0.4, np.inf), (-1.5, 2.0), (3.0, 3.0)]


@pytest.mark.parametrize("a, b", _QUAD_CASES)
def test_quad_is_scipys_quad_bit_for_bit(a, b):
    """_lazy.quad against scipy.integrate.quad (the reference) on a fat-tailed integrand like the
    one-period value loss's, at the risk module's tolerances and at quad's defaults."""
    import math

    from scipy import integrate

    def g(z):  # the value loss's shape on a lower tail; bounded and decaying where the interval reaches +inf
        if math.isinf(b):
            return math.cos(z) * (1.0 + z * z / 5.0) ** -3.0
        return -math.expm1(0.01 * (0.1 + 2.0 * z)) * (1.0 + z * z / 5.0) ** -3.0

    for opts in ({"epsabs": 0.0, "epsrel": 1e-12, "limit": 200}, {}):
        assert _lazy.quad(g, a, b, **opts) == tuple(integrate.quad(g, a, b, **opts)[:2])


_RISK = r"""
import json, sys
import numpy as np
from xlfuncs.core import fit
from xlfuncs.core.risk import risk
r = np.random.default_rng(1).standard_t(5, size=400)
f = fit(r, "GARCH(1,1)", "t")
out = risk(f, r, 0.99, 1, returns="log100")
loaded = sorted(m for m in ("scipy.integrate", "scipy.optimize") if m in sys.modules)
import scipy.integrate
again = risk(f, r, 0.99, 1, returns="log100")
print(json.dumps({"loaded": loaded, "es": [out.es_value, again.es_value], "var": [out.var_value, again.var_value]}))
"""


def test_one_period_value_loss_without_scipy_integrate():
    """The one-period ES in % of value (its tail integral) in a fresh process imports neither
    scipy.integrate nor scipy.optimize, and equals the figure computed with them imported."""
    import json

    done = subprocess.run([sys.executable, "-c", _RISK], capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    out = json.loads(done.stdout.strip().splitlines()[-1])
    assert out["loaded"] == []
    assert out["es"][0] == out["es"][1] and out["var"][0] == out["var"][1] and out["es"][0] > out["var"][0] > 0
