"""Many series in one run: ``volcast batch PANEL ...``, and the CSV text reader the commands share.

A panel is a CSV or Parquet file, wide (one column per series, an optional date column) or long
(``--id`` names the series column and ``--value`` the returns column).  Series that look like price
levels are refused unless the caller converts them (``levels_to_returns``) or takes them as they are.
Each series is fitted, forecast and turned into VaR in parallel across processes (or on a Dask
cluster); a series that fails is recorded beside its id and never stops the run.  The output is
tidy: one row per (id, kind, name) with its value, for parameters the standard error, and for an
error row the message.

Nothing is lost silently.  A panel that cannot be read as it is meant is refused as a whole
(:class:`PanelError`, one line): a blank series id, a series split into separate blocks of a long
panel, two columns of a wide panel with one name, a column with data and no name, a first line of
numbers instead of names, dates newest first, out of order or repeated (in a wide panel's date
column, or within a long panel's series).  A cell inside a
series that is not a number (text, "n/a", "inf", a blank between numbers) gives that series an
error row naming the data row, as ``VOLFIT`` does for such a cell; ``skip_bad`` leaves such cells
out instead (and says how many), as ``missing=skip`` does for blank cells only.  Blank cells before
a series' first number and after its last (the shorter series of a wide panel) are not data.
"""

from __future__ import annotations

import math
import os
import tempfile
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from .core.errors import excerpt, typed_number
from .sheet.fittable import STATUS_TEXT  # the fit table's words for a blank standard error
from .csvtext import (LEVELS_AUTOCORRELATION, MAX_FIELD_CHARS, PanelError, check_date_order, check_header_names,
                      check_row_widths, day_number, decimal_comma_hint, read_csv_records)

__all__ = ["read_panel", "load_panel", "Panel", "PanelError", "run_one", "run_batch", "write_tidy", "check_output",
           "check_arguments", "lag1_autocorrelation", "looks_like_levels", "level_like_series", "levels_to_returns",
           "read_csv_records", "check_row_widths", "decimal_comma_hint", "LEVELS_AUTOCORRELATION", "MAX_FIELD_CHARS", "COLUMNS"]

COLUMNS = ["id", "kind", "name", "value", "std_error", "message"]
OUTPUT_SUFFIXES = (".csv", ".parquet", ".pq")



def _number(cell) -> float | None:
    """A cell's finite number, or None when it holds something else."""
    if isinstance(cell, (bool, np.bool_)):
        return None
    try:
        x = float(cell)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def _blank(cell) -> bool:
    if cell is None:
        return True
    if isinstance(cell, str):
        return not cell.strip()
    if isinstance(cell, (float, np.floating)):
        return math.isnan(cell)  # a missing value of a typed column (Parquet null or NaN)
    try:
        import pandas as pd

        return bool(pd.isna(cell)) if not isinstance(cell, (list, tuple, np.ndarray)) else False
    except (TypeError, ValueError):
        return False


def _what(cell) -> str:
    """What a cell that is not a number holds, in a spreadsheet user's words."""
    if not isinstance(cell, str):
        from .sheet.cells import describe  # TRUE/FALSE, dates as 2020-01-31, infinity

        return describe(cell)
    s = cell.strip()
    try:
        x = float(s)
    except ValueError:
        x = None
    if x is not None and not math.isfinite(x):
        return f'"{excerpt(s)}", which is not a finite number'
    return f'text "{excerpt(s)}"'


# ---------------------------------------------------------------------------------------------
# panels


class Panel(dict):
    """{series id: values}, a float array per series with NaN where the cell is blank.

    ``rows[id]`` are the 1-based data rows the values come from (the header is not a data row),
    ``lines[id]`` the file's line numbers (CSV only), and ``bad[id]`` the message for the series'
    first cell that is neither a number nor blank (its value is NaN).
    """

    def __init__(self, series=(), rows=None, lines=None, bad=None, name="the panel", note=""):
        super().__init__(series)
        self.note = note  # how the file's numbers were read, when worth saying (csvtext.Records.note)
        self.rows = rows if rows is not None else {sid: np.arange(1, len(v) + 1) for sid, v in self.items()}
        self.lines = lines or {}
        self.bad = bad or {}
        self.name = name
        self.days: dict = {}  # {series id: the day numbers of its dated rows}, when the file has dates

    def where(self, sid, i: int) -> str:
        """Where the series' value i is in the file: "data row 14 (line 15)"."""
        row = int(self.rows[sid][i])
        if sid in self.lines:
            return f"data row {row} (line {int(self.lines[sid][i])})"
        return f"data row {row}"


