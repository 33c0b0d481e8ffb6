"""The ``volcast`` command.

``volcast fit FILE.csv [--column C] [--model M] [--dist D] [--options O]`` prints the fit table;
``volcast recalc BOOK.xlsx [-o OUT.xlsx] [--values-only]`` recalculates a workbook headlessly;
``volcast`` alone prints the help, ``volcast --version`` the version.
Exit status 0 on success, 2 on bad input with a one-line reason on standard error.
"""

from __future__ import annotations

import argparse
import math
import os
import shlex
import sys
import warnings
from contextlib import contextmanager
from dataclasses import dataclass

from .core.errors import InputError, excerpt, typed_number

__all__ = ["main", "read_returns_csv", "load_returns_csv"]


class CliError(Exception):
    """Bad input: printed as one line, exit status 2."""


#: the longest reason printed on standard error (echoes of input inside it are short excerpts)
_MAX_REASON_CHARS = 1000
#: the most worker processes ``batch`` starts (a typo such as --workers 10000 is refused)
_MAX_WORKERS = max(64, os.cpu_count() or 1)


RETURN_NAMES = ("return", "returns", "ret", "r")


@dataclass
class CsvReturns:
    """The returns read from one CSV column, and the line that says how they were taken."""

    returns: list
    column: str
    note: str


def read_returns_csv(path: str, column: str | None = None, skip_blanks: bool = False, levels: bool = False) -> list:
    """The returns of the chosen CSV column as a list of floats; see ``load_returns_csv``."""
    return load_returns_csv(path, column, skip_blanks, levels).returns


def load_returns_csv(path: str, column: str | None = None, skip_blanks: bool = False,
                     levels: bool = False) -> CsvReturns:
    """The returns of one numeric column of a CSV file (header row required).

    The file may be UTF-8 (with or without BOM), UTF-16 with a BOM or Windows-1252, separated by
    commas, semicolons or tabs (found from the header line).  Blank cells before the first and after
    the last number are ignored (a return column computed from prices starts blank); blank cells in
    between are refused unless ``skip_blanks``.  With ``levels`` the column holds price levels p,
    all above zero, and the returns are 100 ln(p[t]/p[t-1]); a skipped blank level leaves out the
    returns on both sides of it.  Without it, a column chosen by default that looks like price
    levels is refused; a column the caller named is taken as returns.
    """
    from .batch import decimal_comma_hint, lag1_autocorrelation, looks_like_levels

    header, records = _csv_rows(path)
    col = _choose_column(path, header, records, column, levels)
    name = header[col]
    shown_name = excerpt(name)
    cells = [(lineno, r[col] if col < len(r) else "") for lineno, r in records]
    filled = [i for i, (_, c) in enumerate(cells) if c]
    if not filled:
        raise CliError(f'{path}: column "{shown_name}" holds no numbers')
    values, skipped = [], 0  # (line, number) or None for a skipped blank
    for lineno, cell in cells[filled[0]: filled[-1] + 1]:
        if not cell:
            if skip_blanks:
                skipped += 1
                values.append(None)
                continue
            raise CliError(f'{path} line {lineno}: column "{shown_name}" is blank; fill it or pass --options "missing=skip"')
        if not _is_number(cell):
            what = "is not a finite number" if _is_float(cell) else "is not a number"
            raise CliError(f'{path} line {lineno}: "{excerpt(cell)}" in column "{shown_name}" {what}'
                           f"{decimal_comma_hint(cell)}")
        values.append((lineno, float(cell)))
    numbers = [v for _, v in filter(None, values)]
    where = f'column "{shown_name}" of {os.path.basename(path)}'
    if levels:
        for lineno, v in filter(None, values):
            if v <= 0:
                raise CliError(f'{path} line {lineno}: the level {v:g} in column "{shown_name}" is not above zero; '
                               "--levels needs price levels above zero")
        returns = [100.0 * (math.log(b[1]) - math.log(a[1])) for a, b in zip(values, values[1:]) if a and b]
        if not returns:
            raise CliError(f'{path}: column "{shown_name}" needs at least two levels in a row for --levels')
        note = f"{where}: {len(returns)} log returns in percent from {len(numbers)} levels"
    else:
        returns = numbers
        level_like = looks_like_levels(returns)
        if level_like and column is None:
            raise CliError(f'{path}: column "{shown_name}" looks like price levels, not returns (all above zero, lag-1 '
                           f"autocorrelation {lag1_autocorrelation(returns):.2f}); pass --levels to fit its log "
                           f"returns in percent, or --column {shlex.quote(name)} to take it as returns")
        note = f"{where}: {len(returns)} returns"
        if level_like:
            note += " (taken as returns as named, though they look like price levels; --levels converts them)"
    if skipped:
        note += f"; {skipped} blank cell{'s' if skipped > 1 else ''} skipped"
    if records.note:
        note += f"; {records.note}"
    return CsvReturns(returns, name, note)


