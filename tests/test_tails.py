"""xlfuncs.core.tails against scipy.stats (the reference: SciPy's chi2.sf, t.sf, norm.ppf and
norm.pdf), equal bit for bit on grids that reach the tails and the edges (0, negative, infinite
and nan arguments); and the workbook's tests and comparisons no longer import scipy.stats."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
from scipy import stats

from xlfuncs.core import tails


def test_chi2_sf_is_scipys():
    rng = np.random.default_rng(2)
    x = np.r_[rng.uniform(0, 80, 4000), 10.0 ** rng.uniform(-12, 3, 1000), [0.0, -1.0, np.inf, np.nan, 1e-300]]
    df = np.r_[rng.integers(1, 60, 5000), rng.uniform(0.3, 200, 5)]
    assert np.array_equal(tails.chi2_sf(x, df), stats.chi2.sf(x, df), equal_nan=True)
    for a, d in ((3.84, 1), (0.0, 2), (np.nan, 2), (3.0, 0), (5.0, -1)):
        assert np.array_equal(tails.chi2_sf(a, d), stats.chi2.sf(a, d), equal_nan=True)


def test_t_sf_is_scipys():
    rng = np.random.default_rng(3)
    x = np.r_[rng.normal(0, 4, 4000), rng.normal(0, 40, 996), [np.inf, -np.inf, np.nan, 0.0]]
    df = np.r_[rng.uniform(0.5, 1e4, 4996), [3, 3, 3, np.inf]]
    assert np.array_equal(tails.t_sf(x, df), stats.t.sf(x, df), equal_nan=True)
    for a, d in ((1.0, 0), (2.0, np.inf), (-2.5, 7)):
        assert np.array_equal(tails.t_sf(a, d), stats.t.sf(a, d), equal_nan=True)


def test_normal_quantile_and_density_are_scipys():
    rng = np.random.default_rng(4)
    q = np.r_[rng.uniform(0, 1, 5000), 10.0 ** -rng.uniform(1, 300, 500), [0.0, 1.0, 0.5, np.nan]]
    assert np.array_equal(tails.norm_ppf(q), stats.norm.ppf(q), equal_nan=True)
    z = np.r_[rng.normal(0, 5, 5000), [0.0, 40.0, -40.0, np.inf, np.nan]]
    assert np.array_equal(tails.norm_pdf(z), stats.norm.pdf(z), equal_nan=True)


def test_tests_and_comparisons_do_not_import_scipy_stats():
    code = ("import sys, numpy as np; from xlfuncs import VOLFIT, VOLTESTS, VOLCOMPARE; "
            "r = [[float(v)] for v in np.random.default_rng(5).standard_normal(400)]; "
            "f = VOLFIT(r, 'GARCH(1,1)'); t = VOLTESTS(r, f); c = VOLCOMPARE(r, 'GARCH(1,1);ARCH(1)'); "
            "print(all(not str(x[0][0]).startswith('ERROR') for x in (f, t, c)), 'scipy.stats' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert out == ["True", "False"]
