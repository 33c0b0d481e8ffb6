"""Tests of the ``volcast fit`` command (DESIGN.md "Command line").

Exit status 0 on success and 2 on bad input, with a one-line reason on standard error that
starts with ``volcast:``.  The numbers are checked only against VOLFIT itself (the command prints
its table); all data are simulated with fixed seeds, except the one run on the bundled demo file.
"""

import csv
import math
import re
import subprocess
import sys
from importlib import metadata
from pathlib import Path

import numpy as np
import pytest

from xlfuncs import VOLFIT
from xlfuncs.cli import main

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_data" / "demo_returns.csv"


def simulated_returns(n, seed, omega=0.2, alpha=0.2, beta=0.6):
    """A constant-mean GARCH(1,1) path with normal shocks."""
    rng = np.random.default_rng(seed)
    s2, out = omega / (1 - alpha - beta), []
    for z in rng.standard_normal(n):
        e = math.sqrt(s2) * z
        out.append(float(0.1 + e))
        s2 = omega + alpha * e * e + beta * s2
    return out


def write_csv(path, header, columns):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        for row in zip(*columns):
            w.writerow([v if isinstance(v, str) else repr(v) for v in row])
    return str(path)


def run(argv, capsys):
    """(exit status, stdout, stderr) of ``volcast ARGV``; argparse's own exits are caught too."""
    try:
        rc = main(argv)
    except SystemExit as exc:
        rc = exc.code
    out, err = capsys.readouterr()
    return rc, out, err


def table_lines(out):
    return {line.split()[0]: line for line in out.splitlines() if line.strip()}


def printed_number(lines, name):
    return float(lines[name].split()[1])


A = simulated_returns(300, seed=21)
B = simulated_returns(300, seed=22)


@pytest.fixture
def returns_csv(tmp_path):
    dates = [f"{2001 + i // 12}-{1 + i % 12:02d}-28" for i in range(len(A))]  # one a month, oldest first
    return write_csv(tmp_path / "returns.csv", ["date", "return"], [dates, A])


@pytest.fixture
def two_column_csv(tmp_path):
    dates = [f"d{i}" for i in range(len(A))]
    return write_csv(tmp_path / "two.csv", ["date", "a", "b"], [dates, A, B])


# ---------------------------------------------------------------------------------------------
# success


def test_fit_prints_the_table(returns_csv, capsys):
    rc, out, err = run(["fit", returns_csv], capsys)
    assert rc == 0
    assert err == ""
    lines = table_lines(out)
    assert out.splitlines()[0] == 'column "return" of returns.csv: 300 returns'  # which column, how many numbers
    assert out.splitlines()[1].split() == ["parameter", "estimate", "std_error", "t_stat", "p_value"]
    for name in ("model", "dist", "options", "mu", "omega", "alpha[1]", "beta[1]", "loglik", "aic", "bic",
                 "nobs", "persistence", "uncond_variance", "half_life", "converged"):
        assert name in lines, name
    assert lines["model"].split()[1] == "GARCH(1,1)"  # the command's default model
    assert lines["dist"].split()[1] == "normal"
    assert "presample=mean; se=robust" in lines["options"]
    assert lines["converged"].split()[1] == "TRUE"
    # the numbers are VOLFIT's on the same column
    table = {row[0]: row for row in VOLFIT([[v] for v in A], "GARCH(1,1)")}
    assert int(lines["nobs"].split()[1]) == len(A) == table["nobs"][1]
    for name in ("mu", "omega", "alpha[1]", "beta[1]", "loglik", "aic", "bic"):
        assert printed_number(lines, name) == pytest.approx(table[name][1], rel=1e-5), name
    for name in ("mu", "omega", "alpha[1]", "beta[1]"):
        assert float(lines[name].split()[2]) == pytest.approx(table[name][2], rel=1e-5), name


def test_fit_with_model_dist_and_options(returns_csv, capsys):
    rc, out, err = run(["fit", returns_csv, "--model", "arch(1)", "--dist", "Gaussian",
                        "--options", "presample=drop; se=hessian; mu=0"], capsys)
    assert (rc, err) == (0, "")
    lines = table_lines(out)
    assert lines["model"].split()[1] == "ARCH(1)"
    assert lines["dist"].split()[1] == "normal"
    assert "presample=drop; se=hessian; mu=0" in lines["options"]
    assert lines["mu"].split()[2] == "fixed"
    assert "beta[1]" not in lines
    assert int(lines["nobs"].split()[1]) == len(A) - 1


