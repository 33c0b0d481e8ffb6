"""Backtests of an expected-shortfall series: McNeil & Frey (2000) and Acerbi & Szekely (2014).

Inputs, row by row: the realised returns r[t], the VaR forecasts v[t] and the ES forecasts
s[t] (both losses, positive numbers) at confidence ``level``, alpha = 1 - level.  An exception
is a return below -v[t].

| test | statistic | p-value | reference |
| --- | --- | --- | --- |
| exceedance residuals | on the exceptions, x[t] = (-r[t] - s[t]) / sigma[t]; mean 0 if ES is right, positive if understated; t = mean / (sd / sqrt(k)), k exceptions | one-sided (mean > 0), bootstrap: resample the residuals less their mean 10,000 times, p = share of bootstrap t >= t | McNeil & Frey (2000), bootstrap test of Efron & Tibshirani (1993, ch. 16) |
| Z2 | Z2 = 1 + sum_t r[t] 1(r[t] < -v[t]) / (T alpha s[t]); 0 if ES is right, negative if understated | one-sided (Z2 below), from 2,000 samples of T returns simulated under the forecasts' own distribution | Acerbi & Szekely (2014) |

sigma[t] is the forecast volatility where the caller knows it (a walk-forward backtest of a
model, as in the paper); for a bare VaR and ES series it is s[t] - v[t], which under a
location-scale model with a fixed shape is sigma[t] times a constant, so the t statistic (and
its bootstrap p-value) are the same.  Acerbi & Szekely give approximate thresholds for Z2 in
their setting (alpha = 2.5%, 250 days): -0.70 at 5% and -1.8 at 0.01% (from memory); here the
p-value is simulated instead, for any level and length: under the fitted model's distribution
in a walk-forward backtest, and for a bare series under the normal distribution that matches
each row's VaR and ES exactly (mean m and sd d solving v = -(m + d q), s = -m + d phi(q)/alpha,
q the standard normal alpha-quantile), which satisfies the null hypothesis of both forecasts
being right; fatter tails than normal widen Z2's null distribution, so this p-value is then a
little small.  Every draw is seeded (:data:`SEED`), so the same inputs give the same p-values.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError, value_words
from .tails import norm_pdf, norm_ppf

__all__ = ["ESTests", "BOOTSTRAP", "SIMULATIONS", "SEED", "exceedance_residuals", "mcneil_frey", "z2_statistic",
           "z2_pvalue", "es_tests"]

BOOTSTRAP = 10_000  # bootstrap resamples of the exceedance residuals
SIMULATIONS = 2_000  # simulated samples for Z2's p-value
SEED = 20240531  # the seed of both (the forecasts' default seed)
_CHUNK = 2_000_000  # simulated numbers held in memory at once


@dataclass
class ESTests:
    exceptions: int
    mf_mean: float  # mean exceedance residual
    mf_t: float
    mf_p: float
    z2: float
    z2_p: float
    z2_null: str  # the distribution Z2's p-value was simulated under


def _check(r, v, s, level):
    r = np.asarray(r, dtype=float).ravel()
    v = np.asarray(v, dtype=float).ravel()
    s = np.asarray(s, dtype=float).ravel()
    if not (r.shape == v.shape == s.shape):
        raise InputError(f"returns, VaR and ES need one value per row each, got {r.size}, {v.size} and {s.size}")
    if r.size == 0:
        raise InputError("the ES tests need at least one forecast")
    if isinstance(level, bool) or not isinstance(level, (int, float)) or not 0.5 <= level < 1:
        raise InputError(f"level must be between 0.5 and 1, e.g. 0.99, got {value_words(level)}")
    for name, x in (("returns", r), ("VaR", v), ("ES", s)):
        if not np.all(np.isfinite(x)):
            raise InputError(f"{name} row {int(np.flatnonzero(~np.isfinite(x))[0]) + 1} is not a finite number")
    bad = np.flatnonzero(s < v)
    if bad.size:
        i = int(bad[0])
        raise InputError(f"ES row {i + 1} ({s[i]:.6g}) is below the VaR ({v[i]:.6g}); the expected shortfall "
                         f"is the mean loss beyond the VaR, so it is at least the VaR")
    bad = np.flatnonzero(s <= 0)
    if bad.size:
        raise InputError(f"ES row {int(bad[0]) + 1} is not a positive loss ({s[bad[0]]:.6g}); the ES tests need ES > 0")
    return r, v, s


def exceedance_residuals(returns, var, es, scale) -> np.ndarray:
    """(-r - ES) / scale on the rows where r < -VaR (McNeil & Frey 2000)."""
    r, v, s = (np.asarray(x, dtype=float).ravel() for x in (returns, var, es))
    sc = np.asarray(scale, dtype=float).ravel()
    hits = r < -v
    return (-r[hits] - s[hits]) / sc[hits]


def mcneil_frey(resid, boot: int = BOOTSTRAP, seed: int = SEED):
    """(mean, t, one-sided bootstrap p) of exceedance residuals; nan with fewer than two or no spread.

    The bootstrap test of a mean of Efron & Tibshirani (1993, Algorithm 16.2): resample the
    residuals less their mean, take the studentised mean of each resample, and count how often
    it reaches the observed t.
    """
    x = np.asarray(resid, dtype=float)
    k = x.size
    if k == 0:
        return math.nan, math.nan, math.nan
    m = float(x.mean())
    sd = float(x.std(ddof=1)) if k > 1 else 0.0
    if k < 2 or not sd > 1e-12 * max(1.0, abs(m)):
        return m, math.nan, math.nan
    t = m / (sd / math.sqrt(k))
    rng = np.random.default_rng(seed)
    c = x - m
    out = np.empty(boot)
    step = max(1, _CHUNK // k)
    for lo in range(0, boot, step):
        hi = min(boot, lo + step)
        xb = c[rng.integers(0, k, size=(hi - lo, k))]
        mb = xb.mean(axis=1)
        sb = xb.std(axis=1, ddof=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            tb = np.where(sb > 0, mb / (sb / math.sqrt(k)), np.sign(mb) * np.inf)
        out[lo:hi] = np.nan_to_num(tb, nan=0.0)
    return m, float(t), float(np.mean(out >= t))


def z2_statistic(returns, var, es, level) -> float:
    """Acerbi & Szekely's (2014) Z2 = 1 + sum r 1(r < -VaR) / (T alpha ES)."""
    r, v, s = _check(returns, var, es, level)
    alpha = 1.0 - level
    hits = r < -v
    return float(1.0 + np.sum(r[hits] / s[hits]) / (r.size * alpha))


