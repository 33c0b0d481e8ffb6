"""The ``volcast`` command.

``volcast fit FILE.csv [--column C] [--model M] [--dist D] [--options O]`` prints the fit table;
``volcast recalc BOOK.xlsx [-o OUT.xlsx] [--values-only]`` recalculates a workbook headlessly.
Exit status 0 on success, 2 on bad input with a one-line reason on standard error.
"""

from __future__ import annotations

import argparse
import csv
import math
import sys

from .core.errors import InputError
from .core.spec import parse_options
from .sheet import VOLFIT

__all__ = ["main", "read_returns_csv"]


class CliError(Exception):
    """Bad input: printed as one line, exit status 2."""


def read_returns_csv(path: str, column: str | None = None, skip_blanks: bool = False) -> list:
    """The chosen numeric column of a CSV file (header row required), as a list of floats.

    Blank cells before the first and after the last number are ignored (a return column computed
    from prices starts blank); blank cells in between are refused unless ``skip_blanks``.
    """
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except FileNotFoundError:
        raise CliError(f"{path}: no such file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CliError(f"{path}: cannot be read as a CSV text file ({exc})") from None
    rows = [r for r in rows if any(c.strip() for c in r)] if rows else rows
    if len(rows) < 2:
        raise CliError(f"{path}: needs a header row and at least one row of data")
    header = [h.strip() for h in rows[0]]
    if column is not None:
        if column in header:
            col = header.index(column)
        elif column.isdigit() and 1 <= int(column) <= len(header):
            col = int(column) - 1
        else:
            raise CliError(f'{path}: no column "{column}"; the columns are {", ".join(header)}')
    else:
        lowered = [h.lower() for h in header]
        named = [i for i, h in enumerate(lowered) if h in ("return", "returns", "ret", "r")]
        if named:
            col = named[0]
        else:
            numeric = [i for i in range(len(header)) if all(_is_number(r[i]) for r in rows[1:] if i < len(r) and r[i].strip())]
            if not numeric:
                raise CliError(f"{path}: no numeric column found; name one with --column")
            col = numeric[-1]
    cells = [(lineno, r[col].strip() if col < len(r) else "") for lineno, r in enumerate(rows[1:], start=2)]
    filled = [i for i, (_, c) in enumerate(cells) if c]
    if not filled:
        raise CliError(f'{path}: column "{header[col]}" holds no numbers')
    out = []
    for lineno, cell in cells[filled[0]: filled[-1] + 1]:
        if not cell:
            if skip_blanks:
                continue
            raise CliError(f'{path} line {lineno}: column "{header[col]}" is blank; fill it or pass --options "missing=skip"')
        if not _is_number(cell):
            raise CliError(f'{path} line {lineno}: "{cell}" in column "{header[col]}" is not a number')
        out.append(float(cell))
    return out


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
        return f"{v:.6g}" if abs(v) >= 1e-4 or v == 0 else f"{v:.4e}"
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


def _cmd_fit(args) -> int:
    try:
        skip = parse_options(args.options).missing == "skip"
    except InputError as exc:
        raise CliError(str(exc)) from None
    returns = read_returns_csv(args.file, args.column, skip_blanks=skip)
    rows = VOLFIT([[v] for v in returns], args.model, args.dist, args.options)
    if len(rows) == 1 and isinstance(rows[0][0], str) and rows[0][0].startswith("ERROR:"):
        raise CliError(rows[0][0][len("ERROR:"):].strip())
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
    if report.error_cells:
        shown = ", ".join(f"{a} {v if len(v) < 80 else v[:77] + '...'}" for a, v in report.error_cells[:10])
        more = f" and {len(report.error_cells) - 10} more" if len(report.error_cells) > 10 else ""
        print(f"volcast: {len(report.error_cells)} cells evaluate to errors: {shown}{more}", file=sys.stderr)
    return 0


def _cmd_demo(args) -> int:
    from .demo import run_demo

    out_dir = args.out or "volcast-demo"
    try:
        h = run_demo(out_dir)
    except Exception as exc:  # noqa: BLE001 - one line, as for any bad input
        raise CliError(f"the demo failed: {exc}") from None
    print(f"Volcast demo: synthetic Harrowgate Lane Global Equity Composite, monthly, to {h['last_date']}")
    print(f"model {h['model']} with {h['dist']} shocks")
    print(f"next month's volatility   {h['vol_1m']:6.2f} %  ({h['vol_1m_annualised']:.2f} % annualised)")
    print(f"12-month volatility       {h['vol_12m']:6.2f} %  (of the cumulative 12-month return)")
    print(f"{h['var_level']:.0%} one-month VaR      {h['var_1m']:6.2f} %  of value")
    print(f"workbook: {h['workbook']}   chart: {h['chart']}")
    print("Model estimates, not advice; validate under your model-risk policy.")
    if h["error_cells"]:
        print(f"volcast: {len(h['error_cells'])} cells evaluate to errors", file=sys.stderr)
    return 0


def _cmd_refresh(args) -> int:
    from .headless.recalc import RecalcError
    from .headless.refresh import refresh

    try:
        out, row, report, added = refresh(args.book, args.data, args.out)
    except RecalcError as exc:
        raise CliError(str(exc)) from None
    print(f"added {added} new observation(s) to {row['last date']}; wrote {out}")
    print(f"history: loglik {row['loglik']:.4f}, vol 1m {row['vol 1m (%)']:.3f} %, VaR 1m {row['VaR 1m (%)']:.3f} %"
          + (f"; {row['flag']}" if row["flag"] else ""))
    if report.error_cells:
        print(f"volcast: {len(report.error_cells)} cells evaluate to errors", file=sys.stderr)
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
    from .core.spec import parse_model

    returns = read_returns_csv(args.file, args.column)
    try:
        spec, dist, opts = parse_model(args.model), get_distribution(args.dist), parse_options(args.options)
        bt = backtest(np.array(returns), spec, dist, opts, args.window, args.level, args.scheme, args.refit,
                      progress=_Progress("backtest", args.progress))
    except VolcastError as exc:
        raise CliError(str(exc)) from None
    c = bt.coverage
    print(f"{spec.canonical} with {dist.name} shocks, {args.scheme} window {args.window}, refit every {args.refit}")
    print(f"forecasts {c.forecasts}  exceptions {c.exceptions} ({c.rate:.2%}, expected {c.expected_rate:.2%})  zone {c.zone}")
    print(f"Kupiec LR {c.lr_uc:.3f} (p {c.p_uc:.3f})  independence LR {c.lr_ind:.3f} (p {c.p_ind:.3f})  "
          f"conditional coverage LR {c.lr_cc:.3f} (p {c.p_cc:.3f})")
    print(f"mean QLIKE {bt.qlike:.4f}  mean MSE {bt.mse:.4g}  estimations {bt.fits}")
    if args.png:
        _backtest_png(bt, args.png, f"{spec.canonical}-{dist.name}")
        print(f"chart: {args.png}")
    return 0


def _backtest_png(bt, path, title):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    fig, ax = plt.subplots(figsize=(10, 4), dpi=110)
    ax.plot(bt.index, np.abs(bt.actual - bt.mean), color="#9AA5B1", lw=0.8, label="|return - mean forecast|")
    ax.plot(bt.index, np.sqrt(bt.variance), color="#1F3A5F", lw=1.4, label="forecast volatility")
    ax.plot(bt.index, bt.var, color="#C0504D", lw=1.0, ls="--", label="VaR")
    x = bt.exception
    ax.scatter(bt.index[x], np.abs(bt.actual[x] - bt.mean[x]), color="#C0504D", zorder=3, s=18, label="exceptions")
    ax.set_title(f"Backtest {title}: {bt.coverage.exceptions} exceptions in {bt.coverage.forecasts} (model estimates)")
    ax.set_xlabel("observation")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=8)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


