"""What a user measures: ``volcast batch`` as a command on a CSV panel of 1,000 series of 1,000
observations (GARCH(1,1) with t shocks, the README's figure), start-up, reading, fitting and writing
included.  Prints, for 1 and 2 worker processes run one after the other, the wall-clock time and the
CPU time of the command and its worker processes (the fair figure on a machine other work shares),
and the machine it ran on.

    python benchmarks/batch_command_speed.py [--series 1000] [--obs 1000]
"""

from __future__ import annotations

import argparse
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.simulate import simulate


def _cpu_model() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine()


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--series", type=int, default=1000)
    ap.add_argument("--obs", type=int, default=1000)
    args = ap.parse_args(argv)
    sims = simulate(parse_model("GARCH(1,1)"), get_distribution("t"), np.array([0.02, 0.05, 0.08, 0.9, 6.0]),
                    args.obs, args.series, rng=np.random.default_rng(1))
    print(f"machine: {_cpu_model()}, {os.cpu_count()} logical cores, Python {platform.python_version()}; "
          f"load average before: {' '.join(f'{x:.1f}' for x in os.getloadavg())}")
    with tempfile.TemporaryDirectory() as tmp:
        panel = Path(tmp) / "panel.csv"
        header = ",".join(f"S{i:04d}" for i in range(args.series))
        np.savetxt(panel, sims, delimiter=",", header=header, comments="", fmt="%.6f")
        for workers in (1, 2):
            cmd = [sys.executable, "-m", "xlfuncs.cli", "batch", str(panel), "--dist", "t", "--workers", str(workers),
                   "-o", str(Path(tmp) / f"out{workers}.csv")]
            before = resource.getrusage(resource.RUSAGE_CHILDREN)
            t0 = time.perf_counter()
            done = subprocess.run(cmd, capture_output=True, text=True)
            wall = time.perf_counter() - t0
            after = resource.getrusage(resource.RUSAGE_CHILDREN)
            cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
            print(f"volcast batch panel.csv --dist t --workers {workers} -o out.csv: exit {done.returncode}, "
                  f"wall {wall:.1f} s, CPU {cpu:.1f} s ({1e3 * cpu / args.series:.1f} ms of CPU a series)")
            if done.returncode:
                print(done.stderr.strip())
    print(f"load average after: {' '.join(f'{x:.1f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
