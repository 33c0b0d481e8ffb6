"""Which column the fitting commands use, and price levels told apart from returns.

``volcast fit`` / ``backtest`` / ``batch`` say which column (or how the panel's series) they use and
how many numbers.  A column chosen by default that looks like price levels (all above zero, lag-1
autocorrelation above 0.8, our own rule of thumb) is refused with exit status 2 unless ``--levels``
converts it to log returns in percent or ``--column`` names it.  Percent log returns are
100*ln(p[t]/p[t-1]) (common practice definition), computed here with NumPy, and fits on them are
compared with ``VOLFIT`` / the core ``fit`` called directly on the NumPy returns.
"""

import csv
import math
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from xlfuncs import VOLFIT
from xlfuncs.batch import LEVELS_AUTOCORRELATION, lag1_autocorrelation, looks_like_levels
from xlfuncs.cli import build_parser, main, read_returns_csv
from xlfuncs.core import fit

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_data"
LEVEL_FILES = ["equity_composite_monthly.csv", "bond_index_monthly.csv", "commodity_basket_daily.csv"]
RETURNS_FILE = DEMO / "demo_returns.csv"


def run(argv, capsys):
    """(exit status, stdout, stderr) of ``volcast ARGV``; argparse's own exits are caught too."""
    try:
        rc = main([str(a) for a in argv])
    except SystemExit as exc:
        rc = exc.code
    out, err = capsys.readouterr()
    return rc, out, err


def one_error_line(err):
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("volcast: ")
    assert "Traceback" not in err
    return lines[0]


def csv_column(path, name):
    """The header and one column of a CSV file as floats, read with the csv module (blank cells NaN)."""
    with open(path, newline="", encoding="utf-8-sig") as fh:
        rows = [r for r in csv.reader(fh) if any(c.strip() for c in r)]
    col = rows[0].index(name)
    return rows[0], np.array([float(r[col]) if r[col].strip() else np.nan for r in rows[1:]])


def pct_log_returns(levels):
    """100 * diff(log(p)): percent log returns (common practice definition)."""
    return 100.0 * np.diff(np.log(levels))


def table_lines(out):
    return {line.split()[0]: line for line in out.splitlines()[1:] if line.strip()}


def assert_table_matches(out, reference_rows):
    """The printed fit table (after the column line) shows VOLFIT's numbers to its 6 printed digits."""
    lines = table_lines(out)
    ref = {row[0]: row for row in reference_rows}
    assert int(lines["nobs"].split()[1]) == ref["nobs"][1]
    for name in ("mu", "omega", "alpha[1]", "beta[1]", "loglik", "aic", "bic"):
        assert float(lines[name].split()[1]) == pytest.approx(ref[name][1], rel=1e-5), name
    for name in ("mu", "omega", "alpha[1]", "beta[1]"):
        if isinstance(ref[name][2], str):  # a parameter not estimated says why (`at bound`, `implied`)
            assert ref[name][2] in lines[name], name
        else:
            assert float(lines[name].split()[2]) == pytest.approx(ref[name][2], rel=1e-5), name


# ---------------------------------------------------------------------------------------------
# the rule of thumb itself


def test_lag1_autocorrelation_is_statsmodels_acf():
    # reference: statsmodels.tsa.stattools.acf, the usual sample autocorrelation (adjusted=False)
    acf = pytest.importorskip("statsmodels.tsa.stattools").acf
    rng = np.random.default_rng(5)
    for x in (rng.standard_normal(200), np.cumsum(rng.standard_normal(300)) + 50,
              csv_column(DEMO / "bond_index_monthly.csv", "level")[1]):
        assert lag1_autocorrelation(x) == pytest.approx(acf(x, nlags=1)[1], rel=1e-12, abs=1e-14)


def test_levels_are_positive_and_strongly_autocorrelated():
    rng = np.random.default_rng(11)
    walk = 100 * np.exp(np.cumsum(rng.normal(0, 0.04, 300)))  # a price path: a random walk in logs
    noise = rng.normal(0, 1, 300)
    assert looks_like_levels(walk)
    assert not looks_like_levels(100 * np.diff(np.log(walk)))  # its returns
    assert not looks_like_levels(noise + 10)  # all positive, but no autocorrelation
    assert not looks_like_levels(np.cumsum(noise))  # wanders, but crosses zero: not price levels
    assert not looks_like_levels(np.full(50, 1.0))  # constant: no autocorrelation defined
    for v in (1.757812, 0.1, 3.3):  # constants whose mean rounds off v (a generated test's find: rho was (n-1)/n)
        for n in (3, 6, 7, 40):
            assert np.isnan(lag1_autocorrelation(np.full(n, v))) and not looks_like_levels(np.full(n, v))
    assert 0.5 < LEVELS_AUTOCORRELATION < 1


