"""Batch speed: 1,000 series of 1,000 observations, GARCH(1,1)-t, with 1 and 2 worker processes
measured in one run; prints the times and the scaling ratio.  Target: at most 15 s, and
near-linear scaling from 1 to 2 workers.

    python benchmarks/batch_speed.py [--series 1000] [--obs 1000]
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402

from xlfuncs.batch import run_batch  # noqa: E402
from xlfuncs.core import get_distribution, parse_model  # noqa: E402
from xlfuncs.core.simulate import simulate  # noqa: E402


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--series", type=int, default=1000)
    ap.add_argument("--obs", type=int, default=1000)
    args = ap.parse_args(argv)
    sims = simulate(parse_model("GARCH(1,1)"), get_distribution("t"), np.array([0.02, 0.05, 0.08, 0.9, 6.0]),
                    args.obs, args.series, rng=np.random.default_rng(1))
    panel = {f"S{i:04d}": sims[:, i] for i in range(args.series)}
    times = {}
    for workers in (1, 2):
        t0 = time.perf_counter()
        rows = run_batch(panel, "GARCH(1,1)", "t", workers=workers)
        times[workers] = time.perf_counter() - t0
        failed = len({r[0] for r in rows if r[1] == "error"})
        print(f"{workers} worker{'s' if workers > 1 else ''}: {times[workers]:7.2f} s "
              f"({1e3 * times[workers] / args.series:.1f} ms a series, {failed} failed)")
    print(f"scaling 1 -> 2 workers: {times[1] / times[2]:.2f}x   (near-linear is 2x)   "
          f"2-worker time {times[2]:.1f} s (target <= 15 s)")


if __name__ == "__main__":
    main()
