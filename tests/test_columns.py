"""The NumPy column route (xlfuncs/headless/columns.py) against the general route.

The reference is the formula engine evaluating each cell on its own (the route every formula
took before the column batches); the fast route must give the same value and the same type in
every cell it answers, and leave the others to the engine.  Layouts are generated (hypothesis):
shapes of element-wise formulas in different columns and sheets, over floats, integers, blanks,
texts, booleans, zeros, negative numbers and error values.
"""

from __future__ import annotations

import math

import numpy as np
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from xlfuncs.headless.columns import ColumnShape, Unsupported, digit_runs, shape_groups, shape_key
from xlfuncs.headless.recalc import Workbook

_SHAPES = [
    '=IF(OR({a}="",{b}=""),"",LN({a}/{b})*100)',  # the templates' return formula
    "=LN({a}/{b})*100",
    "={a}*2+{b}/{a}",
    "=IF({a}>{b},{a},{b})",
    "=IF({a}>0,1,0)",
    "=IF({a}>0,1.5)",
    "=IFERROR(SQRT({a}-{b}),-1)",
    "=ABS({a})^0.5",
    "=POWER({a},2)-{b}%",
    "=-{a}^2",
    '=AND({a}<>"",{b}>=1)',
    "=OR({a}>110,{a}=0)",
    "=ISNUMBER({a})",
    '=IF(ISBLANK({b}),"none",EXP({a}/100))',
    "=SIGN({a}-{b})*LOG10(ABS({a})+1)",
    "={a}/({b}-{b})",
    '=IF({a}="x",1,2)',
    "={a}",
    "=+{a}",
    "=({a}-{b})^3/{b}",
    "=IF({a}<={b},-{a},{a}*{b})",
    '=IF({a}<>"",{a}^{b},"")',
]

_VALUES = st.one_of(
    st.floats(-1e3, 1e3, allow_nan=False).map(lambda x: round(x, 6)),
    st.floats(0.5, 300, allow_nan=False),
    st.sampled_from([0.0, -0.0, 1.0, 2.0, 100.0, -5.5, 1e300, 1e-300]),
    st.integers(-5, 200),
    st.sampled_from([None, None, "", "text", "x", True, False, "#N/A", "#DIV/0!"]),
)


def _evaluate_both(path):
    fast = Workbook(path)
    fast._batch_vector(min_size=2)
    answered = dict(fast.values)
    fast.evaluate_all()
    single = Workbook(path)
    single._batch_elementwise = lambda *a, **k: None  # every cell through the engine on its own
    single.evaluate_all()
    return answered, fast, single


def _same(a, b) -> bool:
    if type(a) is not type(b):
        return False
    if isinstance(a, float) and math.isnan(a):
        return math.isnan(b)
    return a == b


@given(shape=st.sampled_from(_SHAPES), rows=st.integers(3, 30), col=st.integers(1, 4), other_sheet=st.booleans(),
       absolute=st.booleans(), lag=st.integers(0, 2), far=st.booleans(), data=st.data())
