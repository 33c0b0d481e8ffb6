"""The few reference-law probabilities the tests, comparisons and backtests read, as SciPy's
distributions compute them, over scipy.special alone.

``scipy.stats`` costs 0.6-1.2 s CPU to import (it parses the docstrings of every distribution),
far more than a workbook's tests and comparisons take; each function here is the very expression
that SciPy's distribution evaluates inside its method (``chi2._sf``, ``t._sf``, ``norm._ppf``,
``norm._pdf``), so the numbers are SciPy's own, bit for bit (tests/test_tails.py compares them
with scipy.stats on grids).  The binomial distribution function stays with scipy.stats, whose
routine is not a public scipy.special function.
"""

from __future__ import annotations

import numpy as np

from ._lazy import special

__all__ = ["chi2_sf", "t_sf", "norm_ppf", "norm_pdf"]

_SQRT_2PI = np.sqrt(2 * np.pi)  # as scipy.stats writes it (_norm_pdf_C)


def chi2_sf(x, df):
    """P(X > x) for X chi-squared with ``df`` degrees of freedom (scipy.stats.chi2.sf); 1 at and
    below 0, nan for nan or df not above 0."""
    x, df = np.asarray(x, dtype=float), np.asarray(df, dtype=float)
    out = np.where(x <= 0.0, 1.0, special.chdtrc(df, np.maximum(x, 0.0)))
    out = np.where(np.isnan(x) | ~(df > 0), np.nan, out)
    return out[()] if out.ndim == 0 else out


def t_sf(x, df):
    """P(T > x) for Student's t with ``df`` degrees of freedom (scipy.stats.t.sf); nan for df not above 0."""
    x, df = np.asarray(x, dtype=float), np.asarray(df, dtype=float)
    out = np.where(df > 0, special.stdtr(df, -x), np.nan)
    return out[()] if out.ndim == 0 else out


def norm_ppf(q):
    """The standard normal quantile (scipy.stats.norm.ppf)."""
    return special.ndtri(q)


def norm_pdf(x):
    """The standard normal density (scipy.stats.norm.pdf)."""
    x = np.asarray(x, dtype=float)
    out = np.exp(-x ** 2 / 2.0) / _SQRT_2PI
    return out[()] if out.ndim == 0 else out
