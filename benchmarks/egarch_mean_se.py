"""Standard error of EGARCH's mean: the closed-form Hessian against differences of the gradient.

EGARCH's news |z| kinks the log-likelihood along the mean parameters wherever a residual crosses
zero.  The closed-form Hessian holds between the kinks; a difference of the analytic gradient
over a step catches the kinks of the residuals within the step, each a jump of the slope divided
by the step.  Those jumps are weighted by a later variance's score, whose mean is zero given the
past, so leaving them out (the closed form) or averaging over many of them (a step of one
standard error) estimates the same information, while a step that catches a few scatters it.

For ``--samples`` seeded simulations of EGARCH(1,1)-t (mu 0.02, omega 0.01, alpha 0.15, gamma
-0.06, beta 0.96, nu 7; egarch_speed.py's series, seeds from 100) of ``--n`` returns, each fit's
standard error of mu (Hessian and robust kinds) with the Hessian's mu column taken as:

  reported     what fit() reports (default robust; its Hessian kind alongside)
  closed       the closed form, between the kinks
  wide         Richardson differences at 100 and 50 times the estimator's step (the route the
               standard errors took before: it catches the kinks of residuals within the step)
  1 SE         central differences over one standard error (the outer product's)

and beside them the standard deviation of the estimates of mu across the samples (the sampling
spread the standard errors estimate; common practice).  Printed: the median standard error,
its spread across samples and its largest value.

    python benchmarks/egarch_mean_se.py [--n 2500] [--samples 300]
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import argparse  # noqa: E402
import math  # noqa: E402
import sys  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=2500)
    ap.add_argument("--samples", type=int, default=300)
    args = ap.parse_args(argv)

    from egarch_speed import series

    from xlfuncs.core import estimate
    from xlfuncs.core.estimate import fit

    seen = {}
    real = estimate._std_errors

    def spy(problem, u, H, active, kind):  # keep the estimator's problem and estimate
        seen["at"] = (problem, u.copy())
        return real(problem, u, H, active, kind)

    estimate._std_errors = spy
    rows = []
    for seed in range(100, 100 + args.samples):
        r = series(args.n, seed)
        f = fit(r, "EGARCH(1,1)", "t")
        hes = fit(r, "EGARCH(1,1)", "t", "se=hessian").std_errors[0]
        problem, u = seen["at"]
        _, G, closed = problem.second(u)
        B = G.T @ G

        def se_mu(H):
            try:
                Hinv = np.linalg.inv(-H)
            except np.linalg.LinAlgError:
                return math.nan, math.nan
            a, b = Hinv[0, 0], (Hinv @ B @ Hinv)[0, 0]
            return (math.sqrt(a) if a > 0 else math.nan), (math.sqrt(b) if b > 0 else math.nan)

        def with_column(col):
            H = closed.copy()
            H[:, 0] = col
            H[0, :] = col
            return H

        def central(h):
            up, dn = u.copy(), u.copy()
            up[0] += h
            dn[0] -= h
            return (-problem.fun_grad(up)[1] + problem.fun_grad(dn)[1]) / (2 * h)

        s = 50.0 * problem.steps[0]
        wide = (4.0 * central(s) - central(2 * s)) / 3.0
        one = central(math.sqrt(np.linalg.inv(B)[0, 0]))
        row = [f.params[0], hes, f.std_errors[0]]
        for H in (closed, with_column(wide), with_column(one)):
            row += se_mu(H)
        rows.append(row)
    estimate._std_errors = real
    a = np.array(rows)
    m = len(a)
    sd = a[:, 0].std(ddof=1)
    print(f"EGARCH(1,1)-t, n = {args.n:,}, {m} samples: sd of the estimates of mu {sd:.5f} "
          f"(its own Monte Carlo error {sd / math.sqrt(2 * (m - 1)):.5f})")
    print(f"  {'column':10s} {'kind':8s} {'median SE':>10s} {'spread':>9s} {'largest':>9s} {'not PD':>7s}")
    for i, name in enumerate(("reported", "closed", "wide", "1 SE")):
        for j, kind in enumerate(("hessian", "robust")):
            v = a[:, 1 + 2 * i + j]
            print(f"  {name:10s} {kind:8s} {np.nanmedian(v):10.5f} {np.nanstd(v):9.5f} {np.nanmax(v):9.5f} "
                  f"{int(np.isnan(v).sum()):7d}")


if __name__ == "__main__":
    main()
