"""Every row of the speed table of issue 12 in one run, each beside its peer computed here.

CPU time (time.process_time, or a child process's CPU from getrusage), medians of interleaved
rounds, one BLAS thread.  Rows, and the benchmark scripts whose functions they reuse:

* EGARCH(1,1)-t fit against GARCH(1,1)-t at n = 2,500 and 20,000 (egarch_speed.py's series);
* GARCH(1,1)-normal VOLFIT on DEM/GBP against the bare lfilter/L-BFGS-B reference and the
  textbook loop with Nelder-Mead (fit_speed.py);
* VaR/ES at h = 22, level 0.99, on DEM/GBP: error of risk() (its default paths, 10 seeds)
  against a plain simulation of 100,000,000 paths (risk_accuracy.py's reference, whose own error
  is then a fraction of the 0.2% target; at 10^7 it was 0.1-0.2%), spread across
  seeds and CPU time of one call, for GARCH(1,1)-t, GJR-GARCH(1,1)-skewt, EGARCH(1,1)-ged and
  EGARCH(1,1)-t (VaR only: its ES is infinite);
* EGARCH(1,1) exact variance forecast, 40 steps, normal and GED shocks: the smallest LRE against
  Nelson's (1991) product with each factor by SciPy's quad over the scipy.stats density;
* `volcast recalc` of 20 fits over 20 x 2,500 returns against start-up plus the fits' own time,
  with the returns as the templates' formula and as stored numbers (recalc_fits.py);
* CLI start-up: ``volcast --help`` in a fresh process;
* VOLBACKTEST (GARCH(1,1)-t, window 1,000, refit 20, 1,500 steps) against its refits alone;
* VOLCOMPARE of the templates' candidates (EWMA, GARCH, GJR-GARCH, EGARCH x normal, t) on
  DEM/GBP: the share of its time that the two EGARCH fits take alone.

    python benchmarks/issue12_table.py            # about 18 minutes here (8 of them the 10^8-path references)
    python benchmarks/issue12_table.py --quick    # fewer rounds, a 1,000,000-path reference: ~3 minutes
    RISK_REF_CACHE=/tmp/risk_refs RISK_REF_RUNS=2 python benchmarks/issue12_table.py --only risk  # kept, pooled
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import argparse  # noqa: E402
import math  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

ROWS: list = []


def cpu(fn):
    t0 = time.process_time()
    out = fn()
    return time.process_time() - t0, out


def interleaved(contenders: dict, rounds: int, only_first: dict | None = None) -> dict:
    """Median CPU seconds of each contender over ``rounds`` interleaved rounds (fewer where asked)."""
    times = {k: [] for k in contenders}
    for i in range(rounds):
        for k, fn in contenders.items():
            if only_first and i >= only_first.get(k, rounds):
                continue
            times[k].append(cpu(fn)[0])
    return {k: statistics.median(v) for k, v in times.items()}


def add(path, measured, target, met):
    ROWS.append((path, measured, target, "yes" if met else "no"))
    print(f"  -> {path}: {measured}   [target {target}: {'met' if met else 'MISSED'}]", flush=True)


# ------------------------------------------------------------------------------------------ rows

def egarch_rows(rounds):
    from egarch_speed import series

    from xlfuncs.core.estimate import fit

    print("EGARCH(1,1)-t against GARCH(1,1)-t", flush=True)
    for n in (2500, 20000):
        r = series(n)
        fit(r[:300], "EGARCH(1,1)", "t")  # the kernels loaded before timing
        med = interleaved({"garch": lambda: fit(r, "GARCH(1,1)", "t"), "egarch": lambda: fit(r, "EGARCH(1,1)", "t")},
                          rounds)
        ratio = med["egarch"] / med["garch"]
        add(f"EGARCH(1,1)-t fit, n = {n:,}", f"{med['egarch']:.3f} s vs GARCH(1,1)-t {med['garch']:.3f} s: "
            f"{ratio:.2f}x", "<= 3x", ratio <= 3)


def volfit_rows(rounds, textbook_rounds):
    from fit_speed import load, reference_fit, textbook_fit, volfit

    print("GARCH(1,1)-normal VOLFIT on DEM/GBP", flush=True)
    r = load()
    cells = [[v] for v in r.tolist()]
    volfit(cells), reference_fit(r)
    med = interleaved({"volfit": lambda: volfit(cells), "reference": lambda: reference_fit(r),
                       "textbook": lambda: textbook_fit(r)}, rounds, {"textbook": textbook_rounds})
    a = med["volfit"] / med["reference"]
    b = med["textbook"] / med["volfit"]
    add("GARCH(1,1)-normal VOLFIT, DEM/GBP", f"{1e3 * med['volfit']:.1f} ms: {a:.2f}x the reference "
        f"({1e3 * med['reference']:.1f} ms); textbook {b:.0f}x ({med['textbook']:.2f} s)",
        "<= 0.35x reference, >= 150x textbook", a <= 0.35 and b >= 150)


def risk_rows(ref_paths, seeds):
    import risk_accuracy as ra

    from xlfuncs.core import fit
    from xlfuncs.core.risk import RISK_PATHS, risk

    print(f"VaR/ES at h = {ra.H} against a {ref_paths:,}-path plain simulation", flush=True)
    r = ra.dmbp()
    for model, dist in ra.MODELS:
        f = fit(r, model, dist)
        t0 = time.process_time()
        runs = int(os.environ.get("RISK_REF_RUNS", "1"))  # 2: two independent references pooled
        ref = ra.reference(f, r, ref_paths) if runs <= 1 else ra.pooled_reference(f, r, runs, ref_paths)
        tref = time.process_time() - t0
        vals, times = [], []
        for s in seeds:
            dt, rk = cpu(lambda: risk(f, r, ra.LEVEL, ra.H, seed=s))
            vals.append((rk.var, rk.es))
            times.append(dt)
        vals = np.array(vals)
        parts, met = [], True
        for j, what in enumerate(("VaR", "ES")):
            if not np.all(np.isfinite(vals[:, j])):
                parts.append(f"{what} infinite (said)")
                continue
            rel = vals[:, j] / ref[j] - 1
            se_ref, se_b = ref[2 + j] / ref[j], ref[4 + j] / ref[j]
            err, sd = np.max(np.abs(rel)), rel.std(ddof=1)
            met &= err <= 0.002 and sd <= 0.002
            parts.append(f"{what} max abs err {100 * err:.2f}% (mean {100 * rel.mean():+.2f}%; reference se "
                         f"{100 * se_ref:.2f}%, by batch means {100 * se_b:.2f}%), sd {100 * sd:.2f}%")
        tm = statistics.median(times)
        met &= tm <= 0.150
        add(f"VaR/ES h = {ra.H}, {model}-{dist}", f"{'; '.join(parts)}; {1e3 * tm:.0f} ms ({RISK_PATHS:,} paths, "
            f"{len(seeds)} seeds; reference {tref:.0f} s CPU)", "<= 0.2%, <= 0.2%, <= 150 ms", met)


def lre_rows():
    from fit_speed import load
    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.core.estimate import evaluate
    from xlfuncs.core.forecast import forecast, in_sample

    print("EGARCH(1,1) exact variance forecast (40 steps) against quadrature", flush=True)
    r = load()
    E11 = {"mu": 0.01, "omega": -0.02, "alpha[1]": 0.2, "gamma[1]": -0.08, "beta[1]": 0.95}

    sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
    from helpers import egarch11_product_forecast  # the test suite's reference (Nelson 1991)

    worst = {}
    for dist, eta in (("normal", {}), ("ged", {"nu": 1.5}), ("ged", {"nu": 1.0}), ("ged", {"nu": 2.5})):
        spec, d = parse_model("EGARCH(1,1)"), get_distribution(dist)
        names = list(spec.param_names) + list(d.param_names)
        p = {**E11, **eta}
        f = evaluate(r, spec, d, names, [p[n] for n in names], None)
        fc = forecast(f, r, 40)
        e, s2, _ = in_sample(f, r)
        want = egarch11_product_forecast(E11, eta, e[-1], s2[-1], d.abs_moment(list(eta.values())), 40)
        lres = [16.0 if got == w else -math.log10(abs(got - w) / abs(w)) for got, w in zip(fc.variance, want)]
        worst[f"{dist}{'' if not eta else ' ' + str(eta['nu'])}"] = min(lres)
    m = min(worst.values())
    add("EGARCH variance forecast, h = 1..40", "smallest LRE " + ", ".join(f"{k} {v:.1f}" for k, v in worst.items()),
        "LRE >= 8 (normal, GED)", m >= 8)


def child_cpu(cmd):
    import resource

    from _installed import child_env  # the bytecode, as an installed copy loads it

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run(cmd, check=True, capture_output=True, timeout=1800, env=child_env())
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def recalc_rows(repeat):
    import recalc_fits

    print("volcast recalc, 20 fits over 20 x 2,500 returns", flush=True)
    for how in ("formulas", "values"):
        m = recalc_fits.measure(how, repeat)
        add(f"volcast recalc, 20 fits ({how})", f"{m['recalc']:.2f} s CPU vs start-up {m['startup']:.2f} s + fits "
            f"{m['fits']:.2f} s: {m['ratio']:.1f}x", "<= 1.5x", m["ratio"] <= 1.5)


def startup_row(repeat):
    print("CLI start-up", flush=True)
    t = statistics.median(child_cpu([sys.executable, "-m", "xlfuncs.cli", "--help"]) for _ in range(repeat))
    add("CLI start-up (volcast --help)", f"{t:.2f} s CPU", "<= 0.5 s", t <= 0.5)


def backtest_row(repeat):
    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.core.backtest import backtest
    from xlfuncs.core.estimate import fit
    from xlfuncs.core.simulate import simulate
    from xlfuncs.core.spec import parse_options

    print("VOLBACKTEST against its refits", flush=True)
    import backtest_speed as bs

    spec, dist, opts = parse_model("GARCH(1,1)"), get_distribution("t"), parse_options("")
    r = simulate(spec, dist, np.array([0.05, 0.02, 0.08, 0.9, 6.0]), bs.N, rng=np.random.default_rng(2026))[:, 0]
    W, K = bs.WINDOW, bs.REFIT
    med = interleaved({
        "refits": lambda: [fit(r[t - W:t], spec, dist, opts).params for t in range(W, len(r), K)],
        "backtest": lambda: backtest(r, spec, dist, opts, W, 0.99, "rolling", K),
    }, repeat)
    ratio = med["backtest"] / med["refits"]
    add("VOLBACKTEST, window 1,000, refit 20, 1,500 steps", f"{med['backtest']:.2f} s vs refits "
        f"{med['refits']:.2f} s: {ratio:.2f}x", "<= 1.2x", ratio <= 1.2)


def compare_row(repeat):
    from fit_speed import load

    from xlfuncs.core.estimate import fit
    from xlfuncs.sheet import VOLCOMPARE
    from xlfuncs.sheet.cache import FIT_CACHE

    print("VOLCOMPARE of the templates' candidates", flush=True)
    r = load()
    cells = [[v] for v in r.tolist()]
    models = "EWMA, GARCH(1,1), GJR-GARCH(1,1), EGARCH(1,1)"

    def compare():
        FIT_CACHE.clear()
        out = VOLCOMPARE(cells, models, "normal, t")
        assert not str(out[0][0]).startswith("ERROR"), out

    def egarch():
        fit(r, "EGARCH(1,1)", "normal"), fit(r, "EGARCH(1,1)", "t")

    med = interleaved({"compare": compare, "egarch": egarch}, repeat)
    share = med["egarch"] / med["compare"]
    add("VOLCOMPARE (8 candidates), DEM/GBP", f"{med['compare']:.2f} s, of which the two EGARCH fits "
        f"{med['egarch']:.2f} s ({100 * share:.0f}%)", "follows from EGARCH", True)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer rounds and a 1,000,000-path reference")
    ap.add_argument("--only", default="", help="comma-separated sections: egarch, volfit, risk, lre, recalc, "
                    "startup, backtest, compare")
    args = ap.parse_args(argv)
    q = args.quick
    sections = {
        "egarch": lambda: egarch_rows(5 if q else 15),
        "volfit": lambda: volfit_rows(10 if q else 30, 1 if q else 3),
        "risk": lambda: risk_rows(1_000_000 if q else 100_000_000, range(1, 6) if q else range(1, 11)),
        "lre": lre_rows,
        "recalc": lambda: recalc_rows(1 if q else 3),
        "startup": lambda: startup_row(3 if q else 7),
        "backtest": lambda: backtest_row(3 if q else 5),
        "compare": lambda: compare_row(3 if q else 7),
    }
    chosen = [s.strip() for s in args.only.split(",") if s.strip()] or list(sections)
    t0 = time.perf_counter()
    for name in chosen:
        sections[name]()
    print(f"\nissue 12 table ({'quick' if q else 'full'} run, {time.perf_counter() - t0:.0f} s wall)\n")
    print("| path | measured here (peer in the same run) | target | met |")
    print("| --- | --- | --- | --- |")
    for row in ROWS:
        print("| " + " | ".join(row) + " |")


if __name__ == "__main__":
    main()
