"""What the worksheet bounds (``xlfuncs/sheet/bounds.py``) cost at their edge, and beyond it.

A worksheet call should answer in about ten seconds or refuse.  This script times, each case in a
fresh process with a wall-time limit (a case over it prints "> LIMIT s wall"):

  fits       one estimation as VOLFIT does it (core ``fit``, standard errors included) on 2,500 seeded
             GARCH(1,1) returns: models at FIT_PARAMS / EGARCH_FIT_PARAMS, then the next sizes up;
  compare    VOLCOMPARE at COMPARE_CANDIDATES and COMPARE_WORK, and the old bound of 60 candidates;
  sim        VOLSIM at SIM_PERIODS and SIM_CELLS (as the list of rows a spreadsheet gets), and past them;
  risk       VOLRISK beyond one period and an EGARCH VOLFORECAST at SIM_DRAWS (paths x horizon);
  backtest   VOLBACKTEST from a model string and from an EGARCH fit table, at and past BACKTEST_WORK;
  inmean     in-mean (-M) fits, whose recursion runs one observation at a time with numerical
             derivatives: at IN_MEAN_FIT_PARAMS and past it, a VOLCOMPARE of in-mean candidates, and
             a backtest from an in-mean fit table.

A case labelled "past" runs with the bounds lifted in its process, to show what a bound refuses.

The data are simulated by the script, so the figures are comparable from run to run.  Each case
prints the CPU time of its process, which the bounds are set by (it changes little when other work
shares the machine, where the wall time can triple), and the wall time.  The README's "Bounds"
subsection quotes the figures.  Best run on a quiet machine:

    python benchmarks/bounds_timing.py [--limit 60] [--only fits,compare,sim,risk,backtest,inmean]
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import argparse  # noqa: E402
import multiprocessing as mp  # noqa: E402
import time  # noqa: E402

N_OBS = 2500


_CACHE = {}


def _returns(n=N_OBS):
    """2,500 (or n) returns of a seeded GARCH(1,1) simulation, computed once per process."""
    if n in _CACHE:
        return _CACHE[n]
    import numpy as np

    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.core.simulate import simulate

    _CACHE[n] = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.05, 0.05, 0.08, 0.9]),
                         n, 1, rng=np.random.default_rng(3))[:, 0]
    return _CACHE[n]


def case_fit(model, dist="normal"):
    from xlfuncs.core import fit

    f = fit(_returns(), model, dist)
    return f"converged {f.converged}"


def case_compare(models, dist="normal"):
    from xlfuncs import VOLCOMPARE
    from xlfuncs.sheet.bounds import weight
    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.sheet.cache import FIT_CACHE

    dists = dist.split(",")
    pairs = [(parse_model(m), get_distribution(d)) for m in models for d in dists]
    FIT_CACHE.clear()
    out = VOLCOMPARE([[v] for v in _returns()], [[m] for m in models], dist)
    bad = sum(1 for row in out[1:] if isinstance(row[2], str))
    return f"{len(out) - 1} rows ({bad} errors), {sum(weight(s, d) for s, d in pairs):,} units"


def _table(model, p, q, paths=None):
    rows = [["model", model], ["dist", "normal"], ["mu", 0.05], ["omega", 0.01]]
    rows += [[f"alpha[{i}]", 0.1 / p] for i in range(1, p + 1)]
    if "EGARCH" in model or "GJR" in model or "APARCH" in model:
        rows += [[f"gamma[{i}]", -0.05 / p] for i in range(1, p + 1)]
    rows += [[f"beta[{j}]", 0.85 / q] for j in range(1, q + 1)]
    if "APARCH" in model:
        rows += [["delta", 1.5]]
    return rows + ([["options", f"paths={paths}"]] if paths else [])


def case_sim(model, p, q, periods, paths):
    from xlfuncs import VOLSIM

    out = VOLSIM(_table(model, p, q), periods, paths)
    return f"{len(out)} x {len(out[0])} cells"


def case_draws(model, p, q, horizon, paths):
    from xlfuncs import VOLFORECAST, VOLRISK

    r = [[v] for v in _returns()]
    table = _table(model, p, q, paths)
    t0 = time.perf_counter()
    out = VOLRISK(r, table, 0.99, horizon)
    t1 = time.perf_counter()
    from xlfuncs.core import parse_model

    fc = VOLFORECAST(r, table, horizon) if parse_model(model).family.simulated_forecast else [[None]]
    return f"VOLRISK {t1 - t0:.2f} s ({str(out[1][0])[:30]}), VOLFORECAST {time.perf_counter() - t1:.2f} s ({len(fc)} rows)"


def case_backtest(model, window, refit, n, table=None):
    from xlfuncs import VOLBACKTEST

    r = [[v] for v in _returns(n)]
    out = VOLBACKTEST(r, table or model, window, 0.99, f"refit={refit}")
    return str(out[-1])[:120]


def _lift_bounds():
    """Past a bound the call would refuse: lift every bound in this process to time what it refuses."""
    from xlfuncs.sheet import bounds, functions

    for name in bounds.__all__:
        if name.isupper() and name not in ("EGARCH_WEIGHT", "IN_MEAN_WEIGHT"):
            setattr(bounds, name, 10**15)
            if hasattr(functions, name):
                setattr(functions, name, 10**15)


def _run(q, fn, args, past):
    import xlfuncs.sheet  # noqa: F401 - imports and the data are not part of the time

    if past:
        _lift_bounds()

    _returns()
    t0, c0 = time.perf_counter(), time.process_time()
    try:
        note = fn(*args)
    except Exception as exc:  # noqa: BLE001 - a benchmark reports, never stops
        note = f"{type(exc).__name__}: {exc}"[:100]
    q.put((time.perf_counter() - t0, time.process_time() - c0, note))


def timed(label, fn, *args, limit=60.0):
    """Time fn(*args) in a fresh process; a label that starts with "past" runs with the bounds lifted."""
    q = mp.Queue()
    p = mp.Process(target=_run, args=(q, fn, args, label.startswith("past")))
    p.start()
    p.join(limit)
    if p.is_alive():
        p.terminate()
        p.join()
        print(f"{label:<52} > {limit:.0f} s wall", flush=True)
        return
    secs, cpu, note = q.get()
    print(f"{label:<52} {cpu:7.2f} s cpu {secs:7.2f} s wall  {note}", flush=True)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--limit", type=float, default=60.0, help="seconds of wall time before a case is stopped")
    ap.add_argument("--only", default="fits,compare,sim,risk,backtest,inmean")
    args = ap.parse_args(argv)
    only = set(args.only.split(","))
    lim = args.limit
    if "fits" in only:
        print(f"-- one fit on {N_OBS} returns: at FIT_PARAMS / EGARCH_FIT_PARAMS, then past them")
        for m, d in (("ARMA(6,6)-GARCH(1,1)", "normal"), ("ARMA(5,5)-GARCH(1,1)", "skewt"), ("GARCH(6,6)", "skewt"),
                     ("GJR-GARCH(4,4)", "t"), ("ARMA(4,4)-GARCH(2,2)", "skewt"), ("AR(11)-GARCH(1,1)", "t"),
                     ("MA(12)-ARCH(1)", "normal"), ("GJR-GARCH(3,3)", "skewt"),
                     ("EGARCH(1,1)", "normal"), ("EGARCH(1,1)", "t"), ("ZERO-EGARCH(1,2)", "t"),
                     ("ARMA(1,1)-EGARCH(1,1)", "t"), ("AR(2)-EGARCH(2,1)", "t"), ("EGARCH(2,2)", "skewt"),
                     ("ARMA(1,1)-EGARCH(1,2)", "skewt"), ("ARMA(2,2)-EGARCH(1,1)", "t"), ("AR(1)-EGARCH(2,2)", "t"),
                     ("MA(2)-EGARCH(2,1)", "ged"), ("GARCH(1,1)", "t"), ("APARCH(1,1)", "t"),
                     ("ARMA(2,2)-APARCH(2,2)", "skewt"), ("ARMA(1,1)-APARCH(4,2)", "t")):
            timed(f"{m} {d}", case_fit, m, d, limit=lim)
        for m, d in (("ARMA(4,4)-GARCH(4,4)", "normal"), ("ARMA(8,8)-GARCH(1,1)", "normal"),
                     ("ARMA(12,12)-GARCH(1,1)", "normal"), ("ARMA(12,12)-GARCH(12,12)", "normal"),
                     ("MA(2)-EGARCH(2,2)", "ged"), ("EGARCH(3,3)", "normal"), ("ARMA(1,1)-EGARCH(2,2)", "skewt"),
                     ("ARMA(2,2)-EGARCH(2,2)", "t"), ("ARMA(12,12)-EGARCH(12,12)", "normal")):
            timed(f"past: {m} {d}", case_fit, m, d, limit=lim)
    if "compare" in only:
        print("-- VOLCOMPARE (COMPARE_CANDIDATES, COMPARE_WORK; distinct candidates, the fit cache cleared)")
        usual = ["GARCH(1,1)", "GJR-GARCH(1,1)", "ARCH(1)", "IGARCH(1,1)", "AR(1)-GARCH(1,1)", "GARCH(2,1)"]
        big = ["ARMA(6,6)-GARCH(1,1)", "ARMA(5,5)-GARCH(2,2)", "ARMA(4,4)-GARCH(3,3)", "AR(12)-GARCH(1,1)",
               "MA(12)-GARCH(1,1)", "ARMA(6,6)-ARCH(2)", "GARCH(7,7)"]  # 16 parameters each
        timed("24 usual candidates (6 models x 4 dists)", case_compare, usual, "normal,t,ged,skewt", limit=lim)
        timed("the templates' 6 (GARCH, GJR, EGARCH x normal, t)", case_compare,
              ["GARCH(1,1)", "GJR-GARCH(1,1)", "EGARCH(1,1)"], "normal,t", limit=lim)
        timed("7 models of 16 parameters", case_compare, big, limit=lim)
        timed("GARCH, GJR, APARCH(1,1), APARCH(2,1), AR(1)-APARCH(1,1) x normal, t", case_compare,
              ["GARCH(1,1)", "GJR-GARCH(1,1)", "APARCH(1,1)", "APARCH(2,1)", "AR(1)-APARCH(1,1)"], "normal,t", limit=lim)
        timed("EGARCH(1,1) t, ZERO-EGARCH(1,2) normal", case_compare, ["EGARCH(1,1)", "ZERO-EGARCH(1,2)"], "t",
              limit=lim)
        timed("past: 60 usual candidates (15 x 4)", case_compare,
              usual + ["ARCH(2)", "ARCH(3)", "GARCH(1,2)", "GJR-GARCH(2,1)", "MA(1)-GARCH(1,1)", "ZERO-GARCH(1,1)",
                       "AR(2)-GARCH(1,1)", "ARMA(1,1)-GARCH(1,1)", "AR(1)-GJR-GARCH(1,1)"], "normal,t,ged,skewt",
              limit=lim)
        timed("3 EGARCH (normal, t, ged) and 3 GARCH", case_compare, ["GARCH(1,1)", "EGARCH(1,1)"],
              "normal,t,ged", limit=lim)
        egarch10 = ["AR(2)-EGARCH(2,1)", "AR(1)-EGARCH(2,2)", "ARMA(2,2)-EGARCH(1,1)", "MA(2)-EGARCH(2,1)",
                    "ARMA(1,1)-EGARCH(2,1)", "ARMA(2,1)-EGARCH(1,2)"]  # 10 parameters each with t shocks
        timed("5 EGARCH models of 10 parameters, t", case_compare, egarch10[:5], "t", limit=lim)
        timed("past: 6 EGARCH models of 10 parameters, t", case_compare, egarch10, "t", limit=lim)
    if "sim" in only:
        print("-- VOLSIM (SIM_PERIODS, SIM_CELLS)")
        for model, p, q, periods, paths in (("GARCH(1,1)", 1, 1, 25_000, 40), ("GJR-GARCH(12,12)", 12, 12, 25_000, 1),
                                            ("EGARCH(12,12)", 12, 12, 25_000, 40), ("GJR-GARCH(12,12)", 12, 12, 1000, 1000),
                                            ("EGARCH(12,12)", 12, 12, 1000, 1000), ("APARCH(12,12)", 12, 12, 25_000, 40)):
            timed(f"{model} {periods} periods x {paths} paths", case_sim, model, p, q, periods, paths, limit=lim)
        for model, p, q, periods, paths in (("GARCH(1,1)", 1, 1, 100_000, 1), ("GJR-GARCH(12,12)", 12, 12, 100_000, 1)):
            timed(f"past: {model} {periods} periods x {paths} paths", case_sim, model, p, q, periods, paths, limit=lim)
    if "risk" in only:
        print("-- VOLRISK beyond one period and EGARCH VOLFORECAST (SIM_DRAWS)")
        for model, p, q, h, paths in (("GARCH(1,1)", 1, 1, 20, 1_000_000), ("GJR-GARCH(12,12)", 12, 12, 20, 1_000_000),
                                      ("EGARCH(1,1)", 1, 1, 20, 1_000_000), ("EGARCH(12,12)", 12, 12, 20, 1_000_000),
                                      ("EGARCH(12,12)", 12, 12, 600, 20_000), ("APARCH(1,1)", 1, 1, 20, 1_000_000),
                                      ("APARCH(12,12)", 12, 12, 20, 1_000_000), ("APARCH(12,12)", 12, 12, 600, 20_000)):
            timed(f"{model} horizon {h} x {paths} paths", case_draws, model, p, q, h, paths, limit=lim)
        timed("past: EGARCH(12,12) horizon 100 x 1000000 paths", case_draws, "EGARCH(12,12)", 12, 12, 100, 1_000_000,
              limit=lim)
    if "backtest" in only:
        print("-- VOLBACKTEST (BACKTEST_WORK)")
        for model, window, refit, n in (("GARCH(1,1)", 500, 1, 1000), ("GJR-GARCH(1,1)", 500, 2, 1000),
                                        ("ARMA(6,6)-GARCH(1,1)", 2000, 100, 2500), ("EGARCH(1,1)", 500, 5, 1000),
                                        ("EGARCH(1,1)", 2000, 250, 2500), ("APARCH(1,1)", 500, 10, 1000)):
            timed(f"{model} window {window} refit {refit} on {n}", case_backtest, model, window, refit, n, limit=lim)
        for p, q, window, n, paths in ((1, 1, 250, 1450, None), (4, 4, 250, 1000, None), (1, 1, 250, 350, 1_000_000)):
            timed(f"EGARCH({p},{q}) table window {window} on {n}, paths {paths or 'default'}", case_backtest,
                  None, window, 1, n, _table(f"EGARCH({p},{q})", p, q, paths), limit=lim)
        for model, window, refit, n in (("GJR-GARCH(1,1)", 500, 1, 1000), ("EGARCH(1,1)", 500, 2, 1000)):
            timed(f"past: {model} window {window} refit {refit} on {n}", case_backtest, model, window, refit, n,
                  limit=lim)
        timed("past: EGARCH(12,12) table window 250 on 1450", case_backtest, None, 250, 1, 1450,
              _table("EGARCH(12,12)", 12, 12), limit=lim)

    if "inmean" in only:
        print(f"-- in-mean fits on {N_OBS} returns (IN_MEAN_FIT_PARAMS, IN_MEAN_WEIGHT)")
        for m, d in (("GARCH(1,1)", "t"), ("GARCH(1,1)-M", "normal"), ("GARCH(1,1)-M", "t"),
                     ("GJR-GARCH(1,1)-M", "skewt"), ("AR(1)-GJR-GARCH(1,1)-M", "t"), ("ARMA(1,1)-GARCH(1,1)-M", "t"),
                     ("MA(2)-GARCH(1,1)-M", "t"), ("AR(3)-GARCH(1,1)-M", "t"), ("ARCH(2)-M", "skewt"),
                     ("EGARCH(1,1)-M", "normal"), ("ZERO-EGARCH(1,1)-M", "t"), ("IGARCH(1,1)-M", "t"), ("ZERO-EWMA-M", "t")):
            timed(f"{m} {d}", case_fit, m, d, limit=lim)
        for m, d in (("ARMA(1,1)-GJR-GARCH(1,1)-M", "skewt"), ("GARCH(2,2)-M", "t"), ("GJR-GARCH(2,1)-M", "t"),
                     ("GARCH(1,3)-M", "normal"), ("EGARCH(1,1)-M", "t")):
            timed(f"past: {m} {d}", case_fit, m, d, limit=lim)
        timed("GARCH-M, GJR-GARCH-M x normal, t", case_compare, ["GARCH(1,1)-M", "GJR-GARCH(1,1)-M"], "normal,t",
              limit=lim)
        timed("past: GARCH-M, GJR-GARCH-M, AR(1)-GARCH-M x normal, t, skewt", case_compare,
              ["GARCH(1,1)-M", "GJR-GARCH(1,1)-M", "AR(1)-GARCH(1,1)-M"], "normal,t,skewt", limit=lim)
        table = [["model", "GARCH(1,1)-M"], ["dist", "normal"], ["mu", 0.05], ["lambda_m", 0.1], ["omega", 0.05],
                 ["alpha[1]", 0.08], ["beta[1]", 0.9]]
        timed("GARCH(1,1)-M table window 500 on 1000", case_backtest, None, 500, 1, 1000, table, limit=lim)
        timed("GARCH(1,1)-M window 500 refit 50 on 1000", case_backtest, "GARCH(1,1)-M", 500, 50, 1000, limit=lim)
        timed("past: GARCH(1,1)-M window 500 refit 10 on 1000", case_backtest, "GARCH(1,1)-M", 500, 10, 1000,
              limit=lim)


if __name__ == "__main__":
    main()
