"""Equal forecast accuracy: the Diebold & Mariano (1995) test with the Harvey, Leybourne &
Newbold (1997) small-sample correction.

For two series of forecast losses a[t] and b[t] (e.g. the QLIKE losses of two models'
one-step variance forecasts of the same returns), d[t] = a[t] - b[t], n pairs:

| quantity | formula | reference |
| --- | --- | --- |
| mean_diff | dbar = (1/n) sum d[t] | |
| long-run variance | f = g0 + 2 sum_{k=1..L} (1 - k/(L+1)) g_k, g_k = (1/n) sum_{t>k} (d[t]-dbar)(d[t-k]-dbar) | Newey & West (1987), Bartlett weights |
| DM | dbar / sqrt(f / n) | Diebold & Mariano (1995) |
| statistic | DM * sqrt((n + 1 - 2h + h(h-1)/n) / n), h = L + 1 | Harvey, Leybourne & Newbold (1997) |
| p_value | two-sided, Student t with n - 1 degrees of freedom | Harvey, Leybourne & Newbold (1997) |

The correction is HLN's for h-step forecasts, whose loss differences are autocorrelated up
to lag h - 1; it is applied with h = L + 1, i.e. reading the lags as the horizon less one
(for one-step losses with L = 0 the factor is sqrt((n - 1)/n)).  With no lags given,
L = floor(4 (n/100)^(2/9)), the rule of thumb of Newey & West (1994) (common practice), which
allows for the autocorrelation one-step losses of volatility forecasts often keep.

A positive statistic says the first series' losses are larger: the second forecast is the
better one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError, value_words
from .tails import t_sf

__all__ = ["DieboldMariano", "diebold_mariano", "default_lags", "max_lags", "MIN_PAIRS"]

MIN_PAIRS = 10  # fewest pairs of losses accepted (a practical floor, not a recommendation)


@dataclass
class DieboldMariano:
    mean_diff: float  # mean of a - b
    statistic: float  # HLN-corrected DM statistic (nan when the differences do not vary)
    p_value: float  # two-sided, t(n - 1)
    lags: int
    pairs: int
    dm: float  # the uncorrected DM statistic
    long_run_variance: float


def default_lags(n: int) -> int:
    """floor(4 (n/100)^(2/9)) (Newey & West 1994; common practice), within :func:`max_lags`."""
    return int(min(math.floor(4.0 * (n / 100.0) ** (2.0 / 9.0)), max_lags(n)))


def max_lags(n: int) -> int:
    """The most lags accepted for n pairs: n // 2 - 1 (keeps the HLN factor positive)."""
    return max(0, int(n) // 2 - 1)


def long_run_variance(d, lags: int) -> float:
    """Newey-West (1987) long-run variance of d: Bartlett weights 1 - k/(lags + 1), autocovariances over n."""
    d = np.asarray(d, dtype=float)
    n = len(d)
    c = d - d.mean()
    f = float(c @ c) / n
    for k in range(1, lags + 1):
        f += 2.0 * (1.0 - k / (lags + 1.0)) * float(c[k:] @ c[:-k]) / n
    return f


def diebold_mariano(a, b, lags=None) -> DieboldMariano:
    """The Diebold-Mariano test of equal mean loss of ``a`` and ``b`` (module docstring)."""
    a = np.asarray(a, dtype=float).ravel()
    b = np.asarray(b, dtype=float).ravel()
    if a.shape != b.shape:
        raise InputError(f"the two loss series must have one value per period each, got {a.size} and {b.size}")
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
        raise InputError("the losses must be finite numbers")
    n = a.size
    if n < MIN_PAIRS:
        raise InputError(f"the Diebold-Mariano test needs at least {MIN_PAIRS} pairs of losses, got {n}")
    hi = max_lags(n)
    if lags is None:
        L = default_lags(n)
    else:
        if isinstance(lags, bool) or not isinstance(lags, (int, np.integer)) or not 0 <= lags <= hi:
            raise InputError(f"lags must be a whole number from 0 to {hi} for {n} pairs, got {value_words(lags)}")
        L = int(lags)
    d = a - b
    dbar = float(d.mean())
    f = long_run_variance(d, L)
    scale = float(np.max(np.abs(d))) if n else 0.0
    if not f > 1e-24 * max(scale * scale, 1e-300):
        return DieboldMariano(dbar, math.nan, math.nan, L, n, math.nan, f)
    dm = dbar / math.sqrt(f / n)
    h = L + 1
    stat = dm * math.sqrt((n + 1 - 2 * h + h * (h - 1) / n) / n)
    p = float(2.0 * t_sf(abs(stat), n - 1))
    return DieboldMariano(dbar, float(stat), p, L, n, float(dm), f)
