"""Messages in spreadsheet words (issue 14), over generated bad inputs (hypothesis).

A worksheet function given a bad cell answers with one ``ERROR:`` cell that echoes the value as a
spreadsheet shows it (TRUE/FALSE, 2020-01-31, blank, "not a number", infinity), never in a
Python spelling (True, nan, inf, datetime.datetime(...)), and quotes at most a short excerpt of
typed text.  The command line answers bad files and arguments with exit status 2 and one line.
The wording rules are the project's own (common practice for spreadsheet messages)."""

from __future__ import annotations

import datetime as dt
import math
import re

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from xlfuncs import VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLRISK, VOLTESTS
from xlfuncs.cli import main, read_returns_csv
from xlfuncs.core.errors import EXCERPT_CHARS, describe_value, excerpt, value_words
from xlfuncs.core.simulate import simulate
from xlfuncs.core.spec import parse_model
from xlfuncs.core.distributions import get_distribution

#: spellings a spreadsheet user never types or sees
PYTHON_SPELLINGS = re.compile(r"\bTrue\b|\bFalse\b|\bNone\b|\bnan\b|\bNaN\b|(?<![-\w])-?inf\b|datetime\.|numpy|"
                              r"Traceback|\bnp\.|float64|<class")

_SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def _returns(n=300, seed=7):
    x = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.0, 0.1, 0.1, 0.8]), n, 1,
                 rng=np.random.default_rng(seed))[:, 0]
    return [[float(v)] for v in x]


R = _returns()
FIT = VOLFIT(R, "GARCH(1,1)")

# values a cell can hold that are not usable numbers (text that is not a number: letters only, so
# that the echo is checked, not the text's own content)
bad_cells = st.one_of(
    st.booleans(),
    st.datetimes(min_value=dt.datetime(1900, 1, 1), max_value=dt.datetime(2100, 1, 1)),
    st.dates(min_value=dt.date(1900, 1, 1), max_value=dt.date(2100, 1, 1)),
    st.sampled_from([math.nan, math.inf, -math.inf, np.float64("nan"), np.float64("-inf")]),
    st.text(alphabet="abcdefghijklmnopqrstuvwxyz /%", min_size=1, max_size=300).filter(lambda s: s.strip()),
    st.sampled_from(["#N/A", "#VALUE!", "#DIV/0!", "ERROR: another cell's reason"]),
)


def _one_error_cell(out):
    assert isinstance(out, list) and len(out) == 1 and len(out[0]) == 1, out
    text = out[0][0]
    assert isinstance(text, str) and text.startswith("ERROR: "), text
    assert "\n" not in text and text.isprintable()
    assert not PYTHON_SPELLINGS.search(text), text
    return text


# ---------------------------------------------------------------------------------------------
# the words of a value


@given(st.one_of(st.none(), st.booleans(), st.datetimes(), st.dates(), st.times(),
                 st.floats(allow_nan=True, allow_infinity=True), st.integers(), st.text(max_size=500)))
@settings(max_examples=300, deadline=None)
def test_value_words_never_use_python_spellings(v):
    words = value_words(v)
    if not isinstance(v, str):
        assert not PYTHON_SPELLINGS.search(words), words
    assert words.isprintable()
    assert len(words) <= EXCERPT_CHARS + 2  # a text's excerpt in its two quotes


@pytest.mark.parametrize("value,words", [
    (True, "TRUE"), (False, "FALSE"), (np.bool_(True), "TRUE"), (None, "blank"),
    (dt.datetime(2020, 1, 31), "2020-01-31"), (dt.datetime(2020, 1, 31, 9, 30), "2020-01-31 09:30:00"),
    (dt.date(2020, 1, 31), "2020-01-31"), (math.nan, "not a number"), (math.inf, "infinity"),
    (-math.inf, "minus infinity"), (2.0, "2"), (0.99, "0.99"), (np.float64(2.5), "2.5"), (np.int64(3), "3"),
])
def test_value_words(value, words):
    assert value_words(value) == words


def test_describe_value():
    assert describe_value(dt.datetime(2020, 1, 31)) == "the date 2020-01-31"
    assert describe_value(True) == "the logical value TRUE"
    assert describe_value(math.nan) == "a value that is not a number"
    assert describe_value(-math.inf) == "minus infinity"
    assert describe_value(None) == "a blank"
    assert describe_value("n/a") == 'text "n/a"'


