"""The main job on the bundled demo data: `volcast demo` fills the monthly template, recalculates
it headlessly, and its headline agrees with direct calls of the worksheet functions."""

import math

import openpyxl
import pytest
from numpy.testing import assert_allclose

from xlfuncs import VOLFIT, VOLFORECAST, VOLRISK
from xlfuncs.cli import main
from xlfuncs.demo import data_file, run_demo, template_file


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return run_demo(tmp_path_factory.mktemp("demo"))


def test_bundled_files_exist():
    assert data_file().is_file() and template_file().is_file()


def test_demo_workbook_has_no_error_cells(demo):
    assert demo["error_cells"] == []
    wb = openpyxl.load_workbook(demo["workbook"], data_only=True)
    bad = [f"{ws.title}!{c.coordinate}" for ws in wb for row in ws.iter_rows() for c in row
           if isinstance(c.value, str) and (c.value.startswith("ERROR:") or c.value.startswith("#"))]
    assert bad == []


def test_headline_matches_direct_calls(demo):
    """The headline, read through the template's defined names, equals direct calls on the
    returns the `returns` name covers."""
    from xlfuncs.headless.contract import figures_from_file, name_range

    wb = openpyxl.load_workbook(demo["workbook"], data_only=True)
    sheet, r1, c, r2, _ = name_range(wb, "returns")
    cells = [[wb[sheet].cell(r, c).value] for r in range(r1, r2 + 1)]
    fit = VOLFIT(cells, "AR(1)-GJR-GARCH(1,1)", "t", "periods=12; returns=log100")
    vol = VOLFORECAST(cells, fit, 12, "vol")
    cum = VOLFORECAST(cells, fit, 12, "cumvol")
    assert_allclose(demo["vol_1m"], vol[0][0], rtol=1e-10)
    assert_allclose(demo["vol_1m_annualised"], vol[0][0] * math.sqrt(12), rtol=1e-10)
    assert_allclose(demo["vol_12m"], cum[-1][0], rtol=1e-10)
    risk = {r[0]: r[1] for r in VOLRISK(cells, fit, 0.99, 1)}
    assert_allclose(demo["var_1m"], risk["VaR_value"], rtol=1e-10)
    assert_allclose(demo["es_1m"], risk["ES_value"], rtol=1e-10)
    # "% of value" is the value loss of the log-return quantile (common practice), below it
    assert_allclose(demo["var_1m"], 100 * (1 - math.exp(-risk["VaR"] / 100)), rtol=1e-12)
    assert demo["var_1m"] < risk["VaR"]
    assert figures_from_file(demo["workbook"])["nobs"] == 369 == demo["nobs"]  # 370 levels


def test_cli_demo(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "next month's volatility" in out and "99% one-month VaR" in out
    assert (tmp_path / "volcast-demo.xlsx").exists()


def test_demo_writes_a_chart_and_keeps_the_native_charts(demo):
    import zipfile

    png = demo["chart"]
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 10_000
    with zipfile.ZipFile(demo["workbook"]) as z:
        assert sum(n.startswith("xl/charts/chart") for n in z.namelist()) == 2
