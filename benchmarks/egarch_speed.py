"""EGARCH(1,1)-t estimation time against GARCH(1,1)-t on the same returns, side by side.

Series: seeded simulations of an EGARCH(1,1) with Student-t shocks (mu 0.02, omega 0.01, alpha
0.15, gamma -0.06, beta 0.96, nu 7) at n = 2,500 and n = 20,000.  Contenders, interleaved in one
process and each run many times (CPU time, one BLAS thread):

  garch      fit(r, "GARCH(1,1)", "t"): estimation and robust standard errors
  egarch     fit(r, "EGARCH(1,1)", "t"): the same, through the compiled log-variance loop

Prints the median times and the ratio egarch / garch per n (target: <= 3), then, each in a
fresh process: the first call's cost (importing numba and loading the compiled loops from its
cache, and compiling them with an empty cache), the same EGARCH fit with the plain-Python
loops (``VOLCAST_NO_JIT=1``), and the wall time of ``volcast demo``, whose template compares
EGARCH candidates in VOLCOMPARE.

    python benchmarks/egarch_speed.py [--rounds 15] [--no-fallback] [--no-demo]
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
PARAMS = [0.02, 0.01, 0.15, -0.06, 0.96, 7.0]


def series(n: int, seed: int = 7) -> np.ndarray:
    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.core.simulate import simulate

    return simulate(parse_model("EGARCH(1,1)"), get_distribution("t"), np.array(PARAMS), n,
                    rng=np.random.default_rng(seed))[:, 0]


def cpu(fn) -> float:
    t0 = time.process_time()
    fn()
    return time.process_time() - t0


def child(code: str, env: dict | None = None) -> str:
    """Run ``code`` in a fresh interpreter with this checkout first on the path; its stdout."""
    from _installed import child_env  # the bytecode, as an installed copy loads it

    full = child_env(PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""), **(env or {}))
    out = subprocess.run([sys.executable, "-c", code], env=full, capture_output=True, text=True, check=True)
    return out.stdout.strip()


_FIRST = """
import time
t0 = time.process_time()
import numpy as np
from xlfuncs.core.estimate import fit
from xlfuncs.core.families._compiled import jit_state
r = np.random.default_rng(1).standard_normal(500)
t1 = time.process_time()
fit(r, "EGARCH(1,1)", "t")
t2 = time.process_time()
fit(r * 1.1, "EGARCH(1,1)", "t")
t3 = time.process_time()
print(f"{t2 - t1:.3f} {t3 - t2:.3f} {jit_state()}")
"""

_ONE_FIT = """
import time, numpy as np
import sys
sys.path.insert(0, {bench!r})
from egarch_speed import series
from xlfuncs.core.estimate import fit
r = series({n})
fit(r[:300], "EGARCH(1,1)", "t")
t0 = time.process_time()
f = fit(r, "EGARCH(1,1)", "t")
print(f"{{time.process_time() - t0:.3f}} {{f.loglik:.10f}}")
"""


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=15)
    ap.add_argument("--no-fallback", action="store_true", help="skip the plain-Python fit")
    ap.add_argument("--no-demo", action="store_true", help="skip volcast demo")
    args = ap.parse_args(argv)

    from xlfuncs.core.estimate import fit
    from xlfuncs.core.families._compiled import jit_state

    print(f"kernels: {jit_state()}")
    print(f"{'n':>7} {'GARCH(1,1)-t':>14} {'EGARCH(1,1)-t':>14} {'ratio':>7}   (median CPU s, {args.rounds} interleaved rounds)")
    fits = {}
    for n in (2500, 20000):
        r = series(n)
        fit(r[:300], "EGARCH(1,1)", "t")  # the first call's cost is reported below, not here
        tg, te = [], []
        for _ in range(args.rounds):
            tg.append(cpu(lambda: fits.__setitem__(("garch", n), fit(r, "GARCH(1,1)", "t"))))
            te.append(cpu(lambda: fits.__setitem__(("egarch", n), fit(r, "EGARCH(1,1)", "t"))))
        mg, me = statistics.median(tg), statistics.median(te)
        print(f"{n:>7,} {mg:>14.4f} {me:>14.4f} {me / mg:>7.2f}")
    for n in (2500, 20000):
        f = fits[("egarch", n)]
        print(f"  EGARCH(1,1)-t at n = {n:,}: loglik {f.loglik:.6f}, converged {f.converged} ({f.message})")

    print("\nfirst call in a fresh process (CPU s: first EGARCH fit on 500 returns, a second one)")
    warm = child(_FIRST).split(" ", 2)
    print(f"  numba cache warm:  first {warm[0]}  second {warm[1]}  [{warm[2]}]")
    with tempfile.TemporaryDirectory() as tmp:
        cold = child(_FIRST, {"NUMBA_CACHE_DIR": tmp, "NUMBA_CACHE_LOCATOR_CLASSES": "UserProvidedCacheLocator"}).split(" ", 2)
    print(f"  numba cache empty: first {cold[0]}  second {cold[1]}  (compiles the loops once, then cached)")
    imp = child("import time; t = time.process_time(); import numba; print(f'{time.process_time() - t:.3f}')")
    print(f"  of which importing numba: {imp}")
    cli = child("import time; t = time.process_time(); import xlfuncs.cli; print(f'{time.process_time() - t:.3f}')")
    print(f"  import xlfuncs.cli (must not load numba): {cli}")

    if not args.no_fallback:
        print("\nplain-Python loops (VOLCAST_NO_JIT=1), one fit in a fresh process (CPU s)")
        bench = str(Path(__file__).resolve().parent)
        for n in (2500,):
            jit = child(_ONE_FIT.format(bench=bench, n=n)).split()
            plain = child(_ONE_FIT.format(bench=bench, n=n), {"VOLCAST_NO_JIT": "1"}).split()
            print(f"  n = {n:,}: compiled {jit[0]}, plain Python {plain[0]} ({float(plain[0]) / float(jit[0]):.0f}x); "
                  f"logliks {jit[1]} and {plain[1]}")

    if not args.no_demo:
        with tempfile.TemporaryDirectory() as tmp:
            from _installed import child_env

            env = child_env(PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-m", "xlfuncs.cli", "demo", "--out", tmp], env=env, check=True,
                           capture_output=True)
            print(f"\nvolcast demo: {time.perf_counter() - t0:.2f} s wall")
    return 0


if __name__ == "__main__":
    sys.exit(main())