def _column_values(cells, where_of) -> tuple:
    """(values with NaN for blanks, message for the first cell that is neither, or None)."""
    vals = np.full(len(cells), np.nan)
    bad = None
    for i, c in enumerate(cells):
        if _blank(c):
            continue
        x = _number(c)
        if x is None:
            if bad is None:
                hint = decimal_comma_hint(c) if isinstance(c, str) else ""
                bad = f"{where_of(i)} holds {_what(c)}{hint}; numbers only"
            continue
        vals[i] = x
    return vals, bad


def load_panel(path, id_col=None, value_col=None, date_col="date") -> Panel:
    """Read a wide or long panel (CSV or Parquet) into a :class:`Panel`; :class:`PanelError` if it
    cannot be read as meant."""
    path = Path(path)
    if id_col is not None and not id_col.strip() or value_col is not None and not value_col.strip():
        raise PanelError("--id and --value must name columns; got a blank name")
    if (id_col is None) != (value_col is None):
        raise PanelError("a long panel needs both --id (the series column) and --value (the values column); "
                         "a wide panel needs neither")
    if id_col is not None and id_col.strip() == value_col.strip():
        raise PanelError(f'--id and --value name the same column "{excerpt(id_col)}"')
    note = ""
    if path.suffix.lower() in (".parquet", ".pq"):
        header, columns, lines = _parquet_columns(path)
    else:
        header, columns, lines, note = _csv_columns(path)
    if not columns or not len(columns[0]):
        raise PanelError(f"{path}: has a header but no data rows")
    _check_header(path, header, columns)
    if id_col is not None:
        panel = _long_panel(path, header, columns, lines, id_col.strip(), value_col.strip(), date_col)
    else:
        panel = _wide_panel(path, header, columns, lines, date_col)
    panel.note = note
    return panel


def _csv_columns(path: Path) -> tuple:
    """(header, columns of raw cells, line numbers of the data rows, the reader's note) of a CSV panel."""
    records = read_csv_records(path)
    if not records:
        raise PanelError(f"{path}: is empty; a panel needs a header row and rows of data")
    (_, header), data = records[0], records[1:]
    width = len(header)
    check_header_names(path, records, whole_numbers_are_names=True)
    check_row_widths(path, records)
    columns = [[row[j] if j < len(row) else "" for _, row in data] for j in range(width)]
    return header, columns, np.array([lineno for lineno, _ in data], dtype=int), records.note


def _parquet_columns(path: Path) -> tuple:
    """(header, columns of typed cells, None) of a Parquet panel; a stored pandas index is left out."""
    if not path.exists():
        raise PanelError(f"{path}: no such file")
    if path.is_dir():
        raise PanelError(f"{path}: is a directory (a folder), not a file")
    try:
        import pyarrow.parquet as pq

        names = [str(n).strip() for n in pq.read_schema(path).names]
        if len(set(names)) < len(names):  # a table cannot even be read with two columns alike
            _check_header(path, names, [[1]] * len(names))
        table = pq.read_table(path)
    except PanelError:
        raise
    except ImportError:
        raise PanelError("reading Parquet needs pyarrow: pip install pyarrow") from None
    except Exception as exc:  # noqa: BLE001 - any unreadable file is one line
        raise PanelError(f"{path}: cannot be read as Parquet ({type(exc).__name__}: {excerpt(exc, 80)})") from None
    index = {c for c in ((table.schema.pandas_metadata or {}).get("index_columns") or []) if isinstance(c, str)}
    keep = [i for i, n in enumerate(table.column_names) if n not in index]
    header = [str(table.column_names[i]).strip() for i in keep]
    columns = [table.column(i).to_pylist() for i in keep]
    return header, columns, None


