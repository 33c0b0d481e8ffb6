"""The package reader and writer of `volcast recalc` (fastread.py, xlsxpost.place_values) against
the openpyxl route they replace.

Reading: every cell's constant or formula, the array formulas, the sheets' extents and the defined
names equal what the workbook loaded by openpyxl gives.  Writing: the recalculated workbook,
read back by openpyxl (formulas and stored values), equals the one written through openpyxl, and
so do the dynamic-array marks and the report.  Two differences are by design and allowed here:
openpyxl writes a number with 16 significant digits (``%.16g``), so its copy may differ in the
last digit and reads a whole float back as an int; the edited package stores the number exactly.
"""

from __future__ import annotations

import datetime as dt
import math
import shutil
import subprocess

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from openpyxl.worksheet.formula import ArrayFormula

from xlfuncs.headless.recalc import Workbook, recalc
from xlfuncs.headless.xlsxpost import dynamic_anchors


def _same_read(path):
    fast, slow = Workbook(path), Workbook(path, fast=False)
    assert fast.fast_read and not slow.fast_read
    for attr in ("inputs", "formulas", "arrays", "max_row", "max_col", "names", "sheets", "array_cells"):
        a, b = getattr(fast, attr), getattr(slow, attr)
        assert a == b, attr
        if isinstance(a, dict):
            for k in a:
                assert type(a[k]) is type(b[k]), (attr, k, a[k], b[k])


def _cells(path, data_only):
    wb = openpyxl.load_workbook(path, data_only=data_only)
    out = {}
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                v = c.value
                if v is not None:
                    out[(ws.title, c.coordinate)] = (v.ref, v.text) if isinstance(v, ArrayFormula) else v
    return out, (wb.calculation.calcId, wb.calculation.fullCalcOnLoad, wb.sheetnames)


def _same_value(a, b) -> bool:
    if {type(a), type(b)} == {int, float}:
        return a == b  # openpyxl writes a whole float as an int
    if type(a) is not type(b):
        return False
    if isinstance(a, float):
        return a == b or math.isclose(a, b, rel_tol=1e-15, abs_tol=0)  # %.16g against the exact value
    return a == b


def _same_written(src, tmp_path, monkeypatch):
    new, rnew = recalc(src, tmp_path / "new.xlsx")
    with monkeypatch.context() as m:
        m.setenv("VOLCAST_OPENPYXL_WRITE", "1")
        old, rold = recalc(src, tmp_path / "old.xlsx")
    for data_only in (True, False):
        a, b = _cells(new, data_only), _cells(old, data_only)
        assert a[1] == b[1]
        assert a[0].keys() == b[0].keys()
        for k in a[0]:
            assert _same_value(a[0][k], b[0][k]), (k, a[0][k], b[0][k])
    assert dynamic_anchors(new) == dynamic_anchors(old)
    assert (rnew.error_cells, rnew.altered, rnew.unread, rnew.spills, rnew.formulas) == \
        (rold.error_cells, rold.altered, rold.unread, rold.spills, rold.formulas)
    return new


_CONSTANTS = st.one_of(
    st.floats(-1e6, 1e6, allow_nan=False), st.integers(-10**6, 10**6), st.booleans(),
    st.text(st.characters(codec="utf-8", exclude_categories=("Cs", "Cc")), max_size=12),
    st.sampled_from(["#N/A", "#DIV/0!", "a & b <c> \"d\"", "  spaced  ", "=not a formula?"]),
    st.dates(dt.date(1900, 3, 1), dt.date(2100, 1, 1)),
    st.datetimes(dt.datetime(1950, 1, 1), dt.datetime(2050, 1, 1)),
)


@given(values=st.lists(_CONSTANTS, min_size=1, max_size=30), seed=st.integers(0, 10**6))
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_generated_workbooks_read_as_openpyxl_reads_them(tmp_path, values, seed):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data & more"
    other = wb.create_sheet("B'2")
    for i, v in enumerate(values):
        ws.cell(1 + (seed + 7 * i) % 13, 1 + (seed + i) % 5, v)
    other["A1"] = '=IF(\'Data & more\'!A1<>"x&y",1,2)'
    other["B2"] = "=SUM('Data & more'!A1:E13)"
    other["C3"] = ArrayFormula("C3:D4", "=TRANSPOSE('Data & more'!A1:B2)")
    other["E5"].number_format = "0.00"  # a styled empty cell counts for the extent
    from openpyxl.workbook.defined_name import DefinedName

    wb.defined_names["total"] = DefinedName("total", attr_text="'B''2'!$B$2")
    path = tmp_path / "gen.xlsx"
    wb.save(path)
    _same_read(path)