# ---------------------------------------------------------------------------------------------
# fit on the bundled level files


@pytest.mark.parametrize("name", LEVEL_FILES)
def test_bundled_level_files_are_refused_without_levels(name, capsys):
    header, levels = csv_column(DEMO / name, "level")
    assert header == ["date", "level"]
    assert (levels > 0).all()
    rc, out, err = run(["fit", DEMO / name], capsys)
    assert rc == 2
    assert out == ""
    line = one_error_line(err)
    assert 'column "level"' in line and "price levels" in line
    assert "--levels" in line and "--column level" in line


@pytest.mark.parametrize("name", LEVEL_FILES)
def test_bundled_level_files_fit_their_log_returns_with_levels(name, capsys):
    _, levels = csv_column(DEMO / name, "level")
    returns = pct_log_returns(levels)
    rc, out, err = run(["fit", DEMO / name, "--levels"], capsys)
    assert (rc, err) == (0, "")
    assert out.splitlines()[0] == (f'column "level" of {name}: {len(returns)} log returns in percent '
                                   f"from {len(levels)} levels")
    assert out.splitlines()[1].split()[0] == "parameter"
    assert_table_matches(out, VOLFIT([[v] for v in returns], "GARCH(1,1)", "normal"))


@pytest.mark.parametrize("name", LEVEL_FILES)
def test_the_converted_returns_are_numpys(name):
    _, levels = csv_column(DEMO / name, "level")
    got = read_returns_csv(str(DEMO / name), levels=True)
    assert_allclose(got, pct_log_returns(levels), rtol=1e-12, atol=1e-12)


def test_demo_returns_are_taken_as_they_are(capsys):
    header, returns = csv_column(RETURNS_FILE, "return")
    assert header == ["date", "return"]
    assert (returns < 0).any()
    rc, out, err = run(["fit", RETURNS_FILE, "--model", "GARCH(1,1)"], capsys)
    assert (rc, err) == (0, "")
    assert out.splitlines()[0] == f'column "return" of demo_returns.csv: {len(returns)} returns'
    assert_table_matches(out, VOLFIT([[v] for v in returns], "GARCH(1,1)", "normal"))


def test_a_named_column_of_levels_is_taken_as_returns(capsys):
    name = "equity_composite_monthly.csv"
    _, levels = csv_column(DEMO / name, "level")
    for column in ("level", "2"):
        rc, out, err = run(["fit", DEMO / name, "--column", column], capsys)
        assert (rc, err) == (0, "")
        first = out.splitlines()[0]
        assert first.startswith(f'column "level" of {name}: {len(levels)} returns')
        assert "look like price levels" in first
        assert_table_matches(out, VOLFIT([[v] for v in levels], "GARCH(1,1)", "normal"))


def test_the_default_column_with_levels_skips_a_return_column(tmp_path, capsys):
    _, levels = csv_column(DEMO / "bond_index_monthly.csv", "level")
    r = np.concatenate([[np.nan], pct_log_returns(levels)])
    path = tmp_path / "both.csv"
    pd.DataFrame({"date": range(len(levels)), "return": r, "close": levels}).to_csv(path, index=False)
    rc, out, _ = run(["fit", path, "--model", "ARCH(1)"], capsys)  # without --levels: the return column
    assert rc == 0 and out.splitlines()[0] == f'column "return" of both.csv: {len(levels) - 1} returns'
    rc, out, _ = run(["fit", path, "--model", "ARCH(1)", "--levels"], capsys)
    assert rc == 0
    assert out.splitlines()[0] == (f'column "close" of both.csv: {len(levels) - 1} log returns in percent '
                                   f"from {len(levels)} levels")


def test_a_level_that_is_not_above_zero_is_refused_naming_the_line(tmp_path, capsys):
    path = tmp_path / "p.csv"
    path.write_text("date,level\nd1,100\nd2,101\nd3,0\nd4,102\n", encoding="utf-8")
    rc, out, err = run(["fit", path, "--levels"], capsys)
    assert (rc, out) == (2, "")
    line = one_error_line(err)
    assert "line 4" in line and "above zero" in line


def test_skipped_blank_levels_drop_the_returns_on_both_sides(tmp_path):
    rng = np.random.default_rng(3)
    levels = 100 * np.exp(np.cumsum(rng.normal(0, 0.05, 60)))
    cells = [f"{v:.6f}" for v in levels]
    cells[20] = ""
    path = tmp_path / "gap.csv"
    path.write_text("date,level\n" + "".join(f"d{i},{c}\n" for i, c in enumerate(cells)), encoding="utf-8")
    got = read_returns_csv(str(path), skip_blanks=True, levels=True)
    p = np.array([float(c) if c else np.nan for c in cells])
    expected = pct_log_returns(p)
    assert_allclose(got, expected[np.isfinite(expected)], rtol=1e-12)
    assert len(got) == len(levels) - 3


