"""What an analyst sees: the demo's workbook and its values copy, found through the template's
defined names (DESIGN.md, "Templates"), and the values copy opened in a real spreadsheet
application (LibreOffice, headless), which must show numbers, never error cells, and print in a
dozen pages at most (issue 14's bound)."""

import csv
import re
import shutil
import subprocess

import openpyxl
import pytest
from numpy.testing import assert_allclose

from xlfuncs.demo import run_demo
from xlfuncs.headless.contract import FIGURES, name_range
from xlfuncs.headless.layout import BOOL_FORMAT, DATA_PRINT_ROWS

MAX_PAGES = 12
ERROR_TEXT = ("#NAME?", "#VALUE!", "#REF!", "#DIV/0!", "#NUM!", "#N/A", "#SPILL!", "#NULL!", "Err:", "ERROR:")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return run_demo(tmp_path_factory.mktemp("render"))


def _cell(wb, name):
    sheet, r, c, _, _ = name_range(wb, name)
    return wb[sheet].cell(r, c)


def test_headline_cells_have_formats(demo):
    """Every headline figure carries a number format (no General), dates as dates, TRUE/FALSE
    shown as such; in the workbook and in its values copy."""
    for path in (demo["workbook"], demo["values_copy"]):
        wb = openpyxl.load_workbook(path)
        for n in FIGURES:
            assert _cell(wb, n).number_format != "General", (path.name, n)
        assert "yy" in _cell(wb, "last_date").number_format
        assert _cell(wb, "converged").number_format == BOOL_FORMAT
        assert "%" in _cell(wb, "var_level").number_format


def test_values_copy_holds_the_values_and_no_formulas(demo):
    live = openpyxl.load_workbook(demo["workbook"], data_only=True)
    vals = openpyxl.load_workbook(demo["values_copy"])
    assert vals.sheetnames == live.sheetnames and vals.sheetnames[0] == "Summary"
    formulas = [f"{ws.title}!{c.coordinate}" for ws in vals for row in ws.iter_rows() for c in row
                if isinstance(c.value, str) and c.value.startswith("=") or type(c.value).__name__ == "ArrayFormula"]
    assert formulas == []
    for n in FIGURES:
        a, b = _cell(vals, n).value, _cell(live, n).value
        if isinstance(b, float):  # the copy stores the number as written (to the last digit or so)
            assert_allclose(a, b, rtol=1e-14)
        else:
            assert a == b, n
    bools = [c for ws in vals for row in ws.iter_rows() for c in row if isinstance(c.value, bool)]
    assert bools and all(c.number_format == BOOL_FORMAT for c in bools)
    with __import__("zipfile").ZipFile(demo["values_copy"]) as z:
        assert sum(n.startswith("xl/charts/chart") for n in z.namelist()) == 2


def test_history_chart_and_print_areas_follow_the_data(demo):
    """The conditional-volatility chart ends at the last observation (not the template's last
    row), and the Data sheet prints its latest rows under the header."""
    wb = openpyxl.load_workbook(demo["workbook"])
    sheet, r1, _, _, _ = name_range(wb, "returns")
    last = max(r for r in range(r1, wb[sheet].max_row + 1) if wb[sheet].cell(r, 2).value is not None)
    refs = [s.val.numRef.f for ws in wb for ch in ws._charts for s in ch.series]
    dated = [f for f in refs if f.startswith("'Volatility'") or f.startswith("Volatility")]
    assert dated and all(f.endswith(f"${last}") for f in dated), dated
    assert wb[sheet].print_area.endswith(f"$C${last}")
    assert f"${last - DATA_PRINT_ROWS + 1}:" in wb[sheet].print_area
    assert wb[sheet].print_title_rows == "$1:$1"


@pytest.mark.skipif(shutil.which("soffice") is None, reason="LibreOffice (soffice) is not installed here; CI installs it")
def test_libreoffice_shows_the_values_copy_without_errors_in_a_dozen_pages(demo, tmp_path):
    src = demo["values_copy"]
    profile = f"-env:UserInstallation=file://{tmp_path / 'lo-profile'}"
    run = dict(check=True, capture_output=True, timeout=300)
    subprocess.run(["soffice", profile, "--headless", "--convert-to", "pdf", "--outdir", str(tmp_path), str(src)], **run)
    pdf = (tmp_path / (src.stem + ".pdf")).read_bytes()
    pages = len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))
    assert 5 <= pages <= MAX_PAGES, pages
    # every sheet as text, formatted as shown (LibreOffice's CSV filter: token 9 "true" = as shown,
    # token 12 "-1" = every sheet)
    subprocess.run(["soffice", profile, "--headless", "--convert-to",
                    "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true,false,false,-1",
                    "--outdir", str(tmp_path), str(src)], **run)
    wb = openpyxl.load_workbook(src)
    shown = {}
    for ws in wb:
        rows = list(csv.reader(open(tmp_path / f"{src.stem}-{ws.title}.csv", newline="", encoding="utf-8")))
        bad = [(ws.title, i, c) for i, r in enumerate(rows, 1) for c in r if c.strip().startswith(ERROR_TEXT)]
        assert bad == [], bad[:5]
        shown[ws.title] = rows
    for n in ("converged", "last_date", "vol_1m", "var_1m"):
        sheet, r, c, _, _ = name_range(wb, n)
        text = shown[sheet][r - 1][c - 1]
        if n == "converged":
            assert text == ("TRUE" if demo["converged"] else "FALSE")
        elif n == "last_date":
            assert text == demo["last_date"]
        else:
            assert re.fullmatch(r"\d+\.\d\d %", text), (n, text)


def test_backtest_chart_marks_only_losses_beyond_the_var(tmp_path):
    """The backtest chart's exceptions are the periods whose loss (the negative of the return)
    exceeds the one-step VaR (the definition of an exception, common practice), never an upside
    move; the x-axis carries the CSV's dates of the forecast returns."""
    import datetime as dt
    from pathlib import Path

    import numpy as np

    from xlfuncs.cli import _backtest_png, _backtest_points, _csv_dates, load_returns_csv
    from xlfuncs.core.backtest import backtest
    from xlfuncs.core.distributions import get_distribution
    from xlfuncs.core.spec import parse_model, parse_options

    src = Path(__file__).resolve().parent.parent / "demo_data" / "demo_returns.csv"
    series = load_returns_csv(str(src))
    bt = backtest(np.array(series.returns), parse_model("GARCH(1,1)"), get_distribution("t"), parse_options(""),
                  300, 0.95, "rolling", 20)
    dates = _csv_dates(str(src), None, False, len(series.returns))
    rows = list(csv.DictReader(open(src, newline="")))
    assert dates == [dt.date.fromisoformat(r["date"]) for r in rows]
    x, loss, marked = _backtest_points(bt, dates)
    assert list(x) == [dates[i] for i in bt.index]
    assert_allclose(loss, -np.array([float(rows[i]["return"]) for i in bt.index]), rtol=1e-12)
    assert marked.sum() > 0 and np.array_equal(marked, loss > bt.var)
    assert np.array_equal(marked, bt.exception)  # the core's count is the chart's
    assert (loss[marked] > 0).all()
    png = tmp_path / "bt.png"
    _backtest_png(bt, png, "GARCH(1,1)-t", dates)
    assert png.read_bytes()[:4] == b"\x89PNG"
    assert _csv_dates(str(src), None, False, len(series.returns) - 1) is None  # unmatched: positions instead