def _csv_rows(path: str) -> tuple:
    """(header, [(line number, cells)] of the data rows) of a CSV file: a header and at least one
    row of data.  Rows with more filled fields than the header are refused (a decimal comma in a
    comma-separated file would shift the columns), so is a first line of numbers (no header line:
    its observation would be lost) and, in a column named date, dates that are not oldest first
    and one to a row (the rows are fitted in file order, the last as the latest)."""
    from .batch import PanelError, check_row_widths, read_csv_records
    from .csvtext import Records, check_date_order, check_header_names, day_number

    if str(path).lower().endswith((".parquet", ".pq")):
        raise CliError(f"{path}: fit and backtest read a CSV file; save the column as CSV (volcast batch reads Parquet)")
    try:
        records = read_csv_records(path)
        check_header_names(path, records)
        check_row_widths(path, records)
        if records:
            low = [h.strip().lower() for h in records[0][1]]
            if "date" in low:
                di = low.index("date")
                cells = [(f"line {lineno}", r[di]) for lineno, r in records[1:] if di < len(r)]
                check_date_order(path, [(w, d, c) for w, c in cells if (d := day_number(c)) is not None],
                                 f'column "{excerpt(records[0][1][di])}"')
    except PanelError as exc:
        raise CliError(str(exc)) from None
    if len(records) < 2:
        raise CliError(f"{path}: needs a header row and at least one row of data")
    rows = Records(records[1:])
    rows.note = records.note
    return records[0][1], rows


def _choose_column(path: str, header: list, records: list, column: str | None, levels: bool) -> int:
    """The index of the named column; by default one named like "return", else the last numeric one
    (with ``levels``, the last numeric one not named like "return")."""
    if column is not None:
        if column in header:
            return header.index(column)
        if column.strip() in header:
            return header.index(column.strip())
        if column.isascii() and column.isdigit() and 1 <= int(column) <= len(header):
            return int(column) - 1
        shown = ", ".join(excerpt(h) for h in header[:20]) + (f" and {len(header) - 20} more" if len(header) > 20 else "")
        raise CliError(f'{path}: no column "{excerpt(column)}"; the columns are {shown}')
    lowered = [h.lower() for h in header]
    named = [i for i, h in enumerate(lowered) if h in RETURN_NAMES]
    if named and not levels:
        return named[0]
    numeric = [i for i in range(len(header))
               if all(_is_number(r[i]) for _, r in records if i < len(r) and r[i])
               and any(i < len(r) and r[i] for _, r in records)]
    if not numeric:
        raise CliError(f"{path}: no numeric column found; name one with --column")
    return ([i for i in numeric if lowered[i] not in RETURN_NAMES] or numeric)[-1]


def _is_float(s: str) -> bool:
    try:
        float(s)
    except ValueError:
        return False
    return True


def _is_number(s: str) -> bool:
    try:
        return math.isfinite(float(s))
    except ValueError:
        return False