def _check_header(path, header, columns):
    """Every column with data has a name, and no two columns the same one."""
    blank = [j for j, h in enumerate(header) if not h and any(not _blank(c) for c in columns[j])]
    if blank:
        raise PanelError(f"{path}: column {blank[0] + 1} holds data but has no name in the header row; "
                         "name every column")
    seen, dup = set(), []
    for h in header:
        if h and h in seen and h not in dup:
            dup.append(h)
        seen.add(h)
    if dup:
        shown = ", ".join(f'"{excerpt(h)}"' for h in dup[:5]) + (f" and {len(dup) - 5} more" if len(dup) > 5 else "")
        raise PanelError(f"{path}: the header names more than one column {shown}; give every column its own name")


def _wide_panel(path, header, columns, lines, date_col) -> Panel:
    names = [h for h in header if h and h.lower() != date_col]
    if not names:
        raise PanelError(f"{path}: no series found; a wide panel has one column per series "
                         "(a long one needs --id and --value)")
    rows = np.arange(1, len(columns[0]) + 1)
    date_idx = next((j for j, h in enumerate(header) if h.lower() == date_col), None)
    if date_idx is not None:  # the rows of every series are fitted in file order, the last as the latest
        where = (lambda i: f"line {int(lines[i])}") if lines is not None else (lambda i: f"data row {i + 1}")
        cells = columns[date_idx]
        days = _parse_dates(cells)
        check_date_order(path, [(where(i), d, cells[i]) for i, d in enumerate(days) if not np.isnan(d)],
                         f'column "{excerpt(header[date_idx])}"')
    panel = Panel({}, {h: rows for h in names}, {h: lines for h in names} if lines is not None else {}, {}, path.name)
    for h, cells in zip(header, columns):
        if h in panel.rows:
            panel[h], msg = _column_values(cells, lambda i, h=h: panel.where(h, i))
            if msg:
                panel.bad[h] = msg
    if date_idx is not None:
        panel.days = {h: days[~np.isnan(days)] for h in names}
    return panel


def _long_panel(path, header, columns, lines, id_col, value_col, date_col) -> Panel:
    for c in (id_col, value_col):
        if c not in header:
            shown = ", ".join(f'"{excerpt(h)}"' for h in header[:20]) + (" ..." if len(header) > 20 else "")
            raise PanelError(f'{path}: no column "{excerpt(c)}" for a long panel; the columns are {shown}')
    ids_raw = columns[header.index(id_col)]
    values = columns[header.index(value_col)]
    line_of = (lambda i: f"line {int(lines[i])}") if lines is not None else (lambda i: f"data row {i + 1}")
    ids = []
    for i, k in enumerate(ids_raw):
        if _blank(k):
            more = sum(1 for x in ids_raw[i + 1:] if _blank(x))
            raise PanelError(f'{path} {line_of(i)}: the id column "{excerpt(id_col)}" is blank'
                             + (f" (and in {more} more rows)" if more else "")
                             + "; every row of a long panel needs its series id")
        ids.append(k.strip() if isinstance(k, str) else str(k))
    order: dict = {}
    for i, k in enumerate(ids):
        order.setdefault(k, []).append(i)
    date_idx = next((j for j, h in enumerate(header) if h.lower() == date_col and h not in (id_col, value_col)), None)
    dates = _parse_dates(columns[date_idx]) if date_idx is not None else None
    for k, idx in order.items():
        starts = [i for j, i in enumerate(idx) if j == 0 or idx[j - 1] != i - 1]
        d = dates[idx] if dates is not None else None
        if d is not None and not np.isnan(d).any():
            seen: dict = {}
            for j, x in enumerate(d):
                if x in seen:
                    raise PanelError(f'{path} {line_of(idx[j])}: series "{excerpt(k)}" has the date of '
                                     f"{line_of(idx[seen[x]])} again; one value per date (a panel made of two "
                                     "pieces?)")
                seen[x] = j
            if len(starts) == 1 or np.all(np.diff(d) > 0):
                # one block, or blocks that follow each other in date order; either way oldest first
                check_date_order(path, [(line_of(i), x, columns[date_idx][i]) for i, x in zip(idx, d)],
                                 f'series "{excerpt(k)}" in column "{excerpt(header[date_idx])}"')
                continue
        if len(starts) > 1:
            shown = " and ".join(line_of(i) for i in starts[:2])
            raise PanelError(f'{path}: series "{excerpt(k)}" comes in {len(starts)} separate blocks (from {shown}); '
                             "keep each series' rows together, or give a date column (YYYY-MM-DD) in date order")
    rows = {k: np.asarray(idx) + 1 for k, idx in order.items()}
    line_map = {k: lines[np.asarray(idx)] for k, idx in order.items()} if lines is not None else {}
    panel = Panel({}, rows, line_map, {}, path.name)
    for k, idx in order.items():
        panel[k], msg = _column_values([values[i] for i in idx], lambda i, k=k: panel.where(k, i))
        if msg:
            panel.bad[k] = msg
    if dates is not None:
        panel.days = {k: dates[np.asarray(idx)][~np.isnan(dates[np.asarray(idx)])] for k, idx in order.items()}
    return panel


