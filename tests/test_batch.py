"""`volcast batch`: wide and long panels, CSV and Parquet, failures recorded beside their id, the
same numbers as single fits, in processes and on a local Dask cluster."""

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
    assert len(err) == 1 and err[0][1] == "error" and "constant series" in err[0][4]


def test_long_panel_and_parquet(wide, tmp_path):
    _, df = wide
    long = df.drop(columns="date").iloc[:, :3].melt(var_name="series", value_name="ret").dropna()
    long.to_parquet(tmp_path / "long.parquet")
    panel = read_panel(tmp_path / "long.parquet", "series", "ret")
    assert sorted(panel) == ["fund0", "fund1", "fund2"]
    assert main(["batch", str(tmp_path / "long.parquet"), "--id", "series", "--value", "ret",
                 "--workers", "1", "-o", str(tmp_path / "out.parquet")]) == 0
    out = pd.read_parquet(tmp_path / "out.parquet")
    assert list(out.columns) == ["id", "kind", "name", "value", "std_error"]
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
