"""The variance-family protocol and its registry: structure, not numbers.

The numbers each family produces are checked against outside references in the tests of the
likelihood, estimation, forecasts and risk; here: that the layers above the families hold no
branch on a family's name, and that every registered family keeps the protocol's promises.
"""

import ast
from pathlib import Path

import numpy as np
import pytest

from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.families import FAMILIES, WORDS, History, VarianceFamily

from helpers import family_models

ROOT = Path(__file__).resolve().parents[1] / "xlfuncs"
# the modules that must reach a family through the protocol only (spec.py parses the words)
NO_BRANCHES = ["core/estimate.py", "core/likelihood.py", "core/forecast.py", "core/simulate.py",
               "core/coverage.py", "core/risk.py", "core/backtest.py", "sheet/functions.py",
               "sheet/fittable.py", "sheet/cells.py"]


@pytest.mark.parametrize("module", NO_BRANCHES)
def test_no_module_above_the_families_names_one(module):
    tree = ast.parse((ROOT / module).read_text(encoding="utf-8"))
    keys = set(FAMILIES)
    named = [node.value for node in ast.walk(tree)
             if isinstance(node, ast.Constant) and isinstance(node.value, str) and node.value.lower() in keys]
    assert named == [], f"{module} names the families {named}"


@pytest.mark.parametrize("model", family_models())
def test_every_family_keeps_the_protocol(model):
    spec = parse_model(model)
    fam = spec.family
    assert isinstance(fam, VarianceFamily)
    assert parse_model(spec.canonical) == spec  # the canonical string reads back to the same model
    names = fam.param_names
    assert len(set(names)) == len(names) == fam.n_params
    assert len(fam.box(1.0)) == fam.n_params
    dist = get_distribution("t")
    eta = dist.start()
    starts = fam.starts(1.0)
    assert starts and all(s.shape == (fam.n_params,) for s in starts)
    # at least one start is admissible, and the recursion gives positive finite variances there
    rng = np.random.default_rng(1)
    n = max(300, 2 * fam.arch_lags)  # enough residuals for presample=drop's lags
    e = rng.standard_normal(n)
    good = [s for s in starts if fam.admissible(s, eta, dist, held=fam.integrated)]
    assert good
    sig2 = fam.variance(good[0], e, "mean", eta, dist)
    assert sig2.shape == (n,) and np.all(np.isfinite(sig2)) and np.all(sig2 > 0)
    drop = fam.variance(good[0], e, "drop", eta, dist)
    assert drop.shape == (n - fam.arch_lags,)
    # forecasts and a simulation step from the end of that sample
    hist = History(e, sig2, 0)
    fvar, _ = fam.forecast(good[0], eta, dist, hist, 5, np.random.default_rng(2), 100)
    assert fvar.shape == (5,) and np.all(fvar > 0)
    state = fam.sim_continue(good[0], eta, dist, hist)
    s2, shock = fam.sim_step(state, good[0], eta, dist, np.ones(3))
    assert np.allclose(np.broadcast_to(s2, (3,)), fvar[0])  # the first step is the one-step forecast
    assert np.allclose(shock, np.sqrt(s2) * np.ones(3))


def test_words_are_unique_and_upper_case():
    seen = [w for cls in FAMILIES.values() for w in cls.words]
    assert len(seen) == len(set(seen)) == len(WORDS)
    assert all(w == w.upper() for w in seen)


def test_wrong_parameter_count_is_refused():
    fam = parse_model("GARCH(1,1)").family
    with pytest.raises(ValueError, match="3 variance parameters"):
        fam.persistence([0.1, 0.1])
