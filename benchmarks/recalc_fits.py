"""`volcast recalc` on a workbook of 20 fits over 20 x 2,500 returns, beside its start-up and its fits.

The workbook (built here with openpyxl): a Data sheet with 20 columns of simulated price levels
(GARCH(1,1)-t returns), the returns beside them either as the templates' formula
=IF(OR(A3="",A2=""),"",LN(A3/A2)*100) (``formulas``) or as stored numbers (``values``), and a
Model sheet with one VOLFIT (GARCH(1,1), t) per column.  Measured in one run, interleaved, as CPU
time of a child process (one BLAS thread):

* recalc: ``volcast recalc BOOK -o OUT`` (a fresh process: start-up, reading, the engine, the
  fits, writing);
* start-up: ``volcast --help`` (the command line's imports);
* fits: the same 20 VOLFIT calls on the same returns, in a fresh process, minus that process's
  start-up (the fits' own time).

Target (issue 12): recalc <= 1.5 x (start-up + the fits' own time).  Also printed: the ratio to
(core_import + the fits' own time), where core_import is the import of the worksheet functions
(NumPy, SciPy and the estimation core) in a fresh process beyond Python's own start: a
recalculation of fits cannot avoid it, and ``volcast --help`` does not pay it, so this second
ratio says how far the recalculation is from its floor (importing, then fitting).

    python benchmarks/recalc_fits.py [--repeat 3] [--returns formulas|values|both]
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

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _installed import child_env  # noqa: E402  (children load the bytecode, as an installed copy does)

N, K = 2500, 20
RETURN_FORMULA = '=IF(OR({c}{r}="",{c}{p}=""),"",LN({c}{r}/{c}{p})*100)'


def _col(j: int) -> str:
    s = ""
    j += 1
    while j:
        j, m = divmod(j - 1, 26)
        s = chr(65 + m) + s
    return s


def series(k: int = K, n: int = N):
    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.core.simulate import simulate

    r = simulate(parse_model("GARCH(1,1)"), get_distribution("t"), np.array([0.03, 0.02, 0.07, 0.9, 6.0]), n,
                 paths=k, rng=np.random.default_rng(12))
    return np.round(r, 10)


def build(path: Path, returns: str, k: int = K, n: int = N):
    """The workbook: levels in columns 1..k, returns in k+1..2k (formulas or numbers), one VOLFIT each."""
    import openpyxl

    r = series(k, n)
    levels = 100 * np.exp(np.cumsum(np.vstack([np.zeros(k), r]) / 100, axis=0))
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    for j in range(k):
        ws.cell(1, j + 1, f"level{j + 1}")
        ws.cell(1, k + j + 1, f"return{j + 1}")
        lc = _col(j)
        for i in range(n + 1):
            row = i + 2
            ws.cell(row, j + 1, float(levels[i, j]))
            if i:
                if returns == "formulas":
                    ws.cell(row, k + j + 1, RETURN_FORMULA.format(c=lc, r=row, p=row - 1))
                else:
                    ws.cell(row, k + j + 1, float(np.log(levels[i, j] / levels[i - 1, j]) * 100))
    m = wb.create_sheet("Model")
    for j in range(k):
        rc = _col(k + j)
        m.cell(1, 1 + 6 * j, f"=VOLFIT(Data!{rc}3:{rc}{n + 2}, \"GARCH(1,1)\", \"t\")")
    wb.save(path)


_FITS = """
import sys, time, openpyxl
t0 = time.process_time()
from xlfuncs.sheet import VOLFIT
wb = openpyxl.load_workbook(sys.argv[1], data_only=False)
ws = wb["Data"]
k = {k}
cols = []
import math
for j in range(k):
    lv = [ws.cell(i, j + 1).value for i in range(2, ws.max_row + 1)]
    cols.append([[math.log(lv[i] / lv[i - 1]) * 100] for i in range(1, len(lv))])
t1 = time.process_time()
for c in cols:
    out = VOLFIT(c, "GARCH(1,1)", "t")
    assert not str(out[0][0]).startswith("ERROR"), out
print(time.process_time() - t1)
"""


def _child_cpu(cmd, tree=None) -> tuple:
    if tree is not None:  # another source tree (the baseline) first on the path
        env = child_env(tree, PYTHONPATH=str(tree))
    else:
        env = child_env()
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    # run outside any source tree, so that the path (not the working directory) says which code runs
    out = subprocess.run(cmd, check=True, capture_output=True, text=True, timeout=1200, env=env,
                         cwd=tempfile.gettempdir())
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime), out.stdout


def _volcast():
    return [sys.executable, "-m", "xlfuncs.cli"]


def measure(returns: str = "formulas", repeat: int = 3, k: int = K, n: int = N, baseline=None) -> dict:
    """Median CPU seconds of recalc, start-up and the fits' own time, interleaved; and the ratio.

    With ``baseline`` (a source tree, such as the main checkout), its ``volcast recalc`` of the same
    workbook is measured interleaved too (``before``), and so is the import of the worksheet
    functions (``core_import``: NumPy, SciPy and the estimation core, which a recalculation of
    fits cannot avoid and neither start-up nor the fits' own time include)."""
    env_py = sys.executable
    with tempfile.TemporaryDirectory() as d:
        src = Path(d) / f"fits_{returns}.xlsx"
        build(src, returns, k, n)
        rec, start, fits, before, core = [], [], [], [], []
        for i in range(repeat):
            rec.append(_child_cpu(_volcast() + ["recalc", str(src), "-o", str(Path(d) / f"out{i}.xlsx")])[0])
            if baseline is not None:
                before.append(_child_cpu(_volcast() + ["recalc", str(src), "-o", str(Path(d) / f"base{i}.xlsx")],
                                         tree=baseline)[0])
            start.append(_child_cpu(_volcast() + ["--help"])[0])
            fits.append(float(_child_cpu([env_py, "-c", _FITS.format(k=k), str(src)])[1].strip()))
            core.append(_child_cpu([env_py, "-c", "import xlfuncs.sheet"])[0] - _child_cpu([env_py, "-c", "pass"])[0])
    a, s, f = statistics.median(rec), statistics.median(start), statistics.median(fits)
    c = statistics.median(core)
    out = {"recalc": a, "startup": s, "fits": f, "ratio": a / (s + f), "core_import": c, "ratio_core": a / (c + f)}
    if before:
        out["before"] = statistics.median(before)
        out["ratio_before"] = out["before"] / (s + f)
        out["ratio_core_before"] = out["before"] / (c + f)
    return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--returns", choices=("formulas", "values", "both"), default="both")
    ap.add_argument("--baseline", help="a source tree (e.g. the main checkout) whose recalc is measured beside")
    args = ap.parse_args(argv)
    for how in (("formulas", "values") if args.returns == "both" else (args.returns,)):
        m = measure(how, args.repeat, baseline=args.baseline)
        print(f"recalc, {K} fits over {K} x {N:,} returns ({how}): {m['recalc']:.2f} s CPU; start-up "
              f"{m['startup']:.2f} s + fits {m['fits']:.2f} s; ratio {m['ratio']:.2f} (target <= 1.5); "
              f"of the recalc, importing the worksheet functions (NumPy, SciPy, the core) {m['core_import']:.2f} s; "
              f"ratio to (core_import + fits) {m['ratio_core']:.2f}")
        if "before" in m:
            print(f"    baseline {args.baseline}: {m['before']:.2f} s CPU, ratio {m['ratio_before']:.2f}, "
                  f"ratio to (core_import + fits) {m['ratio_core_before']:.2f}")


if __name__ == "__main__":
    main()