def _cmd_batch(args) -> int:
    from .batch import read_panel, run_batch, write_tidy

    try:
        panel = read_panel(args.panel, args.id, args.value)
        if not panel:
            raise ValueError(f"{args.panel}: no series found")
        parse_options(args.options)
        rows = run_batch(panel, args.model, args.dist, args.options, args.horizon, args.level,
                         workers=args.workers, cluster=args.cluster, progress=_Progress("batch", args.progress))
        out = write_tidy(rows, args.out)
    except (ValueError, InputError) as exc:
        raise CliError(str(exc)) from None
    failed = sorted({r[0] for r in rows if r[1] == "error"})
    print(f"fitted {len(panel) - len(failed)} of {len(panel)} series; wrote {out}")
    if failed:
        shown = ", ".join(failed[:10]) + (f" and {len(failed) - 10} more" if len(failed) > 10 else "")
        print(f"volcast: {len(failed)} series failed (see their error rows): {shown}", file=sys.stderr)
    return 0


def _model_args(p):
    """--model, --dist and --options, the same for every command that fits."""
    p.add_argument("--model", default="GARCH(1,1)", help="model string, e.g. AR(1)-GJR-GARCH(1,1) (default GARCH(1,1))")
    p.add_argument("--dist", default="normal", help="normal, t, skewt or ged (default normal)")
    p.add_argument("--options", default=None, help='options string, e.g. "se=hessian; nu=8"')


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="volcast", description="ARCH/GARCH-family variance models for spreadsheets.")
    sub = parser.add_subparsers(dest="command", required=True)
    p = sub.add_parser("fit", help="estimate a model on a CSV column and print the fit table")
    p.add_argument("file", help="CSV file with a header row")
    p.add_argument("--column", help='column name or 1-based number (default: a column named "return", else the last numeric one)')
    _model_args(p)
    p.set_defaults(func=_cmd_fit)
    p = sub.add_parser("recalc", help="recalculate a workbook with no Excel; keeps formulas, stores values")
    p.add_argument("book", help="the .xlsx workbook to recalculate (never written over)")
    p.add_argument("-o", "--out", help="output workbook (default: BOOK.recalc.xlsx beside the input)")
    p.add_argument("--values-only", action="store_true", help="write plain values instead of formulas with values")
    p.set_defaults(func=_cmd_recalc)
    p = sub.add_parser("refresh", help="append new observations from a CSV, recalculate, add an estimate-history row")
    p.add_argument("book", help="the workbook (monthly template layout); never written over")
    p.add_argument("--data", required=True, help="CSV with columns date (YYYY-MM-DD) and level")
    p.add_argument("-o", "--out", required=True, help="output workbook")
    p.set_defaults(func=_cmd_refresh)
    p = sub.add_parser("backtest", help="walk-forward backtest of one-step variance and VaR forecasts on a CSV column")
    p.add_argument("file", help="CSV file with a header row")
    p.add_argument("--column", help="column name or number (default as for fit)")
    _model_args(p)
    p.add_argument("--window", type=int, required=True, help="estimation window (observations)")
    p.add_argument("--level", type=float, default=0.99)
    p.add_argument("--scheme", choices=("rolling", "expanding"), default="rolling")
    p.add_argument("--refit", type=int, default=1, help="re-estimate every N periods (default 1)")
    p.add_argument("--png", help="write a chart of forecast volatility, absolute returns and exceptions")
    p.add_argument("--progress", action="store_true", help="show the progress bar even when not on a terminal")
    p.set_defaults(func=_cmd_backtest)
    p = sub.add_parser("batch", help="fit many series from one CSV or Parquet panel in parallel; tidy output")
    p.add_argument("panel", help="CSV or Parquet: wide (a column per series) or long (with --id and --value)")
    p.add_argument("--id", help="long panel: the series id column")
    p.add_argument("--value", help="long panel: the returns column")
    _model_args(p)
    p.add_argument("--horizon", type=int, default=12)
    p.add_argument("--level", type=float, default=0.99)
    p.add_argument("--workers", type=int, default=None, help="processes (default: one per core)")
    p.add_argument("--cluster", help="address of a Dask scheduler (needs volcast[cluster])")
    p.add_argument("-o", "--out", required=True, help="output .csv or .parquet")
    p.add_argument("--progress", action="store_true", help="show the progress bar even when not on a terminal")
    p.set_defaults(func=_cmd_batch)
    p = sub.add_parser("demo", help="the main job on the bundled demo data: refresh the monthly template, print the headline")
    p.add_argument("--out", help="folder for the workbook (default: ./volcast-demo)")
    p.set_defaults(func=_cmd_demo)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        return args.func(args)
    except CliError as exc:
        print(f"volcast: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