def test_column_by_name_and_by_number(two_column_csv, capsys):
    by_name = run(["fit", two_column_csv, "--column", "b", "--model", "ARCH(1)"], capsys)
    by_number = run(["fit", two_column_csv, "--column", "3", "--model", "ARCH(1)"], capsys)
    other = run(["fit", two_column_csv, "--column", "a", "--model", "ARCH(1)"], capsys)
    other_number = run(["fit", two_column_csv, "--column", "2", "--model", "ARCH(1)"], capsys)
    assert by_name[0] == by_number[0] == other[0] == 0
    assert by_name == by_number
    assert other == other_number
    assert other[1] != by_name[1]
    table_b = {row[0]: row for row in VOLFIT([[v] for v in B], "ARCH(1)")}
    assert printed_number(table_lines(by_name[1]), "loglik") == pytest.approx(table_b["loglik"][1], rel=1e-5)


def test_default_column_is_the_return_column(tmp_path, capsys):
    # a column named "return" is chosen even when it is not the last
    path = write_csv(tmp_path / "x.csv", ["date", "Return", "volume"], [[f"d{i}" for i in range(len(A))], A, B])
    assert run(["fit", path, "--model", "ARCH(1)"], capsys) == run(["fit", path, "--model", "ARCH(1)", "--column", "2"], capsys)


def test_default_column_without_a_return_column_is_the_last_numeric_one(two_column_csv, capsys):
    assert run(["fit", two_column_csv, "--model", "ARCH(1)"], capsys) == \
        run(["fit", two_column_csv, "--model", "ARCH(1)", "--column", "b"], capsys)


# ---------------------------------------------------------------------------------------------
# bad input: exit 2, one line on standard error


