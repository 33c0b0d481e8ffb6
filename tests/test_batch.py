"""`volcast batch`: wide and long panels, CSV and Parquet, failures recorded beside their id, the
same numbers as single fits, in processes and on a local Dask cluster; nothing lost silently (bad
cells, blank ids, split series, duplicate names), the input never written over, arguments bad for
every series refused before any fitting.

Numbers are checked against the core ``fit`` called directly on the same (cleaned) NumPy series."""

import hashlib
import os
import shutil

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from xlfuncs.batch import read_panel, run_batch
from xlfuncs.cli import main
from xlfuncs.core import fit, get_distribution, parse_model
from xlfuncs.core.simulate import simulate


@pytest.fixture(scope="module")
def wide(tmp_path_factory):
    sims = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.0, 0.05, 0.1, 0.85]),
                    400, 6, rng=np.random.default_rng(8))
    df = pd.DataFrame(sims, columns=[f"fund{i}" for i in range(6)])
    df.insert(0, "date", pd.date_range("2000-01-01", periods=400).strftime("%Y-%m-%d"))
    df.iloc[:20, 2] = np.nan  # a series that starts later
    df["flat"] = 1.0  # a series that must fail
    path = tmp_path_factory.mktemp("p") / "wide.csv"
    df.to_csv(path, index=False)
    return path, df


def _value(rows, sid, name):
    return [r[3] for r in rows if r[0] == sid and r[2] == name][0]


def test_batch_matches_single_fits_and_records_failures(wide):
    path, df = wide
    panel = read_panel(path)
    assert list(panel) == [f"fund{i}" for i in range(6)] + ["flat"]
    rows = run_batch(panel, "GARCH(1,1)", "normal", workers=2)
    for sid in ("fund0", "fund2"):
        r = df[sid].dropna().to_numpy()
        f = fit(r, "GARCH(1,1)", "normal")
        assert_allclose(_value(rows, sid, "loglik"), f.loglik, rtol=1e-10)
        assert_allclose(_value(rows, sid, "beta[1]"), f.value("beta[1]"), rtol=1e-8)
    err = [r for r in rows if r[0] == "flat"]
    assert len(err) == 1 and err[0][1] == "error" and "constant series" in err[0][5]


def test_long_panel_and_parquet(wide, tmp_path):
    _, df = wide
    long = df.drop(columns="date").iloc[:, :3].melt(var_name="series", value_name="ret").dropna()
    long.to_parquet(tmp_path / "long.parquet")
    panel = read_panel(tmp_path / "long.parquet", "series", "ret")
    assert sorted(panel) == ["fund0", "fund1", "fund2"]
    assert main(["batch", str(tmp_path / "long.parquet"), "--id", "series", "--value", "ret",
                 "--workers", "1", "-o", str(tmp_path / "out.parquet")]) == 0
    out = pd.read_parquet(tmp_path / "out.parquet")
    assert list(out.columns) == ["id", "kind", "name", "value", "std_error", "message"]
    assert set(out["id"]) == {"fund0", "fund1", "fund2"}


def test_cli_batch_reports_failures(wide, tmp_path, capsys):
    path, _ = wide
    assert main(["batch", str(path), "-o", str(tmp_path / "t.csv"), "--workers", "2"]) == 0
    cap = capsys.readouterr()
    assert "fitted 6 of 7 series" in cap.out and "flat" in cap.err
    assert main(["batch", str(tmp_path / "missing.csv"), "-o", str(tmp_path / "x.csv")]) == 2


def test_local_dask_cluster(wide):
    distributed = pytest.importorskip("distributed", reason="Dask is the optional volcast[cluster] extra")
    path, _ = wide
    panel = read_panel(path)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as lc:
        rows = run_batch(panel, "GARCH(1,1)", "normal", cluster=lc.scheduler_address)
    local = run_batch(panel, "GARCH(1,1)", "normal", workers=1)
    assert rows == local


# ---------------------------------------------------------------------------------------------
# nothing lost, nothing written over


def _run(argv, capsys):
    rc = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return rc, out, err


def _one_line(err):
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("volcast: "), err
    return lines[0]


def _sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def small(tmp_path):
    """A wide CSV panel of three simulated return series, 300 rows, and the series themselves."""
    sims = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.0, 0.05, 0.1, 0.85]),
                    300, 3, rng=np.random.default_rng(11))
    df = pd.DataFrame(sims, columns=["a", "b", "c"])
    path = tmp_path / "small.csv"
    df.to_csv(path, index=False)
    return path, df