def z2_pvalue(z2, mean, sd, es, level, ppf, sims: int = SIMULATIONS, seed: int = SEED) -> float:
    """P(Z2* <= z2) over ``sims`` samples of T returns r* = mean + sd z* drawn under the forecasts.

    Only the exceptions enter Z2, so only they are drawn.  Across the ``sims`` x T cells of the
    simulated samples the exceptions are independent with probability alpha each (the VaR being the
    model's own quantile), so the gaps between them, read row after row, are geometric with
    parameter alpha; each exception's uniform is then uniform below alpha, and its shock
    z* = ``ppf(u, rows)`` is the standardised shock's quantile at u for its row.  This draws about
    alpha x sims x T numbers instead of sims x T, with the same distribution.
    """
    mean, sd, s = (np.asarray(x, dtype=float).ravel() for x in (mean, sd, es))
    T = s.size
    alpha = 1.0 - level
    rng = np.random.default_rng(seed)
    below = 0
    step = max(1, int(_CHUNK / (T * alpha)))  # about _CHUNK exceptions a chunk
    for lo in range(0, sims, step):
        rows = min(sims, lo + step) - lo
        cells = rows * T
        pos = _bernoulli_positions(rng, cells, alpha)
        which, cols = np.divmod(pos, T)
        u = alpha * rng.random(pos.size)
        x = mean[cols] + sd[cols] * np.asarray(ppf(u, cols), dtype=float)
        total = np.bincount(which, weights=x / s[cols], minlength=rows)
        below += int(np.sum(1.0 + total / (T * alpha) <= z2))
    return below / sims