def _bad_csv(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return str(p)


BAD = [
    # (make argv from tmp_path and the good file, pattern of the reason)
    ("missing_file", lambda tp, good: ["fit", str(tp / "nope.csv")], r"nope\.csv: no such file"),
    ("non_numeric", lambda tp, good: ["fit", _bad_csv(tp, "bad.csv", "date,return\nd1,0.5\nd2,n/a\nd3,0.1\n")],
     r'line 3: "n/a" in column "return" is not a number'),
    ("blank_cell", lambda tp, good: ["fit", _bad_csv(tp, "blank.csv", "date,return\nd1,0.5\nd2,\nd3,0.1\n")],
     r'line 3: column "return" is blank'),
    ("unknown_column", lambda tp, good: ["fit", good, "--column", "price"],
     r'no column "price"; the columns are date, return'),
    ("column_zero", lambda tp, good: ["fit", good, "--column", "0"], r'no column "0"'),
    ("column_too_big", lambda tp, good: ["fit", good, "--column", "9"], r'no column "9"'),
    ("text_column", lambda tp, good: ["fit", good, "--column", "date"], r'in column "date" is not a number'),
    ("header_only", lambda tp, good: ["fit", _bad_csv(tp, "h.csv", "date,return\n")],
     r"needs a header row and at least one row of data"),
    ("no_numeric_column", lambda tp, good: ["fit", _bad_csv(tp, "t.csv", "x,y\na,b\nc,d\n")],
     r"no numeric column found; name one with --column"),
    ("bad_model", lambda tp, good: ["fit", good, "--model", "GARCH(1,1,1)"],
     r'model "GARCH\(1,1,1\)" is not understood'),
    ("unknown_model", lambda tp, good: ["fit", good, "--model", "FOO"], r'"FOO" is not a model name'),
    ("bad_dist", lambda tp, good: ["fit", good, "--dist", "cauchy"], r'unknown distribution "cauchy"'),
    ("bad_options", lambda tp, good: ["fit", good, "--options", "se=white"], r"options: se=white is not allowed"),
    ("too_few", lambda tp, good: ["fit", _bad_csv(tp, "few.csv", "r\n0.1\n-0.2\n0.3\n"), "--model", "ARCH(1)"],
     r"ARCH\(1\) needs at least \d+ returns, got 3"),
    ("constant", lambda tp, good: ["fit", _bad_csv(tp, "c.csv", "r\n" + "0.5\n" * 50), "--model", "ARCH(1)"],
     r"all the same number"),
    ("directory", lambda tp, good: ["fit", str(tp)], r"cannot be read|no such file|is a directory"),
]


@pytest.mark.parametrize("name, argv, pattern", BAD, ids=[b[0] for b in BAD])
def test_bad_input_exits_2_with_one_line(tmp_path, returns_csv, capsys, name, argv, pattern):
    rc, out, err = run(argv(tmp_path, returns_csv), capsys)
    assert rc == 2
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("volcast: ")
    assert "Traceback" not in err
    assert re.search(pattern, lines[0]), lines[0]


@pytest.mark.parametrize("argv", [["fit"], ["fit", "x.csv", "--bogus"], ["bogus"]],
                         ids=["no_file", "unknown_flag", "unknown_command"])
def test_usage_errors_exit_2_with_one_line(capsys, argv):
    rc, out, err = run(argv, capsys)
    assert rc == 2
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("volcast:"), err


def test_a_good_run_after_a_bad_one(returns_csv, capsys):
    good = run(["fit", returns_csv, "--model", "ARCH(1)"], capsys)
    assert run(["fit", returns_csv, "--model", "FOO"], capsys)[0] == 2
    assert run(["fit", returns_csv, "--model", "ARCH(1)"], capsys) == good


# ---------------------------------------------------------------------------------------------
# dates and the header line of a CSV: the rows are fitted in file order, the last row the latest
# observation (common practice for a time series file: oldest first, one row per date), so a file
# sorted the other way, out of order or with a date twice is refused, as is a file whose first line
# is data (it would be read as the header and its observation lost)


MONTH_ENDS = [f"{2001 + i // 12}-{1 + i % 12:02d}-28" for i in range(len(A))]


def _dated_csv(tmp_path, name, dates, header="date,return\n"):
    p = tmp_path / name
    p.write_text(header + "".join(f"{d},{r!r}\n" for d, r in zip(dates, A)), encoding="utf-8")
    return str(p)


ORDER_BAD = [
    # (file name, dates, header, pattern of the reason: the file and the lines named)
    ("reversed.csv", MONTH_ENDS[::-1], "date,return\n",
     r"reversed\.csv: column \"date\" runs newest first \(line 2: 2025-12-28, line 3: 2025-11-28\); "
     r"sort it oldest first"),
    ("swapped.csv", MONTH_ENDS[:40] + [MONTH_ENDS[41], MONTH_ENDS[40]] + MONTH_ENDS[42:], "date,return\n",
     r"swapped\.csv line 43: column \"date\" is out of order \(2004-05-28 after 2004-06-28 on line 42\); "
     r"sort the file oldest first"),
    ("repeated.csv", MONTH_ENDS[:100] + [MONTH_ENDS[99]] + MONTH_ENDS[100:-1], "date,return\n",
     r"repeated\.csv line 102: column \"date\" repeats the date 2009-04-28 of line 101; one row per date"),
    ("noheader.csv", MONTH_ENDS, "",
     r"noheader\.csv line 1: the first line holds numbers \(\"2001-01-28,0\.\d+\"\), not column names; add a "
     r"header line naming the columns, such as date,return"),
]


@pytest.mark.parametrize("command", [["fit"], ["backtest", "--window", "200"], ["report", "-o", "{d}/r.html"]],
                         ids=["fit", "backtest", "report"])
@pytest.mark.parametrize("name, dates, header, pattern", ORDER_BAD, ids=[b[0] for b in ORDER_BAD])
def test_dates_not_oldest_first_and_a_missing_header_exit_2(tmp_path, capsys, command, name, dates, header, pattern):
    path = _dated_csv(tmp_path, name, dates, header)
    argv = [command[0], path] + [a.replace("{d}", str(tmp_path)) for a in command[1:]]
    rc, out, err = run(argv, capsys)
    assert rc == 2 and out == ""
    lines = [x for x in err.splitlines() if not x.startswith("report:")]  # report's progress lines
    assert len(lines) == 1 and lines[0].startswith("volcast: "), err
    assert "Traceback" not in err
    assert re.search(pattern, lines[0]), lines[0]
    assert not (tmp_path / "r.html").exists()
    if command == ["fit"]:
        # the same returns with a header and their dates oldest first: every row one observation
        rc, out, err = run(["fit", _dated_csv(tmp_path, "ok.csv", MONTH_ENDS), "--model", "ARCH(1)"], capsys)
        assert rc == 0 and int(table_lines(out)["nobs"].split()[1]) == len(A), err
        # dates that are not ISO (day/month/year here) cannot be ordered safely and are not checked
        dm = _dated_csv(tmp_path, "dm.csv", [f"28/{1 + i % 12:02d}/2001" for i in range(len(A))])
        assert run(["fit", dm, "--model", "ARCH(1)"], capsys)[0] == 0



# ---------------------------------------------------------------------------------------------
# the installed command


def test_console_script_is_declared():
    eps = metadata.entry_points(group="console_scripts")
    (ep,) = [e for e in eps if e.name == "volcast"]
    assert ep.value == "xlfuncs.cli:main"


def test_module_run_on_the_demo_file():
    # the console script may not be on PATH in CI; ``python -m xlfuncs.cli`` runs the same main()
    proc = subprocess.run([sys.executable, "-m", "xlfuncs.cli", "fit", str(DEMO)],
                          capture_output=True, text=True, timeout=60, cwd=str(ROOT))
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""
    lines = table_lines(proc.stdout)
    with open(DEMO, newline="", encoding="utf-8-sig") as fh:
        n_data_rows = sum(1 for row in csv.reader(fh) if any(c.strip() for c in row)) - 1
    assert int(lines["nobs"].split()[1]) == n_data_rows
    assert lines["model"].split()[1] == "GARCH(1,1)"
    assert lines["converged"].split()[1] in ("TRUE", "FALSE")



def test_cli_backtest_with_chart(tmp_path, capsys):
    from pathlib import Path

    demo = Path(__file__).resolve().parent.parent / "demo_data" / "demo_returns.csv"
    png = tmp_path / "bt.png"
    assert main(["backtest", str(demo), "--window", "300", "--refit", "20", "--png", str(png)]) == 0
    out = capsys.readouterr().out
    assert "forecasts 69" in out and "zone" in out and "Kupiec LR" in out
    assert png.read_bytes()[:4] == b"\x89PNG"
    assert main(["backtest", str(demo), "--window", "3"]) == 2
    assert capsys.readouterr().err.startswith("volcast: window must be")


# ---------------------------------------------------------------------------------------------
# the options against the file: periods a year against the dates' spacing (the rule of the
# workbook refresh, our own: the usual spacing within 0.4 to 2.5 times 365.25/periods days), and
# returns= against --levels (which makes log returns in percent, 100 ln(p[t]/p[t-1]), common practice)


def _refused(argv, capsys, pattern):
    rc, out, err = run(argv, capsys)
    assert rc == 2, (rc, out, err)
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("volcast: "), err
    assert "Traceback" not in err
    assert re.search(pattern, lines[0]), lines[0]


SPACING = (r"the dates are usually 3\d days apart \(monthly data\), but the options say periods=252 a year, one "
           r"every 1\.4 days: every figure would be for the wrong horizon; set periods=12 for monthly data")


@pytest.mark.parametrize("command", [["fit"], ["backtest", "--window", "200"], ["report", "-o", "rep.html"],
                                     ["batch", "-o", "tidy.csv"]], ids=["fit", "backtest", "report", "batch"])
def test_periods_that_disagree_with_monthly_dates_are_refused(tmp_path, returns_csv, capsys, command):
    argv = [command[0], returns_csv] + [str(tmp_path / a) if a.endswith((".html", ".csv")) else a
                                        for a in command[1:]]
    _refused(argv + ["--options", "periods=252; returns=log100"], capsys, SPACING)
    assert not (tmp_path / "rep.html").exists() and not (tmp_path / "tidy.csv").exists()
    if command == ["fit"]:  # periods that agree with the dates are taken
        rc, out, err = run(["fit", returns_csv, "--model", "ARCH(1)", "--options", "periods=12"], capsys)
        assert rc == 0, err


def _levels_csv(tmp_path):
    levels = 100 * np.exp(np.cumsum(np.r_[0.0, A]) / 100)
    return write_csv(tmp_path / "levels.csv", ["date", "level"], [["2001-01-28"] + MONTH_ENDS, list(levels)])


@pytest.mark.parametrize("command", [["fit"], ["backtest", "--window", "200"], ["report", "-o", "rep.html"],
                                     ["batch", "-o", "tidy.csv"]], ids=["fit", "backtest", "report", "batch"])
@pytest.mark.parametrize("returns", ["simple", "simple100", "log"])
def test_levels_with_another_returns_definition_are_refused(tmp_path, capsys, command, returns):
    argv = [command[0], _levels_csv(tmp_path), "--levels"] + [
        str(tmp_path / a) if a.endswith((".html", ".csv")) else a for a in command[1:]]
    _refused(argv + ["--options", f"returns={returns}"], capsys,
             rf"--levels makes log returns in percent, 100\*ln\(p\[t\]/p\[t-1\]\), but the options say "
             rf"returns={returns}; use returns=log100 or leave returns out")


def test_fraction_units_on_percent_returns_are_refused(capsys):
    """The demo's returns are in percent (standard deviation about 4): returns=simple, which says
    fractions, is refused (our own rule: a standard deviation above 1 is not fractions)."""
    _refused(["fit", str(DEMO), "--options", "returns=simple"], capsys,
             r"returns=simple means fractions \(0\.01 = 1 %\), but these returns have standard deviation 4\.\d+.*"
             r"use returns=simple100")