def _parse_dates(cells) -> np.ndarray:
    """Each cell as a day number (ISO text or a date value; a time of day as a fraction), NaN
    where it is not a date."""
    out = np.full(len(cells), np.nan)
    for i, c in enumerate(cells):
        d = day_number(c)
        if d is not None:
            out[i] = d
    return out


def read_panel(path, id_col=None, value_col=None, date_col="date", with_rows=False):
    """The :class:`Panel` of a file (a dict of {series id: values}); with ``with_rows`` also its
    {series id: 1-based data rows}, as ``(panel, rows)``."""
    panel = load_panel(path, id_col, value_col, date_col)
    return (panel, panel.rows) if with_rows else panel


# ---------------------------------------------------------------------------------------------
# levels


def lag1_autocorrelation(values) -> float:
    """The sample autocorrelation at lag 1, sum (x[t]-m)(x[t-1]-m) / sum (x[t]-m)^2 over the finite
    values; NaN when there are fewer than three or they are all equal."""
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if x.size < 3 or x.min() == x.max():  # all equal: the mean's rounding would leave a spurious (n-1)/n
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


def levels_to_returns(panel: dict, rows: dict | None = None, where: str = "the panel") -> Panel:
    """Each series of levels p as log returns in percent, 100 ln(p[t]/p[t-1]).

    A missing level (NaN) leaves the returns on both sides of it missing (``run_batch`` treats them
    as blank cells: trimmed at the ends, an error inside unless skipped).  A return is placed at the
    data row of its later level.  A level that is zero or negative is refused (PanelError) naming
    the series and its data row (``rows`` maps ids to 1-based row numbers).
    """
    rows = rows if rows is not None else getattr(panel, "rows", None)
    lines = getattr(panel, "lines", {})
    out = Panel(name=getattr(panel, "name", where))
    out.rows, out.lines, out.bad = {}, {}, dict(getattr(panel, "bad", {}))
    for sid, v in panel.items():
        p = np.asarray(v, dtype=float)
        bad = np.flatnonzero(np.isfinite(p) & (p <= 0))
        if bad.size:
            i = int(bad[0])
            row = int(rows[sid][i]) if rows is not None else i + 1
            raise PanelError(f'{where}: series "{excerpt(sid)}" has the level {p[i]:g} in data row {row}; '
                             "--levels needs levels above zero")
        with np.errstate(invalid="ignore", divide="ignore"):
            out[sid] = 100.0 * np.diff(np.log(p))
        out.rows[sid] = (np.asarray(rows[sid]) if rows is not None else np.arange(1, p.size + 1))[1:]
        if sid in lines:
            out.lines[sid] = np.asarray(lines[sid])[1:]
    return out


# ---------------------------------------------------------------------------------------------
# the run


def _clean(panel, sid, skip_blanks: bool, skip_bad: bool):
    """(returns, skipped cells) of one series, or (None, message) when it cannot be fitted as is."""
    bad = getattr(panel, "bad", {}).get(sid)
    if bad and not skip_bad:
        return None, bad + " (or pass --skip-bad to leave such cells out)"
    x = np.asarray(panel[sid], dtype=float)
    ok = np.isfinite(x)
    if not ok.any():
        return None, "holds no numbers"
    first, last = int(np.argmax(ok)), int(len(ok) - 1 - np.argmax(ok[::-1]))
    inner = x[first:last + 1]
    holes = np.flatnonzero(~np.isfinite(inner))
    if holes.size and not (skip_blanks or skip_bad):
        where = panel.where(sid, first + int(holes[0])) if isinstance(panel, Panel) else f"value {first + int(holes[0]) + 1}"
        more = f" (and {holes.size - 1} more)" if holes.size > 1 else ""
        return None, (f"{where} is blank inside the series{more}; fill it, or pass --options \"missing=skip\" "
                      "to leave blank cells out")
    return inner[np.isfinite(inner)], int(holes.size)