def _bernoulli_positions(rng, cells: int, p: float) -> np.ndarray:
    """The positions, in 0..cells-1, of the successes of ``cells`` independent Bernoulli(p) trials,
    from geometric gaps (the number of trials up to and including each success)."""
    if p >= 1.0:
        return np.arange(cells)
    mean = cells * p
    pos = np.empty(0, dtype=np.int64)
    last = -1
    while True:
        need = int(mean + 8.0 * math.sqrt(mean + 1.0)) + 16
        gaps = rng.geometric(p, size=need)
        more = last + np.cumsum(gaps)
        pos = np.concatenate([pos, more[more < cells]])
        if more[-1] >= cells:
            return pos
        last = int(more[-1])


def _matched_normal(var, es, level):
    """Mean and sd of the normal whose VaR and ES at ``level`` are exactly ``var`` and ``es``."""
    alpha = 1.0 - level
    q = float(norm_ppf(alpha))
    es_z = float(norm_pdf(q)) / alpha
    sd = (es - var) / (es_z + q)
    return -var - sd * q, sd


def es_tests(returns, var, es, level, *, mean=None, sd=None, dist=None, eta=None,
             boot: int = BOOTSTRAP, sims: int = SIMULATIONS, seed: int = SEED) -> ESTests:
    """Both tests on one series.

    With ``dist`` (a :class:`~xlfuncs.core.distributions.Distribution`), ``mean``, ``sd`` (the
    forecasts' mean and volatility, one per row) and ``eta`` (its shape parameters, one row per
    forecast, or one row for all), the exceedance residuals are standardised by ``sd`` and Z2's
    p-value is simulated under that distribution.  Without them, the residuals are scaled by
    ES - VaR and Z2 is simulated under the normal matched to each row's VaR and ES.
    """
    r, v, s = _check(returns, var, es, level)
    T = r.size
    if dist is None:
        scale = s - v
        m, d = _matched_normal(v, s, level)
        if not np.all(d > 0):
            i = int(np.flatnonzero(~(d > 0))[0])
            raise InputError(f"ES row {i + 1} equals the VaR; the ES tests need ES above the VaR")

        def ppf(u, cols):
            return norm_ppf(u)

        null = "normal matched to each row's VaR and ES"
    else:
        m = np.asarray(mean, dtype=float).ravel()
        d = np.asarray(sd, dtype=float).ravel()
        if m.shape != r.shape or d.shape != r.shape:
            raise InputError("mean and sd need one value per forecast")
        scale = d
        E = np.asarray(eta if eta is not None else np.empty((1, 0)), dtype=float)
        E = E.reshape(-1, len(dist.param_names)) if E.size else np.empty((1, 0))
        if E.shape[0] == 1:
            E = np.repeat(E, T, axis=0)
        if E.shape[0] != T:
            raise InputError(f"eta needs one row of shape parameters per forecast or one for all, got {E.shape[0]} rows")
        # the rows that share shape parameters (all of them for a fit that is not re-estimated)
        keys, group = np.unique(E, axis=0, return_inverse=True) if E.shape[1] else (np.empty((1, 0)), np.zeros(T, int))
        group = np.asarray(group).ravel()

        def ppf(u, cols):
            z = np.empty(u.size)
            g = group[cols]
            order = np.argsort(g, kind="stable")
            present, starts = np.unique(g[order], return_index=True)
            for k, lo, hi in zip(present, starts, np.r_[starts[1:], u.size]):
                sel = order[lo:hi]
                z[sel] = dist.ppf(u[sel], keys[k])
            return z

        null = f"fitted {dist.name} distribution"
    resid = exceedance_residuals(r, v, s, scale)
    mf_mean, mf_t, mf_p = mcneil_frey(resid, boot, seed)
    z2 = z2_statistic(r, v, s, level)
    z2_p = z2_pvalue(z2, m, d, s, level, ppf, sims, seed)
    return ESTests(int(resid.size), mf_mean, mf_t, mf_p, z2, z2_p, null)