@settings(max_examples=int(__import__("os").environ.get("VOLCAST_COLUMN_EXAMPLES", "60")), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
def test_generated_layouts_equal_cell_by_cell_evaluation(tmp_path, shape, rows, col, other_sheet, absolute, lag, far,
                                                         data):
    """Every cell the fast route answers, and every cell after the whole evaluation, equals the
    engine's cell-by-cell value (value and type).  With ``far`` the sheet read holds a cell far
    below the column, so the fast route reads the rows referenced, not the whole column."""
    values = data.draw(st.lists(_VALUES, min_size=rows + 3, max_size=rows + 3))
    mostly_floats = data.draw(st.booleans())
    if mostly_floats:  # most real columns are numbers: a few odd cells among floats (not whole
        # numbers: a workbook gives those back as ints, which the fast route takes only where the
        # formula computes with them, and leaves to the engine where a formula shows them as they are)
        values = [v if i % 7 == 3 else 50.1 + (i * 37 % 11) * 1.25 for i, v in enumerate(values)]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Calc"
    src = wb.create_sheet("In put") if other_sheet else ws
    letter = "ABCD"[col - 1]
    for i, v in enumerate(values):
        if v is not None:
            src.cell(i + 1, col, v)
    if far:
        src.cell(6000, 5, 1.25)
    prefix = "'In put'!" if other_sheet else ""
    dollar = "$" if absolute else ""
    out_col = 6 + col
    for r in range(3, rows + 3):
        a = f"{prefix}{dollar}{letter}{r}"
        b = f"{prefix}{dollar}{letter}{r - 1 - lag if r - 1 - lag >= 1 else 1}"
        ws.cell(r, out_col, shape.format(a=a, b=b))
        ws.cell(r, out_col + 1, shape.format(a=b, b=a))  # a second column of the same shape
    path = tmp_path / "gen.xlsx"
    wb.save(path)
    answered, fast, single = _evaluate_both(path)
    for key, v in answered.items():  # the NumPy route against the engine, cell by cell
        assert _same(v, single.values[key]), (key, shape, v, single.values[key])
    before = Workbook(path)  # the whole recalculation against the route before the NumPy columns
    before._batch_elementwise(vector=False)
    before.evaluate_all()
    assert fast.values.keys() == before.values.keys() == single.values.keys()
    for key, v in before.values.items():
        # the value before; where the engine's column batch itself differs from the engine cell
        # by cell (it does on some powers near error rows), the cell-by-cell value may stand
        assert _same(fast.values[key], v) or _same(fast.values[key], single.values[key]), \
            (key, shape, fast.values[key], v, single.values[key])
    if mostly_floats and shape in (_SHAPES[0], _SHAPES[1]) and not absolute:
        assert answered, "a column of returns over floats goes through the fast route"


@pytest.mark.parametrize("name", ["monthly_variance.xlsx", "daily_variance.xlsx"])
def test_shipped_templates_fast_route_equals_engine(tmp_path, name):
    """The shipped templates with levels in their Data sheet (as `volcast refresh` loads them):
    each return the fast route computes equals the engine's, and they all go the fast route."""
    from xlfuncs.demo import template_file
    from xlfuncs.headless.contract import return_formula

    book = openpyxl.load_workbook(template_file(name))
    ws = book["Data"]
    rng = np.random.default_rng(5)
    levels = 100 * np.exp(np.cumsum(rng.standard_normal(300) / 50))
    odd = {40: None, 41: "n/a", 90: 0.0, 150: 120, 151: -3.0}
    for i, x in enumerate(levels):
        ws.cell(i + 2, 2, odd.get(i, float(x)))
    assert ws.cell(5, 3).value == return_formula(5)  # the contract's return formula is in place
    path = tmp_path / name
    book.save(path)
    fast = Workbook(path)
    fast._batch_vector()
    rets = {k: v for k, v in fast.values.items() if k[0] == "Data" and k[2] == 3}
    assert len(rets) >= 290
    single = Workbook(path)
    for key in list(rets)[:: 3] + [("Data", r, 3) for r in range(40, 46)] + [("Data", r, 3) for r in range(90, 94)] \
            + [("Data", r, 3) for r in range(150, 156)]:
        assert _same(fast.value(key), single.value(key)), (key, fast.value(key), single.value(key))
    assert ("Data", 44, 3) not in rets  # a row beside a text level is the engine's


def test_shape_key_and_reading():
    assert shape_key("=LN(B13/B12)*100") == shape_key("=LN(B3/B2)*100")
    assert shape_key("=LN(B3/B2)*100") != shape_key("=LN(C3/C2)*100")
    s = ColumnShape('=IF(OR(A3="",A2=""),"",LN(A3/A2)*100)')
    assert [r[2] for r in s.refs] == [0, 1, 2, 3] and s.fixed == [4]
    for text in ("=SUM(A1:A3)", "=A1&B1", "=1E3*A1", "=--A1", "=ROUND(A1,2)", "=A1 B1", "=TRUE+A1", "=name1*2"):
        with pytest.raises(Unsupported):
            ColumnShape(text).evaluate([np.ones(2)] * 4)


# formula-like texts: letters, operators, ASCII digits (runs of any length, leading zeros), a digit
# outside ASCII (which \d matches too), the separator the grouping joins with, and '#'
_TEXT = st.lists(st.sampled_from(["A", "B", "$", "(", ")", "/", "*", "+", '"', "#", ".", "!", "LN(", "IF(",
                                   "0", "1", "7", "9", "12", "007", "99999999999999999999", "\u0663", "\x00"]),
                 min_size=1, max_size=12).map("".join)


@given(texts=st.lists(_TEXT, min_size=1, max_size=40), sheets=st.lists(st.sampled_from(["S", "T"]), min_size=40,
                                                                       max_size=40))
@settings(max_examples=300, deadline=None)
def test_shape_groups_are_the_shape_key_groups(texts, sheets):
    """shape_groups partitions the cells exactly as shape_key does (reference: shape_key on each
    text, the grouping it replaces), and digit_runs reads each member's digit runs as int() reads
    the runs the regular expression finds (or says None where int64 cannot hold one)."""
    import re

    keys = [(sheets[i], i + 1, 1) for i in range(len(texts))]
    want: dict = {}
    for k, t in zip(keys, texts):
        want.setdefault((k[0], shape_key(t)), []).append(k)
    got = shape_groups(keys, texts)
    assert set(got) == set(want)
    text_of = dict(zip(keys, texts))
    for gk, parts in got.items():
        assert sorted(k for _, members in parts for k in members) == sorted(want[gk])
        for pattern, members in parts:
            runs = [[int(x) for x in re.findall(r"\d+", text_of[k])] for k in members]
            n = len(runs[0])
            assert all(len(r) == n for r in runs)
            arr = digit_runs([text_of[k] for k in members], pattern, n)
            if any(x >= 2**63 for r in runs for x in r):
                assert arr is None
            else:
                assert arr is not None and arr.tolist() == runs
            assert digit_runs([text_of[k] for k in members], pattern, n + 1) is None


@given(shape=st.sampled_from(_SHAPES), horizon=st.integers(12, 40), extra=st.integers(0, 8), lag=st.integers(0, 1),
       other_sheet=st.booleans(), chained=st.booleans(), blocked=st.booleans())
@settings(max_examples=int(__import__("os").environ.get("VOLCAST_COLUMN_EXAMPLES", "60")) // 2, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
def test_columns_over_a_spill_equal_cell_by_cell_evaluation(tmp_path, shape, horizon, extra, lag, other_sheet, chained,
                                                            blocked):
    """Columns that read a spilled result (=IF(ISNUMBER(B2),B2*SQRT(12),"") beside a spilled
    series, as the templates' Volatility and Forecast sheets do) are batched once every spill is
    evaluated; each cell, including rows below the spill (empty cells), a column that reads that
    column (chained) and a spill blocked by a typed cell (#SPILL!), equals the engine's cell-by-cell
    value (reference: the engine on each cell alone, every batch switched off)."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Calc"
    src = wb.create_sheet("Fore cast") if other_sheet else ws
    rng = np.random.default_rng(horizon * 10 + extra)
    for i, v in enumerate(rng.standard_normal(60)):  # returns in column A, a typed ARCH(1) in C1:D4
        ws.cell(i + 1, 1, float(v))
    for i, (k, v) in enumerate((("model", "ARCH(1)"), ("mu", 0.05), ("omega", 0.4), ("alpha1", 0.3))):
        ws.cell(i + 1, 3, k)
        ws.cell(i + 1, 4, v)
    # the spill: E2 down ``horizon`` rows (in the other sheet, column B)
    col = 2 if other_sheet else 5
    letter = "B" if other_sheet else "E"
    src.cell(2, col, "=VOLFORECAST(Calc!A1:A60,Calc!C1:D4,%d,\"vol\")" % horizon)
    if blocked:
        src.cell(5, col, 7.5)  # a typed cell in the spill's way
    prefix = "'Fore cast'!" if other_sheet else ""
    for r in range(3, horizon + 3 + extra):
        a, b = f"{prefix}{letter}{r}", f"{prefix}{letter}{r - 1 - lag}"
        ws.cell(r, 7, shape.format(a=a, b=b))
        if chained:
            ws.cell(r, 8, f'=IF(ISNUMBER(G{r}),G{r}*2,"")')
    path = tmp_path / "spill.xlsx"
    wb.save(path)
    fast = Workbook(path)
    fast.evaluate_all()
    single = Workbook(path)
    single._batch_elementwise = lambda *a, **k: None  # every cell through the engine on its own
    single.evaluate_all()
    assert fast.values.keys() == single.values.keys()
    for key, v in single.values.items():
        assert _same(fast.values[key], v), (key, shape, fast.values[key], v)


def test_column_comparisons_on_15_significant_digits(tmp_path):
    """A column of comparisons between numbers answered by the NumPy route compares as the
    engine does, on 15 significant digits (0.1+0.2 = 0.3 is TRUE, Excel from memory; LibreOffice
    gives TRUE), and the engine cell by cell agrees."""
    wb = openpyxl.Workbook()
    ws = wb.active
    for r in range(1, 21):
        ws.cell(r, 1, 0.1 * r)
        ws.cell(r, 2, 0.2 * r)
        ws.cell(r, 3, float(f"{0.3 * r:.12g}"))
        ws.cell(r, 5, f"=A{r}+B{r}=C{r}")
        ws.cell(r, 6, f"=IF(A{r}+B{r}>=C{r},1,0)")
        ws.cell(r, 7, f"=A{r}+B{r}<C{r}")
    path = tmp_path / "cmp.xlsx"
    wb.save(path)
    answered, fast, single = _evaluate_both(path)
    assert len(answered) == 60  # the NumPy route took every row
    for r in range(1, 21):
        assert answered[("Sheet", r, 5)] is True
        assert answered[("Sheet", r, 6)] == 1
        assert answered[("Sheet", r, 7)] is False
    for key, v in answered.items():
        assert _same(v, single.values[key]), key