def run_one(task) -> list:
    """Fit one series; tidy rows, or one error row.  Runs in a worker process."""
    sid, values, model, dist, options, horizon, level = task
    from .core import fit, forecast
    from .core.risk import risk

    try:
        r = np.asarray(values, dtype=float)
        r = r[np.isfinite(r)]  # already clean when it comes from run_batch
        f = fit(r, model, dist, options)
        rows = [[sid, "status", "converged", float(f.converged), None, None if f.converged else f.message],
                [sid, "stat", "loglik", f.loglik, None, None], [sid, "stat", "aic", f.aic, None, None],
                [sid, "stat", "bic", f.bic, None, None], [sid, "stat", "nobs", float(f.nobs), None, None]]
        status = getattr(f, "status", None) or ("free",) * len(f.names)
        for n, v, s, st in zip(f.names, f.params, f.std_errors, status):
            # a blank std_error says why, as the fit table's cell does: held fixed, implied by the
            # others, targeted, or on a bound of its domain (no standard error there)
            rows.append([sid, "param", n, float(v), None if not math.isfinite(s) else float(s), STATUS_TEXT.get(st)])
        fc = forecast(f, r, horizon)
        rows += [[sid, "forecast", "vol_1", float(fc.vol[0]), None, None],
                 [sid, "forecast", f"vol_{horizon}", float(fc.vol[-1]), None, None],
                 [sid, "forecast", f"cumvol_{horizon}", float(fc.cumvol[-1]), None, None]]
        rk = risk(f, r, level, 1)
        rows += [[sid, "risk", f"VaR_{level:g}", rk.var, None, None], [sid, "risk", f"ES_{level:g}", rk.es, None, None]]
        return rows
    except Exception as exc:  # noqa: BLE001 - a failed series is recorded, never fatal
        return [_error_row(sid, type(exc).__name__, str(exc))]


def _error_row(sid, kind: str, message: str) -> list:
    return [sid, "error", kind, None, None, excerpt(message, 500)]


def run_batch(panel: dict, model="GARCH(1,1)", dist="normal", options=None, horizon=12, level=0.99,
              workers=None, cluster=None, progress=None, skip_bad=False) -> list:
    """Tidy rows of every series of ``panel``, in panel order; a series that cannot be fitted has
    one error row.  Blank cells at a series' ends are not data; blank cells inside it are an error
    for that series unless the options say ``missing=skip`` (or ``skip_bad``, which also leaves out
    the cells that are not numbers)."""
    from .core.spec import parse_options

    try:
        skip_blanks = parse_options(options).missing == "skip"
    except ValueError:
        skip_blanks = False  # the fits say what is wrong with the options, series by series
    results: dict = {}
    tasks, skipped = [], {}
    for sid in panel:
        r, note = _clean(panel, sid, skip_blanks, skip_bad)
        if r is None:
            results[sid] = [_error_row(sid, "InputError", note)]
        else:
            skipped[sid] = note
            tasks.append((sid, r, model, dist, options, horizon, level))
    total, done = len(panel), len(results)
    if progress and done:
        progress(done, total)
    for sid, rows in _fits(tasks, workers, cluster):
        if skipped.get(sid):
            rows.append([sid, "stat", "skipped", float(skipped[sid]), None, None])
        results[sid] = rows
        done += 1
        if progress:
            progress(done, total)
    return [row for sid in panel for row in results[sid]]