@pytest.mark.parametrize("how", ["same path", "dot path", "hard link"])
def test_output_equal_to_the_input_is_refused_before_any_work(small, tmp_path, capsys, how):
    path, _ = small
    before = _sha(path)
    if how == "same path":
        out = path
    elif how == "dot path":
        out = tmp_path / "." / path.name
    else:
        out = tmp_path / "link.csv"
        os.link(path, out)
    rc, stdout, err = _run(["batch", path, "-o", out, "--workers", "1"], capsys)
    assert (rc, stdout) == (2, "")  # refused before the panel is even read
    assert "is the input file" in _one_line(err)
    assert _sha(path) == before


def test_output_under_a_file_or_in_a_read_only_folder(small, tmp_path, capsys, monkeypatch):
    path, _ = small
    rc, stdout, err = _run(["batch", path, "-o", path / "out.csv"], capsys)
    assert (rc, stdout) == (2, "") and "is a file, not a folder" in _one_line(err)
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        if os.access(ro, os.W_OK):  # root writes anywhere: make the folder refuse as a read-only one would
            import xlfuncs.batch

            def refuse(*a, **k):
                raise PermissionError(13, "Permission denied")

            monkeypatch.setattr(xlfuncs.batch.tempfile, "mkstemp", refuse)
        rc, stdout, err = _run(["batch", path, "-o", ro / "out.csv", "--workers", "1"], capsys)
    finally:
        ro.chmod(0o755)
    assert (rc, stdout) == (2, "")
    assert "cannot write in the folder" in _one_line(err) and "Permission denied" in err
    assert not (ro / "out.csv").exists()


def test_a_failed_write_leaves_no_output(small, tmp_path, capsys, monkeypatch):
    path, _ = small

    def broken(self, *a, **k):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(pd.DataFrame, "to_csv", broken)
    rc, _, err = _run(["batch", path, "--model", "ARCH(1)", "-o", tmp_path / "out.csv", "--workers", "1"], capsys)
    assert rc == 2 and "No space left on device" in _one_line(err)
    assert [p.name for p in tmp_path.iterdir()] == ["small.csv"]  # no output, no temporary file


@pytest.mark.parametrize("argv, text", [
    (["--horizon", "0"], "--horizon must be"), (["--horizon", "601"], "--horizon must be"),
    (["--level", "1.5"], "--level must be"), (["--level", "0.2"], "--level must be"),
    (["--model", "GARCH(1,1,1)"], "not understood"), (["--dist", "cauchy"], "unknown distribution"),
    (["--options", "se=white"], "se=white is not allowed"), (["--options", "nu=8"], "nu is not a parameter"),
    (["--options", "target=yes"], None), (["--model", "EGARCH(1,1)", "--options", "target=yes"], "target=yes works"),
    (["--workers", "0"], "--workers"),
], ids=["horizon0", "horizon601", "level1.5", "level0.2", "model", "dist", "options", "fixed", "ok", "target",
        "workers"])
def test_arguments_bad_for_every_series_exit_2_before_fitting(small, tmp_path, capsys, monkeypatch, argv, text):
    import xlfuncs.batch

    path, _ = small
    fitted = []
    monkeypatch.setattr(xlfuncs.batch, "_fits", lambda tasks, *a: fitted.extend(tasks) or [(t[0], []) for t in tasks])
    rc, stdout, err = _run(["batch", path, "-o", tmp_path / "o.csv", "--workers", "1", *argv], capsys)
    if text is None:  # the control case: good arguments reach the fits
        assert rc == 0 and len(fitted) == 3
        return
    assert (rc, stdout, fitted) == (2, "", [])
    assert text in _one_line(err)
    assert not (tmp_path / "o.csv").exists()


