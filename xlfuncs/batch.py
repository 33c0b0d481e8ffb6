"""Many series in one run: ``volcast batch PANEL ...``.

A panel is a CSV or Parquet file, wide (one column per series, an optional date column) or long
(``--id`` names the series column and ``--value`` the returns column).  Series that look like price
levels are refused unless the caller converts them (``levels_to_returns``) or takes them as they are.
Each series is fitted,
forecast and turned into VaR in parallel across processes (or on a Dask cluster); a series that
fails is recorded beside its id and never stops the run.  The output is tidy: one row per
(id, kind, name) with its value and, for parameters, the standard error.
"""

from __future__ import annotations

import math
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

__all__ = ["read_panel", "run_one", "run_batch", "write_tidy", "lag1_autocorrelation", "looks_like_levels",
           "level_like_series", "levels_to_returns", "LEVELS_AUTOCORRELATION"]

COLUMNS = ["id", "kind", "name", "value", "std_error"]

# Our own rule of thumb for telling price levels from returns (common practice, not a formal test):
# returns have a lag-1 autocorrelation near zero, while a level series wanders like a random walk and
# has one near one.  A column of positive numbers whose lag-1 autocorrelation exceeds 0.8 is taken to
# be levels.  0.8 rather than 0.9 because short random walks fall below 0.9 often (in simulation about
# half of 60-point walks do), while returns this autocorrelated would be most unusual.
LEVELS_AUTOCORRELATION = 0.8


def lag1_autocorrelation(values) -> float:
    """The sample autocorrelation at lag 1, sum (x[t]-m)(x[t-1]-m) / sum (x[t]-m)^2 over the finite
    values; NaN when there are fewer than three or they are all equal."""
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if x.size < 3:
        return math.nan
    d = x - x.mean()
    den = float(d @ d)
    if den <= 0 or not math.isfinite(den):
        return math.nan
    return float(d[1:] @ d[:-1]) / den


def looks_like_levels(values) -> bool:
    """All finite values positive and lag-1 autocorrelation above LEVELS_AUTOCORRELATION."""
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if x.size < 3 or not (x > 0).all():
        return False
    rho = lag1_autocorrelation(x)
    return math.isfinite(rho) and rho > LEVELS_AUTOCORRELATION


def level_like_series(panel: dict) -> list:
    """The ids of the panel's series that look like price levels, in panel order."""
    return [sid for sid, v in panel.items() if looks_like_levels(v)]


def levels_to_returns(panel: dict, rows: dict | None = None, where: str = "the panel") -> dict:
    """Each series of levels p as log returns in percent, 100 ln(p[t]/p[t-1]).

    A missing level (NaN) leaves the returns on both sides of it missing; ``run_one`` drops missing
    values as it does for the blanks of a wide panel.  A level that is zero or negative is refused
    (ValueError) naming the series and its data row (``rows`` maps ids to 1-based row numbers).
    """
    out = {}
    for sid, v in panel.items():
        p = np.asarray(v, dtype=float)
        bad = np.flatnonzero(np.isfinite(p) & (p <= 0))
        if bad.size:
            i = int(bad[0])
            row = int(rows[sid][i]) if rows is not None else i + 1
            raise ValueError(f'{where}: series "{sid}" has the level {p[i]:g} in data row {row}; '
                             "--levels needs levels above zero")
        with np.errstate(invalid="ignore", divide="ignore"):
            out[sid] = 100.0 * np.diff(np.log(p))
    return out


def read_panel(path, id_col=None, value_col=None, date_col="date", with_rows=False):
    """{series id: values array} from a wide or long panel.

    With ``with_rows`` also {series id: the 1-based data rows of the file its values come from}.
    """
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
        df = df.reset_index(drop=True)
        groups = list(df.groupby(id_col, sort=False))
        panel = {str(k): pd.to_numeric(g[value_col], errors="coerce").to_numpy(dtype=float) for k, g in groups}
        rows = {str(k): g.index.to_numpy() + 1 for k, g in groups}
    else:
        cols = [c for c in df.columns if str(c).lower() != date_col]
        panel = {str(c): pd.to_numeric(df[c], errors="coerce").to_numpy(dtype=float) for c in cols}
        rows = {sid: np.arange(1, len(df) + 1) for sid in panel}
    return (panel, rows) if with_rows else panel


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
