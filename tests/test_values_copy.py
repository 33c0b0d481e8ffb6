"""The values copy written by editing the package (xlsxpost.strip_formulas, layout.write_values_copy)
against the copy openpyxl writes (load with data_only=True, save), on generated workbooks.

openpyxl's reading of stored formula values is the reference here (a general-purpose library,
not ours): whatever values and types a generated workbook's formulas store (numbers, texts with
spaces, markup characters and non-ASCII letters, empty texts, TRUE/FALSE, error values, none),
both copies must hold the same values, types and number formats, and the edited one no formula.
The TRUE/FALSE format is the one the values copy gives booleans (common practice for
LibreOffice, which otherwise shows a stored boolean as 1).
"""

import math
import zipfile

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from xlfuncs.headless.layout import BOOL_FORMAT, write_values_copy
from xlfuncs.headless.xlsxpost import ERROR_LITERALS, ExcelError, store_values, strip_formulas

_TEXT = st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")) | st.sampled_from(" <>&\"'é€\t\n"),
                max_size=12)
_VALUE = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False),
    st.integers(min_value=-10**12, max_value=10**12),
    _TEXT,
    st.booleans(),
    st.sampled_from(ERROR_LITERALS).map(ExcelError),
    st.none(),
)
_CELLS = st.lists(st.tuples(st.integers(1, 12), st.integers(1, 5), _VALUE, st.booleans(), st.booleans()),
                  min_size=1, max_size=30, unique_by=lambda c: (c[0], c[1]))


def _book(path, cells):
    """A workbook whose formula cells store the generated values (store_values), beside a few
    constants; a boolean's cell is in the TRUE/FALSE format where ``shown`` says so."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Sheet & <One>"
    other = wb.create_sheet("Two")
    other["A1"] = 1.25
    other["B2"] = "a constant"
    values = {}
    for row, col, value, shown, on_other in cells:
        sheet = other if on_other else ws
        c = sheet.cell(row + 2, col, f"=ROW()+{row}*{col}")
        if shown or not isinstance(value, bool):
            c.number_format = BOOL_FORMAT if isinstance(value, bool) else ("0.00" if shown else "General")
        values[(sheet.title, c.coordinate)] = value
    wb.save(path.with_suffix(".plain.xlsx"))
    store_values(path.with_suffix(".plain.xlsx"), path, values)
    return values


def _cells(path):
    wb = openpyxl.load_workbook(path)
    return {(ws.title, c.coordinate): (c.value, c.number_format)
            for ws in wb for row in ws.iter_rows() for c in row if c.value is not None or c.has_style}


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cells=_CELLS)
def test_the_edited_copy_holds_what_openpyxl_reads_and_writes(tmp_path, monkeypatch, cells):
    import tempfile
    from pathlib import Path

    tmp_path = Path(tempfile.mkdtemp(dir=tmp_path))  # one folder per generated example
    src = tmp_path / "book.xlsx"
    values = _book(src, cells)
    edited = tmp_path / "edited.xlsx"
    unformatted = any(isinstance(v, bool) and not shown for _, _, v, shown, _ in cells)
    if unformatted:  # a boolean not yet in the TRUE/FALSE format: declined, nothing written
        with pytest.raises(ValueError, match="boolean"):
            strip_formulas(src, edited, BOOL_FORMAT)
        assert not edited.exists()
        return
    strip_formulas(src, edited, BOOL_FORMAT)
    with zipfile.ZipFile(edited) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/"):
                assert b"<f>" not in z.read(name) and b"<f " not in z.read(name)
    monkeypatch.setenv("VOLCAST_OPENPYXL_WRITE", "1")
    reference = _cells(write_values_copy(src, tmp_path / "openpyxl.xlsx"))
    mine = _cells(edited)
    assert mine.keys() == reference.keys()
    for key, (value, fmt) in mine.items():
        want, want_fmt = reference[key]
        assert fmt == want_fmt, key
        numbers = (int, float)
        if isinstance(value, numbers) and isinstance(want, numbers) and not isinstance(value, bool) \
                and not isinstance(want, bool):
            # openpyxl's copy keeps 16 digits, and reads a whole float it wrote back as an int;
            # 16 digits round a number within 1e-16 of the largest double up past it, which then
            # reads back as infinity (found by this test: 1.7976931348623155e308)
            if math.isinf(want):
                assert abs(value) > 1.797693134862315e308, key
                continue
            assert math.isclose(value, want, rel_tol=1e-15, abs_tol=1e-300), key
        else:
            assert value == want and type(value) is type(want), (key, value, want)
    for (sheet, ref), v in values.items():  # and each is the value stored, to its last digit
        got = mine.get((sheet, ref), (None, None))[0]
        if isinstance(v, ExcelError):
            assert got == v.code
        elif isinstance(v, str):
            assert got == (v or None)
        elif isinstance(v, bool) or v is None:
            assert got is v
        else:
            assert got == v and not isinstance(got, bool)


def test_the_copy_goes_through_openpyxl_where_the_editor_declines(tmp_path):
    """write_values_copy on a workbook with an unformatted TRUE: openpyxl's copy, TRUE/FALSE shown."""
    src = tmp_path / "book.xlsx"
    _book(src, [(1, 1, True, False, False), (2, 1, 2.5, True, False)])
    out = write_values_copy(src, tmp_path / "copy.xlsx")
    got = _cells(out)
    assert got[("Sheet & <One>", "A3")] == (True, BOOL_FORMAT)
    assert got[("Sheet & <One>", "A4")] == (2.5, "0.00")


def test_a_text_result_that_looks_like_a_formula_stays_text(tmp_path):
    """A formula whose result is the text "=1+1" (openpyxl would save that text back as a
    formula): the edited copy holds it as an inline string, with spaces kept."""
    src = tmp_path / "book.xlsx"
    _book(src, [(1, 1, "=1+1", False, False), (2, 1, "  padded  ", False, False)])
    strip_formulas(src, tmp_path / "copy.xlsx", BOOL_FORMAT)
    with zipfile.ZipFile(tmp_path / "copy.xlsx") as z:
        xml = z.read("xl/worksheets/sheet1.xml").decode()
    assert "<f" not in xml
    assert '<c r="A3" t="inlineStr"><is><t xml:space="preserve">=1+1</t></is></c>' in xml
    got = _cells(tmp_path / "copy.xlsx")
    assert got[("Sheet & <One>", "A4")][0] == "  padded  "