def test_bad_cells_give_that_series_an_error_row_and_skip_bad_leaves_them_out(small, tmp_path, capsys):
    path, df = small
    text = path.read_text().splitlines()
    # data row 41 of series b holds "n/a", data row 101 of c "inf"; line = data row + 1
    cells = text[41].split(",")
    cells[1] = "n/a"
    text[41] = ",".join(cells)
    cells = text[101].split(",")
    cells[2] = "inf"
    text[101] = ",".join(cells)
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join(text) + "\n")
    for out in ("o.csv", "o.parquet"):
        rc, stdout, err = _run(["batch", bad, "-o", tmp_path / out, "--workers", "1"], capsys)
        assert rc == 0 and "fitted 1 of 3 series" in stdout and "b, c" in err
        res = pd.read_parquet(tmp_path / out) if out.endswith("parquet") else pd.read_csv(tmp_path / out)
        assert list(res["id"].unique()) == ["a", "b", "c"]  # no series lost
        msg = dict(zip(res[res["kind"] == "error"]["id"], res[res["kind"] == "error"]["message"]))
        assert msg["b"].startswith('data row 41 (line 42) holds text "n/a"; numbers only')
        assert msg["c"].startswith('data row 101 (line 102) holds "inf", which is not a finite number')
        assert res["value"].dtype == np.float64 and res["std_error"].dtype == np.float64
    rc, stdout, _ = _run(["batch", bad, "-o", tmp_path / "s.csv", "--workers", "1", "--skip-bad"], capsys)
    assert rc == 0 and "fitted 3 of 3 series" in stdout
    res = pd.read_csv(tmp_path / "s.csv")
    for sid, row in (("b", 41), ("c", 101)):  # data rows
        r = np.delete(df[sid].to_numpy(), row - 1)
        got = res[(res["id"] == sid) & (res["name"] == "loglik")]["value"].iloc[0]
        assert_allclose(got, fit(r, "GARCH(1,1)", "normal").loglik, rtol=1e-9)
        assert res[(res["id"] == sid) & (res["name"] == "skipped")]["value"].iloc[0] == 1


def test_a_blank_inside_a_series_is_an_error_unless_missing_skip(small, tmp_path, capsys):
    path, df = small
    d = df.copy()
    d.loc[[0, 1], "a"] = np.nan  # leading blanks: not data
    d.loc[299, "b"] = np.nan  # a trailing blank: not data
    d.loc[150, "c"] = np.nan  # inside: an error for c only
    p = tmp_path / "holes.csv"
    d.to_csv(p, index=False)
    rc, stdout, _ = _run(["batch", p, "-o", tmp_path / "o.csv", "--workers", "1"], capsys)
    res = pd.read_csv(tmp_path / "o.csv")
    assert "fitted 2 of 3 series" in stdout
    assert res[res["id"] == "c"]["message"].iloc[0].startswith("data row 151 (line 152) is blank inside the series")
    assert res[(res["id"] == "a") & (res["name"] == "nobs")]["value"].iloc[0] == 298
    rc, stdout, _ = _run(["batch", p, "-o", tmp_path / "o.csv", "--workers", "1", "--options", "missing=skip"], capsys)
    res = pd.read_csv(tmp_path / "o.csv")
    assert "fitted 3 of 3 series" in stdout
    got = res[(res["id"] == "c") & (res["name"] == "loglik")]["value"].iloc[0]
    assert_allclose(got, fit(d["c"].dropna().to_numpy(), "GARCH(1,1)", "normal").loglik, rtol=1e-9)


def test_duplicate_and_unnamed_columns_are_refused_naming_them(small, tmp_path, capsys):
    path, _ = small
    lines = path.read_text().splitlines()
    dup = tmp_path / "dup.csv"
    dup.write_text("\n".join(["a,b,a"] + lines[1:]) + "\n")
    rc, stdout, err = _run(["batch", dup, "-o", tmp_path / "o.csv"], capsys)
    assert (rc, stdout) == (2, "") and 'more than one column "a"' in _one_line(err)
    assert pd.read_csv(dup).columns.tolist() == ["a", "b", "a.1"]  # what reading with pandas alone would do
    unnamed = tmp_path / "unnamed.csv"
    unnamed.write_text("\n".join(["a,,c"] + lines[1:]) + "\n")
    rc, _, err = _run(["batch", unnamed, "-o", tmp_path / "o.csv"], capsys)
    assert rc == 2 and "column 2 holds data but has no name" in _one_line(err)
    import pyarrow as pa
    import pyarrow.parquet as pq

    x = np.arange(50, dtype=float)
    pq.write_table(pa.Table.from_arrays([pa.array(x), pa.array(-x)], names=["a", "a"]), tmp_path / "dup.parquet")
    rc, _, err = _run(["batch", tmp_path / "dup.parquet", "-o", tmp_path / "o.csv"], capsys)
    assert rc == 2 and 'more than one column "a"' in _one_line(err)
    assert not (tmp_path / "o.csv").exists()


