"""Headless recalculation: openpyxl-built workbooks, every value compared with direct calls of
the worksheet functions, spills and legacy arrays as Excel shows them (Excel's documented
dynamic-array behaviour: a result spills from its anchor, #SPILL! when blocked, E2# reads the
spill; legacy array formulas pad with #N/A -- common practice), and the output's package."""

import hashlib
import math
import shutil
import subprocess
import zipfile

import numpy as np
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from numpy.testing import assert_allclose
from openpyxl.worksheet.formula import ArrayFormula

from xlfuncs import VOLFIT, VOLFORECAST, VOLRISK
from xlfuncs.cli import main
from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.simulate import simulate
from xlfuncs.headless.recalc import RecalcError, recalc

N = 300


@pytest.fixture(scope="module")
def levels():
    r = simulate(parse_model("GARCH(1,1)"), get_distribution("t"), np.array([0.4, 0.3, 0.1, 0.85, 6.0]), N,
                 rng=np.random.default_rng(5))[:, 0]
    return 100.0 * np.exp(np.cumsum(r / 100.0))


def _returns(levels):
    return [100.0 * math.log(levels[i] / levels[i - 1]) for i in range(1, len(levels))]


def build(path, levels, blocker=False):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws["A1"], ws["B1"] = "level", "return (%)"
    for i, v in enumerate(levels, start=2):
        ws.cell(i, 1, float(v))
        if i > 2:
            ws.cell(i, 2, f"=LN(A{i}/A{i - 1})*100")
    m = wb.create_sheet("Model sheet")
    m["A1"], m["A2"] = "GARCH(1,1)", "normal"
    m["C1"] = "=VOLFIT(Data!B2:B500, A1, A2)"  # spills; the range reaches past the data
    m["I1"] = '=VOLFORECAST(Data!B2:B500, C1:G40, 12, "vol")'  # oversized fit range
    m["J1"] = '=VOLFORECAST(Data!B2:B500, _xlfn.ANCHORARRAY(C1), 12, "variance")'  # spill reference
    m["K1"] = "=SQRT(SUM(_xlfn.ANCHORARRAY(J1)))"  # a standard formula over a spilled result
    m["K2"] = "=INDEX(C1#, 5, 2)*2"
    m["K3"] = "=IFERROR(1/0, -1)"
    m["K4"] = "='Model sheet'!K2+Data!A2"
    m["L1"] = ArrayFormula("L1:L14", '=VOLFORECAST(Data!B2:B500, C1#, 12, "cumvar")')  # legacy array, 2 extra
    m["M1"] = "=1/0"
    m["M2"] = "=M1*2"  # an error upstream propagates
    m["N1"] = "=VOLRISK(Data!B2:B500, C1#, 0.99, 1)"
    if blocker:
        m["O3"] = "in the way"
    wb.save(path)


@pytest.fixture(scope="module")
def done(tmp_path_factory, levels):
    d = tmp_path_factory.mktemp("book")
    src = d / "book.xlsx"
    build(src, levels)
    before = hashlib.sha256(src.read_bytes()).hexdigest()
    out, report = recalc(src, d / "out.xlsx")
    assert hashlib.sha256(src.read_bytes()).hexdigest() == before  # the input's bytes are unchanged
    return src, out, report


def _engine_returns(out):
    """The returns as the workbook computed them: direct calls get the very same numbers."""
    ws = _vals(out, "Data")
    return [[ws.cell(i, 2).value] for i in range(3, N + 2)]


def _vals(path, sheet="Model sheet"):
    return openpyxl.load_workbook(path, data_only=True)[sheet]


def test_returns_from_prices_by_formula(done, levels):
    _, out, _ = done
    ws = _vals(out, "Data")
    got = [ws.cell(i, 2).value for i in range(3, N + 2)]
    assert_allclose(got, _returns(levels), rtol=1e-11)  # the engine divides, then takes logs