@given(values=st.lists(_CONSTANTS, min_size=1, max_size=40), arrays=st.lists(st.tuples(st.integers(1, 14), st.integers(1, 6)),
       min_size=1, max_size=3, unique=True), seed=st.integers(0, 10**6))
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_sheets_of_plain_cells_with_a_few_array_formulas_read_as_openpyxl_reads_them(tmp_path, values, arrays, seed):
    """A sheet mostly of plain cells with array formulas among them (the quick route for the first,
    the general loop for the rest) reads as the whole sheet does through openpyxl."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Mixed"
    taken = set()
    for r, c in arrays:
        ws.cell(r, c).value = ArrayFormula(ws.cell(r, c).coordinate, f"=SUM(A1:A{r})")
        taken.add((r, c))
    for i, v in enumerate(values):
        at = (1 + (seed + 7 * i) % 15, 1 + (seed + i) % 6)
        if at not in taken:
            ws.cell(*at, v)
    ws.cell(16, 2, "=A1*2")  # a plain formula after them
    path = tmp_path / "mixed.xlsx"
    wb.save(path)
    _same_read(path)


@pytest.mark.parametrize("name", ["monthly_variance.xlsx", "daily_variance.xlsx"])
def test_shipped_templates_read_as_openpyxl_reads_them(name):
    from xlfuncs.demo import template_file

    _same_read(template_file(name))


def _spill_book(path, rows=12, blocked=False, legacy=False):
    from xlfuncs.core import get_distribution, parse_model
    from xlfuncs.core.simulate import simulate

    import numpy as np

    r = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.0, 0.05, 0.1, 0.85]), 300, 1,
                 rng=np.random.default_rng(3))[:, 0]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    for i, x in enumerate(r):
        ws.cell(i + 2, 1, float(x))
    ws["A1"] = "returns"
    m = wb.create_sheet("Model")
    m["A1"] = "=VOLFIT(Data!A2:A301)"
    m["E1"] = '=VOLFORECAST(Data!A2:A301, A1#, 5)'
    m["H1"] = "=INDEX(A1#, 2, 2)*2"
    m["H2"] = '=IF(H1>0,"positive","not")'
    if blocked:
        m["A3"] = "in the way"
    if legacy:
        m["J1"] = ArrayFormula("J1:K3", "=VOLFORECAST(Data!A2:A301, A1#, 2)")
    wb.save(path)
    return path


@pytest.mark.parametrize("blocked", [False, True])
@pytest.mark.parametrize("legacy", [False, True])
def test_recalc_written_by_editing_the_package_equals_the_openpyxl_route(tmp_path, monkeypatch, blocked, legacy):
    src = _spill_book(tmp_path / "book.xlsx", blocked=blocked, legacy=legacy)
    out = _same_written(src, tmp_path, monkeypatch)
    # and again on its own output, which carries spills marked as dynamic arrays and stored values
    again = tmp_path / "again"
    again.mkdir()
    _same_written(out, again, monkeypatch)


def test_recalc_of_a_filled_template_equals_the_openpyxl_route(tmp_path, monkeypatch):
    """The daily template's Data sheet with a short series: the template's own formulas (spills,
    names, charts' ranges) through both writers."""
    import numpy as np

    from xlfuncs.demo import template_file

    book = openpyxl.load_workbook(template_file("monthly_variance.xlsx"))
    ws = book["Data"]
    rng = np.random.default_rng(8)
    levels = 100 * np.exp(np.cumsum(rng.standard_normal(150) / 30))
    day = dt.date(2001, 1, 31)
    for i, x in enumerate(levels):
        ws.cell(i + 2, 1, day + dt.timedelta(days=30 * i))
        ws.cell(i + 2, 2, float(x))
    path = tmp_path / "filled.xlsx"
    book.save(path)
    _same_written(path, tmp_path, monkeypatch)


@pytest.mark.skipif(shutil.which("soffice") is None, reason="LibreOffice is not installed")
def test_a_workbook_saved_by_libreoffice_reads_and_writes_as_through_openpyxl(tmp_path, monkeypatch):
    src, _ = recalc(_spill_book(tmp_path / "raw.xlsx"), tmp_path / "book.xlsx")
    lo = tmp_path / "lo"
    lo.mkdir()
    subprocess.run(["soffice", "--headless", "--convert-to", "xlsx", "--outdir", str(lo), str(src)],
                   check=True, capture_output=True, timeout=180)
    saved = lo / "book.xlsx"
    w = Workbook(saved)
    if w.fast_read:
        _same_read(saved)
    _same_written(saved, tmp_path, monkeypatch)
