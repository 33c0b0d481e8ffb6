"""Headless recalculation time beside LibreOffice's time to convert the same workbook.

Two workbooks, built here with openpyxl: 400 monthly and 5,000 daily rows of levels, returns
computed by formulas (=LN(B3/B2)*100), and a dozen of our calls (a fit that spills, forecasts,
series, tests, risk, a comparison) plus standard formulas over their results.  For each, in one
run: `volcast recalc` (in process) and `soffice --headless --convert-to xlsx` (LibreOffice,
Debian package libreoffice-calc-nogui), median of a few repetitions, and the ratio.
Target: recalc no slower than LibreOffice on either.

    python benchmarks/recalc_speed.py [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
import openpyxl  # noqa: E402

from xlfuncs.core import get_distribution, parse_model  # noqa: E402
from xlfuncs.core.simulate import simulate  # noqa: E402
from xlfuncs.headless.recalc import recalc  # noqa: E402
from xlfuncs.sheet.cache import FIT_CACHE  # noqa: E402


def build(path: Path, n: int, seed: int):
    r = simulate(parse_model("GARCH(1,1)"), get_distribution("t"), np.array([0.05, 0.02, 0.08, 0.9, 6.0]), n,
                 rng=np.random.default_rng(seed))[:, 0]
    levels = 100 * np.exp(np.cumsum(r / 100))
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append(["level", "return"])
    for i, v in enumerate(levels, start=2):
        ws.cell(i, 1, float(v))
        if i > 2:
            ws.cell(i, 2, f"=LN(A{i}/A{i - 1})*100")
    last = n + 50
    rng = f"Data!B2:B{last}"
    m = wb.create_sheet("Model")
    m["A1"], m["A2"] = "GARCH(1,1)", "t"
    m["C1"] = f"=VOLFIT({rng}, A1, A2)"
    m["I1"] = f'=VOLFORECAST({rng}, C1#, 12, "vol")'
    m["J1"] = f'=VOLFORECAST({rng}, C1#, 12, "cumvar")'
    m["K1"] = f'=VOLFORECAST({rng}, C1#, 12, "table")'
    m["Q1"] = f"=VOLTESTS({rng}, C1#)"
    m["Q12"] = f"=VOLRISK({rng}, C1#, 0.99, 1)"
    m["Q22"] = f"=VOLRISK({rng}, C1#, 0.95, 1)"
    m["Q32"] = f"=VOLLOGLIK({rng}, C1#)"
    m["U1"] = f'=VOLCOMPARE({rng}, "ARCH(1), GARCH(1,1), GJR-GARCH(1,1)", "normal, t")'
    m["A40"] = "=SQRT(I1*12)"
    m["A41"] = "=SUM(_xlfn.ANCHORARRAY(J1))"
    m["A42"] = "=INDEX(C1#, 5, 2)"
    s = wb.create_sheet("Series")
    s["A1"] = f'=VOLSERIES({rng}, Model!C1:G40, "vol")'
    s["B1"] = f'=VOLSERIES({rng}, Model!C1:G40, "stdresid")'
    wb.save(path)


def time_ours(src: Path, out: Path) -> float:
    FIT_CACHE.clear()
    t0 = time.perf_counter()
    recalc(src, out)
    return time.perf_counter() - t0


def time_libreoffice(src: Path, outdir: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run(["soffice", "--headless", "--convert-to", "xlsx", "--outdir", str(outdir), str(src)],
                   check=True, capture_output=True, timeout=600)
    return time.perf_counter() - t0


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    if shutil.which("soffice") is None:
        raise SystemExit("LibreOffice (soffice) is needed for the comparison: apt-get install libreoffice-calc-nogui")
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        for name, n in (("monthly", 400), ("daily", 5000)):
            src = d / f"{name}.xlsx"
            build(src, n, seed=n)
            ours, lo = [], []
            for i in range(args.repeat):
                ours.append(time_ours(src, d / f"{name}.out.xlsx"))
                lo.append(time_libreoffice(src, d / "lo"))
            a, b = statistics.median(ours), statistics.median(lo)
            print(f"{name:8s} {n:5d} rows: volcast recalc {a:6.2f} s   LibreOffice convert {b:6.2f} s   "
                  f"ratio {a / b:5.2f}   (target <= 1)")


if __name__ == "__main__":
    main()