def test_fit_help_tells_the_default_column_and_the_new_flag(capsys):
    rc, out, _ = run(["fit", "--help"], capsys)
    assert rc == 0
    text = " ".join(out.split())
    assert 'named "return", else the last numeric one' in text
    assert "--levels" in text and "100*ln(p[t]/p[t-1])" in text


def test_every_new_flag_has_help():
    sub = next(a for a in build_parser()._actions if a.dest == "command")
    for command, flags in (("fit", ["--levels", "--column"]), ("backtest", ["--levels", "--column"]),
                           ("batch", ["--levels", "--as-returns", "--value"])):
        actions = {o: a for a in sub.choices[command]._actions for o in a.option_strings}
        for flag in flags:
            assert len(actions[flag].help or "") > 20, (command, flag)
    value_help = {o: a for a in sub.choices["batch"]._actions for o in a.option_strings}["--value"].help
    assert "--levels" in value_help and "--as-returns" in value_help


# ---------------------------------------------------------------------------------------------
# backtest


def test_backtest_refuses_levels_and_runs_on_their_returns(tmp_path, capsys):
    name = "bond_index_monthly.csv"
    argv = ["--window", "200", "--refit", "20", "--model", "ARCH(1)"]
    rc, out, err = run(["backtest", DEMO / name] + argv, capsys)
    assert (rc, out) == (2, "")
    assert "--levels" in one_error_line(err)

    _, levels = csv_column(DEMO / name, "level")
    returns = pct_log_returns(levels)
    rc, out, err = run(["backtest", DEMO / name, "--levels"] + argv, capsys)
    assert (rc, err) == (0, "")
    lines = out.splitlines()
    assert lines[0] == f'column "level" of {name}: {len(returns)} log returns in percent from {len(levels)} levels'
    assert f"forecasts {len(returns) - 200} " in out
    # the same summary as on a file holding the NumPy returns
    ref = tmp_path / "ref.csv"
    pd.DataFrame({"return": returns}).to_csv(ref, index=False)
    rc, ref_out, _ = run(["backtest", ref] + argv, capsys)
    assert rc == 0
    assert ref_out.splitlines()[0] == f'column "return" of ref.csv: {len(returns)} returns'
    assert lines[1:] == ref_out.splitlines()[1:]


# ---------------------------------------------------------------------------------------------
# batch


@pytest.fixture
def level_panels(tmp_path):
    """A wide panel (bond starts ten years later: blanks at its start) and the same data long."""
    eq = pd.read_csv(DEMO / "equity_composite_monthly.csv").rename(columns={"level": "equity"})
    bd = pd.read_csv(DEMO / "bond_index_monthly.csv").rename(columns={"level": "bond"})
    wide = eq.merge(bd, on="date", how="left")
    assert wide["bond"].isna().iloc[0] and wide["bond"].notna().iloc[-1]
    wide_path = tmp_path / "wide_levels.csv"
    wide.to_csv(wide_path, index=False)
    long = wide.melt(id_vars="date", var_name="sid", value_name="lvl").dropna()
    long_path = tmp_path / "long_levels.csv"
    long.to_csv(long_path, index=False)
    series = {"equity": eq["equity"].to_numpy(float), "bond": bd["bond"].to_numpy(float)}
    return wide_path, long_path, series


def tidy(path):
    df = pd.read_csv(path)
    return lambda sid, name: float(df[(df["id"] == sid) & (df["name"] == name)]["value"].iloc[0])


@pytest.mark.parametrize("long", [False, True], ids=["wide", "long"])
def test_batch_refuses_level_panels(level_panels, tmp_path, capsys, long):
    wide_path, long_path, _ = level_panels
    argv = ["batch", long_path, "--id", "sid", "--value", "lvl"] if long else ["batch", wide_path]
    rc, out, err = run(argv + ["-o", tmp_path / "out.csv", "--workers", "1"], capsys)
    assert (rc, out) == (2, "")
    line = one_error_line(err)
    assert '"equity", "bond"' in line and "price levels" in line
    assert "--levels" in line and "--as-returns" in line
    assert not (tmp_path / "out.csv").exists()


@pytest.mark.parametrize("long", [False, True], ids=["wide", "long"])
def test_batch_with_levels_fits_each_series_log_returns(level_panels, tmp_path, capsys, long):
    wide_path, long_path, series = level_panels
    argv = ["batch", long_path, "--id", "sid", "--value", "lvl"] if long else ["batch", wide_path]
    rc, out, err = run(argv + ["--levels", "-o", tmp_path / "out.csv", "--workers", "1"], capsys)
    assert (rc, err) == (0, "")
    first = out.splitlines()[0]
    where = 'long panel long_levels.csv (ids "sid", values "lvl")' if long else "wide panel wide_levels.csv"
    assert first.startswith(f"{where}: 2 series, levels converted to log returns in percent")
    assert "fitted 2 of 2 series" in out.splitlines()[1]
    value = tidy(tmp_path / "out.csv")
    for sid, levels in series.items():
        f = fit(pct_log_returns(levels), "GARCH(1,1)", "normal")
        assert value(sid, "nobs") == len(levels) - 1
        assert_allclose(value(sid, "loglik"), f.loglik, rtol=1e-9)
        assert_allclose(value(sid, "beta[1]"), f.value("beta[1]"), rtol=1e-7)