def _fmt(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return f"{v:.6g}" if abs(v) >= 1e-4 or v == 0 else f"{v:.5e}"  # six significant digits either way
    return str(v)


def format_table(rows) -> str:
    cells = [[_fmt(v) for v in row] for row in rows]
    # long texts (options, the optimiser's message) do not widen the numeric columns
    widths = [0] * max(len(r) for r in cells)
    for r in cells:
        if r[0] in ("options", "converged"):
            continue
        for i, c in enumerate(r):
            widths[i] = max(widths[i], len(c))
    lines = []
    for r in cells:
        if r[0] in ("options", "converged"):
            lines.append("  ".join(c for c in [r[0].ljust(widths[0])] + [c for c in r[1:] if c]))
        else:
            lines.append("  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))).rstrip())
    return "\n".join(lines)


@contextmanager
def _quiet():
    """No NumPy or Python warnings on the terminal: standard error carries at most the one line."""
    import numpy as np

    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


def _core_error(exc) -> CliError:
    """A core or worksheet-layer refusal as the one line of exit status 2."""
    return CliError(excerpt(str(exc), _MAX_REASON_CHARS))


def levels_returns_problem(levels: bool, returns, error=None):
    """With --levels the returns are percent log returns: a ``returns=`` other than log100 says
    otherwise.  The one-line reason (raised as ``error`` when given), else None."""
    if not levels or returns in (None, "log100"):
        return None
    msg = (f"--levels makes log returns in percent, 100*ln(p[t]/p[t-1]), but the options say returns={returns}; "
           "use returns=log100 or leave returns out")
    if error is not None:
        raise error(msg)
    return msg


def _check_spacing(args, opts, n: int) -> None:
    """Refuse a CSV whose dates' usual spacing disagrees with the options' periods a year
    (csvtext.spacing_problem, the rule of the workbook refresh)."""
    from .csvtext import spacing_problem

    if not opts.periods:
        return
    dates = _csv_dates(args.file, args.column, args.levels, n)
    msg = None if dates is None else spacing_problem(args.file, dates, opts.periods)
    if msg:
        raise CliError(msg)


def _cmd_fit(args) -> int:
    from .core.errors import VolcastError
    from .core.spec import parse_options
    from .sheet.fittable import encode
    from .sheet.functions import fit_from_cells

    try:
        opts = parse_options(args.options)
    except InputError as exc:
        raise _core_error(exc) from None
    levels_returns_problem(args.levels, opts.returns, CliError)
    series = load_returns_csv(args.file, args.column, skip_blanks=opts.missing == "skip", levels=args.levels)
    _check_spacing(args, opts, len(series.returns))
    try:
        with _quiet():
            # the worksheet's own cleaning and fit table, without the worksheet's time bounds
            result, _ = fit_from_cells([[v] for v in series.returns], args.model, args.dist, args.options,
                                       bounded=False)
            rows = encode(result)
    except VolcastError as exc:
        raise _core_error(exc) from None
    print(series.note)
    print(format_table(rows))
    return 0


class _Parser(argparse.ArgumentParser):
    """argparse with usage errors as one line (DESIGN.md: exit 2, a one-line reason)."""

    def error(self, message):
        raise CliError(f"{message}; see {self.prog} --help")


def _cmd_recalc(args) -> int:
    from .headless.recalc import RecalcError, recalc

    try:
        out, report = recalc(args.book, args.out, values_only=args.values_only)
    except RecalcError as exc:
        raise CliError(str(exc)) from None
    print(f"recalculated {report.formulas} formulas ({report.spills} spilled results) into {out}")
    for line in report.unread:
        print(f"volcast: WARNING: data left out: {line}", file=sys.stderr)
    for where, text in report.warnings:
        print(f"volcast: {where}: {_one_line(text, 400)}", file=sys.stderr)
    for where, what in report.altered[:10]:
        print(f"volcast: {where}: the result does not fit in a cell as it is: {what}", file=sys.stderr)
    if report.error_cells:
        shown = ", ".join(f"{a} {_one_line(v, 80)}" for a, v in report.error_cells[:10])
        more = f" and {len(report.error_cells) - 10} more" if len(report.error_cells) > 10 else ""
        print(f"volcast: {len(report.error_cells)} cells evaluate to errors: {shown}{more}", file=sys.stderr)
    return 0


def _one_line(text, limit: int) -> str:
    """A cell's text for one line of the terminal: control characters as spaces, cut to ``limit``."""
    text = "".join(" " if ord(ch) < 32 or ord(ch) == 127 else ch for ch in str(text))
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _cmd_demo(args) -> int:
    from .demo import run_demo

    out_dir = args.out or "volcast-demo"
    try:
        h = run_demo(out_dir)
    except Exception as exc:  # noqa: BLE001 - one line, as for any bad input
        raise CliError(f"the demo failed: {exc}") from None
    print(f"Volcast demo: synthetic Harrowgate Lane Global Equity Composite, monthly, to {h['last_date']}")
    print(f"model {h['model']} with {h['dist']} shocks, {h['nobs']} monthly log returns, "
          f"converged {'TRUE' if h['converged'] else 'FALSE'}")
    print(f"next month's volatility   {h['vol_1m']:6.2f} %  ({h['vol_1m_annualised']:.2f} % annualised)")
    print(f"12-month volatility       {h['vol_12m']:6.2f} %  (of the cumulative 12-month log return)")
    print(f"{h['var_level']:.0%} one-month VaR      {h['var_1m']:6.2f} %  of value (ES {h['es_1m']:.2f} % of value)")
    print(f"workbook (Excel with the Volcast add-in): {h['workbook']}")
    print(f"values copy (LibreOffice, or Excel without Volcast): {h['values_copy']}")
    print(f"chart: {h['chart']}")
    print("Model estimates, not advice; validate under your model-risk policy.")
    if h["error_cells"]:
        print(f"volcast: {len(h['error_cells'])} cells evaluate to errors", file=sys.stderr)
    return 0


def _cmd_refresh(args) -> int:
    from .headless.recalc import RecalcError
    from .headless.refresh import refresh

    try:
        res = refresh(args.book, args.data, args.out, accept_jumps=args.accept_jumps, accept_gaps=args.accept_gaps)
    except RecalcError as exc:
        raise CliError(str(exc)) from None
    for w in res.warnings:
        print(f"volcast: warning: {w}", file=sys.stderr)
    f = res.figures
    if res.history is None:
        print(f"nothing new after {res.last_date}: no History row added; wrote {res.out} (recalculated)")
    else:
        print(f"added {res.added} observation(s), data to {res.last_date}; wrote {res.out}")
        h = res.history
        print(f"{h['model']} with {h['dist']} shocks on {f['nobs']} returns: vol 1m {f['vol_1m']:.3f} %, "
              f"vol 12m {f['vol_12m']:.3f} %, {f['var_level']:.0%} VaR 1m {f['var_1m']:.3f} % of value, "
              f"ES 1m {f['es_1m']:.3f} % of value" + (f"; moved: {h['moved']}" if h["moved"] else ""))
    if res.values_copy is not None:
        print(f"open {res.out} in Excel with the Volcast add-in; {res.values_copy} (values, no formulas) in "
              "LibreOffice or Excel without Volcast; refresh the first, never the values copy")
    if not f.get("converged", True):
        print("volcast: WARNING: the fit did NOT converge; its figures are not reliable (see the Model sheet; "
              "the History row says NOT CONVERGED)", file=sys.stderr)
    if res.report.error_cells:
        print(f"volcast: {len(res.report.error_cells)} cells evaluate to errors, e.g. "
              f"{res.report.error_cells[0][0]} {_one_line(res.report.error_cells[0][1], 80)}", file=sys.stderr)
    return 0


def _cmd_template(args) -> int:
    import shutil
    from pathlib import Path

    from .demo import template_file

    out = Path(args.out)
    if out.suffix.lower() != ".xlsx":
        raise CliError(f"{out.name}: the output must be an .xlsx file")
    if out.exists() and not args.force:
        raise CliError(f"{out} exists; choose another name or pass --force")
    try:
        shutil.copyfile(template_file(f"{args.kind}_variance.xlsx"), out)
    except OSError as exc:
        raise CliError(f"{out}: cannot write there ({exc.strerror or exc})") from None
    print(f"wrote the empty {args.kind} template to {out}; load your history with: "
          f"volcast refresh {out} --data HISTORY.csv -o BOOK.xlsx")
    return 0


class _Progress:
    """A one-line progress bar on standard error (only when it is a terminal, or when forced)."""

    def __init__(self, label: str, force: bool = False):
        self.label = label
        self.on = force or sys.stderr.isatty()
        self.last = -1

    def __call__(self, done: int, total: int):
        if not self.on or total <= 0:
            return
        pct = int(100 * done / total)
        if pct != self.last:
            self.last = pct
            bar = "#" * (pct // 4)
            print(f"\r{self.label} [{bar:<25}] {pct:3d}% ({done}/{total})", end="", file=sys.stderr, flush=True)
        if done == total:
            print(file=sys.stderr)


def _cmd_backtest(args) -> int:
    import numpy as np

    from .core.backtest import backtest
    from .core.distributions import get_distribution
    from .core.errors import VolcastError
    from .core.spec import parse_model, parse_options

    try:
        spec, dist, opts = parse_model(args.model), get_distribution(args.dist), parse_options(args.options)
    except VolcastError as exc:
        raise _core_error(exc) from None
    if not 0.5 <= args.level < 1:  # as the core requires; said before the file is read
        raise CliError(f"--level must be at least 0.5 and below 1, e.g. 0.99, got {typed_number(args.level)}")
    if args.refit < 1:
        raise CliError(f"--refit must be 1 or more, got {args.refit}")
    if args.png:
        _check_chart_path(args.png, args.file)
    levels_returns_problem(args.levels, opts.returns, CliError)
    series = load_returns_csv(args.file, args.column, skip_blanks=opts.missing == "skip", levels=args.levels)
    _check_spacing(args, opts, len(series.returns))
    try:
        with _quiet():
            bt = backtest(np.array(series.returns), spec, dist, opts, args.window, args.level, args.scheme,
                          args.refit, progress=_Progress("backtest", args.progress))
    except VolcastError as exc:
        raise _core_error(exc) from None
    if args.png:
        try:
            with _quiet():
                _backtest_png(bt, args.png, f"{spec.canonical}-{dist.name}",
                              _csv_dates(args.file, args.column, args.levels, len(series.returns)))
        except (OSError, ValueError) as exc:
            raise CliError(f"{args.png}: the chart cannot be written ({excerpt(exc, 120)})") from None
    c = bt.coverage
    print(series.note)
    print(f"{spec.canonical} with {dist.name} shocks, {args.scheme} window {args.window}, refit every {args.refit}")
    print(f"forecasts {c.forecasts}  exceptions {c.exceptions} ({c.rate:.2%}, expected {c.expected_rate:.2%})  zone {c.zone}")
    print(f"Kupiec LR {c.lr_uc:.3f} (p {c.p_uc:.3f})  independence LR {c.lr_ind:.3f} (p {c.p_ind:.3f})  "
          f"conditional coverage LR {c.lr_cc:.3f} (p {c.p_cc:.3f})")
    print(f"mean QLIKE {bt.qlike:.4f}  mean MSE {bt.mse:.4g}  estimations {bt.fits}")
    if args.png:
        print(f"chart: {args.png}")
    return 0


_CHART_SUFFIXES = (".png", ".svg", ".pdf", ".jpg", ".jpeg")


def _check_chart_path(png: str, source: str) -> None:
    """The chart's path, checked before the backtest runs: a known image type, in a folder that
    exists, and not the input file."""
    from pathlib import Path

    out = Path(png)
    if out.suffix.lower() not in _CHART_SUFFIXES:
        raise CliError(f"{png}: the chart cannot be written (give a file ending in {', '.join(_CHART_SUFFIXES)})")
    if out.is_dir():
        raise CliError(f"{png}: the chart cannot be written (a folder of that name exists)")
    if out.resolve() == Path(source).resolve():
        raise CliError(f"{png}: the chart cannot be written over the input file")
    if not out.resolve().parent.is_dir():
        raise CliError(f"{png}: the chart cannot be written (no folder {out.resolve().parent})")


def _csv_dates(path, column, levels: bool, n: int):
    """The dates of the ``n`` returns read from the CSV ``path`` (a column named date, YYYY-MM-DD),
    or None when the file has none or they cannot be matched one to one."""
    import datetime as dt

    try:
        header, records = _csv_rows(path)
        low = [h.strip().lower() for h in header]
        if "date" not in low:
            return None
        di, col = low.index("date"), _choose_column(path, header, records, column, levels)
        rows = [r for _, r in records if col < len(r) and r[col].strip()]
        dates = [dt.date.fromisoformat(r[di].strip()) for r in rows]
    except (CliError, ValueError, IndexError):
        return None
    if levels:
        dates = dates[1:]
    return dates if len(dates) == n else None


def _backtest_points(bt, dates=None):
    """(x, loss, marked) of the backtest chart: the forecast dates (or positions), each period's
    loss (the negative of the return) and the periods marked as exceptions, those whose loss
    exceeds the VaR."""
    import numpy as np

    x = np.asarray(dates, dtype=object)[bt.index] if dates is not None else np.asarray(bt.index)
    loss = -np.asarray(bt.actual, dtype=float)
    return x, loss, loss > np.asarray(bt.var, dtype=float)


def _backtest_png(bt, path, title, dates=None):
    """Losses against the one-step VaR: each period's loss (the negative of the return, a gain
    below zero), the VaR line at its level, exceptions marked where the loss exceeds the VaR;
    dates on the x-axis when the CSV has them."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    level = 1.0 - bt.coverage.expected_rate
    x, loss, exc = _backtest_points(bt, dates)
    fig, ax = plt.subplots(figsize=(10, 4.2), dpi=110)
    ax.vlines(x, 0, loss, color=np.where(loss > 0, "#7F8C9A", "#C9D1D9"), lw=0.8, label="loss (gain below zero)")
    ax.plot(x, bt.var, color="#C0504D", lw=1.2, label=f"VaR at {level:.1%} (one step ahead)")
    ax.scatter(x[exc], loss[exc], color="#C0504D", zorder=3, s=20, marker="o",
               label=f"exceptions: loss above VaR ({bt.coverage.exceptions})")
    ax.axhline(0, color="#555555", lw=0.6)
    ax.set_title(f"Backtest {title}, VaR at {level:.1%}: {bt.coverage.exceptions} exceptions in "
                 f"{bt.coverage.forecasts} forecasts (expected {bt.coverage.expected_rate * bt.coverage.forecasts:.1f}); "
                 "model estimates", fontsize=9)
    ax.set_xlabel("date" if dates is not None else "observation (the CSV has no date column)")
    ax.set_ylabel("loss, in the returns' units (% for returns in percent)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=8)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


def _cmd_batch(args) -> int:
    from pathlib import Path

    from .batch import (LEVELS_AUTOCORRELATION, PanelError, check_arguments, check_output, level_like_series,
                        levels_to_returns, load_panel, run_batch, write_tidy)

    try:
        # everything that would fail the whole run is said before any fitting
        out = check_output(args.out, [args.panel])
        if args.workers is not None and not 1 <= args.workers <= _MAX_WORKERS:
            raise PanelError(f"--workers must be from 1 to {_MAX_WORKERS}, got {args.workers}")
        with _quiet():
            check_arguments(args.model, args.dist, args.options, args.horizon, args.level)
        from .core.spec import parse_options
        from .csvtext import spacing_problem

        opts = parse_options(args.options)  # read by check_arguments above
        levels_returns_problem(args.levels, opts.returns, PanelError)
        panel = load_panel(args.panel, args.id, args.value)
        for sid, days in (panel.days.items() if opts.periods else ()):
            msg = spacing_problem(args.panel, days, opts.periods)
            if msg:
                raise PanelError(msg.replace(": the dates", f': series "{excerpt(sid)}": the dates', 1))
        read_note = getattr(panel, "note", "")  # e.g. decimal commas read as points
        name = Path(args.panel).name
        where = (f'long panel {name} (ids "{excerpt(args.id)}", values "{excerpt(args.value)}")' if args.id
                 else f"wide panel {name}")
        if args.levels:
            panel = levels_to_returns(panel, None, args.panel)
            how = "levels converted to log returns in percent, 100*ln(p[t]/p[t-1]), series by series"
        else:
            like = [] if args.as_returns else level_like_series(panel)
            if like:
                more = f" and {len(like) - 3} more" if len(like) > 3 else ""
                shown = ", ".join(f'"{excerpt(sid)}"' for sid in like[:3]) + more
                raise PanelError(f"{args.panel}: {len(like)} of {len(panel)} series look like price levels, not "
                                 f"returns ({shown}: all above zero, lag-1 autocorrelation above "
                                 f"{LEVELS_AUTOCORRELATION:g}); pass --levels to fit their log returns in percent, "
                                 "or --as-returns to take them as they are")
            how = "taken as returns"
        if read_note:
            how += f"; {read_note}"
        if args.skip_bad:
            how += "; cells that are not numbers left out"
        print(f"{where}: {len(panel)} series, {how}", flush=True)
        with _quiet():
            rows = run_batch(panel, args.model, args.dist, args.options, args.horizon, args.level,
                             workers=args.workers, cluster=args.cluster, progress=_Progress("batch", args.progress),
                             skip_bad=args.skip_bad)
        out = write_tidy(rows, out)
    except PanelError as exc:
        raise CliError(str(exc)) from None
    except OSError as exc:
        raise CliError(f"{args.out}: cannot be written ({exc.strerror or excerpt(exc, 120)})") from None
    except ImportError as exc:
        raise CliError(f"a module the batch needs is missing ({excerpt(exc, 120)})") from None
    failed = [sid for sid in panel if any(r[0] == sid and r[1] == "error" for r in rows)]
    print(f"fitted {len(panel) - len(failed)} of {len(panel)} series; wrote {out}")
    if failed:
        shown = ", ".join(excerpt(sid) for sid in failed[:10]) + (f" and {len(failed) - 10} more" if len(failed) > 10 else "")
        print(f"volcast: {len(failed)} series failed (see their error rows): {shown}", file=sys.stderr)
    return 0


def _cmd_report(args) -> int:
    from .report import ReportError, read_csv, read_workbook, write_report

    given = [("--column", args.column), ("--model", args.model), ("--dist", args.dist), ("--options", args.options),
             ("--level", args.level)]
    cmd = " ".join(["volcast report", shlex.quote(str(args.file)), "-o", shlex.quote(str(args.out))]
                   + (["--levels"] if args.levels else [])
                   + [f"{k} {shlex.quote(str(v))}" for k, v in given if v is not None])
    try:
        if str(args.file).lower().endswith((".xlsx", ".xlsm")):
            if args.column or args.levels or args.model or args.dist or args.options:
                raise ReportError("a workbook gives its own model, distribution and options (the fit table at the name "
                                  "fit); --column, --levels, --model, --dist and --options are for a CSV")
            src = read_workbook(args.file, args.level)
        else:
            src = read_csv(args.file, args.column, args.levels, args.model, args.dist, args.options, args.level or 0.99)
        out = write_report(src, args.out, command=cmd)
    except ReportError as exc:
        raise CliError(str(exc)) from None
    print(f"wrote {out}: {src.model} with {src.dist} shocks on {len(src.returns)} returns")
    return 0


def _column_choice(what: str) -> str:
    """The help description of fit and backtest: how the column is chosen."""
    from .csvtext import LEVELS_AUTOCORRELATION

    return (f'{what}. The column is the one given with --column, else one named "return", else the last numeric '
            f"one. A column chosen by default that looks like price levels (all above zero, lag-1 autocorrelation "
            f"above {LEVELS_AUTOCORRELATION:g}) is refused: pass --levels to use its log returns in percent, or "
            "name it with --column to take it as returns.")


def _column_args(p):
    """--column and --levels, the same for fit and backtest."""
    p.add_argument("--column", metavar="C",
                   help='column name or 1-based number (default: a column named "return", else the last numeric '
                        'one; with --levels, the last numeric one not named "return"). A column named here is taken '
                        "as asked, even when it looks like price levels")
    p.add_argument("--levels", action="store_true",
                   help="the column holds price levels p (all above zero): use their log returns in percent, "
                        "100*ln(p[t]/p[t-1]) (default: off, the column holds returns)")


def _model_args(p):
    """--model, --dist and --options, the same for every command that fits."""
    p.add_argument("--model", metavar="M", default="GARCH(1,1)",
                   help="model string, e.g. AR(1)-GJR-GARCH(1,1) (default: %(default)s)")
    p.add_argument("--dist", metavar="D", default="normal",
                   help="shock distribution: normal, t, skewt or ged (default: %(default)s)")
    p.add_argument("--options", metavar="O", default=None,
                   help='options string, e.g. "se=hessian; nu=8" (default: none, i.e. presample=mean; se=robust; '
                        "missing=error)")


def _progress_arg(p):
    p.add_argument("--progress", action="store_true",
                   help="show the progress bar even when standard error is not a terminal (default: only on a "
                        "terminal)")


def _version() -> str:
    """The installed distribution's version, else the package's own (a source checkout)."""
    try:
        from importlib.metadata import PackageNotFoundError, version

        return version("volcast")
    except (ImportError, PackageNotFoundError):
        from . import __version__

        return __version__


class _VersionAction(argparse.Action):
    """argparse's ``version`` action, with the version looked up only when asked for: reading the
    distribution's metadata costs about 0.05 s, which every other command would pay."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, help=None):
        super().__init__(option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        parser._print_message(f"volcast {_version()}\n", sys.stdout)
        parser.exit()


EXAMPLE_FILES = {
    "demo_returns.csv": "monthly returns (percent log returns) of the Harrowgate Lane Global Equity Composite",
    "equity_composite_monthly.csv": "the equity composite's month-end levels (date, level)",
    "equity_history.csv": "the same levels without the last month: a first load",
    "equity_new_levels.csv": "the last month's level: a monthly refresh",
    "bond_index_monthly.csv": "month-end levels of the Harrowgate Lane Core Bond Index",
    "commodity_basket_daily.csv": "daily levels of the Harrowgate Lane Commodity Basket",
    "fund_returns_monthly.csv": "a wide panel: monthly returns of six Harrowgate Lane funds",
    "fund_prices_monthly.csv": "the same six funds as month-end price levels",
}


def _cmd_examples(args) -> int:
    import shutil
    from pathlib import Path

    from .demo import data_file

    out = Path(args.dir)
    if out.exists() and not out.is_dir():
        raise CliError(f"{out}: exists and is not a folder")
    clash = [n for n in EXAMPLE_FILES if (out / n).exists()]
    if clash and not args.force:
        more = f" and {len(clash) - 1} more" if len(clash) > 1 else ""
        raise CliError(f"{out / clash[0]} exists{more}; choose another folder or pass --force")
    try:
        out.mkdir(parents=True, exist_ok=True)
        for name in EXAMPLE_FILES:
            shutil.copyfile(data_file(name), out / name)
    except OSError as exc:
        raise CliError(f"{out}: cannot write there ({exc.strerror or excerpt(exc, 120)})") from None
    print(f"wrote {len(EXAMPLE_FILES)} example files (synthetic data of a fictional asset manager) to {out}:")
    width = max(map(len, EXAMPLE_FILES))
    for name, what in EXAMPLE_FILES.items():
        print(f"  {name.ljust(width)}  {what}")
    return 0


_EPILOG = """examples (in a folder where `volcast examples .` copied the example files):
  volcast fit demo_returns.csv --model "AR(1)-GJR-GARCH(1,1)" --dist t
  volcast backtest demo_returns.csv --window 120 --refit 6
  volcast batch fund_returns_monthly.csv --dist t -o results.csv
Exit status 0 on success, 2 on bad input with a one-line reason on standard error.
Model estimates, not advice; validate them under your firm's model-risk policy."""


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="volcast", description="ARCH/GARCH-family variance models for spreadsheets.",
                     epilog=_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action=_VersionAction,
                        help="print the version and exit")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    p = sub.add_parser("fit", help="estimate a model on a CSV column and print the fit table",
                       description=_column_choice("Estimates a model on one column of a CSV file and prints "
                                                  "the fit table"))
    p.add_argument("file", help="CSV file with a header row")
    _column_args(p)
    _model_args(p)
    p.set_defaults(func=_cmd_fit)
    p = sub.add_parser("recalc", help="recalculate a workbook with no Excel; keeps formulas, stores values",
                       description="Recalculates every formula of a workbook with no Excel and writes a copy "
                                   "with the formulas and their values; the input is never written over.")
    p.add_argument("book", help="the .xlsx workbook to recalculate (never written over)")
    p.add_argument("-o", "--out", help="output workbook (default: BOOK.recalc.xlsx beside the input)")
    p.add_argument("--values-only", action="store_true",
                   help="write plain values instead of formulas with values, for LibreOffice or any application "
                        "without the add-in (default: off)")
    p.set_defaults(func=_cmd_recalc)
    p = sub.add_parser("refresh", help="append new observations from a CSV, recalculate, add an estimate-history row",
                       description="Appends the new dates and levels of a CSV file to a workbook made from a "
                                   "shipped template, recalculates it and adds a row to its estimate history.")
    p.add_argument("book", help="a workbook made from a shipped template (an empty one for the first load); never written over")
    p.add_argument("--data", required=True,
                   help="CSV with a header row naming columns date (YYYY-MM-DD) and level (required)")
    p.add_argument("-o", "--out", required=True, help="output workbook (required)")
    p.add_argument("--accept-jumps", action="store_true",
                   help="take new returns beyond the outlier bound (default: off, such a return stops the run: a "
                        "misplaced decimal point?)")
    p.add_argument("--accept-gaps", action="store_true",
                   help="take calendar gaps much longer or much shorter than the series' usual spacing (default: "
                        "off, such a gap stops the run: missing rows, or a date before the period's end?)")
    p.set_defaults(func=_cmd_refresh)
    p = sub.add_parser("template", help="write an empty shipped template, to load a history into with refresh",
                       description="Writes an empty shipped template; load a history of dates and levels into it "
                                   "with volcast refresh.")
    p.add_argument("kind", choices=("monthly", "daily"), help="monthly, or daily (a month is 21 trading days)")
    p.add_argument("-o", "--out", required=True, help="output workbook, .xlsx (required)")
    p.add_argument("--force", action="store_true", help="write over an existing file (default: off, refuse)")
    p.set_defaults(func=_cmd_template)
    p = sub.add_parser("backtest", help="walk-forward backtest of one-step variance and VaR forecasts on a CSV column",
                       description=_column_choice("Walk-forward backtest of one-step variance and VaR "
                                                  "forecasts on one column of a CSV file"))
    p.add_argument("file", help="CSV file with a header row")
    _column_args(p)
    _model_args(p)
    p.add_argument("--window", type=int, required=True, metavar="N",
                   help="estimation window: the N returns before each forecast (required)")
    p.add_argument("--level", type=float, default=0.99, metavar="L",
                   help="VaR level, from 0.5 to below 1: the one-step VaR is exceeded with probability 1 - L "
                        "(default: %(default)s)")
    p.add_argument("--scheme", choices=("rolling", "expanding"), default="rolling",
                   help="rolling: every fit uses the last N returns; expanding: every fit uses all returns so far, "
                        "starting from N (default: %(default)s)")
    p.add_argument("--refit", type=int, default=1, metavar="K",
                   help="re-estimate every K forecasts, keeping the parameters in between (default: %(default)s)")
    p.add_argument("--png", metavar="FILE",
                   help="also write a chart of forecast volatility, VaR, absolute returns and exceptions "
                        "(.png, .svg, .pdf or .jpg; default: no chart)")
    _progress_arg(p)
    p.set_defaults(func=_cmd_backtest)
    p = sub.add_parser("batch", help="fit many series from one CSV or Parquet panel in parallel; tidy output",
                       description="Fits every series of a panel in parallel processes (or on a Dask cluster) and "
                                   "writes tidy rows: id, kind, name, value, std_error, message.")
    p.add_argument("panel", help="CSV or Parquet: wide (a column per series) or long (with --id and --value)")
    p.add_argument("--id", help="long panel: the series id column (default: none, the panel is wide)")
    p.add_argument("--value", help="long panel: the column of values (default: none, the panel is wide); values "
                                   "that look like price levels are still refused unless --levels or --as-returns "
                                   "is given")
    how = p.add_mutually_exclusive_group()
    how.add_argument("--levels", action="store_true",
                     help="the series are price levels (above zero): fit each one's log returns in percent, "
                          "100*ln(p[t]/p[t-1]) (default: off)")
    how.add_argument("--as-returns", action="store_true",
                     help="take every series as returns even when it looks like price levels (default: off, such "
                          "a panel is refused)")
    _model_args(p)
    p.add_argument("--horizon", type=int, default=12, metavar="H",
                   help="forecast horizon in periods: each series gets vol_H (the H-th period's volatility) and "
                        "cumvol_H (of the cumulative H-period return) (default: %(default)s)")
    p.add_argument("--level", type=float, default=0.99, metavar="L",
                   help="level of the one-period VaR and ES rows, from 0.5 to below 1 (default: %(default)s)")
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="worker processes (default: one per core)")
    p.add_argument("--cluster", metavar="ADDRESS",
                   help="address of a Dask scheduler, e.g. tcp://host:8786; needs volcast[cluster] (default: none, "
                        "local processes)")
    p.add_argument("--skip-bad", action="store_true",
                   help="leave out the cells inside a series that are not numbers (text, n/a, inf, blanks) instead "
                        "of giving that series an error row; each series' tidy rows say how many were left out "
                        "(default: off)")
    p.add_argument("-o", "--out", required=True, help="output .csv or .parquet, never the panel itself (required)")
    _progress_arg(p)
    p.set_defaults(func=_cmd_batch)
    p = sub.add_parser("report", help="the model-validation pack of a workbook or a CSV column, as one HTML file",
                       description="Writes one self-contained HTML file a model validator can read without Volcast: "
                                   "data, fit with three kinds of standard errors, diagnostics with readings, "
                                   "stability, walk-forward backtest, comparison, news impact, term structure with "
                                   "VaR/ES, cautions and a reproducibility block.")
    p.add_argument("file", help="a workbook made from a shipped template (.xlsx), or a CSV file with a header row "
                                "(required)")
    p.add_argument("-o", "--out", required=True, help="the report, an .html file (required)")
    p.add_argument("--column", metavar="C", help="CSV: column name or 1-based number, chosen as for fit (default: as for fit)")
    p.add_argument("--levels", action="store_true",
                   help="CSV: the column holds price levels; use their log returns in percent (default: off)")
    p.add_argument("--model", help="CSV: model string (default: GARCH(1,1))")
    p.add_argument("--dist", help="CSV: normal, t, skewt or ged (default: normal)")
    p.add_argument("--options", help='CSV: options string, e.g. "periods=12; returns=log100" (default: none)')
    p.add_argument("--level", type=float, help="VaR level (default: the workbook's var_level, else 0.99)")
    p.set_defaults(func=_cmd_report)
    p = sub.add_parser("demo", help="the main job on the bundled demo data: refresh the monthly template, print the headline",
                       description="Loads the bundled synthetic equity composite into the monthly template, "
                                   "recalculates it, prints the headline forecast and writes the workbook and a chart.")
    p.add_argument("--out", metavar="DIR", help="folder for the workbook and chart (default: ./volcast-demo)")
    p.set_defaults(func=_cmd_demo)
    p = sub.add_parser("examples", help="copy the example CSV files (synthetic) into a folder, to try the commands on",
                       description="Copies the bundled example files (synthetic data of a fictional asset manager: "
                                   "returns, levels and a panel of six funds) into a folder; the README's examples "
                                   "run on them.")
    p.add_argument("dir", nargs="?", default="volcast-examples",
                   help="folder to copy them into, made if missing (default: %(default)s)")
    p.add_argument("--force", action="store_true", help="write over files of the same names (default: off, refuse)")
    p.set_defaults(func=_cmd_examples)
    return parser


def _one_reason(text) -> str:
    """The reason as one line: line breaks and other control characters escaped, cut when huge."""
    return excerpt(text, _MAX_REASON_CHARS)


def main(argv=None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if getattr(args, "func", None) is None:  # bare `volcast`: what it can do, not an error
            parser.print_help()
            return 0
        return args.func(args)
    except CliError as exc:
        print(f"volcast: {_one_reason(exc)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("volcast: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # the reader stopped early (volcast fit ... | head): not an error; keep Python quiet at exit
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except Exception as exc:  # noqa: BLE001 - never a traceback; each case found is fixed at its source
        print(f"volcast: internal error: {type(exc).__name__}: {excerpt(exc, 200)}; please report it",
              file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
