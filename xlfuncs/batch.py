"""Many series in one run: ``volcast batch PANEL ...``.

A panel is a CSV or Parquet file, wide (one column per series, an optional date column) or long
(``--id`` names the series column and ``--value`` the returns column).  Each series is fitted,
forecast and turned into VaR in parallel across processes (or on a Dask cluster); a series that
fails is recorded beside its id and never stops the run.  The output is tidy: one row per
(id, kind, name) with its value and, for parameters, the standard error.
"""

from __future__ import annotations

import math
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

__all__ = ["read_panel", "run_one", "run_batch", "write_tidy"]

COLUMNS = ["id", "kind", "name", "value", "std_error"]


def read_panel(path, id_col=None, value_col=None, date_col="date") -> dict:
    """{series id: returns array} from a wide or long panel."""
    import pandas as pd

    path = Path(path)
    if not path.exists():
        raise ValueError(f"{path}: no such file")
    try:
        df = pd.read_parquet(path) if path.suffix.lower() in (".parquet", ".pq") else pd.read_csv(path)
    except Exception as exc:  # noqa: BLE001
        raise ValueError(f"{path}: cannot be read as a panel ({type(exc).__name__}: {exc})") from None
    if id_col:
        if id_col not in df.columns or not value_col or value_col not in df.columns:
            raise ValueError(f"{path}: a long panel needs --id and --value naming columns of {', '.join(map(str, df.columns))}")
        return {str(k): pd.to_numeric(g[value_col], errors="coerce").to_numpy(dtype=float)
                for k, g in df.groupby(id_col, sort=False)}
    cols = [c for c in df.columns if str(c).lower() != date_col]
    return {str(c): pd.to_numeric(df[c], errors="coerce").to_numpy(dtype=float) for c in cols}


def run_one(task) -> list:
    """Fit one series; tidy rows, or one error row.  Runs in a worker process."""
    sid, values, model, dist, options, horizon, level = task
    from .core import fit, forecast
    from .core.risk import risk

    try:
        r = np.asarray(values, dtype=float)
        r = r[np.isfinite(r)]  # blanks of a wide panel (series of different lengths)
        f = fit(r, model, dist, options)
        rows = [[sid, "status", "converged", float(f.converged), None],
                [sid, "stat", "loglik", f.loglik, None], [sid, "stat", "aic", f.aic, None],
                [sid, "stat", "bic", f.bic, None], [sid, "stat", "nobs", float(f.nobs), None]]
        for n, v, s in zip(f.names, f.params, f.std_errors):
            rows.append([sid, "param", n, float(v), None if not math.isfinite(s) else float(s)])
        fc = forecast(f, r, horizon)
        rows += [[sid, "forecast", "vol_1", float(fc.vol[0]), None],
                 [sid, "forecast", f"vol_{horizon}", float(fc.vol[-1]), None],
                 [sid, "forecast", f"cumvol_{horizon}", float(fc.cumvol[-1]), None]]
        rk = risk(f, r, level, 1)
        rows += [[sid, "risk", f"VaR_{level:g}", rk.var, None], [sid, "risk", f"ES_{level:g}", rk.es, None]]
        return rows
    except Exception as exc:  # noqa: BLE001 - a failed series is recorded, never fatal
        return [[sid, "error", type(exc).__name__, None, str(exc)]]


def run_batch(panel: dict, model="GARCH(1,1)", dist="normal", options=None, horizon=12, level=0.99,
              workers=None, cluster=None, progress=None) -> list:
    tasks = [(sid, v, model, dist, options, horizon, level) for sid, v in panel.items()]
    out, total = [], len(tasks)
    if cluster:
        try:
            from dask.distributed import Client, as_completed
        except ImportError:
            raise ValueError("--cluster needs Dask: pip install 'volcast[cluster]'") from None
        with Client(cluster) as client:
            futures = client.map(run_one, tasks, pure=False)
            for i, fut in enumerate(as_completed(futures), start=1):
                out.extend(fut.result())
                if progress:
                    progress(i, total)
        return _ordered(out, panel)
    if workers == 1:
        for i, t in enumerate(tasks, start=1):
            out.extend(run_one(t))
            if progress:
                progress(i, total)
        return out
    with ProcessPoolExecutor(max_workers=workers) as pool:
        chunk = max(1, total // (8 * (workers or 2)))
        for i, rows in enumerate(pool.map(run_one, tasks, chunksize=chunk), start=1):
            out.extend(rows)
            if progress:
                progress(i, total)
    return out


def _ordered(rows, panel):
    order = {sid: i for i, sid in enumerate(panel)}
    return sorted(rows, key=lambda r: order[r[0]])


def write_tidy(rows, path) -> Path:
    import pandas as pd

    path = Path(path)
    df = pd.DataFrame(rows, columns=COLUMNS)
    if path.suffix.lower() in (".parquet", ".pq"):
        df.to_parquet(path, index=False)
    else:
        df.to_csv(path, index=False)
    return path
