"""Coverage tests of a Value-at-Risk series, the traffic-light zone, and the news-impact curve.

| test | statistic | reference |
| --- | --- | --- |
| unconditional coverage | LR_uc = -2 ln[(1-p)^(n-x) p^x] + 2 ln[(1-x/n)^(n-x) (x/n)^x], chi2(1) | Kupiec (1995) |
| independence | LR_ind from the first-order Markov hit transitions n00, n01, n10, n11, chi2(1) | Christoffersen (1998) |
| conditional coverage | LR_cc = LR_uc + LR_ind, chi2(2) | Christoffersen (1998) |
| zone | green while P(X <= x) < 95 %, yellow while < 99.99 %, else red, X ~ Binomial(n, p) | Basel Committee (1996) |

With 250 forecasts at 99 % the zones are green 0-4, yellow 5-9 and red 10 or more exceptions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._lazy import lazy_module

stats = lazy_module("scipy.stats")  # the binomial distribution function (zone)
from .errors import InputError, value_words
from .tails import chi2_sf

__all__ = ["Coverage", "coverage", "kupiec", "christoffersen", "zone", "news_impact"]


def _xlogy(x, y):
    return 0.0 if x == 0 else x * math.log(y)


def kupiec(n: int, x: int, p: float):
    """(LR_uc, p-value) for x exceptions in n forecasts at exception probability p."""
    if n <= 0:
        raise InputError("coverage needs at least one forecast")
    phat = x / n
    lr = -2.0 * (_xlogy(n - x, 1 - p) + _xlogy(x, p)) + 2.0 * (_xlogy(n - x, 1 - phat) + _xlogy(x, phat))
    lr = lr if lr > 0 else 0.0  # rounding can leave -0.0
    return lr, float(chi2_sf(lr, 1))


def christoffersen(hits):
    """(LR_ind, p_ind) from the hit sequence's transition counts."""
    h = np.asarray(hits, dtype=int)
    a, b = h[:-1], h[1:]
    n00 = int(np.sum((a == 0) & (b == 0)))
    n01 = int(np.sum((a == 0) & (b == 1)))
    n10 = int(np.sum((a == 1) & (b == 0)))
    n11 = int(np.sum((a == 1) & (b == 1)))
    tot = n00 + n01 + n10 + n11
    if tot == 0:
        return math.nan, math.nan
    pi = (n01 + n11) / tot
    pi01 = n01 / (n00 + n01) if n00 + n01 else 0.0
    pi11 = n11 / (n10 + n11) if n10 + n11 else 0.0
    l0 = _xlogy(n00 + n10, 1 - pi) + _xlogy(n01 + n11, pi)
    l1 = _xlogy(n00, 1 - pi01) + _xlogy(n01, pi01) + _xlogy(n10, 1 - pi11) + _xlogy(n11, pi11)
    lr = -2.0 * (l0 - l1)
    lr = lr if lr > 0 else 0.0
    return lr, float(chi2_sf(lr, 1))


def zone(n: int, x: int, p: float) -> str:
    cdf = float(stats.binom.cdf(x, n, p))
    if cdf < 0.95:
        return "green"
    if cdf < 0.9999:
        return "yellow"
    return "red"


@dataclass
class Coverage:
    forecasts: int
    exceptions: int
    rate: float
    expected_rate: float
    lr_uc: float
    p_uc: float
    lr_ind: float
    p_ind: float
    lr_cc: float
    p_cc: float
    zone: str


def coverage(returns, var, level: float) -> Coverage:
    """Coverage of a VaR series (losses positive) against the realised returns, row by row.
    An exception is a return below minus the VaR."""
    if not (isinstance(level, (int, float)) and 0.5 <= level < 1):
        raise InputError(f"level must be between 0.5 and 1, e.g. 0.99, got {value_words(level)}")
    r = np.asarray(returns, dtype=float)
    v = np.asarray(var, dtype=float)
    if r.shape != v.shape:
        raise InputError(f"returns and var must have one value per row each, got {r.size} and {v.size}")
    hits = (r < -v).astype(int)
    n, x = len(hits), int(hits.sum())
    p = round(1.0 - level, 12)
    lr_uc, p_uc = kupiec(n, x, p)
    lr_ind, p_ind = christoffersen(hits)
    lr_cc = lr_uc + lr_ind
    p_cc = float(chi2_sf(lr_cc, 2)) if math.isfinite(lr_cc) else math.nan
    return Coverage(n, x, x / n, p, lr_uc, p_uc, lr_ind, p_ind, lr_cc, p_cc, zone(n, x, p))


def news_impact(fit, shocks) -> np.ndarray:
    """Next-period variance as a function of this period's shock e, with the lagged variance at
    its unconditional level (Engle & Ng 1993); the other lagged shocks are at their expectation.
    Each variance family computes its own curve (``news_impact`` of :mod:`xlfuncs.core.families`)."""
    spec, dist = fit.spec, fit.dist
    d = dict(zip(fit.names, fit.params))
    fam = spec.family
    vp = np.array([d[n] for n in fam.param_names], dtype=float)
    eta = np.array([d[n] for n in dist.param_names], dtype=float)
    return fam.news_impact(vp, eta, dist, np.asarray(shocks, dtype=float))
