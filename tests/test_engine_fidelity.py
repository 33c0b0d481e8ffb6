"""Ordinary formulas in a headless recalculation evaluated as Excel evaluates them.

Each workbook is built with openpyxl (a Python ``str`` is stored as a text cell, "3" included),
recalculated by ``volcast recalc`` and read back.  The source of every expected value is named
beside it: Excel's function reference (the documented rule), "from memory" where it is recalled
without a source at hand, and LibreOffice 7 (``soffice --headless --convert-to csv``) where it was
run on the same cells; where LibreOffice and Excel differ this is said, and Excel's rule is kept.
"""

import math

import openpyxl
import pytest

from xlfuncs.cli import main
from xlfuncs.headless.recalc import recalc


def _recalc(tmp_path, formulas, cells=None):
    """The values ``volcast recalc`` computes for ``formulas`` (column C of one sheet), with the
    constant ``cells`` ({"A2": "3", ...}) in place."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    for ref, v in (cells or {}).items():
        ws[ref] = v
    for i, f in enumerate(formulas, start=1):
        ws.cell(i, 3, f)
    src, dst = tmp_path / "book.xlsx", tmp_path / "book.out.xlsx"
    wb.save(src)
    recalc(src, dst)
    out = openpyxl.load_workbook(dst, data_only=True)["S"]
    return [out.cell(i, 3).value for i in range(1, len(formulas) + 1)]


# A2 holds the text "3" (a number typed into a text-formatted cell, or imported as text), A3:A4
# the numbers 2 and 4, A5 TRUE.
TEXT_NUMBER = {"A2": "3", "A3": 2, "A4": 4, "A5": True, "A6": 5, "A7": "abc", "A8": 1}

# Excel's function reference for SUM, AVERAGE, COUNT, MIN, MAX (and STDEV.S, VAR.S, MEDIAN,
# SUMSQ, PRODUCT, which state the same rule): "If an argument is an array or reference, only
# numbers in that array or reference are counted. Empty cells, logical values, or text in the
# array or reference are ignored."  LibreOffice gives the same for the ranges over A2:A4 below.
RANGE_CASES = [
    ("=SUM(A2:A4)", 6),
    ("=AVERAGE(A2:A4)", 3),
    ("=COUNT(A2:A4)", 2),
    ("=MIN(A2:A4)", 2),
    ("=MAX(A2:A4)", 4),
    ("=MEDIAN(A2:A4)", 3),
    ("=SUMSQ(A2:A4)", 20),
    ("=PRODUCT(A2:A4)", 8),
    ("=STDEV(A2:A4)", math.sqrt(2)),
    ("=_xlfn.STDEV.S(A2:A4)", math.sqrt(2)),
    ("=VAR(A2:A4)", 2),
    ("=_xlfn.VAR.P(A2:A4)", 1),
    ("=AVERAGE(A7,A8)", 1),  # a text that is no number, ignored in a reference as well
    ("=SUM(A2)", 0),  # a single cell is a reference too
    # logical values in a reference are ignored (Excel's reference, as above); LibreOffice
    # differs here and counts TRUE as 1 (it gives 6)
    ("=SUM(A5:A6)", 5),
    # SUMPRODUCT "treats array entries that are not numeric as if they were zeros" (Excel's
    # function reference for SUMPRODUCT): 0*0 + 2*2 + 4*4; LibreOffice gives 20 as well
    ("=SUMPRODUCT(A2:A4,A2:A4)", 20),
    ("=PERCENTILE(A2:A4,0.5)", 3),  # "3" is no data point: the median of 2 and 4 (from memory)
]


def _check(tmp_path, cases, cells):
    got = _recalc(tmp_path, [f for f, _ in cases], cells)
    for (formula, expected), value in zip(cases, got):
        want = pytest.approx(expected, rel=1e-15) if isinstance(expected, (int, float)) else expected
        assert value == want, formula


def test_text_and_logical_values_in_ranges_are_ignored(tmp_path):
    _check(tmp_path, RANGE_CASES, TEXT_NUMBER)


# A value typed as an argument is converted: Excel's reference for SUM ("=SUM("3", 1)" style
# arguments: "Numbers, logical values, and text representations of numbers that you type
# directly into the list of arguments are counted"; the same sentence for COUNT, MIN, MAX,
# AVERAGE).  LibreOffice differs for SUM("3",1) (#VALUE!); Excel's documented rule is kept.
TYPED_CASES = [
    ('=SUM("3",1)', 4),
    ("=SUM(TRUE,1)", 2),
    ('=COUNT(1,"2","x",TRUE)', 3),  # a text that is no number is not counted (Excel's reference for COUNT)
    ('=MAX(A3:A4,"7")', 7),
    ('=MAX(A3:A4,"zzz")', "#VALUE!"),  # a typed text that is no number (Excel's reference for MAX)
    ("=A2+1", 4),  # arithmetic converts a text cell (Excel's "Formula operators": "3"+1 is 4)
    ("=SUM(A2:A4*1)", 9),  # the product converted the text before SUM saw it (from memory)
]


def test_typed_arguments_are_converted(tmp_path):
    _check(tmp_path, TYPED_CASES, TEXT_NUMBER)


def test_isnumber_and_istext_of_a_text_number(tmp_path):
    # Excel's IS functions: "Value arguments of these functions are not converted ... in the
    # formula ISNUMBER("19"), "19" is not converted from a text value"; LibreOffice: FALSE, TRUE
    got = _recalc(tmp_path, ["=ISNUMBER(A2)", "=ISTEXT(A2)", '=ISNUMBER("19")', "=ISNUMBER(A3)"], TEXT_NUMBER)
    assert got == [False, True, False, True]


# Numbers compared as Excel holds them, to 15 significant digits: =0.1+0.2=0.3 is TRUE in Excel
# (from memory: the classic example of its 15-digit comparison); LibreOffice gives every value
# below as well (run on the same formulas).
COMPARISON_CASES = [
    ("=0.1+0.2=0.3", True),
    ('=IF(0.1+0.2=0.3,"ok","mismatch")', "ok"),
    ("=0.1+0.2<>0.3", False),
    ("=0.1+0.2>0.3", False),
    ("=0.1+0.2>=0.3", True),
    ("=0.3<0.1+0.2", False),
    ("=1+1E-15=1", True),  # a difference past the 15th digit
    ("=1+1E-14=1", False),  # within 15 digits: still different
    ("=1E-20=0", False),  # a tiny number is not zero (15 significant digits, not 15 decimals)
]


def test_numbers_compare_on_15_significant_digits(tmp_path):
    _check(tmp_path, COMPARISON_CASES, {})


# A number turned into text shows at most 15 significant digits (Excel's specifications: "Number
# precision: 15 digits"; the text forms from memory); LibreOffice gives the same texts.
TEXT_CASES = [
    ('="x"&(0.1+0.2)', "x0.3"),
    ('="x"&1/3', "x0.333333333333333"),
    ('="x"&-1/3', "x-0.333333333333333"),
    ('="x"&100/3', "x33.3333333333333"),
    ('="x"&2/3', "x0.666666666666667"),
    ("=CONCATENATE(1/3)", "0.333333333333333"),
    ("=LEN(0.1+0.2)", 3),
    ('="a"&1.10', "a1.1"),
    ('="x"&123456789012345', "x123456789012345"),
    ('="x"&1E+100', "x1E+100"),
]


def test_numbers_become_text_with_15_significant_digits(tmp_path):
    _check(tmp_path, TEXT_CASES, {})


def test_number_literals_with_an_unsigned_exponent(tmp_path):
    # Excel reads 1e3 and 1E3 as 1000 (from memory; LibreOffice gives 1000 too), and a result
    # past the largest number Excel holds is #NUM! (Excel's specifications: largest number
    # 9.99999999999999E+307; =1E308*10 is #NUM!, from memory)
    cases = [("=1e3", 1000), ("=1E3", 1000), ("=2*1e3", 2000), ('=LEN("1e3")', 3),
             ("=1E308*10", "#NUM!"), ("=2.5e-3", 0.0025)]
    _check(tmp_path, cases, {})


def test_recalc_command_accepts_unsigned_exponents(tmp_path):
    wb = openpyxl.Workbook()
    wb.active["A1"], wb.active["A2"] = "=1e3", "=A1*2"
    src = tmp_path / "sci.xlsx"
    wb.save(src)
    assert main(["recalc", str(src), "-o", str(tmp_path / "out.xlsx")]) == 0
    ws = openpyxl.load_workbook(tmp_path / "out.xlsx", data_only=True).active
    assert (ws["A1"].value, ws["A2"].value) == (1000, 2000)


# Text Excel (en-US) converts in arithmetic and VALUE: a thousands separator and a percent sign
# (Excel's reference for VALUE: "text can be in any of the constant number, date, or time formats
# recognized by Microsoft Excel"; the values from memory, and LibreOffice gives the same).
CONVERSION_CASES = [
    ('="10,900.50"+0', 10900.5),
    ('=VALUE("10,900.50")', 10900.5),
    ('=VALUE("15%")', 0.15),
    ('="15%"*2', 0.3),
    ("=A1*1", 1234567),  # A1 holds the text "1,234,567"
    ('=" 3 "+0', 3),
    ('="1e3"+0', 1000),
    ('="nan"+0', "#VALUE!"),  # Python's float() reads it; Excel does not
    ('="1_000"+0', "#VALUE!"),
]


def test_text_with_thousands_separators_and_percent_converts(tmp_path):
    _check(tmp_path, CONVERSION_CASES, {"A1": "1,234,567"})


def test_texts_that_are_no_number_or_date_are_errors(tmp_path):
    # a text Excel would not read as a number stays an error, never a date the library's lenient
    # date reader found in it ("1,5" was 5 January of the current year); LibreOffice gives an error
    # for each of these and the same serial numbers for the dates (46027 is 5 January 2026)
    cases = [('=VALUE("1,5")', "#VALUE!"), ('=VALUE("May")', "#VALUE!"), ('=VALUE("1 2")', "#VALUE!"),
             ('=VALUE("3.4.5")', "#VALUE!"), ('="nan"+0', "#VALUE!"),
             ('="2026-01-05"+1', 46028), ('=VALUE("1/5/2026")', 46027), ('=VALUE("5-Jan-2026")', 46027)]
    _check(tmp_path, cases, {})
