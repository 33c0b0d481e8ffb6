"""CPU time of `volcast refresh` on the demo data, beside a baseline source tree in the same run.

Two refreshes, each a fresh process (start-up, reading, the recalculation, the estimate history,
writing the workbook and its values copy), CPU time of the child (one BLAS thread):

* daily: the empty daily template loaded with the commodity basket's 2,609 daily levels
  (``--accept-jumps``: its one day of -11.5 %, see demo_data/README.md);
* monthly: the monthly demo book (built once here from the equity history) refreshed with next
  month's level (``equity_new_levels.csv``), the monthly job itself.

With ``--baseline TREE`` (a source tree, e.g. a worktree of the previous commit) the same commands
run from that tree too, interleaved round by round, and the ratio new / baseline is printed (a
ratio measured side by side, since this machine's CPU times drift by tens of percent between runs).

    python benchmarks/refresh_speed.py [--rounds 3] [--baseline /tmp/old_tree]
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _installed import ROOT, child_env  # noqa: E402

DEMO = ROOT / "demo_data"


def _cpu(args, tree: Path, cwd: Path) -> float:
    env = child_env(tree, PYTHONPATH=str(tree), OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run([sys.executable, "-m", "xlfuncs.cli"] + args, check=True, capture_output=True, text=True,
                   env=env, cwd=cwd, timeout=600)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--baseline", help="another source tree run beside this one")
    args = ap.parse_args(argv)
    trees = {"this": ROOT}
    if args.baseline:
        trees["baseline"] = Path(args.baseline).resolve()
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        _cpu(["template", "daily", "-o", str(d / "daily.xlsx")], ROOT, d)
        _cpu(["template", "monthly", "-o", str(d / "monthly.xlsx")], ROOT, d)
        _cpu(["refresh", str(d / "monthly.xlsx"), "--data", str(DEMO / "equity_history.csv"), "-o",
              str(d / "book.xlsx")], ROOT, d)
        jobs = {
            "daily first load (2,609 levels)": ["refresh", str(d / "daily.xlsx"), "--data",
                                                str(DEMO / "commodity_basket_daily.csv"), "--accept-jumps"],
            "monthly refresh (one new month)": ["refresh", str(d / "book.xlsx"), "--data",
                                                str(DEMO / "equity_new_levels.csv")],
        }
        for name in trees.values():  # numba's cache and the bytecode of each tree, before measuring
            for job, cmd in jobs.items():
                _cpu(cmd + ["-o", str(d / "warm.xlsx")], name, d)
        times = {(job, t): [] for job in jobs for t in trees}
        for i in range(args.rounds):
            for job, cmd in jobs.items():
                for t, tree in trees.items():
                    times[(job, t)].append(_cpu(cmd + ["-o", str(d / f"out_{t}_{i}.xlsx")], tree, d))
    for job in jobs:
        this = statistics.median(times[(job, "this")])
        line = f"{job}: {this:.2f} s CPU (median of {args.rounds})"
        if "baseline" in trees:
            base = statistics.median(times[(job, "baseline")])
            ratios = [a / b for a, b in zip(times[(job, "this")], times[(job, "baseline")])]
            line += (f"; baseline {base:.2f} s; ratio {this / base:.2f} (per round "
                     f"{', '.join(f'{x:.2f}' for x in ratios)})")
        print(line, flush=True)


if __name__ == "__main__":
    main()
