"""The formula engine's statistics functions reach SciPy only when called.

The engine's function table imports its statistics module, which imports scipy.stats,
scipy.linalg and scipy.interpolate (about 1.0-1.4 s CPU here); the adapter lets them in only when a
formula needs one (xlfuncs/headless/engine.py, ``_Deferred``).  Checked in a fresh process: the
table built without them, then formulas that use each of them evaluated to SciPy's own numbers
(reference: scipy.stats and scipy.interpolate called directly), and every later import of those
subpackages gets the real one.
"""

from __future__ import annotations

import json
import subprocess
import sys

_CODE = r"""
import json, sys
from xlfuncs.headless import engine
engine._register_ours()
out = {"after_table": sorted(m for m in engine._DEFERRED if m in sys.modules)}
out["normsinv"] = engine.compile_formula("=NORM.S.INV(0.99)")()
out["still"] = sorted(m for m in engine._DEFERRED if m in sys.modules)
out["tinv"] = float(engine.compile_formula("=T.INV(0.975, 10)")())
out["chisq"] = float(engine.compile_formula("=CHISQ.DIST.RT(3.5, 4)")())
out["kurt"] = float(engine.compile_formula("=KURT(1,2,3,4,5,9)")())
import scipy.stats, scipy.interpolate, scipy.linalg
out["real"] = [type(m).__name__ for m in (scipy.stats, scipy.interpolate, scipy.linalg)]
out["has_norm"] = hasattr(scipy.stats, "norm") and hasattr(scipy.interpolate, "interp1d")
out["ref"] = [float(scipy.stats.t.ppf(0.975, 10)), float(scipy.stats.chi2.sf(3.5, 4)),
              float(scipy.stats.kurtosis([1, 2, 3, 4, 5, 9], fisher=True, bias=False)),
              float(scipy.stats.norm.ppf(0.99))]
# a name the engine took from scipy.interpolate while its table was built, called afterwards
import formulas.functions.stat as st
x = [0.0, 1.0, 2.0]
out["interp"] = [float(st.interp1d(x, [0.0, 10.0, 30.0])(1.5)),
                 float(scipy.interpolate.interp1d(x, [0.0, 10.0, 30.0])(1.5))]
print(json.dumps(out))
"""


def test_engine_functions_import_scipy_only_when_called():
    done = subprocess.run([sys.executable, "-c", _CODE], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    out = json.loads(done.stdout.strip().splitlines()[-1])
    assert out["after_table"] == [] and out["still"] == []  # NORM.S.INV needs no SciPy (the engine's own)
    tinv, chisq, kurt, normsinv = out["ref"]
    assert out["tinv"] == tinv and out["chisq"] == chisq and out["kurt"] == kurt
    assert abs(out["normsinv"] - normsinv) <= 1e-12 * abs(normsinv)
    assert out["real"] == ["module"] * 3 and out["has_norm"]
    assert out["interp"][0] == out["interp"][1] == 20.0


_FITS = r"""
import json, sys
import numpy as np
from xlfuncs import VOLCOMPARE, VOLFIT
from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.simulate import simulate
r = simulate(parse_model("EGARCH(1,1)"), get_distribution("t"), np.array([0.02, 0.01, 0.1, -0.05, 0.95, 7.0]), 500,
             rng=np.random.default_rng(4))
cells = [[float(x)] for x in np.ravel(r)]
fit = VOLFIT(cells, "EGARCH(1,1)", "t")
VOLCOMPARE(cells, "EWMA, GARCH(1,1), GJR-GARCH(1,1), EGARCH(1,1)", "t")
print(json.dumps({"loaded": sorted(m for m in ("scipy.stats", "scipy.signal") if m in sys.modules),
                  "uncond": [row[1] for row in fit if row[0] == "uncond_variance"]}))
"""


def test_the_templates_candidate_fits_load_neither_scipy_stats_nor_scipy_signal():
    """An EGARCH fit's unconditional variance once imported scipy.signal (and with it scipy.stats:
    about 1 s CPU at the first EGARCH fit of every recalculation) for one linear filter; the
    templates' fits and comparison now load neither subpackage."""
    done = subprocess.run([sys.executable, "-c", _FITS], capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    out = json.loads(done.stdout.strip().splitlines()[-1])
    assert out["loaded"] == []
    assert len(out["uncond"]) == 1  # the row the filter serves is there (blank with t shocks)