def _fits(tasks, workers, cluster):
    """(id, rows) of each task, as they finish."""
    if not tasks:
        return
    if cluster:
        try:
            from dask.distributed import Client, as_completed
        except ImportError:
            raise PanelError("--cluster needs Dask: pip install 'volcast[cluster]'") from None
        try:
            client = Client(cluster)
        except (OSError, ValueError, TypeError) as exc:  # a timeout is an OSError
            raise PanelError(f"--cluster {excerpt(cluster)}: no Dask scheduler answers there "
                             f"({excerpt(exc, 120)})") from None
        with client:
            futures = client.map(run_one, tasks, pure=False)
            for fut in as_completed(futures):
                rows = fut.result()
                yield rows[0][0], rows
        return
    if workers == 1 or len(tasks) == 1:
        for t in tasks:
            yield t[0], run_one(t)
        return
    workers = min(workers or os.cpu_count() or 1, len(tasks))
    with ProcessPoolExecutor(max_workers=workers) as pool:
        chunk = max(1, len(tasks) // (8 * workers))
        for t, rows in zip(tasks, pool.map(run_one, tasks, chunksize=chunk)):
            yield t[0], rows


# ---------------------------------------------------------------------------------------------
# arguments and output


def check_arguments(model, dist, options, horizon, level) -> None:
    """Refuse (PanelError) arguments that would fail every series, before any fitting: the model,
    distribution and options (with the options the model cannot take: a fixed parameter it does not
    have, target=yes where it does not apply, a fixed value outside its domain), the horizon and the
    VaR level."""
    from .core.distributions import get_distribution
    from .core.errors import InputError
    from .core.estimate import _Problem  # the estimator's own checks of the options, without estimating
    from .core.forecast import MAX_HORIZON
    from .core.likelihood import Likelihood
    from .core.spec import parse_model, parse_options

    if not (isinstance(horizon, int) and 1 <= horizon <= MAX_HORIZON):
        raise PanelError(f"--horizon must be a whole number from 1 to {MAX_HORIZON}, got {horizon}")
    if not (isinstance(level, float) and 0.5 <= level < 1):
        raise PanelError(f"--level must be at least 0.5 and below 1, e.g. 0.99, got {typed_number(level)}")
    try:
        spec, d, opts = parse_model(model), get_distribution(dist), parse_options(options)
    except InputError as exc:
        raise PanelError(str(exc)) from None
    sample = np.random.default_rng(0).standard_normal(max(spec.min_obs, 30))
    try:
        _Problem(Likelihood(sample, spec, d, opts.presample), opts)
        for name, value in opts.fixed_dict.items():  # as the estimator checks them
            if name in d.param_names:
                eta = d.start().copy()
                eta[d.param_names.index(name)] = value
                d.check(eta)
            elif name == "omega" and not spec.family.log_variance and value <= 0:
                raise InputError(f"options: omega must be greater than 0, got {value:g}")
    except InputError as exc:
        raise PanelError(str(exc)) from None


def check_output(out, inputs=()) -> Path:
    """The output path, checked before any work: a .csv or .parquet file in a folder we can write
    in, and not one of the ``inputs``."""
    out = Path(out)
    if out.suffix.lower() not in OUTPUT_SUFFIXES:
        raise PanelError(f"{out}: the output must be a .csv or .parquet file")
    if out.is_dir():
        raise PanelError(f"{out}: is a folder; give a file name such as results.csv")
    for src in inputs:
        src = Path(src)
        same = out.resolve() == src.resolve()
        try:
            same = same or (out.exists() and src.exists() and os.path.samefile(out, src))
        except OSError:
            pass
        if same:
            raise PanelError(f"{out}: is the input file; choose another output name (the input is never written over)")
    parent = out.resolve().parent
    if not parent.exists():
        raise PanelError(f"{out}: the folder {parent} does not exist")
    if not parent.is_dir():
        raise PanelError(f"{out}: {parent} is a file, not a folder")
    try:
        fd, probe = tempfile.mkstemp(dir=parent, prefix=".volcast-", suffix=".probe")
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise PanelError(f"{out}: cannot write in the folder {parent} ({exc.strerror or type(exc).__name__})") from None
    return out


def write_tidy(rows, path) -> Path:
    """Write the tidy rows to ``path`` (.parquet/.pq or CSV) through a temporary file in the same
    folder, so that a failed write leaves no half-written output."""
    import pandas as pd

    path = Path(path)
    df = pd.DataFrame(rows, columns=COLUMNS)
    for c in ("id", "kind", "name"):
        df[c] = df[c].astype(str)
    for c in ("value", "std_error"):
        df[c] = pd.to_numeric(df[c], errors="coerce").astype("float64")
    df["message"] = df["message"].astype(object).where(df["message"].notna(), None)
    parquet = path.suffix.lower() in (".parquet", ".pq")
    fd, tmp = tempfile.mkstemp(dir=path.resolve().parent, prefix=".volcast-", suffix=path.suffix)
    os.close(fd)
    try:
        if parquet:
            df.to_parquet(tmp, index=False)
        else:
            df.to_csv(tmp, index=False)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path