@given(st.text(max_size=2000))
@settings(max_examples=300, deadline=None)
def test_an_excerpt_is_short_and_printable(text):
    """At most EXCERPT_CHARS (40, within the issue's ~80) printable characters, whatever the input."""
    e = excerpt(text)
    assert len(e) <= EXCERPT_CHARS and e.isprintable()
    assert e == text or e.endswith("...") or "\\" in e


# ---------------------------------------------------------------------------------------------
# worksheet functions over generated bad cells


@given(bad=bad_cells, at=st.integers(0, 299))
@_SETTINGS
def test_a_bad_returns_cell_is_one_error_cell_in_spreadsheet_words(bad, at):
    cells = [list(r) for r in R]
    cells[at] = [bad]
    text = _one_error_cell(VOLFIT(cells, "GARCH(1,1)"))
    assert f"row {at + 1}" in text
    if isinstance(bad, dt.date):
        assert (bad.date() if isinstance(bad, dt.datetime) else bad).isoformat() in text


@given(bad=bad_cells, which=st.sampled_from(["horizon", "level", "lags", "model", "dist", "options", "window"]))
@_SETTINGS
def test_a_bad_scalar_argument_is_one_error_cell_in_spreadsheet_words(bad, which):
    calls = {
        "horizon": lambda: VOLFORECAST(R, FIT, bad),
        "level": lambda: VOLRISK(R, FIT, bad),
        "lags": lambda: VOLTESTS(R, FIT, bad),
        "model": lambda: VOLFIT(R, bad),
        "dist": lambda: VOLFIT(R, "GARCH(1,1)", bad),
        "options": lambda: VOLFIT(R, "GARCH(1,1)", "normal", bad),
        "window": lambda: VOLBACKTEST(R, "GARCH(1,1)", bad),
    }
    out = calls[which]()
    if isinstance(bad, str) and which in ("model", "dist", "options") and not bad.startswith(("#", "ERROR")):
        if len(out) > 1:
            return  # typed text that happens to be valid (e.g. "t" as dist)
    _one_error_cell(out)


@pytest.mark.parametrize("bad,words", [
    (dt.datetime(2020, 1, 31), "the date 2020-01-31"), (True, "the logical value TRUE"),
    (math.nan, "a value that is not a number"), (math.inf, "infinity"),
])
def test_a_fit_table_with_a_bad_model_or_dist_cell(bad, words):
    """A fit table's model and dist cells are echoed as values, not as Python's repr."""
    table = [["model", "GARCH(1,1)"], ["dist", "normal"], ["mu", 0.0], ["omega", 0.1], ["alpha[1]", 0.1],
             ["beta[1]", 0.8]]
    for row in (0, 1):
        bad_table = [list(r) for r in table]
        bad_table[row][1] = bad
        text = _one_error_cell(VOLFORECAST(R, bad_table, 3))
        assert words in text


@pytest.mark.parametrize("typed,words", [("nu=nan", "nan (not a number)"), ("nu=inf", "inf (infinity)"),
                                         ("mu=-inf", "-inf (minus infinity)"),
                                         ("periods=nan", "nan (not a number)")])
def test_options_that_are_not_finite_are_named_in_words(typed, words):
    text = VOLFIT(R, "GARCH(1,1)", "t", typed)[0][0]
    assert text.startswith("ERROR: options:") and text.endswith(words)


def test_a_level_out_of_range_is_shown_as_typed():
    assert VOLRISK(R, FIT, 2)[0][0] == "ERROR: level must be between 0.5 and 1, e.g. 0.99, got 2"


@given(bad=st.one_of(st.booleans(), st.dates(), st.floats()))
@settings(max_examples=30, deadline=None)
def test_volcompare_dist_example_is_a_distribution(bad):
    text = _one_error_cell(VOLCOMPARE(R, "GARCH(1,1)", bad))
    assert text.startswith("ERROR: dist must be text such as t ") and "GARCH" not in text


@given(n=st.integers(2, 19))
@settings(max_examples=18, deadline=None)
def test_a_backtest_on_too_short_a_series_says_so(n):
    """GARCH(1,1) is estimated on at least 19 returns (its min_obs): a backtest needs 20."""
    need = parse_model("GARCH(1,1)").min_obs + 1
    for window in (None, 1, n - 1, n, n + 5, 10):
        text = _one_error_cell(VOLBACKTEST(R[:n], "GARCH(1,1)", window))
        assert text == (f"ERROR: returns: {n} numbers are too few for a backtest of GARCH(1,1); it needs at least "
                        f"{need} (a window of {need - 1}, the fewest GARCH(1,1) is estimated on, and one return to "
                        "forecast)") or (window is None and "window is required" in text), text
        assert "window must be" not in text