def test_batch_as_returns_takes_the_levels_as_they_are(level_panels, tmp_path, capsys):
    wide_path, _, series = level_panels
    rc, out, err = run(["batch", wide_path, "--as-returns", "--model", "ARCH(1)", "-o", tmp_path / "o.csv",
                        "--workers", "1"], capsys)
    assert rc == 0
    assert out.splitlines()[0] == "wide panel wide_levels.csv: 2 series, taken as returns"
    value = tidy(tmp_path / "o.csv")
    for sid, levels in series.items():
        assert value(sid, "nobs") == len(levels)  # the blanks at the bond's start are left out, as before


def test_batch_on_returns_needs_no_flag(tmp_path, capsys):
    df = pd.read_csv(RETURNS_FILE)
    df["half"] = df["return"] / 2
    path = tmp_path / "returns_panel.csv"
    df.to_csv(path, index=False)
    rc, out, err = run(["batch", path, "--model", "ARCH(1)", "-o", tmp_path / "o.csv", "--workers", "1"], capsys)
    assert (rc, err) == (0, "")
    assert out.splitlines()[0] == "wide panel returns_panel.csv: 2 series, taken as returns"


def test_batch_names_only_a_few_level_series(level_panels, tmp_path, capsys):
    _, _, series = level_panels
    df = pd.DataFrame({f"s{i}": series["equity"] * (i + 1) for i in range(5)})
    path = tmp_path / "five.csv"
    df.to_csv(path, index=False)
    rc, _, err = run(["batch", path, "-o", tmp_path / "o.csv"], capsys)
    assert rc == 2
    line = one_error_line(err)
    assert "5 of 5 series" in line and '"s0", "s1", "s2" and 2 more' in line and '"s3"' not in line


def test_batch_levels_not_above_zero_are_refused_naming_series_and_row(tmp_path, capsys):
    path = tmp_path / "neg.csv"
    pd.DataFrame({"a": [100.0, 101, 102, 103], "b": [50.0, 51, -1, 52]}).to_csv(path, index=False)
    rc, out, err = run(["batch", path, "--levels", "-o", tmp_path / "o.csv"], capsys)
    assert (rc, out) == (2, "")
    line = one_error_line(err)
    assert 'series "b"' in line and "data row 3" in line


# ---------------------------------------------------------------------------------------------
# no traceback on bad input


def _file(tmp_path, name, data):
    p = tmp_path / name
    p.write_bytes(data)
    return p


BAD = [
    ("huge_field", lambda tp: ["fit", _file(tp, "huge.csv", b"level\n" + b"1" * 1_100_000 + b"\n2\n")],
     r"cannot be read as a CSV"),
    ("one_level", lambda tp: ["fit", _file(tp, "one.csv", b"level\n100\n"), "--levels"], r"at least two levels"),
    ("both_flags", lambda tp: ["batch", RETURNS_FILE, "--levels", "--as-returns", "-o", tp / "o.csv"],
     r"not allowed with"),
    ("batch_no_folder", lambda tp: ["batch", RETURNS_FILE, "-o", tp / "nope" / "o.csv"], r"does not exist"),
    ("batch_workers", lambda tp: ["batch", RETURNS_FILE, "--workers", "0", "-o", tp / "o.csv"], r"--workers"),
    ("batch_horizon", lambda tp: ["batch", RETURNS_FILE, "--horizon", "0", "-o", tp / "o.csv"], r"--horizon"),
    ("batch_level", lambda tp: ["batch", RETURNS_FILE, "--level", "2", "-o", tp / "o.csv"], r"--level"),
    ("png_no_folder", lambda tp: ["backtest", RETURNS_FILE, "--window", "300", "--refit", "50",
                                  "--png", tp / "nope" / "c.png"], r"chart cannot be written"),
    ("backtest_levels_negative", lambda tp: ["backtest", RETURNS_FILE, "--window", "300", "--levels"],
     r"line \d+: the level -[\d.]+ in column \"return\" is not above zero"),
]


@pytest.mark.parametrize("name, argv, pattern", BAD, ids=[b[0] for b in BAD])
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, name, argv, pattern):
    rc, out, err = run(argv(tmp_path), capsys)
    assert rc == 2
    assert out == ""
    assert re.search(pattern, one_error_line(err)), err
