"""``volcast report BOOK.xlsx|FILE.csv -o REPORT.html``: the model-validation pack.

One self-contained HTML file a validator reads without Volcast: the figures are PNG images
embedded as data URIs, the style sheet is inline, and nothing is fetched from anywhere.  The
sections: the data; the fit with its three kinds of standard errors; the diagnostics with their
readings; parameter stability (Nyblom-Hansen, and the parameter paths of a rolling
re-estimation); a walk-forward backtest (coverage tests, traffic-light zone, ES tests); the
comparison by information criteria and by Diebold-Mariano against an EWMA baseline; the
news-impact curve; the forecast term structure with VaR and ES; the cautions; and what is
needed to reproduce it.

Every number comes from the worksheet layer or the core routine the worksheet function of the
same name calls (``VOLFIT``, ``VOLTESTS``, ``VOLSTABILITY``, ``VOLBACKTEST``, ``VOLCOMPARE``,
``VOLDM``, ``VOLNEWS``, ``VOLFORECAST``, ``VOLRISK``), so a validator can recompute any of them
in the workbook.  A workbook is read through the template contract of DESIGN.md: the returns
through the defined name ``returns``, the model, distribution and options from the fit table at
``fit``, the VaR level from ``var_level``.
"""

from __future__ import annotations

import base64
import dataclasses
import datetime as dt
import hashlib
import html
import io
import math
import platform
import sys
import time
from pathlib import Path

import numpy as np

from .core.errors import VolcastError, excerpt

__all__ = ["ReportError", "Source", "read_workbook", "read_csv", "build_report", "write_report", "MIN_RETURNS"]

#: the fewest returns a report is made from (a backtest needs a window and forecasts after it)
MIN_RETURNS = 60
#: rolling re-estimations for the parameter paths and the backtest (about this many)
ESTIMATIONS = 40
#: the fewest one-step forecasts the backtest makes
MIN_FORECASTS = 30
#: EWMA decay of the baseline: 0.97 for monthly data, 0.94 for daily (common practice)
EWMA_DECAY = {"monthly": 0.97, "daily": 0.94}
#: the candidate variance models of the comparison, beside the model itself
CANDIDATES = ("GARCH(1,1)", "GJR-GARCH(1,1)", "EGARCH(1,1)", "EWMA")

#: the returns' unit for each definition the fit's options may give (returns=...): (what the returns
#: are, how prices p give one, the short label of a column or axis, what a VaR means, how the loss
#: in % of value follows from the returns)
_COMPOUND = "beyond, the quantile and the tail mean of the compounded value change over the simulated paths"
_RETURN_UNITS = {
    "log100": ("log returns in percent", "100 ln(p[t]/p[t-1])", "log return, %",
               "a VaR of 10 means the log returns add up to -10 (percent), not a loss of 10% of the value",
               "VaR_value = 100 (1 - exp(-VaR/100)); ES_value is the mean of the value loss over the tail"),
    "log": ("log returns", "ln(p[t]/p[t-1])", "log return",
            "a VaR of 0.1 means the log returns add up to -0.1, not a loss of 10% of the value",
            "VaR_value = 100 (1 - exp(-VaR)); ES_value is the mean of the value loss over the tail"),
    "simple100": ("simple returns in percent", "100 (p[t]/p[t-1] - 1)", "simple return, %",
                  "a VaR of 10 means the simple returns add up to -10 (percent): over one period a loss of 10% of the "
                  "value; over more, the returns compound and the loss in % of value differs",
                  "over one period they equal VaR and ES; " + _COMPOUND),
    "simple": ("simple returns", "p[t]/p[t-1] - 1", "simple return",
               "a VaR of 0.1 means the simple returns add up to -0.1: over one period a loss of 10% of the value; "
               "over more, the returns compound and the loss in % of value differs",
               "over one period they are 100 times VaR and ES; " + _COMPOUND),
}


def _short_unit(opts) -> str:
    """The returns' unit as a column or axis label: "log return, %", or "return units" when the
    options do not define the returns."""
    return _RETURN_UNITS[opts.returns][2] if opts.returns in _RETURN_UNITS else "return units"


class ReportError(Exception):
    """Bad input for a report: one line for the terminal, exit status 2."""


@dataclasses.dataclass
class Source:
    """The returns and the model a report is made of, and where they came from."""

    returns: np.ndarray
    dates: list | None  # one date per return, or None
    model: str
    dist: str
    options: str | None
    level: float
    path: str
    kind: str  # "workbook" or "CSV"
    note: str  # how the returns were read
    file_sha256: str
    stored_fit: dict | None = None  # the workbook's own fit table (field: value), to compare