def test_fit_spills_and_matches_a_direct_call(done, levels):
    _, out, report = done
    ws = _vals(out)
    direct = VOLFIT(_engine_returns(out), "GARCH(1,1)", "normal")
    for i, row in enumerate(direct):
        for j, v in enumerate(row):
            cell = ws.cell(1 + i, 3 + j).value
            if isinstance(v, float):
                assert_allclose(cell, v, rtol=1e-12)
            else:
                assert cell == v
    assert report.spills >= 3


def test_forecast_by_oversized_range_and_by_spill_reference(done, levels):
    _, out, _ = done
    ws = _vals(out)
    cells = _engine_returns(out)
    fit = VOLFIT(cells, "GARCH(1,1)", "normal")
    vol = [r[0] for r in VOLFORECAST(cells, fit, 12, "vol")]
    var = [r[0] for r in VOLFORECAST(cells, fit, 12, "variance")]
    assert_allclose([ws.cell(i, 9).value for i in range(1, 13)], vol, rtol=1e-12)
    assert_allclose([ws.cell(i, 10).value for i in range(1, 13)], var, rtol=1e-12)
    assert ws["I13"].value is None  # nothing past the spill
    assert_allclose(ws["K1"].value, math.sqrt(sum(var)), rtol=1e-12)
    assert_allclose(ws["K2"].value, 2 * fit[4][1], rtol=1e-12)  # INDEX(C1#, 5, 2): mu's estimate
    assert ws["K3"].value == -1
    assert_allclose(ws["K4"].value, 2 * fit[4][1] + levels[0], rtol=1e-12)
    risk = VOLRISK(cells, fit, 0.99, 1)
    assert [ws.cell(i, 14).value for i in range(1, 9)] == [r[0] for r in risk]
    assert_allclose(ws["O2"].value, risk[1][1], rtol=1e-12)


def test_legacy_array_formula_fills_its_range_and_pads(done, levels):
    _, out, _ = done
    ws = _vals(out)
    cells = _engine_returns(out)
    cum = [r[0] for r in VOLFORECAST(cells, VOLFIT(cells, "GARCH(1,1)"), 12, "cumvar")]
    assert_allclose([ws.cell(i, 12).value for i in range(1, 13)], cum, rtol=1e-12)
    assert ws["L13"].value == "#N/A" and ws["L14"].value == "#N/A"


def test_errors_propagate_and_are_reported(done):
    _, out, report = done
    ws = _vals(out)
    assert ws["M1"].value == "#DIV/0!" and ws["M2"].value == "#DIV/0!"
    flagged = {a for a, _ in report.error_cells}
    assert {"Model sheet!M1", "Model sheet!M2", "Model sheet!L13"} <= flagged


def test_formulas_are_kept_and_spills_marked_dynamic(done):
    _, out, _ = done
    ws = openpyxl.load_workbook(out)["Model sheet"]
    assert ws["C1"].value.text == "=VOLFIT(Data!B2:B500, A1, A2)"
    assert ws["C1"].value.ref.startswith("C1:G")
    assert ws["K1"].value == "=SQRT(SUM(_xlfn.ANCHORARRAY(J1)))"
    assert ws["K2"].value == "=INDEX(_xlfn.ANCHORARRAY(C1), 5, 2)*2"  # stored as Excel stores E2#
    with zipfile.ZipFile(out) as z:
        assert "xl/metadata.xml" in z.namelist()
        sheet = z.read("xl/worksheets/sheet2.xml").decode()
        assert 'r="C1" cm="1"' in sheet or ('r="C1"' in sheet and 'cm="1"' in sheet)
        assert "fullCalcOnLoad=\"1\"" not in z.read("xl/workbook.xml").decode()


def test_recalculating_the_output_gives_the_same_values(done, tmp_path):
    _, out, _ = done
    again, _ = recalc(out, tmp_path / "again.xlsx")
    a, b = _vals(out), _vals(again)
    for row in a.iter_rows(min_row=1, max_row=40, max_col=16):
        for c in row:
            v = b[c.coordinate].value
            if isinstance(c.value, float):
                assert_allclose(v, c.value, rtol=1e-12)
            else:
                assert v == c.value, c.coordinate