def test_a_backtest_window_out_of_range_on_a_long_enough_series():
    text = VOLBACKTEST(R[:40], "GARCH(1,1)", 10)[0][0]
    assert text.startswith("ERROR: window must be a whole number from 19 (the least GARCH(1,1) can be estimated on) "
                           "to 39")


# ---------------------------------------------------------------------------------------------
# the command line: separators, decimal commas, generated bad cells


def _run(argv, capsys):
    rc = main(argv)
    out, err = capsys.readouterr()
    return rc, out, err


@given(values=st.lists(st.floats(-20, 20, allow_nan=False).map(lambda x: round(x, 6)), min_size=3, max_size=40),
       sep=st.sampled_from([";", "\t"]))
@_SETTINGS
def test_semicolon_and_tab_files_read_as_comma_files(tmp_path, values, sep):
    comma = tmp_path / "comma.csv"
    other = tmp_path / "other.csv"
    rows = [("date", "return")] + [(f"{dt.date(2020, 1, 1) + dt.timedelta(days=i)}", f"{v:.6f}") for i, v in enumerate(values)]
    comma.write_text("".join(",".join(r) + "\n" for r in rows))
    other.write_text("".join(sep.join(r) + "\n" for r in rows))
    # the column named: generated values may look like price levels, which a default column refuses
    assert read_returns_csv(str(other), "return") == read_returns_csv(str(comma), "return") == pytest.approx(values, abs=1e-6)


@given(values=st.lists(st.floats(-20, 20, allow_nan=False).map(lambda x: round(x, 6)), min_size=3, max_size=40),
       sep=st.sampled_from([";", "\t"]))
@_SETTINGS
def test_decimal_comma_files_read_as_their_point_twins(tmp_path, values, sep):
    """A semicolon or tab file written where the comma is the decimal mark (common practice for
    such exports) reads as the comma file with decimal points, and the reader says so."""
    from xlfuncs.csvtext import read_csv_records

    point, comma = tmp_path / "point.csv", tmp_path / "comma.csv"
    rows = [(f"{dt.date(2020, 1, 1) + dt.timedelta(days=i)}", f"{v:.6f}") for i, v in enumerate(values)]
    point.write_text("date,return\n" + "".join(",".join(r) + "\n" for r in rows))
    comma.write_text(f"date{sep}return\n" + "".join(f"{d}{sep}{v.replace('.', ',')}\n" for d, v in rows))
    assert read_returns_csv(str(comma), "return") == read_returns_csv(str(point), "return") == pytest.approx(values, abs=1e-6)
    assert read_csv_records(comma).note == "numbers written with decimal commas read as decimal points"
    assert read_csv_records(point).note == ""


def test_thousands_points_beside_a_decimal_comma_are_read(tmp_path):
    from xlfuncs.csvtext import read_csv_records

    f = tmp_path / "levels.csv"
    f.write_text("date;level\n2020-01-31;1.234,5\n2020-02-29;1.250,25\n")
    assert [r for _, r in read_csv_records(f)[1:]] == [["2020-01-31", "1234.5"], ["2020-02-29", "1250.25"]]


@given(whole=st.integers(-99, 99), frac=st.integers(1, 999999), sep=st.sampled_from([";", "\t"]))
@_SETTINGS
def test_a_decimal_comma_gets_a_hint_naming_the_number(tmp_path, capsys, whole, frac, sep):
    f = tmp_path / "dc.csv"
    cell = f"{whole},{frac}"
    f.write_text(f"date{sep}return\n2020-01-31{sep}0.5\n2020-02-28{sep}{cell}\n")
    rc, out, err = _run(["fit", str(f)], capsys)
    assert rc == 2 and out == ""
    line, = err.splitlines()  # 0.5 on the line before: two decimal marks in one file are refused
    assert "use one decimal mark throughout" in line and "line 3" in line and "line 2" in line, line
    assert line.endswith(f"(a decimal comma? write {whole}.{frac})"), line
    assert "header" not in line


def test_a_decimal_comma_in_a_comma_file_is_named(tmp_path, capsys):
    f = tmp_path / "dc.csv"
    f.write_text("date,return\n2020-01-31,0.5\n2020-02-28,1,25\n")
    rc, _, err = _run(["fit", str(f)], capsys)
    assert rc == 2 and "a decimal comma in a comma-separated file? write 1.25" in err


@given(bad=st.one_of(st.text(min_size=1, max_size=400).filter(lambda s: s.strip() and "\x00" not in s),
                     st.sampled_from(["nan", "inf", "-inf", "NaN", "TRUE", "#N/A", "1,5", "2020-01-31"])),
       at=st.integers(0, 29))