def _long(df, order):
    long = df.assign(date=pd.date_range("2001-01-01", periods=len(df)).strftime("%Y-%m-%d"))
    long = long.melt(id_vars="date", var_name="sid", value_name="ret")
    return long.sort_values(["date", "sid"]) if order == "by date" else long


def test_long_panels_blank_ids_split_series_and_date_order(small, tmp_path, capsys):
    _, df = small
    by_date = tmp_path / "by_date.csv"
    _long(df, "by date").to_csv(by_date, index=False)  # every id in 300 blocks of one row, dates in order
    rc, stdout, err = _run(["batch", by_date, "--id", "sid", "--value", "ret", "-o", tmp_path / "o.csv",
                            "--workers", "1"], capsys)
    assert rc == 0 and "fitted 3 of 3 series" in stdout
    res = pd.read_csv(tmp_path / "o.csv")
    got = res[(res["id"] == "b") & (res["name"] == "loglik")]["value"].iloc[0]
    assert_allclose(got, fit(df["b"].to_numpy(), "GARCH(1,1)", "normal").loglik, rtol=1e-9)

    long = _long(df, "by id")
    blank = long.copy()
    blank.iloc[[10, 500], blank.columns.get_loc("sid")] = ""
    p = tmp_path / "blank.csv"
    blank.to_csv(p, index=False)
    rc, stdout, err = _run(["batch", p, "--id", "sid", "--value", "ret", "-o", tmp_path / "x.csv"], capsys)
    assert (rc, stdout) == (2, "")
    assert 'line 12: the id column "sid" is blank (and in 1 more rows)' in _one_line(err)

    split = pd.concat([long.iloc[:150], long.iloc[300:600], long.iloc[150:300]]).drop(columns="date")
    p = tmp_path / "split.csv"
    split.to_csv(p, index=False)
    rc, _, err = _run(["batch", p, "--id", "sid", "--value", "ret", "-o", tmp_path / "x.csv"], capsys)
    assert rc == 2 and 'series "a" comes in 2 separate blocks (from line 2 and line 452)' in _one_line(err)

    twice = pd.concat([long, long[long["sid"] == "a"]])  # series a appended again: the same dates twice
    p = tmp_path / "twice.csv"
    twice.to_csv(p, index=False)
    rc, _, err = _run(["batch", p, "--id", "sid", "--value", "ret", "-o", tmp_path / "x.csv"], capsys)
    assert rc == 2 and 'series "a" has the date of line 2 again' in _one_line(err)
    assert not (tmp_path / "x.csv").exists()


def test_dates_not_oldest_first_and_a_missing_header_are_refused(small, tmp_path, capsys):
    # each series is fitted in row order, the last row the latest (common practice for a time series
    # file: oldest first, one row per date), so dates the other way round are refused, naming the lines
    _, df = small
    dates = pd.date_range("2001-01-31", periods=len(df), freq="ME").strftime("%Y-%m-%d")
    newest_first = df.assign(date=dates)[["date", "a", "b", "c"]].iloc[::-1]
    p = tmp_path / "rev.csv"
    newest_first.to_csv(p, index=False)
    rc, stdout, err = _run(["batch", p, "-o", tmp_path / "o.csv"], capsys)
    assert (rc, stdout) == (2, "")
    assert _one_line(err) == (f'volcast: {p}: column "date" runs newest first (line 2: 2025-12-31, line 3: '
                              "2025-11-30); sort it oldest first (the last row is read as the latest observation)")
    newest_first.assign(date=pd.to_datetime(newest_first["date"]).dt.date).to_parquet(tmp_path / "rev.parquet")
    rc, _, err = _run(["batch", tmp_path / "rev.parquet", "-o", tmp_path / "o.csv"], capsys)
    assert rc == 2 and "runs newest first (data row 1: 2025-12-31, data row 2: 2025-11-30)" in _one_line(err)

    swapped = df.assign(date=dates)[["date", "a", "b", "c"]]
    swapped.loc[[10, 11], "date"] = swapped.loc[[11, 10], "date"].to_numpy()
    p = tmp_path / "swapped.csv"
    swapped.to_csv(p, index=False)
    rc, _, err = _run(["batch", p, "-o", tmp_path / "o.csv"], capsys)
    assert rc == 2 and f'{p} line 13: column "date" is out of order (2001-11-30 after 2001-12-31 on line 12)' \
        in _one_line(err)

    long = _long(df, "by id")
    long["date"] = long.groupby("sid")["date"].transform(lambda d: d.iloc[::-1].to_numpy())  # each series reversed
    p = tmp_path / "long_rev.csv"
    long.to_csv(p, index=False)
    rc, _, err = _run(["batch", p, "--id", "sid", "--value", "ret", "-o", tmp_path / "o.csv"], capsys)
    assert rc == 2 and 'series "a" in column "date" runs newest first (line 2: 2001-10-27, line 3: 2001-10-26)' \
        in _one_line(err)

    # no header line: the first row would name the series and be lost
    p = tmp_path / "noheader.csv"
    p.write_text("\n".join(small[0].read_text().splitlines()[1:]) + "\n")
    rc, _, err = _run(["batch", p, "-o", tmp_path / "o.csv"], capsys)
    assert rc == 2 and f"{p} line 1: the first line holds numbers" in _one_line(err)
    assert not (tmp_path / "o.csv").exists()
    # series named by whole numbers (numeric codes) are names, not data
    p = tmp_path / "codes.csv"
    df.iloc[:150].set_axis(["7203", "6758", "9984"], axis=1).to_csv(p, index=False)
    rc, stdout, err = _run(["batch", p, "-o", tmp_path / "o.csv", "--workers", "1"], capsys)
    assert rc == 0 and "fitted 3 of 3 series" in stdout, err