def _sha256_file(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _sha256_returns(r) -> str:
    """SHA-256 of the returns as used: one number a line, written with 17 significant digits."""
    text = "\n".join(f"{x:.17g}" for x in np.asarray(r, dtype=float)) + "\n"
    return hashlib.sha256(text.encode("ascii")).hexdigest()


# ---------------------------------------------------------------------------------------------
# reading the inputs

def read_csv(path, column=None, levels=False, model=None, dist=None, options=None, level=0.99) -> Source:
    """The returns of one CSV column (as ``volcast fit`` reads it) and the model given on the
    command line.  With ``levels`` the returns are percent log returns, so ``returns=log100`` is
    added to the options unless they say otherwise; a ``date`` column, if any, dates the returns."""
    from .cli import CliError, _csv_rows, levels_returns_problem, load_returns_csv
    from .core.spec import parse_options
    from .csvtext import spacing_problem

    p = Path(path)
    if not p.is_file():
        raise ReportError(f"{path}: no such file")
    try:
        opts = parse_options(options)
    except VolcastError as exc:
        raise ReportError(excerpt(str(exc), 300)) from None
    levels_returns_problem(levels, opts.returns, ReportError)
    try:
        series = load_returns_csv(str(p), column, skip_blanks=opts.missing == "skip", levels=levels)
        header, records = _csv_rows(str(p))
    except CliError as exc:
        raise ReportError(str(exc)) from None
    if levels and opts.returns is None:
        options = "; ".join(x for x in ((options or "").strip().rstrip(";"), "returns=log100") if x)
    dates = _csv_dates(header, records, series, levels)
    problem = None if dates is None or not opts.periods else spacing_problem(path, dates, opts.periods)
    if problem:
        raise ReportError(problem)
    return Source(np.asarray(series.returns, dtype=float), dates, model or "GARCH(1,1)", dist or "normal", options,
                  level, str(p), "CSV", series.note, _sha256_file(p))


def _csv_dates(header, records, series, levels):
    """The dates of a column named ``date`` beside the returns, when they line up one to one."""
    lowered = [h.strip().lower() for h in header]
    if "date" not in lowered or series.column not in header:
        return None
    di, ci = lowered.index("date"), header.index(series.column)
    rows = [(r[di] if di < len(r) else "", r[ci] if ci < len(r) else "") for _, r in records]
    filled = [i for i, (_, c) in enumerate(rows) if c]
    if not filled:
        return None
    rows = rows[filled[0]: filled[-1] + 1]
    if any(not c for _, c in rows):
        return None  # blanks skipped: no simple pairing
    ds = [d for d, _ in rows][1:] if levels else [d for d, _ in rows]
    if len(ds) != len(series.returns):
        return None
    try:
        return [dt.date.fromisoformat(d.strip()[:10]) for d in ds]
    except ValueError:
        return None


def read_workbook(path, level=None) -> Source:
    """The returns, model, distribution, options and VaR level of a workbook made from a shipped
    template, found through its defined names (DESIGN.md, "Templates").  A workbook whose stored
    values are missing (never recalculated) is recalculated headless first, into a temporary file."""
    import openpyxl

    from .headless.contract import missing_names, name_range

    p = Path(path)
    if not p.is_file():
        raise ReportError(f"{path}: no such file")
    try:
        book = openpyxl.load_workbook(p, data_only=True)
    except Exception as exc:  # noqa: BLE001 - any unreadable file is one line
        raise ReportError(f"{path}: not a readable .xlsx workbook ({excerpt(exc, 120)})") from None
    missing = [n for n in missing_names(book) if n in ("returns", "fit")]
    if missing:
        raise ReportError(f"{path}: the workbook lacks the template's defined name{'s' if len(missing) > 1 else ''} "
                          f"{', '.join(missing)}; make it from a shipped template (volcast template monthly -o "
                          "BOOK.xlsx) or pass a CSV of returns")
    note = ""
    if _stored_fit(book, name_range(book, "fit")) is None:
        book = _recalculated(p)
        note = " (recalculated headless: the file had no stored values)"
    sheet, r1, c1, r2, c2 = name_range(book, "returns")
    if c1 != c2:
        raise ReportError(f"{path}: the name returns covers several columns; the template's is one column")
    ws = book[sheet]
    cells = [ws.cell(r, c1).value for r in range(r1, r2 + 1)]
    date_col = [ws.cell(r, c1 - 2).value for r in range(r1, r2 + 1)] if c1 > 2 else [None] * len(cells)
    filled = [i for i, v in enumerate(cells) if v is not None and v != ""]
    if not filled:
        raise ReportError(f"{path}: the returns range ({sheet}) holds no numbers; load the history first "
                          "(volcast refresh BOOK.xlsx --data HISTORY.csv -o BOOK2.xlsx)")
    returns, dates = [], []
    for i in range(filled[0], filled[-1] + 1):
        v = cells[i]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise ReportError(f"{path}: {sheet} row {r1 + i} of the returns range holds "
                              f"{excerpt(repr(v), 40)}, not a number; fix the data and recalculate")
        returns.append(float(v))
        d = date_col[i]
        dates.append(d.date() if isinstance(d, dt.datetime) else d if isinstance(d, dt.date) else None)
    if any(d is None for d in dates):
        dates = None
    fit = _stored_fit(book, name_range(book, "fit"))
    if isinstance(fit.get("model"), str) and fit["model"].startswith("ERROR"):
        raise ReportError(f"{path}: the workbook's fit table holds an error: {excerpt(fit['model'], 160)}")
    for key in ("model", "dist"):
        if not isinstance(fit.get(key), str) or not fit[key].strip():
            raise ReportError(f"{path}: the fit table at the name fit has no {key} row; is this a Volcast template?")
    if level is None:
        ref = name_range(book, "var_level")
        lv = None if ref is None else book[ref[0]].cell(ref[1], ref[2]).value
        level = float(lv) if isinstance(lv, (int, float)) and not isinstance(lv, bool) and 0.5 <= lv < 1 else 0.99
    note = f"the range named returns ({sheet}, rows {r1 + filled[0]}-{r1 + filled[-1]}) of {p.name}: " \
           f"{len(returns)} returns{note}"
    return Source(np.array(returns), dates, fit["model"], fit["dist"], fit.get("options") or None, level, str(p),
                  "workbook", note, _sha256_file(p), stored_fit=fit)


def _stored_fit(book, ref):
    """{field: value} of the fit table stored at the anchor ``ref``, or None when it has no values."""
    if ref is None:
        return None
    ws = book[ref[0]]
    r, c = ref[1], ref[2]
    out = {}
    for row in range(r, r + 400):
        key = ws.cell(row, c).value
        if key is None:
            break
        if isinstance(key, str):
            out[key.strip()] = ws.cell(row, c + 1).value
    return out if out.get("model") is not None else None


def _recalculated(p):
    import tempfile

    import openpyxl

    from .headless.recalc import RecalcError, recalc

    with tempfile.TemporaryDirectory(prefix="volcast-report-") as tmp:
        try:
            out, _ = recalc(p, Path(tmp) / "book.xlsx", values_only=True)
        except RecalcError as exc:
            raise ReportError(str(exc)) from None
        return openpyxl.load_workbook(out, data_only=True)


# ---------------------------------------------------------------------------------------------
# the computations

class _Clock:
    """Progress lines on standard error: what runs, and how long it took."""

    def __init__(self, stream=None):
        self.stream = stream if stream is not None else sys.stderr
        self.t0 = time.perf_counter()

    def say(self, text):
        if self.stream:
            print(f"report: {text}", file=self.stream, flush=True)

    def step(self, text):
        return _Step(self, text)


class _Step:
    def __init__(self, clock, text):
        self.clock, self.text = clock, text

    def __enter__(self):
        self.t = time.perf_counter()
        self.clock.say(f"{self.text} ...")
        return self

    def __exit__(self, *exc):
        if exc[0] is None:
            self.clock.say(f"{self.text}: done in {time.perf_counter() - self.t:.1f} s")


def _cells(r):
    return [[float(x)] for x in r]


def _check_cells(result, what):
    """A worksheet result that is one ERROR: cell becomes a refusal naming the step."""
    if len(result) == 1 and len(result[0]) == 1 and isinstance(result[0][0], str) and result[0][0].startswith("ERROR"):
        raise ReportError(f"{what}: {excerpt(result[0][0][7:].strip(), 300)}")
    return result


def _with_option(options, key, value):
    """The options string with ``key`` set to ``value`` (any earlier setting of it removed)."""
    parts = [p for p in (options or "").split(";") if p.strip() and p.split("=")[0].strip().lower() != key]
    return "; ".join([p.strip() for p in parts] + [f"{key}={value}"])


def _frequency(opts, dates):
    """('monthly' | 'daily' | 'weekly' | None, periods per year) from the options or the dates."""
    periods = opts.periods
    if periods is None and dates and len(dates) > 10:
        gaps = np.diff([d.toordinal() for d in dates])
        med = float(np.median(gaps))
        periods = 12 if 25 <= med <= 35 else 52 if 6 <= med <= 8 else 252 if med <= 4 else None
    kind = {12: "monthly", 52: "weekly", 252: "daily", 250: "daily", 260: "daily"}.get(periods)
    return kind, periods


def _mean_part(spec):
    return "" if spec.mean_canonical == "CONST" else spec.mean_canonical + "-"


def compute(src: Source, clock=None, estimations: int = ESTIMATIONS) -> dict:
    """Every figure of the report, as plain values and rows (the HTML is :func:`render`)."""
    from . import sheet
    from .core import readings
    from .core.backtest import backtest as core_backtest
    from .core.comparison import diebold_mariano
    from .core.distributions import get_distribution
    from .core.estimate import fit as core_fit
    from .core.forecast import DEFAULT_SEED
    from .core.spec import parse_model, parse_options
    from .sheet.fittable import encode
    from .sheet.functions import fit_from_cells

    clock = clock or _Clock()
    r = np.asarray(src.returns, dtype=float)
    n = len(r)
    try:
        spec = parse_model(src.model)
        dist = get_distribution(src.dist)
        opts = parse_options(src.options)
    except VolcastError as exc:
        raise ReportError(excerpt(str(exc), 300)) from None
    if not (isinstance(src.level, (int, float)) and 0.5 <= src.level < 1):
        raise ReportError(f"the VaR level must be at least 0.5 and below 1, e.g. 0.99, got {src.level:g}")
    if spec.n_regressors or opts.xvar:
        raise ReportError("the report does not take models with regressors yet")
    if n < MIN_RETURNS:
        raise ReportError(f"{src.path}: too few returns for a validation report: {n}; it needs at least "
                          f"{MIN_RETURNS} (a backtest window and forecasts after it)")
    if not np.all(np.isfinite(r)):
        raise ReportError(f"{src.path}: the returns hold a value that is not a finite number")
    cells = _cells(r)
    out = {"n": n, "spec": spec, "dist": dist, "opts": opts}
    freq, periods = _frequency(opts, src.dates)
    out["freq"], out["periods"] = freq, periods

    # --- the fit, three kinds of standard errors --------------------------------------------
    with clock.step(f"fitting {spec.canonical} with {dist.name} shocks on {n} returns"):
        tables = {}
        try:
            for kind in ("hessian", "opg", "robust"):
                res, _ = fit_from_cells(cells, spec.canonical, dist.name, _with_option(src.options, "se", kind),
                                        bounded=False)
                tables[kind] = encode(res)
            main, _ = fit_from_cells(cells, spec.canonical, dist.name, src.options, bounded=False)
        except VolcastError as exc:
            raise ReportError(f"the fit: {excerpt(str(exc), 300)}") from None
    fit_table = encode(main)
    out["fit"], out["fit_table"], out["se_tables"] = main, fit_table, tables

    # --- data summary and in-sample series ----------------------------------------------------
    from scipy import stats

    out["summary"] = {
        "n": n, "mean": float(np.mean(r)), "sd": float(np.std(r, ddof=1)),
        "skew": float(stats.skew(r)), "kurt": float(stats.kurtosis(r)),
        "min": float(np.min(r)), "max": float(np.max(r)),
    }
    vol = _check_cells(sheet.VOLSERIES(cells, fit_table, "vol"), "VOLSERIES")
    out["insample_vol"] = np.array([row[0] if isinstance(row[0], (int, float)) else np.nan for row in vol])

    # --- diagnostics, stability ---------------------------------------------------------------
    with clock.step("diagnostics and the Nyblom-Hansen stability test"):
        # a test that cannot run says why in its section; the rest of the report still stands
        out["tests"] = _soft(lambda: _check_cells(sheet.VOLTESTS(cells, fit_table), "VOLTESTS"))
        out["stability"] = _soft(lambda: _check_cells(sheet.VOLSTABILITY(cells, fit_table), "VOLSTABILITY"))

    # --- rolling re-estimation: the windows shared by the parameter paths and the backtest ----
    window = max(spec.min_obs, n // 3)
    if n - window < MIN_FORECASTS:
        raise ReportError(f"{src.path}: too few returns for the walk-forward backtest: {n} returns leave "
                          f"{n - window} forecasts after a window of {window}; it needs {MIN_FORECASTS}")
    refit = max(1, math.ceil((n - window) / estimations))
    out["window"], out["refit"] = window, refit
    ends = list(range(window, n, refit)) + [n]
    with clock.step(f"rolling re-estimation: {len(ends)} windows of {window} returns, warm starts"):
        paths, prev = [], ()
        for e in ends:
            try:
                f = core_fit(r[e - window:e], spec, dist, opts, starts=prev)
            except VolcastError:
                paths.append(None)
                continue
            paths.append(f)
            prev = (f.params,)
    out["paths"] = (ends, paths)

    level = src.level
    out["level"] = level
    with clock.step(f"walk-forward backtest at {level:.1%}: rolling window {window}, refit every {refit}"):
        try:
            bt = core_backtest(r, spec, dist, opts, window, level, "rolling", refit)
        except VolcastError as exc:
            bt = None
            out["backtest_error"] = f"the backtest cannot be run: {excerpt(str(exc), 300)}"
            clock.say(out["backtest_error"])
    out["backtest"] = bt
    out["backtest_rows"] = None if bt is None else _backtest_rows(bt, readings)
    decay = EWMA_DECAY.get(freq or "", 0.97 if (periods or 12) <= 52 else 0.94)
    out["ewma_decay"] = decay
    ewma_opts = f"decay={decay}"
    with clock.step(f"EWMA baseline (decay {decay}, normal shocks) on the same windows"):
        try:
            ew = core_backtest(r, parse_model("EWMA"), get_distribution("normal"), parse_options(ewma_opts), window,
                               level, "rolling", refit)
        except VolcastError as exc:
            raise ReportError(f"the EWMA baseline: {excerpt(str(exc), 300)}") from None
    out["ewma"], out["ewma_options"] = ew, ewma_opts
    out["ewma_rows"] = _backtest_rows(ew, readings)
    dm = None if bt is None else diebold_mariano(bt.qlike_series, ew.qlike_series)
    out["dm"] = dm
    out["dm_rows"] = None if dm is None else [["mean_diff", dm.mean_diff], ["statistic", dm.statistic], ["p_value", dm.p_value],
                      ["lags", dm.lags], ["pairs", dm.pairs],
                      ["reading", readings.diebold_mariano(dm, "the model", "EWMA")]]

    # --- comparison by information criteria ---------------------------------------------------
    mean = _mean_part(spec)
    models = [spec.canonical] + [mean + c for c in CANDIDATES if parse_model(mean + c).canonical != spec.canonical]
    dists = list(dict.fromkeys([dist.name, "normal", "t"]))
    out["compare_models"], out["compare_dists"] = models, dists
    with clock.step(f"comparison: {len(models)} models x {len(dists)} distributions"):
        rows = []
        for m in models:
            for d in dists:
                try:
                    res, _ = fit_from_cells(cells, m, d, src.options, bounded=False)
                except VolcastError as exc:
                    rows.append([m, d, f"ERROR: {excerpt(str(exc), 120)}"] + [None] * 7)
                    continue
                rows.append([res.spec.canonical, res.dist.name, float(res.loglik), int(res.n_free), float(res.aic),
                             float(res.bic), None if res.persistence is None else float(res.persistence),
                             bool(res.converged), None, None])
        for col, rank in ((4, 8), (5, 9)):
            ok = sorted((row[col], i) for i, row in enumerate(rows) if isinstance(row[col], float) and row[7])
            for k, (_, i) in enumerate(ok, start=1):
                rows[i][rank] = k
    out["compare"] = rows

    # --- news impact, forecasts ------------------------------------------------------------------
    sd = math.sqrt(main.uncond_variance) if main.uncond_variance and main.uncond_variance > 0 else out["summary"]["sd"]
    shocks = np.linspace(-3 * sd, 3 * sd, 61)
    curve = _check_cells(sheet.VOLNEWS(fit_table, _cells(shocks)), "VOLNEWS")
    out["news"] = (shocks, np.array([c[0] for c in curve], dtype=float))
    pts = [k * sd for k in (-2, -1, 0, 1, 2)]
    at = _check_cells(sheet.VOLNEWS(fit_table, _cells(pts)), "VOLNEWS")
    out["news_points"] = [(k, e, float(v[0])) for k, e, v in zip((-2, -1, 0, 1, 2), pts, at)]
    out["news_sd"] = sd

    per_month = None
    if periods in (12, 52, 250, 252, 260):
        per_month = {12: 1, 52: 52 / 12, 250: 21, 252: 21, 260: 21}[periods]
    steps = [max(1, round(k * per_month)) for k in range(1, 13)] if per_month else list(range(1, 13))
    out["horizons"] = steps
    out["horizon_unit"] = "month" if per_month else "period"
    # the paths VOLRISK simulates at each horizon beyond one period, as the core chooses them
    from .core.risk import default_paths

    paths_at = {h: opts.paths or default_paths(spec, h) for h in steps if h > 1}
    out["paths_words"] = _paths_words(paths_at, steps, out["horizon_unit"])
    with clock.step(f"forecast term structure and VaR/ES at {len(steps)} horizons ({out['paths_words']} "
                    "beyond one period)"):
        H = max(steps)
        fc = _check_cells(sheet.VOLFORECAST(cells, fit_table, H, "table"), "VOLFORECAST")
        out["forecast_table"] = fc
        term = []
        for k, h in enumerate(steps, start=1):
            rk = dict((row[0], row[1]) for row in _check_cells(sheet.VOLRISK(cells, fit_table, level, h), "VOLRISK")[1:])
            cum = fc[h][4]
            term.append({"k": k, "h": h, "cumvar": cum, "cumvol": math.sqrt(cum) if isinstance(cum, float) else None,
                         "risk": rk})
    out["term"] = term
    out["seed"] = opts.seed if opts.seed is not None else DEFAULT_SEED
    return out


def _paths_words(paths_at: dict, steps: list, unit: str) -> str:
    """The simulated paths of the risk figures in words: "131,072 simulated paths", or where they
    differ between horizons (fewer over long ones) each count with its horizons, numbered as the
    term structure numbers them (the k-th month or period)."""
    groups: list = []  # [paths, [k, ...]]
    for k, h in enumerate(steps, start=1):
        if h in paths_at:
            if groups and groups[-1][0] == paths_at[h]:
                groups[-1][1].append(k)
            else:
                groups.append([paths_at[h], [k]])
    if len(groups) == 1:
        return f"{groups[0][0]:,} simulated paths"
    return ", ".join(f"{n:,} simulated paths at {unit}s {ks[0]}-{ks[-1]}" if len(ks) > 1 else
                     f"{n:,} simulated paths at {unit} {ks[0]}" for n, ks in groups)


def _soft(make):
    """The rows ``make`` returns, or the reason it could not (a text) when it refuses."""
    try:
        return make()
    except ReportError as exc:
        return str(exc)
    except VolcastError as exc:
        return excerpt(str(exc), 300)


def _backtest_rows(bt, readings):
    """The rows VOLBACKTEST shows, from the same core backtest (the worksheet layer lays them out)."""
    from .sheet.functions import coverage_rows, es_rows

    c = bt.coverage
    return (coverage_rows(c) + [["mean QLIKE", bt.qlike], ["mean MSE", bt.mse], ["estimations", bt.fits],
                                ["coverage reading", readings.coverage(c)]] + es_rows(bt.es_tests, bt.es_reason))


# ---------------------------------------------------------------------------------------------
# figures

def _figure_uri(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    import matplotlib.pyplot as plt

    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _figures(src: Source, res: dict) -> dict:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    navy, red, grey = "#1F3A5F", "#C0504D", "#9AA5B1"
    figs = {}
    n = res["n"]
    x = src.dates if src.dates else np.arange(1, n + 1)
    xlabel = "date" if src.dates else "observation"

    fig, ax = plt.subplots(figsize=(9, 3.4))
    ax.plot(x, src.returns, color=grey, lw=0.7, label="return")
    ax.plot(x, res["insample_vol"], color=navy, lw=1.3, label="conditional volatility (in-sample)")
    ax.plot(x, -res["insample_vol"], color=navy, lw=0.8, alpha=0.6)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(_short_unit(res["opts"]))
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=8)
    fig.tight_layout()
    figs["data"] = _figure_uri(fig)

    ends, paths = res["paths"]
    names = [nm for nm, st in zip(res["fit"].names, res["fit"].status) if st == "free"]
    if names:
        cols = 3 if len(names) > 4 else 2 if len(names) > 1 else 1
        rows = math.ceil(len(names) / cols)
        fig, axes = plt.subplots(rows, cols, figsize=(9, 2.1 * rows + 0.4), squeeze=False)
        ex = [src.dates[e - 1] for e in ends] if src.dates else ends
        full = res["fit"].param_dict
        for k, nm in enumerate(names):
            ax = axes[k // cols][k % cols]
            est = np.array([np.nan if f is None else f.param_dict.get(nm, np.nan) for f in paths])
            se = np.array([np.nan if f is None else f.std_errors[f.names.index(nm)] for f in paths])
            ax.fill_between(ex, est - 2 * se, est + 2 * se, color=navy, alpha=0.15, lw=0)
            ax.plot(ex, est, color=navy, lw=1.2, marker="o", ms=2.5)
            ax.axhline(full[nm], color=red, lw=1, ls="--")
            # the axis follows the estimates and the typical band: a window whose standard error
            # explodes does not flatten the rest
            fin = est[np.isfinite(est)]
            if fin.size:
                lo, hi = min(fin.min(), full[nm]), max(fin.max(), full[nm])
                band = np.isfinite(se)
                if band.any():
                    lo = min(lo, float(np.median((est - 2 * se)[band])))
                    hi = max(hi, float(np.median((est + 2 * se)[band])))
                pad = 0.15 * (hi - lo) or 0.1 * max(abs(hi), 1e-3)
                ax.set_ylim(lo - pad, hi + pad)
            ax.set_title(nm, fontsize=9)
            ax.tick_params(labelsize=7)
            ax.grid(alpha=0.3)
        for k in range(len(names), rows * cols):
            axes[k // cols][k % cols].axis("off")
        fig.suptitle("estimate on each rolling window (line), +/- 2 robust standard errors (band), "
                     "full-sample estimate (dashed)", fontsize=8)
        fig.tight_layout()
        figs["paths"] = _figure_uri(fig)

    bt = res["backtest"] or res["ewma"]
    bx = [src.dates[i] for i in bt.index] if src.dates else bt.index + 1
    fig, ax = plt.subplots(figsize=(9, 3.4))
    if res["backtest"] is None:
        ax.set_title("the model's backtest could not be run; the EWMA baseline alone", fontsize=9)
    ax.plot(bx, bt.actual, color=grey, lw=0.8, label="return")
    if res["backtest"] is not None:
        ax.plot(bx, -bt.var, color=red, lw=1.1, label=f"minus VaR {res['level']:.1%} (one step)")
        ax.plot(bx, -bt.es, color=red, lw=0.8, ls=":", label="minus ES")
    ax.plot(bx, -res["ewma"].var, color=navy, lw=0.8, ls="--", label="minus VaR of the EWMA baseline")
    xs = bt.exception
    ax.scatter(np.asarray(bx)[xs], bt.actual[xs], color=red, s=16, zorder=3, label="exceptions")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(_short_unit(res["opts"]))
    ax.grid(alpha=0.3)
    ax.legend(loc="lower left", fontsize=7, ncol=3)
    fig.tight_layout()
    figs["backtest"] = _figure_uri(fig)

    shocks, curve = res["news"]
    fig, ax = plt.subplots(figsize=(6.5, 3.2))
    ax.plot(shocks, curve, color=navy, lw=1.5)
    ax.axvline(0, color=grey, lw=0.8)
    ax.set_xlabel(f"shock e ({_short_unit(res['opts'])})")
    ax.set_ylabel("next-period variance")
    ax.grid(alpha=0.3)
    fig.tight_layout()
    figs["news"] = _figure_uri(fig)

    term = res["term"]
    fig, ax = plt.subplots(figsize=(6.5, 3.2))
    ks = [t["k"] for t in term]
    ax.plot(ks, [t["cumvol"] for t in term], color=navy, marker="o", ms=3,
            label=f"volatility of the cumulative return ({_short_unit(res['opts'])})")
    var_key = "VaR_value" if "VaR_value" in term[0]["risk"] else "VaR"
    es_key = "ES_value" if "ES_value" in term[0]["risk"] else "ES"
    unit = "loss in % of value" if var_key == "VaR_value" else _short_unit(res["opts"])
    ax.plot(ks, [_num(t["risk"].get(var_key)) for t in term], color=red, marker="o", ms=3,
            label=f"VaR {res['level']:.1%} ({unit})")
    ax.plot(ks, [_num(t["risk"].get(es_key)) for t in term], color=red, ls=":", marker="o", ms=3,
            label=f"ES {res['level']:.1%} ({unit})")
    ax.set_xlabel(f"horizon ({res['horizon_unit']}s)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=7)
    fig.tight_layout()
    figs["term"] = _figure_uri(fig)
    return figs


def _num(v):
    return float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) else np.nan


# ---------------------------------------------------------------------------------------------
# HTML

_CSS = """
body { font-family: "DejaVu Sans", Arial, Helvetica, sans-serif; font-size: 10.5pt; color: #1b1b1b;
       max-width: 1050px; margin: 1.5em auto; padding: 0 1em; line-height: 1.35; }
h1 { font-size: 18pt; margin-bottom: 0.2em; color: #1F3A5F; }
h2 { font-size: 13.5pt; color: #1F3A5F; border-bottom: 2px solid #1F3A5F; padding-bottom: 2px; margin-top: 1.6em; }
h3 { font-size: 11pt; margin: 1em 0 0.3em; }
p.sub { margin-top: 0; color: #444; }
table { border-collapse: collapse; margin: 0.4em 0 0.8em; font-size: 9.5pt; }
th, td { border: 1px solid #c9ced6; padding: 2px 6px; vertical-align: top; }
th { background: #e8edf3; text-align: left; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.reject { background: #fbe3e2; }
td.ok { background: #e5f2e5; }
.zone-green { background: #d7efd7; } .zone-yellow { background: #fff2c2; } .zone-red { background: #f7c9c7; }
figure { margin: 0.5em 0 1em; }
figure img { max-width: 100%; height: auto; border: 1px solid #e0e0e0; }
figcaption { font-size: 9pt; color: #444; }
.caution { border: 2px solid #C0504D; background: #fff6f5; padding: 0.6em 0.9em; }
.note { font-size: 9pt; color: #444; }
code { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: 9pt; }
nav ol { columns: 2; font-size: 9.5pt; }
@page { size: A4; margin: 14mm 12mm; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 9.5pt; }
  nav { display: none; }
  section { break-before: page; }
  section.first { break-before: auto; }
  h2, h3 { break-after: avoid; }
  table, figure, .caution { break-inside: avoid; }
  table.long { break-inside: auto; }
  thead { display: table-header-group; }
  tr { break-inside: avoid; }
  a { color: inherit; text-decoration: none; }
}
"""


def _fmt(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if not math.isfinite(v):
            return "" if math.isnan(v) else ("infinity" if v > 0 else "-infinity")
        return f"{v:.6g}" if v == 0 or 1e-4 <= abs(v) < 1e7 else f"{v:.5e}"
    return str(v)


def _td(v, extra="") -> str:
    num = isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)
    cls = " ".join(c for c in ("num" if num else "", extra) if c)
    return f"<td{f' class={chr(34)}{cls}{chr(34)}' if cls else ''}>{html.escape(_fmt(v))}</td>"


def _table(tid, header, rows, classes=None, long=False) -> str:
    head = "".join(f"<th>{html.escape(str(h))}</th>" for h in header)
    body = []
    for i, row in enumerate(rows):
        cl = classes[i] if classes else [""] * len(row)
        body.append("<tr>" + "".join(_td(v, c) for v, c in zip(row, cl)) + "</tr>")
    return (f'<table id="{tid}"{" class=" + chr(34) + "long" + chr(34) if long else ""}><thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(body)}</tbody></table>")


def _p_class(p):
    return "reject" if isinstance(p, float) and p < 0.05 else "ok" if isinstance(p, float) else ""


def _figure(uri, caption, alt) -> str:
    return (f'<figure><img src="{uri}" alt="{html.escape(alt)}"><figcaption>{html.escape(caption)}</figcaption>'
            "</figure>")


def _esc(text) -> str:
    return html.escape(str(text))


def render(src: Source, res: dict, figs: dict, command: str | None = None) -> str:
    from . import __version__

    fit = res["fit"]
    spec, dist, opts = res["spec"], res["dist"], res["opts"]
    now = dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    s = res["summary"]
    parts = []
    add = parts.append
    title = f"Model validation pack: {spec.canonical} with {dist.name} shocks"
    add(f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>{_esc(title)}</title>"
        f"<meta name=\"generator\" content=\"Volcast {_esc(__version__)}\"><style>{_CSS}</style></head><body>")
    add(f"<h1>{_esc(title)}</h1>")
    add(f"<p class=\"sub\">{_esc(Path(src.path).name)} ({_esc(src.kind)}) &middot; {s['n']} returns"
        + (f", {src.dates[0].isoformat()} to {src.dates[-1].isoformat()}" if src.dates else "")
        + f" &middot; made {now} by Volcast {_esc(__version__)}</p>")
    add('<div class="caution"><b>Caution.</b> Every figure here is a model estimate, not investment advice and not '
        "a guarantee of future risk. Volatility forecasts, VaR and ES depend on the model, the data and the sample "
        "chosen, and can be badly wrong in a crisis. Validate any use under your firm's model-risk policy and the "
        "regulation that applies to you (section 10).</div>")
    secs = ["Data", "Fit and standard errors", "Diagnostics", "Parameter stability", "Walk-forward backtest",
            "Model comparison", "News-impact curve", "Forecast term structure, VaR and ES", "Cautions",
            "Reproducibility"]
    add("<nav><h3>Contents</h3><ol>" + "".join(f'<li><a href="#s{i}">{_esc(t)}</a></li>'
                                               for i, t in enumerate(secs, start=1)) + "</ol></nav>")

    # 1 data
    add('<section class="first" id="s1"><h2>1. Data</h2>')
    defined = _RETURN_UNITS.get(opts.returns)
    add(f"<p>{_esc(src.note[:1].upper() + src.note[1:])}. "
        + (f"Returns: {defined[0]}, {defined[1]} (returns={opts.returns})" if defined
           else "Returns in the units of the input (the options do not say how they are defined)")
        + (f"; {res['freq']} data, {res['periods']} periods a year" if res["periods"] else "") + ".</p>")
    rows = [["returns", s["n"]]]
    if src.dates:
        rows += [["first date", src.dates[0].isoformat()], ["last date", src.dates[-1].isoformat()]]
    rows += [["mean", s["mean"]], ["standard deviation (n - 1)", s["sd"]], ["skewness", s["skew"]],
             ["excess kurtosis", s["kurt"]], ["minimum", s["min"]], ["maximum", s["max"]]]
    add(_table("summary", ["statistic", "value"], rows))
    add('<p class="note">Skewness and excess kurtosis use population moments (kurtosis of the normal = 0).</p>')
    add(_figure(figs["data"], "Returns and the fitted in-sample conditional volatility (+/-).",
                "returns and conditional volatility"))
    add("</section>")

    # 2 fit
    add('<section id="s2"><h2>2. Fit and standard errors</h2>')
    add(f"<p>Maximum likelihood, model <code>{_esc(spec.canonical)}</code>, shocks <code>{_esc(dist.name)}</code>, "
        f"options <code>{_esc(opts.canonical)}</code> (as <code>VOLFIT</code> estimates it). Standard errors of three "
        "kinds: the inverse Hessian, the outer product of the scores (OPG) and the quasi-ML sandwich "
        "(Bollerslev-Wooldridge 1992; robust to non-normal shocks). t and p use the robust kind"
        + ("" if opts.se == "robust" else f"; the fit's options choose se={_esc(opts.se)}, the table at the name fit shows that kind")
        + ".</p>")
    se_rows = {k: {row[0]: row for row in t[1:]} for k, t in res["se_tables"].items()}
    prow = []
    for nm, est, st in zip(fit.names, fit.params, fit.status):
        rb = se_rows["robust"].get(nm, [None] * 5)
        prow.append([nm, float(est), se_rows["hessian"].get(nm, [None] * 3)[2], se_rows["opg"].get(nm, [None] * 3)[2],
                     rb[2], rb[3], rb[4]])
    add(_table("fit", ["parameter", "estimate", "se Hessian", "se OPG", "se robust", "t (robust)", "p (robust)"], prow))
    stats_rows = [[k, v] for k, v, *_ in res["fit_table"][1:] if k in ("loglik", "aic", "bic", "nobs", "persistence",
                                                                        "uncond_variance", "half_life")]
    stats_rows.append(["converged", fit.converged])
    add(_table("fitstats", ["statistic", "value"], stats_rows))
    add(f'<p class="note">Optimiser: {_esc(fit.message)}.</p>')
    if src.stored_fit is not None:
        ll = src.stored_fit.get("loglik")
        if isinstance(ll, (int, float)):
            same = abs(ll - fit.loglik) <= 1e-6 * max(1.0, abs(fit.loglik))
            add(f"<p class=\"note\">The workbook's stored fit table has log-likelihood {_esc(_fmt(float(ll)))}: "
                + ("the same fit." if same else "<b>not the fit above</b>: the workbook was not recalculated after "
                   "its data or inputs changed.") + "</p>")
    if not fit.converged:
        add('<p class="caution"><b>The estimation did not converge</b>: none of the figures below can be relied on.</p>')
    add("</section>")

    # 3 diagnostics
    add('<section id="s3"><h2>3. Diagnostics of the standardised residuals</h2>')
    add("<p>As <code>VOLTESTS</code> computes them: Ljung-Box on z and z^2, Engle's ARCH-LM, Jarque-Bera and the "
        "Engle-Ng (1993) sign and size bias tests, each with its reading at 5%. A rejection is not always a defect: "
        "Jarque-Bera rejects on almost any return series, which is expected under t, skewed-t or GED shocks; with "
        "eight tests at 5%, one rejection in a good model is not unusual.</p>")
    t = res["tests"]
    if isinstance(t, str):
        add(f'<p class="caution">The diagnostics cannot be computed: {_esc(t)}</p>')
    else:
        add(_table("tests", t[0], t[1:], [["", "", "", _p_class(row[3]), ""] for row in t[1:]]))
    add("</section>")

    # 4 stability
    add('<section id="s4"><h2>4. Parameter stability</h2>')
    add("<p>The Nyblom (1989) test in Hansen's (1992) form, as <code>VOLSTABILITY</code> computes it from the "
        "per-observation scores at the estimate: one statistic per estimated parameter and a joint one, with the 5% "
        "critical values of Hansen (1992, Table 1; 0.470 for one parameter). A statistic above its critical value "
        "says the parameter moved within the sample.</p>")
    st = res["stability"]
    if isinstance(st, str):
        add(f'<p class="caution">The Nyblom-Hansen test cannot be computed: {_esc(st)}</p>')
    else:
        add(_table("stability", st[0], st[1:], [["", "", "", "reject" if row[3] is True else "ok" if row[3] is False
                                                   else "", ""] for row in st[1:]]))
    ends, paths = res["paths"]
    bad = sum(1 for f in paths if f is None or not f.converged)
    add(f"<p>Rolling re-estimation on {len(ends)} windows of {res['window']} returns, every {res['refit']} "
        f"{'period' if res['refit'] == 1 else 'periods'} from the first full window to the end (each started from "
        f"the previous window's estimate as well as the usual starting points)"
        + (f"; {bad} window{'s' if bad != 1 else ''} did not converge (left out or marked)" if bad else "")
        + ". Estimates on short windows are noisy: a parameter that jumps to a bound of its range (an ARCH or GARCH "
        "weight at 0, a t shape at its upper limit) says that window does not identify it, not that the model "
        "changed. Read the paths beside the Nyblom-Hansen statistics, which use the whole sample.</p>")
    if "paths" in figs:
        add(_figure(figs["paths"], "Parameter paths of the rolling re-estimation, dated by each window's last return.",
                    "parameter paths"))
    prow = []
    names = [nm for nm, stt in zip(fit.names, fit.status) if stt == "free"]
    for e, f in zip(ends, paths):
        label = src.dates[e - 1].isoformat() if src.dates else e
        prow.append([label] + ([f.param_dict.get(nm) for nm in names] + [f.converged] if f is not None
                               else [None] * len(names) + ["failed"]))
    add("<h3>Estimates by window</h3>")
    add(_table("paths", ["window ends"] + names + ["converged"], prow, long=True))
    add("</section>")

    # 5 backtest
    bt = res["backtest"]
    add('<section id="s5"><h2>5. Walk-forward backtest</h2>')
    if bt is None:
        add(f'<p class="caution">{_esc(res["backtest_error"][:1].upper() + res["backtest_error"][1:])}. The model is '
            f"re-estimated on rolling windows of {res['window']} returns every {res['refit']} periods; a model that "
            "cannot be estimated or forecast on windows that short needs a longer history.</p>")
    else:
        _backtest_section(add, res, spec, dist, src, figs)
    add("</section>")

    _comparison_section(add, res)
    _rest(add, src, res, figs, fit, opts, now, command)
    return "".join(parts)


def _backtest_section(add, res, spec, dist, src, figs):
    bt = res["backtest"]
    add(f"<p>One-step forecasts of the variance, VaR and ES at {res['level']:.1%} for each of the last "
        f"{bt.coverage.forecasts} returns, the model re-estimated on a rolling window of {res['window']} returns every "
        f"{res['refit']} {'period' if res['refit'] == 1 else 'periods'} ({bt.fits} estimations), as "
        f"<code>VOLBACKTEST(returns, \"{_esc(spec.canonical)}\", {res['window']}, {res['level']:g}, "
        f"\"dist={_esc(dist.name)}; refit={res['refit']}"
        + (f"; {_esc(src.options)}" if src.options else "") + "\")</code> computes them. Kupiec (1995) tests the "
        "exception rate, Christoffersen (1998) their independence and both together; the traffic-light zone is the "
        "Basel Committee's (1996) binomial rule at this level and number of forecasts. The ES tests: McNeil & Frey "
        "(2000) exceedance residuals (bootstrap p-value) and Acerbi & Szekely's (2014) Z2 (simulated p-value).</p>")
    rows = res["backtest_rows"]
    cls = []
    for k, v in rows:
        cl = _p_class(v) if "p_value" in k else f"zone-{v}" if k == "zone" else ""
        cls.append(["", cl])
    add(_table("backtest", ["measure", "value"], rows, cls))
    add(_figure(figs["backtest"], "Returns against minus the one-step VaR and ES; exceptions marked. The dashed line is "
                                  "the EWMA baseline's VaR (normal shocks).", "backtest"))


def _comparison_section(add, res):
    # 6 comparison
    add('<section id="s6"><h2>6. Model comparison</h2>')
    add("<p>Candidates fitted to the same returns with the same options, as <code>VOLCOMPARE</code> fits them; the "
        "lowest AIC and BIC rank first (only converged fits are ranked).</p>")
    cmp_rows = res["compare"]
    add(_table("compare", ["model", "dist", "loglik", "params", "aic", "bic", "persistence", "converged", "rank_aic",
                           "rank_bic"], cmp_rows))
    ew = res["ewma"]
    add(f"<h3>Against the EWMA baseline</h3><p>The baseline is the exponentially weighted moving average with decay "
        f"{res['ewma_decay']} (common practice for {res['freq'] or 'this'} data), normal shocks, on the same "
        f"windows and forecast dates. The Diebold-Mariano (1995) test compares the QLIKE losses ln h + e^2/h of the "
        "two variance forecasts (Newey-West variance, Harvey-Leybourne-Newbold correction, t(n-1) p-value, as "
        "<code>VOLDM</code> computes it on the two QLIKE columns of <code>VOLBACKTEST(..., \"what=series\")</code>). "
        "A negative mean difference means the model's losses are lower.</p>")
    if res["dm_rows"] is None:
        add('<p class="caution">No comparison: the model\'s backtest could not be run (section 5).</p>')
        add("</section>")
        return
    add(_table("dm", ["measure", "value"], res["dm_rows"],
               [["", _p_class(v) if k == "p_value" else ""] for k, v in res["dm_rows"]]))
    er = dict(res["ewma_rows"])
    br = dict(res["backtest_rows"])
    side = [[k, br[k], er[k]] for k in ("forecasts", "exceptions", "exception rate", "Kupiec p_value",
                                       "independence p_value", "conditional coverage p_value", "zone", "mean QLIKE",
                                       "mean MSE", "McNeil-Frey p_value", "Z2 p_value")]
    add(_table("ewma", ["measure", "model", f"EWMA({res['ewma_decay']})"], side))
    add("</section>")


def _rest(add, src, res, figs, fit, opts, now, command):
    import matplotlib
    import scipy

    from . import __version__

    spec, dist = res["spec"], res["dist"]
    bt = res["backtest"]
    # 7 news impact
    add('<section id="s7"><h2>7. News-impact curve</h2>')
    add(f"<p>Next-period variance for a shock e this period, the lagged variance at its long-run level (Engle & Ng "
        f"1993), as <code>VOLNEWS</code> computes it. Shocks from -3 to +3 times {'the long-run' if fit.uncond_variance else 'the sample'} "
        f"standard deviation ({_esc(_fmt(res['news_sd']))}). A steeper left side means bad news raises the "
        "variance more than good news.</p>")
    add(_figure(figs["news"], "News-impact curve of the fitted model.", "news-impact curve"))
    add(_table("news", ["shock (sd)", "shock e", "next-period variance"],
               [[k, e, v] for k, e, v in res["news_points"]]))
    add("</section>")

    # 8 term structure
    term = res["term"]
    has_value = "VaR_value" in term[0]["risk"]
    unit = res["horizon_unit"]
    defined = _RETURN_UNITS.get(opts.returns)
    if defined is None:
        units = ("<b>VaR and ES (in the units of the returns given)</b> are losses of the cumulative return (the sum "
                 "of the returns over the horizon) in those units. The returns' definition is not given, so no figure "
                 "is in % of value; add <code>returns=log100</code> (or log, simple100, simple) to the options for "
                 "those.")
    else:
        units = (f"<b>VaR and ES ({defined[0]})</b> are losses of the cumulative return (the sum of the returns over "
                 f"the horizon) in those units: {defined[3]}."
                 + (f" <b>VaR and ES in % of value</b> are the loss as a percentage of the position's value, from the "
                    f"distribution of the value change: {defined[4]}." if has_value else ""))
    add('<section id="s8"><h2>8. Forecast term structure, VaR and ES</h2>')
    add(f"<p>Volatility of the cumulative return over the next 1..12 {unit}s (the square root of "
        "<code>VOLFORECAST</code>'s cumvar), and VaR and ES at "
        f"{res['level']:.1%} of that cumulative return as <code>VOLRISK</code> gives them: exact for one period; "
        f"beyond it simulated (seed {res['seed']}) with {res['paths_words']}. " + units + "</p>")
    short = _short_unit(opts)
    head = [f"horizon ({unit}s)", "periods", "cumulative vol", f"VaR ({short})", f"ES ({short})"]
    if has_value:
        head += ["VaR (% of value)", "ES (% of value)"]
    rows = []
    for tt in term:
        rk = tt["risk"]
        row = [tt["k"], tt["h"], tt["cumvol"], rk.get("VaR"), rk.get("ES")]
        if has_value:
            row += [rk.get("VaR_value"), rk.get("ES_value")]
        rows.append(row)
    add(_table("term", head, rows))
    add(_figure(figs["term"], "Cumulative volatility, VaR and ES by horizon.", "term structure"))
    fc = res["forecast_table"]
    if res["periods"]:
        add(f"<p class=\"note\">Next period's volatility {_esc(_fmt(fc[1][3]))}; annualised "
            f"{_esc(_fmt(fc[1][3] * math.sqrt(res['periods'])))} (x sqrt({res['periods']})).</p>")
    add("</section>")

    # 9 cautions
    add('<section id="s9"><h2>9. Cautions</h2><div class="caution"><ul>'
        "<li>Every figure in this report is a model estimate, not investment advice and not a guarantee of future "
        "risk.</li><li>Forecasts, VaR and ES depend on the model, the distribution, the options and the sample; a "
        "model that passed its tests on this history can fail in a crisis or after a break.</li>"
        "<li>The tests are judged one at a time at 5%; with many tests some rejections occur by chance, and tests on "
        "few exceptions have little power.</li>"
        "<li>Validate any use under your firm's model-risk policy and the regulation that applies to you before "
        "relying on it.</li></ul></div></section>")

    # 10 reproducibility
    from .core import esbacktest as es_tests

    add('<section id="s10"><h2>10. Reproducibility</h2>')
    rows = [["Volcast version", __version__], ["made at", now], ["input file", Path(src.path).name],
            ["SHA-256 of the input file", src.file_sha256],
            ["SHA-256 of the returns as used", _sha256_returns(src.returns)
             + " (one number a line, 17 significant digits)"],
            ["returns", src.note], ["model", spec.canonical], ["dist", dist.name],
            ["options (as given)", src.options or ""], ["options (canonical)", opts.canonical],
            ["VaR level", res["level"]],
            ["backtest", f"rolling window {res['window']}, refit every {res['refit']}, "
                         + (f"{bt.fits} estimations" if bt is not None else "not run")],
            ["EWMA baseline", f"EWMA, {res['ewma_options']}, normal shocks"],
            ["candidates", ", ".join(res["compare_models"]) + " x " + ", ".join(res["compare_dists"])],
            ["simulation seed (VaR/ES beyond one period)", res["seed"]],
            ["simulated paths (VaR/ES beyond one period)", res["paths_words"]],
            [f"ES test seed (bootstrap {es_tests.BOOTSTRAP:,}, Z2 {es_tests.SIMULATIONS:,} samples)", es_tests.SEED],
            ["Python", platform.python_version()], ["NumPy", np.__version__], ["SciPy", scipy.__version__],
            ["Matplotlib", matplotlib.__version__], ["platform", platform.platform()]]
    if command:
        rows.append(["command", command])
    add(_table("repro", ["item", "value"], [[k, _fmt(v)] for k, v in rows]))
    add("</section></body></html>")


def build_report(src: Source, clock=None, command=None, estimations: int = ESTIMATIONS) -> str:
    """The HTML text of the report on ``src``."""
    import warnings

    clock = clock or _Clock()
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = compute(src, clock, estimations)
        with clock.step("figures and HTML"):
            figs = _figures(src, res)
            return render(src, res, figs, command)


def write_report(src: Source, out, clock=None, command=None) -> Path:
    """Write the report to ``out`` (through a temporary file, so a failure leaves nothing half-written)."""
    out = Path(out)
    if out.suffix.lower() not in (".html", ".htm"):
        raise ReportError(f"{out}: the report is an .html file; give -o REPORT.html")
    if out.resolve() == Path(src.path).resolve():
        raise ReportError(f"{out}: the report cannot be written over its input")
    if not out.resolve().parent.is_dir():
        raise ReportError(f"{out}: no folder {out.resolve().parent}")
    text = build_report(src, clock, command)
    tmp = out.with_name(out.name + ".part")
    try:
        tmp.write_text(text, encoding="utf-8")
        tmp.replace(out)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise ReportError(f"{out}: cannot be written ({exc.strerror or exc})") from None
    return out
