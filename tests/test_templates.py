"""Every shipped template, filled with its demo series and recalculated headlessly: no error
cells; the daily template's next-month variance is the cumulative variance of the next 21
trading days (common practice: 21 trading days a month), as a direct call computes it."""

import openpyxl
import pytest
from numpy.testing import assert_allclose

from xlfuncs import VOLFIT, VOLFORECAST
from xlfuncs.demo import data_file, load_levels, template_file
from xlfuncs.headless.recalc import recalc

CASES = [("monthly_variance.xlsx", "equity_composite_monthly.csv"),
         ("daily_variance.xlsx", "commodity_basket_daily.csv")]


@pytest.fixture(scope="module", params=CASES, ids=[c[0] for c in CASES])
def filled(request, tmp_path_factory):
    template, series = request.param
    d = tmp_path_factory.mktemp("t")
    load_levels(template_file(template), data_file(series), d / "in.xlsx")
    out, report = recalc(d / "in.xlsx", d / "out.xlsx")
    return template, out, report


def test_no_error_cells(filled):
    _, out, report = filled
    assert report.error_cells == []
    wb = openpyxl.load_workbook(out, data_only=True)
    bad = [f"{ws.title}!{c.coordinate}" for ws in wb for row in ws.iter_rows() for c in row
           if isinstance(c.value, str) and (c.value.startswith("ERROR:") or c.value.startswith("#"))]
    assert bad == []


def test_headline_is_21_and_252_trading_days_in_the_daily_template(filled):
    template, out, _ = filled
    from xlfuncs.headless.contract import figures_from_file, name_range

    wb = openpyxl.load_workbook(out, data_only=True)
    sheet, r1, c, r2, _ = name_range(wb, "returns")
    cells = [[wb[sheet].cell(r, c).value] for r in range(r1, r2 + 1)]
    daily = template.startswith("daily")
    model, periods, month, year = ("GJR-GARCH(1,1)", 252, 21, 252) if daily else ("AR(1)-GJR-GARCH(1,1)", 12, 1, 12)
    fit = VOLFIT(cells, model, "t", f"periods={periods}; returns=log100")
    cum = VOLFORECAST(cells, fit, year, "cumvar")
    f = figures_from_file(out)
    assert_allclose(f["vol_1m"], cum[month - 1][0] ** 0.5, rtol=1e-10)
    assert_allclose(f["vol_1m_ann"], (cum[month - 1][0] * periods / month) ** 0.5, rtol=1e-10)
    assert_allclose(f["vol_12m"], cum[year - 1][0] ** 0.5, rtol=1e-10)
    assert f["nobs"] == sum(isinstance(x[0], float) for x in cells)


def test_every_template_carries_the_contract():
    from xlfuncs.headless.contract import HISTORY_HEADER, missing_names

    for template, _ in CASES:
        wb = openpyxl.load_workbook(template_file(template))
        assert missing_names(wb) == []
        assert [c.value for c in wb["History"][1]] == HISTORY_HEADER
        assert wb.sheetnames[0] == "Summary"


@pytest.mark.skipif(__import__("shutil").which("soffice") is None,
                    reason="LibreOffice (soffice) is not installed here; CI installs it")
def test_libreoffice_opens_the_values_only_output(filled, tmp_path):
    """A real spreadsheet application (LibreOffice, headless, one CSV per sheet) shows the same
    numbers as the workbook and no error cells.  The values-only output is the one for it:
    LibreOffice recomputes array formulas itself and does not know our functions."""
    import csv
    import subprocess

    template, out, _ = filled
    src = out.parent / "in.xlsx"
    vout, _ = recalc(src, tmp_path / "values.xlsx", values_only=True)
    subprocess.run(["soffice", "--headless", "--convert-to",
                    "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,false,false,false,-1",
                    "--outdir", str(tmp_path), str(vout)], check=True, capture_output=True, timeout=300)
    wb = openpyxl.load_workbook(out, data_only=True)
    for sheet in ("Model", "Forecast"):
        rows = list(csv.reader(open(tmp_path / f"values-{sheet}.csv", newline="")))
        flat = [c for r in rows for c in r]
        assert not any(c.startswith("#") or c.startswith("Err:") or c.startswith("ERROR:") for c in flat), sheet
        ws = wb[sheet]
        checked = 0
        for i, r in enumerate(rows, start=1):
            for j, c in enumerate(r, start=1):
                v = ws.cell(i, j).value
                if isinstance(v, float) and c:
                    assert_allclose(float(c), v, rtol=1e-9, atol=1e-12)
                    checked += 1
        assert checked > 20


def test_each_risk_block_method_is_readable_in_full(filled):
    """Each VaR block's method row (path count, seed, variance reduction: what a validator asks
    to reproduce a simulated figure) is shown in full somewhere on the Forecast sheet: a cell (or
    merged range) wide and tall enough for the whole text at about one character per unit of
    column width and 12.5 points a line (common practice for a 9-10 point font)."""
    import math

    from openpyxl.utils import get_column_letter

    _, out, _ = filled
    forms = openpyxl.load_workbook(out)["Forecast"]
    ws = openpyxl.load_workbook(out, data_only=True)["Forecast"]
    text = [(c, getattr(c.value, "text", c.value)) for row in forms.iter_rows() for c in row]  # spills: array formulas
    anchors = [c for c, t in text if isinstance(t, str) and t.upper().startswith("=VOLRISK(")]
    assert len(anchors) == 3
    merged = {m.min_row * 10_000 + m.min_col: m for m in ws.merged_cells.ranges}
    for a in anchors:
        r = a.row
        while ws.cell(r, a.column).value != "method":
            r += 1
            assert r < a.row + 20, "no method row under the VOLRISK block"
        method = ws.cell(r, a.column + 1).value
        assert isinstance(method, str) and len(method) > 5
        # any cell ending with the text but the blocks' own method cells (their left neighbour
        # the label): two blocks may share a method
        shown = [c for row in ws.iter_rows() for c in row
                 if isinstance(c.value, str) and c.value.endswith(method)
                 and not (c.column > 1 and ws.cell(c.row, c.column - 1).value == "method")]
        assert shown, f"the method of the block at {a.coordinate} is not shown in full"
        c = shown[0]
        m = merged.get(c.row * 10_000 + c.column)
        cols = range(c.column, (m.max_col if m else c.column) + 1)
        width = sum(ws.column_dimensions[get_column_letter(k)].width or 8.43 for k in cols)
        lines = math.ceil(len(c.value) / width)
        assert c.alignment.wrap_text or lines == 1
        height = ws.row_dimensions[c.row].height or 15
        assert height >= 12.5 * lines, (c.coordinate, c.value, width, height)