@_SETTINGS
def test_a_bad_csv_cell_is_exit_2_with_one_short_line(tmp_path, capsys, bad, at):
    f = tmp_path / "bad.csv"
    vals = [f"{v[0]:.6f}" for v in R[:30]]
    vals[at] = '"' + bad.replace('"', '""') + '"'
    f.write_text("date,return\n" + "".join(f"{dt.date(2020, 1, 1) + dt.timedelta(days=i)},{v}\n" for i, v in enumerate(vals)),
                 encoding="utf-8")
    rc, out, err = _run(["fit", str(f), "--model", "ARCH(1)"], capsys)
    if rc == 0:  # the text was a number after all (" 1e3", "+5")
        return
    assert rc == 2
    line, = err.splitlines()
    assert line.startswith("volcast: ") and "Traceback" not in line and line.isprintable()
    quoted = re.findall(r'"([^"]*)"', line)
    assert all(len(q) <= 80 for q in quoted), line
    assert not re.search(r"\bnan\b(?! \()|\binf\b(?! \()|datetime\.", line.replace(f'"{excerpt(bad)}"', "")), line


@given(n=st.integers(1, 19))
@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_cli_backtest_on_too_short_a_series(tmp_path, capsys, n):
    f = tmp_path / "short.csv"
    f.write_text("return\n" + "".join(f"{v[0]:.6f}\n" for v in R[:n]))
    rc, _, err = _run(["backtest", str(f), "--window", "10"], capsys)
    assert rc == 2
    line, = err.splitlines()
    assert f"{n} number{'s are' if n != 1 else ' is'} too few for a backtest of GARCH(1,1); it needs at least 20" in line


def test_a_call_with_too_many_or_too_few_arguments_says_how_many_it_takes(tmp_path, capsys):
    """A cell with one argument too many (possible in a file, and read as written by a headless
    recalculation) answered "hit an internal problem (TypeError...)"; it now names the function's
    arguments, optional ones in brackets, and how many it got."""
    import openpyxl

    from xlfuncs import sheet

    for name in sheet.__all__:
        fn = getattr(sheet, name)
        out = fn(*([1.0] * 12))
        text = out[0][0]
        assert re.fullmatch(rf"ERROR: {name}\(.*\) takes \d+( to \d+)? arguments?, got 12", text), text
        assert "internal problem" not in text
    assert VOLFIT()[0][0].endswith("takes 1 to 5 arguments, got 0")
    wb = openpyxl.Workbook()
    ws = wb.active
    for i in range(1, 61):
        ws.cell(i, 1, 0.01 * ((i * 37) % 11 - 5))
    ws["C1"] = '=VOLRISK(A1:A60, 0.99, 10, 1, 2, 3, "log100")'
    wb.save(tmp_path / "b.xlsx")
    assert main(["recalc", str(tmp_path / "b.xlsx"), "-o", str(tmp_path / "o.xlsx")]) == 0
    got = openpyxl.load_workbook(tmp_path / "o.xlsx", data_only=True).active["C1"].value
    assert got.startswith("ERROR: VOLRISK(returns, fit, [level], [horizon]") and got.endswith("got 7")
    capsys.readouterr()


def test_the_optimisers_own_stopping_words_are_translated():
    """A fit that did not converge said 'NOT converged: ABNORMAL: ' or 'CONVERGENCE: RELATIVE
    REDUCTION OF F <= FACTR*EPSMCH' (the optimiser's internal texts); it now says what happened in
    words and what to try.  The component model with target=yes on the demo returns stops so."""
    import csv

    from xlfuncs import VOLFIT
    from xlfuncs.core.estimate import _optimiser_words
    from xlfuncs.demo import data_file

    assert "line search failed" in _optimiser_words("ABNORMAL: ")
    assert "no longer improved" in _optimiser_words("CONVERGENCE: RELATIVE REDUCTION OF F <= FACTR*EPSMCH")
    assert _optimiser_words(b"SOMETHING ELSE") .startswith("the optimiser stopped (")
    r = [[float(x["return"])] for x in csv.DictReader(open(data_file("demo_returns.csv")))]
    table = VOLFIT(r, "CGARCH", "t", "target=yes")
    row = [x for x in table if x[0] == "converged"][0]
    if row[1] is False:
        assert not any(w in row[2] for w in ("ABNORMAL", "FACTR", "EPSMCH")) and "try" in row[2], row