def test_blocked_spill(tmp_path, levels):
    src = tmp_path / "b.xlsx"
    build(src, levels, blocker=True)
    out, report = recalc(src, tmp_path / "o.xlsx")
    ws = _vals(out)
    assert ws["N1"].value == "#SPILL!"
    assert ws["O3"].value == "in the way"
    assert any("#SPILL!" in v for _, v in report.error_cells)


def test_values_only(tmp_path, done):
    src, _, _ = done
    out, _ = recalc(src, tmp_path / "v.xlsx", values_only=True)
    ws = openpyxl.load_workbook(out)["Model sheet"]
    assert ws["C1"].value == "parameter" and isinstance(ws["K1"].value, float)


def test_default_output_beside_input_and_never_over_it(tmp_path, done):
    src, _, _ = done
    local = tmp_path / "book.xlsx"
    shutil.copy(src, local)
    out, _ = recalc(local)
    assert out == tmp_path / "book.recalc.xlsx" and out.exists()
    with pytest.raises(RecalcError, match="refusing to write over the input"):
        recalc(local, local)
    assert main(["recalc", str(local), "-o", str(local)]) == 2


def test_bad_workbooks_exit_2_with_one_line(tmp_path, capsys, levels):
    junk = tmp_path / "junk.xlsx"
    junk.write_bytes(b"not a zip")
    assert main(["recalc", str(junk)]) == 2
    assert "not a readable .xlsx" in capsys.readouterr().err
    wb = openpyxl.Workbook()
    wb.active["A1"] = "=Nowhere!B2+1"
    wb.save(tmp_path / "m.xlsx")
    assert main(["recalc", str(tmp_path / "m.xlsx")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "Sheet!A1" in err and "Nowhere" in err
    wb = openpyxl.Workbook()
    wb.active["B3"] = "=FROBNICATE(1)"
    wb.save(tmp_path / "u.xlsx")
    assert main(["recalc", str(tmp_path / "u.xlsx")]) == 2
    err = capsys.readouterr().err
    assert "Sheet!B3" in err and "FROBNICATE" in err and "not supported" in err
    assert not (tmp_path / "u.recalc.xlsx").exists()  # nothing half-written


def test_cli_reports_error_cells(tmp_path, capsys, done):
    src, _, _ = done
    assert main(["recalc", str(src), "-o", str(tmp_path / "c.xlsx")]) == 0
    captured = capsys.readouterr()
    assert "recalculated" in captured.out
    assert "cells evaluate to errors" in captured.err and "Model sheet!M1 #DIV/0!" in captured.err


def test_each_fit_is_estimated_once(tmp_path, levels):
    from xlfuncs.sheet.cache import FIT_CACHE

    src = tmp_path / "c.xlsx"
    build(src, levels)
    FIT_CACHE.clear()
    recalc(src, tmp_path / "c2.xlsx")
    # VOLFIT spills the table; every other function reads the table, so nothing re-estimates
    assert FIT_CACHE.stats["estimations"] == 1


@pytest.mark.skipif(shutil.which("soffice") is None, reason="LibreOffice (soffice) is not installed here; CI installs it")
def test_libreoffice_shows_the_stored_values(tmp_path, done):
    """A real spreadsheet application opens the output: the standard formulas keep their
    stored values (LibreOffice recalculates array formulas itself, so spilled results are
    checked in values-only output)."""
    src, out, _ = done
    vout, _ = recalc(src, tmp_path / "values.xlsx", values_only=True)
    for book in (out, vout):
        subprocess.run(["soffice", "--headless", "--convert-to", "csv", "--outdir", str(tmp_path), str(book)],
                       check=True, capture_output=True, timeout=180)
    data = (tmp_path / "out.csv").read_text().splitlines()
    ws = _vals(out, "Data")
    assert_allclose(float(data[2].split(",")[1]), ws["B3"].value, rtol=1e-9)


def test_batched_columns_equal_cell_by_cell_evaluation(tmp_path):
    """The column batch gives what the engine gives cell by cell, blanks and errors included."""
    from xlfuncs.headless.recalc import Workbook

    wb = openpyxl.Workbook()
    ws = wb.active
    for i in range(1, 41):
        ws.cell(i, 1, None if i in (7, 20) else (0.0 if i == 30 else 100.0 + i))
        if i > 1:
            ws.cell(i, 2, f"=IFERROR(LN(A{i}/A{i - 1})*100, -99)")
            ws.cell(i, 3, f"=SQRT(ABS(A{i}-$A$1))")
    wb.save(tmp_path / "b.xlsx")
    batched = Workbook(tmp_path / "b.xlsx").evaluate_all()
    single = Workbook(tmp_path / "b.xlsx")
    single._batch_elementwise = lambda *a, **k: None
    single.evaluate_all()
    assert batched.values.keys() == single.values.keys()
    for k, v in single.values.items():
        assert batched.values[k] == v, k


def test_or_and_columns_are_batched_and_equal_cell_by_cell_evaluation(tmp_path):
    """OR and AND over comparisons (the templates' return formula) go into the column batch as
    element-wise arithmetic; every cell equals the engine's OR/AND evaluated cell by cell (the
    formula engine's own functions are the reference), blanks, texts, zeros and errors included."""
    from xlfuncs.headless.recalc import Workbook, elementwise_logic

    wb = openpyxl.Workbook()
    ws = wb.active
    special = {7: None, 20: None, 12: "n/a", 30: 0.0, 31: -5.0}
    for i in range(1, 41):
        ws.cell(i, 1, special.get(i, 100.0 + (i % 7) * 3.5))
        ws.cell(i, 7, None if i % 5 == 0 else i % 3)
        if i > 1:
            ws.cell(i, 2, f'=IF(OR(A{i}="",A{i - 1}=""),"",LN(A{i}/A{i - 1})*100)')
            ws.cell(i, 3, f'=IF(AND(A{i}>101,A{i - 1}<>""),1,0)')
            ws.cell(i, 4, f'=OR(A{i}>110, A{i}=0, G{i}=2)')
            ws.cell(i, 5, f'=AND(G{i}<>"", G{i}>=1, A{i}<108)')
            ws.cell(i, 6, f'=IF(OR(A{i}<0,"x,y"=A{i}),-1,IFERROR(SQRT(A{i}),-2))')
    wb.save(tmp_path / "b.xlsx")
    batched = Workbook(tmp_path / "b.xlsx")
    batched._batch_elementwise()
    for col in range(2, 7):  # each column went through the batch
        assert all((ws.title, i, col) in batched.values for i in range(2, 41)), col
    batched.evaluate_all()
    single = Workbook(tmp_path / "b.xlsx")
    single._batch_elementwise = lambda *a, **k: None
    single.evaluate_all()
    assert batched.values.keys() == single.values.keys()
    for k, v in single.values.items():
        assert batched.values[k] == v, (k, v, batched.values[k])
    assert isinstance(single.values[(ws.title, 2, 2)], float)  # a sanity check of the layout: a return
    # arguments that are not comparisons (OR skips texts and blanks in them) are not rewritten
    assert elementwise_logic("=OR(A1, B1=2)") is None
    assert elementwise_logic("=AND(OR(A1=1), B1=2)") is None


_SHAPES = [
    '=IF(ISNUMBER({r}),{r}*2,"")',  # the reference twice, as the templates' columns read a spill
    "=IFERROR({r}*2+{r}/{r},-1)",
    '=IF({r}="","",ABS({r}))',
    "={r}*2",
]


@given(periods=st.integers(16, 40), spill_col=st.integers(4, 8), gap=st.integers(1, 3),
       shape=st.sampled_from(_SHAPES), offset=st.integers(0, 5), seed=st.integers(0, 1000))
@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_columns_reading_a_spill_equal_direct_values(periods, spill_col, gap, shape, offset, seed):
    """Generated layouts: a column of element-wise formulas reads the cells a spill fills.  Each
    cell equals the same expression on the direct call's values, however the column is batched
    (found by trying layouts: a batched column once read the spilled cells as blanks)."""
    import tempfile
    from pathlib import Path

    from xlfuncs import VOLSIM
    from xlfuncs.headless.recalc import Workbook, cell_name

    fit = [["model", "GARCH(1,1)"], ["dist", "normal"], ["mu", 0.1], ["omega", 0.2], ["alpha[1]", 0.1],
           ["beta[1]", 0.8]]
    wb = openpyxl.Workbook()
    ws = wb.active
    for i, (k, v) in enumerate(fit, start=1):
        ws.cell(i, 1, k)
        ws.cell(i, 2, v)
    ws.cell(1, spill_col, f"=VOLSIM(A1:B6, {periods}, 1, {seed})")
    out_col = spill_col + gap
    for r in range(1 + offset, periods + 1):
        ws.cell(r, out_col, shape.format(r=cell_name(r, spill_col)))
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "g.xlsx"
        wb.save(path)
        book = Workbook(path).evaluate_all()
    direct = [row[0] for row in VOLSIM(fit, periods, 1, seed)]
    for r in range(1 + offset, periods + 1):
        x = direct[r - 1]
        expected = {0: x * 2, 1: x * 2 + 1, 2: abs(x), 3: x * 2}[_SHAPES.index(shape)]
        assert_allclose(book.values[(ws.title, r, out_col)], expected, rtol=1e-14)


def _returns_book(levels, path, extra):
    wb = openpyxl.Workbook()
    ws = wb.active
    for i, r in enumerate(_returns(levels), start=1):
        ws.cell(i, 1, r)
    for cell, value in extra.items():
        ws[cell] = value
    wb.save(path)
    return ws.title


def test_a_spill_that_feeds_its_own_input_is_a_circular_reference(tmp_path, levels, capsys):
    """C1's fit reads A1:A300, and A300 reads D5 inside C1's own spill: Excel calls this a
    circular reference; it must never be a fit of 299 numbers shown calmly."""
    n = len(_returns(levels))
    extra = {"C1": f"=VOLFIT(A1:A{n + 1})", f"A{n + 1}": "=D5"}
    _returns_book(levels, tmp_path / "c.xlsx", extra)
    out, report = recalc(tmp_path / "c.xlsx", tmp_path / "o.xlsx")
    assert any("circular reference" in what and where.endswith("!C1") for where, what in report.error_cells)
    assert openpyxl.load_workbook(out, data_only=True).active["C1"].value == "#VALUE!"


def test_nested_calls_receive_the_whole_table(tmp_path, levels):
    from xlfuncs import VOLSIM

    cells = [[r] for r in _returns(levels)]
    n = len(cells)
    extra = {"C1": f"=VOLSIM(VOLFIT(A1:A{n}), 5, 2, 7)", "F1": f"=VOLFORECAST(A1:A{n}, VOLFIT(A1:A{n}), 3)",
             "H1": f"=INDEX(VOLFIT(A1:A{n}), 5, 2)"}
    title = _returns_book(levels, tmp_path / "n.xlsx", extra)
    out, report = recalc(tmp_path / "n.xlsx", tmp_path / "o.xlsx")
    assert report.error_cells == []
    ws = openpyxl.load_workbook(out, data_only=True)[title]
    fit = VOLFIT(cells)
    sim = VOLSIM(fit, 5, 2, 7)
    assert_allclose([[ws.cell(i, j).value for j in (3, 4)] for i in range(1, 6)], sim, rtol=1e-14)
    assert_allclose([ws.cell(i, 6).value for i in range(1, 4)], [r[0] for r in VOLFORECAST(cells, fit, 3)], rtol=1e-14)
    assert_allclose(ws["H1"].value, fit[4][1], rtol=1e-14)  # a file stores 17 digits or fewer


@pytest.mark.parametrize("values_only", [False, True])
def test_results_a_cell_cannot_hold_are_stored_safely(tmp_path, levels, capsys, values_only):
    """Excel's limit is 32,767 characters a cell (common practice); XML forbids control
    characters.  Such results are stored cut or cleaned, and the command says so."""
    n = len(_returns(levels))
    extra = {"C1": '=REPT("x",40000)', "D1": f'=VOLFIT(A1:A{n},"GARCH"&CHAR(1))', "E1": '="a"&CHAR(7)&"b"'}
    title = _returns_book(levels, tmp_path / "t.xlsx", extra)
    args = ["recalc", str(tmp_path / "t.xlsx"), "-o", str(tmp_path / "o.xlsx")] + (["--values-only"] if values_only else [])
    assert main(args) == 0
    err = capsys.readouterr().err
    assert "cut from 40,000 to 32,767 characters" in err and "control characters" in err
    ws = openpyxl.load_workbook(tmp_path / "o.xlsx", data_only=True)[title]
    assert len(ws["C1"].value) == 32767 and ws["C1"].value.endswith("[cut: 40,000 characters]")
    assert ws["E1"].value == "a\ufffdb"
    assert ws["D1"].value.startswith("ERROR:") and len(ws["D1"].value) < 400


def test_output_where_it_cannot_be_written_is_one_line(tmp_path, capsys, done):
    src, _, _ = done
    (tmp_path / "a_file").write_text("x")
    assert main(["recalc", str(src), "-o", str(tmp_path / "a_file" / "o.xlsx")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("volcast: ") and err.count("\n") == 1 and "cannot write there" in err


def test_direct_calls_of_ours_equal_the_engine_route(tmp_path, monkeypatch):
    """A formula that is one call of ours with plain arguments is evaluated without the formula
    engine (recalc.Workbook._direct_call); every value, spill and reported error equals the route
    through the engine (VOLCAST_ENGINE_CALLS=1), the reference being the engine's own argument
    passing (engine._wrap_ours).  Arguments: ranges, a single cell, a defined name, another
    sheet, string literals, whole and decimal numbers, TRUE, an error cell (=1/0) as an argument,
    a text among the returns, spill references, the _xludf. prefix; a nested call goes through
    the engine."""
    from openpyxl.workbook.defined_name import DefinedName

    from xlfuncs.headless.recalc import Workbook

    rng = np.random.default_rng(5)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    for i in range(300):
        ws.cell(i + 2, 1, float(rng.standard_normal()))
        ws.cell(i + 2, 2, float(rng.standard_normal()) if i != 150 else "n/a")
    ws.cell(1, 4, "GARCH(1,1)")
    ws.cell(1, 5, "=1/0")
    ws.cell(1, 6, 0.975)
    wb.defined_names["rets"] = DefinedName("rets", attr_text="Data!$A$2:$A$301")
    m = wb.create_sheet("Model Sheet")
    m["A1"] = '=VOLFIT(Data!A2:A301, "GARCH(1,1)", "t")'
    m["H1"] = "=VOLFIT(rets, Data!D1)"
    m["O1"] = "=VOLFIT(Data!B2:B301)"
    m["V1"] = '=VOLFORECAST(Data!$A$2:$A$301, A1#, 3)'
    m["AC1"] = "=VOLRISK(rets, A1#, 0.99, 2)"
    m["AJ1"] = "=VOLRISK(rets, A1#, Data!F1)"
    m["AQ1"] = '=VOLFIT(Data!A2:A301, Data!E1)'
    m["AX1"] = '=VOLFIT(Data!A2:A301, "GARCH(1,1)", "normal", TRUE)'
    m["BE1"] = '=VOLFORECAST(Data!A2:A301, VOLFIT(Data!A2:A301), 2)'
    m["BL1"] = '=_xludf.VOLFORECAST(rets, A1#, 1.5)'
    path = tmp_path / "calls.xlsx"
    wb.save(path)

    direct = Workbook(path)
    assert direct._direct_call("Model Sheet", m["A1"].value) is not None
    assert direct._direct_call("Model Sheet", m["BE1"].value) is None  # nested: the engine's
    direct.evaluate_all()
    monkeypatch.setenv("VOLCAST_ENGINE_CALLS", "1")
    engine = Workbook(path).evaluate_all()

    def same(a, b):
        if type(a) is not type(b):
            return False
        if isinstance(a, float) and math.isnan(a):
            return math.isnan(b)
        return a == b

    assert direct.values.keys() == engine.values.keys()
    for k, v in engine.values.items():
        assert same(direct.values[k], v), (k, direct.values[k], v)
    assert direct.spills == engine.spills
    assert direct.collect_errors().error_cells == engine.collect_errors().error_cells
    assert direct.reads == engine.reads


# Excel's results for powers (from memory; the engine's own POWER function gives the same):
# a negative number to a power that is not whole, 0^0 and an overflow are #NUM!, zero to a
# negative power #DIV/0!
_POWERS = [("=A1^1.5", "#NUM!"), ("=(-8)^(1/3)", "#NUM!"), ("=POWER(A1,0.5)", "#NUM!"), ("=0^0", "#NUM!"),
           ("=0^-1", "#DIV/0!"), ("=10^400", "#NUM!"), ("=(-2)^3", -8.0), ("=2^0.5", math.sqrt(2.0)),
           ("=B2+1", "#NUM!")]


def test_powers_give_excels_errors_cell_by_cell_in_columns_and_in_the_file(tmp_path, capsys):
    """A negative number to a fractional power once came back from the engine as a complex
    number, and `volcast recalc` stopped with an internal error when writing it; 0^0 gave 1."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws["A1"] = -1
    for j, (text, _) in enumerate(_POWERS, start=1):
        ws.cell(2, j, text)
    for r in range(4, 40):  # a column of one shape: the NumPy route, then the engine for the rest
        ws.cell(r, 1, [-1.0, 0.0, 2.5, -3.0][r % 4])
        ws.cell(r, 2, [1.5, 0.0, -1.0, 2.0][r % 4])
        ws.cell(r, 3, f"=A{r}^B{r}")
    path = tmp_path / "powers.xlsx"
    wb.save(path)
    assert main(["recalc", str(path), "-o", str(tmp_path / "out.xlsx")]) == 0
    err = capsys.readouterr().err
    assert "internal error" not in err and "Warning" not in err
    got = openpyxl.load_workbook(tmp_path / "out.xlsx", data_only=True).active
    for j, (text, want) in enumerate(_POWERS, start=1):
        assert got.cell(2, j).value == want, text
    rule = {(-1.0, 1.5): "#NUM!", (0.0, 0.0): "#NUM!", (2.5, -1.0): 0.4, (-3.0, 2.0): 9.0}
    for r in range(4, 40):
        want = rule[(ws.cell(r, 1).value, ws.cell(r, 2).value)]
        assert got.cell(r, 3).value == want, r


def test_a_formula_reading_an_empty_cell_shows_zero(tmp_path):
    """=A5 with A5 empty shows 0 in Excel (from memory), not an empty cell, and a formula reading
    that cell sees the 0; in a column of such formulas too (the batches' routes)."""
    from xlfuncs.headless.recalc import Workbook

    wb = openpyxl.Workbook()
    ws = wb.active
    for i, text in enumerate(["=A100", "=IF(TRUE,A100)", "=INDEX(A100:A101,2)", '=A100=""', "=C1=0", '=C1=""'], start=1):
        ws.cell(i, 3, text)
    for r in range(10, 60):  # a column of =A{r} over numbers and blanks
        if r % 3:
            ws.cell(r, 1, r + 0.5)
        ws.cell(r, 4, f"=A{r}")
    wb.save(tmp_path / "e.xlsx")
    got = Workbook(tmp_path / "e.xlsx").evaluate_all().values
    assert [got[("Sheet", i, 3)] for i in range(1, 7)] == [0, 0, 0, True, True, False]
    for r in range(10, 60):
        assert got[("Sheet", r, 4)] == (r + 0.5 if r % 3 else 0), r


# Excel's ROUND examples (its function reference's examples, from memory: 2.15 -> 2.2, 2.149 -> 2.1,
# -1.475 -> -1.48, 21.5 to -1 digits -> 20) and the ties a binary double sits just below
_ROUNDS = [("=ROUND(2.15,1)", 2.2), ("=ROUND(2.149,1)", 2.1), ("=ROUND(-1.475,2)", -1.48), ("=ROUND(21.5,-1)", 20.0),
           ("=ROUND(1.005,2)", 1.01), ("=ROUND(2.675,2)", 2.68), ("=ROUNDUP(3.2,0)", 4.0), ("=ROUNDDOWN(-3.14159,1)", -3.1),
           ("=ROUND(1.5,30)", 1.5), ('=ROUND("x",1)', "#VALUE!")]


@pytest.mark.parametrize("text, want", _ROUNDS)
def test_round_as_excel_rounds(tmp_path, text, want):
    from xlfuncs.headless.recalc import Workbook

    wb = openpyxl.Workbook()
    wb.active["A1"] = text
    for r in range(2, 30):  # and in a column (the engine's batch)
        wb.active.cell(r, 1, text)
    wb.save(tmp_path / "r.xlsx")
    got = Workbook(tmp_path / "r.xlsx").evaluate_all().values
    for r in range(1, 30):
        v = got[("Sheet", r, 1)]
        assert (v.code if hasattr(v, "code") else v) == want


@pytest.mark.parametrize("values_only", [False, True])
def test_spilled_numbers_are_stored_to_the_last_digit_on_the_openpyxl_route(tmp_path, values_only):
    """A workbook whose formulas read a spill (A1#) is written through openpyxl, which keeps 16
    significant digits; the fit table's numbers in the file now equal a direct VOLFIT call's to the
    last bit (they differed in the 17th digit), with --values-only too."""
    r = simulate(parse_model("GARCH(1,1)"), get_distribution("t"), np.array([0.03, 0.02, 0.08, 0.9, 6.0]), 600,
                 rng=np.random.default_rng(7)).ravel()
    r = np.round(r, 10)  # numbers openpyxl writes exactly (16 significant digits), so both fits read the same
    wb = openpyxl.Workbook()
    ws = wb.active
    for i, x in enumerate(r, start=1):
        ws.cell(i, 1, float(x))
    ws["C1"] = '=VOLFIT(A1:A600, "GJR-GARCH(1,1)", "t")'
    ws["J1"] = "=INDEX(C1#, 5, 2)*2"  # a spill reference: the openpyxl route writes the book
    wb.save(tmp_path / "b.xlsx")
    args = ["recalc", str(tmp_path / "b.xlsx"), "-o", str(tmp_path / "o.xlsx")] + (["--values-only"] if values_only else [])
    assert main(args) == 0
    got = openpyxl.load_workbook(tmp_path / "o.xlsx", data_only=True).active
    direct = VOLFIT([[float(x)] for x in r], "GJR-GARCH(1,1)", "t")
    numbers = 0
    for i, row in enumerate(direct, start=1):
        for j, v in enumerate(row, start=3):
            if isinstance(v, float):
                assert got.cell(i, j).value == v, (i, j)
                numbers += 1
    assert numbers > 20 and got["J1"].value == direct[4][1] * 2