@pytest.mark.parametrize("encoding, sep", [("cp1252", ","), ("utf-8-sig", ";"), ("utf-8", "\t"), ("utf-16", ",")])
def test_encodings_and_separators_give_the_same_numbers(small, tmp_path, capsys, encoding, sep):
    path, df = small
    d = df.rename(columns={"a": "caf\u00e9"})
    p = tmp_path / "enc.csv"
    p.write_bytes(d.to_csv(index=False, sep=sep).encode(encoding))
    rc, stdout, err = _run(["batch", p, "--model", "ARCH(1)", "-o", tmp_path / "o.csv", "--workers", "1"], capsys)
    assert (rc, err) == (0, "") and "3 series" in stdout
    res = pd.read_csv(tmp_path / "o.csv")
    got = res[(res["id"] == "caf\u00e9") & (res["name"] == "loglik")]["value"].iloc[0]
    assert_allclose(got, fit(df["a"].to_numpy(), "ARCH(1)", "normal").loglik, rtol=1e-9)


def test_an_error_only_table_writes_to_parquet(tmp_path, capsys):
    p = tmp_path / "flat.csv"
    pd.DataFrame({"x": [1.0] * 50, "y": ["n/a"] * 50}).to_csv(p, index=False)
    rc, stdout, _ = _run(["batch", p, "--as-returns", "-o", tmp_path / "o.parquet", "--workers", "1"], capsys)
    assert rc == 0 and "fitted 0 of 2 series" in stdout
    res = pd.read_parquet(tmp_path / "o.parquet")
    assert res["kind"].tolist() == ["error", "error"] and res["value"].isna().all()
    assert "constant series" in res["message"].iloc[0] and 'holds text "n/a"' in res["message"].iloc[1]


def test_a_blank_standard_error_says_why_as_the_fit_table_does(wide):
    """A parameter held fixed has no standard error: its row says `fixed` in `message`, the word
    VOLFIT's fit table shows for it (internal consistency), so it is not read as a failed one."""
    from xlfuncs import VOLFIT

    path, df = wide
    panel = read_panel(path)
    rows = run_batch({"fund0": panel["fund0"]}, "GARCH(1,1)", "normal", options="alpha[1]=0.05", workers=1)
    alpha = [r for r in rows if r[0] == "fund0" and r[2] == "alpha[1]"][0]
    table = VOLFIT([[v] for v in df["fund0"].dropna()], "GARCH(1,1)", "normal", "alpha[1]=0.05")
    shown = [row for row in table if row[0] == "alpha[1]"][0]
    assert alpha[4] is None and alpha[5] == shown[2] == "fixed"
    beta = [r for r in rows if r[0] == "fund0" and r[2] == "beta[1]"][0]
    assert beta[4] is not None and beta[5] is None
