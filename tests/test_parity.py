"""Parity of the headless recalculation with direct calls, on generated layouts.

Hypothesis writes workbooks an analyst might: our functions and standard formulas placed
anywhere, stacked and side by side, on the data's sheet or another; the returns read through a
range that reaches past the data, an absolute range, a whole column, a workbook-scope or a
sheet-scope defined name; quoted sheet names; spill references in each spelling Excel and
LibreOffice save (``F3#``, ``_xlfn.ANCHORARRAY(F3)``, ``_xlfn.anchorarray(F3)``), sheet-qualified
or not; function names in any case; calls nested in ours and in standard functions.  Each
workbook is recalculated and every cell of every result compared with a direct call of the
worksheet layer on the same numbers (the worksheet layer is the reference: what Excel with the
add-in computes, by DESIGN.md).  The series are seeded simulations of the fitted-model simulator.
"""

import itertools
import math
import os
import tempfile
from pathlib import Path

import numpy as np
import openpyxl
from hypothesis import HealthCheck, given, settings, strategies as st
from openpyxl.workbook.defined_name import DefinedName

from xlfuncs import VOLFIT, VOLFORECAST, VOLLOGLIK, VOLRISK, VOLSERIES
from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.simulate import simulate
from xlfuncs.headless.recalc import Workbook, cell_name, recalc

SHEETS = ["Data", "My Data", "Rets'1", "x"]
CALC_SHEETS = ["Model", "Model sheet", "O'Neil calc"]
MODELS = ["GARCH(1,1)", "ARCH(1)", "GJR-GARCH(1,1)", "CONST", "AR(1)-GARCH(1,1)"]
KINDS = ["fit", "forecast", "nested", "index", "nested_index", "sum", "series", "loglik", "risk"]


def _q(sheet):
    return "'" + sheet.replace("'", "''") + "'"


def _case(name, how):
    return {"upper": name, "lower": name.lower(), "mixed": name[:4].capitalize() + name[4:].lower()}[how]


@st.composite
def layouts(draw):
    return dict(
        sheet=draw(st.sampled_from(SHEETS)),
        calc=draw(st.sampled_from(CALC_SHEETS + ["same"])),
        n=draw(st.integers(40, 120)),
        col=draw(st.integers(1, 4)),
        top=draw(st.integers(1, 6)),
        reach=draw(st.integers(0, 30)),
        spelling=draw(st.sampled_from(["range", "abs", "wholecol", "wbname", "sheetname"])),
        model=draw(st.sampled_from(MODELS)),
        dist=draw(st.sampled_from(["normal", "t"])),
        kinds=draw(st.lists(st.sampled_from(KINDS), min_size=1, max_size=5)),
        placement=draw(st.sampled_from(["stack", "side", "mixed"])),
        case=draw(st.sampled_from(["upper", "lower", "mixed"])),
        spill=draw(st.sampled_from(["hash", "anchorarray", "anchorarray_lower"])),
        qualify=draw(st.booleans()),
        seed=draw(st.integers(0, 10_000)),
        jitter=draw(st.lists(st.integers(0, 3), min_size=10, max_size=10)),
    )


def _returns(n, seed):
    r = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.05, 0.1, 0.1, 0.8]), n, 1,
                 rng=np.random.default_rng(seed))[:, 0]
    return [float(f"{x:.10g}") for x in r]  # as data arrive: a file stores them exactly


def _shape(rows):
    return len(rows), max(len(r) for r in rows)


def _build(lay):
    """(workbook, blocks): blocks are (sheet, row, col, expected rows) to compare."""
    data = _returns(lay["n"], lay["seed"])
    sheet, col, top, n = lay["sheet"], lay["col"], lay["top"], lay["n"]
    calc = sheet if lay["calc"] == "same" else lay["calc"]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = sheet
    for i, v in enumerate(data):
        ws.cell(top + i, col, v)
    cs = ws if calc == sheet else wb.create_sheet(calc)
    letter = openpyxl.utils.get_column_letter(col)
    bottom = top + n - 1 + lay["reach"]
    spelling = lay["spelling"]
    if spelling == "wholecol" and calc == sheet:
        spelling = "range"  # a whole column beside results of ours on its own sheet reaches them
    if spelling == "range":
        ref = f"{_q(sheet)}!{letter}{top}:{letter}{bottom}"
        cells = [[v] for v in data] + [[None]] * lay["reach"]
    elif spelling == "abs":
        ref = f"{_q(sheet)}!${letter}${top}:${letter}${bottom}"
        cells = [[v] for v in data] + [[None]] * lay["reach"]
    elif spelling == "wholecol":
        ref = f"{_q(sheet)}!{letter}:{letter}"
        cells = [[None]] * (top - 1) + [[v] for v in data]
    else:
        target = f"{_q(sheet)}!${letter}${top}:${letter}${bottom}"
        cells = [[v] for v in data] + [[None]] * lay["reach"]
        if spelling == "wbname":
            wb.defined_names["Rets"] = DefinedName("Rets", attr_text=target)
            ref = "rets"  # names are case-insensitive
        else:
            cs.defined_names["MyReturns"] = DefinedName("MyReturns", attr_text=target)
            ref = "MyReturns"

    def fn(name):
        return _case(name, lay["case"])

    def spill_ref(r, c):
        a = cell_name(r, c)
        if lay["qualify"]:
            a = f"{_q(calc)}!{a}"
        return {"hash": f"{a}#", "anchorarray": f"_xlfn.ANCHORARRAY({a})",
                "anchorarray_lower": f"_xlfn.anchorarray({a})"}[lay["spill"]]

    fit_args = f'"{lay["model"]}", "{lay["dist"]}"'
    fit = VOLFIT(cells, lay["model"], lay["dist"])
    if len(fit) == 1:  # the generator's data or model made no fit: nothing to compare
        return None
    fc = VOLFORECAST(cells, fit, 6, "vol")
    # where results go: right of the data when on its sheet
    left = col + 2 if calc == sheet else 1
    row, ccol = 1, left
    jit = itertools.cycle(lay["jitter"])
    blocks, fit_at, fc_at, taken = [], None, None, []
    for kind in lay["kinds"]:
        if kind == "fit" or (fit_at is None and kind in ("forecast", "index", "sum", "series", "loglik", "risk")):
            formula, expected = f"={fn('VOLFIT')}({ref}, {fit_args})", fit
            kind = "fit"
        elif kind == "forecast" or (kind == "sum" and fc_at is None):
            formula, expected = f'={fn("VOLFORECAST")}({ref}, {spill_ref(*fit_at)}, 6, "vol")', fc
            kind = "forecast"
        elif kind == "nested":
            formula = f'={fn("VOLFORECAST")}({ref}, {fn("VOLFIT")}({ref}, {fit_args}), 4, "cumvar")'
            expected = VOLFORECAST(cells, fit, 4, "cumvar")
        elif kind == "index":
            k = 5 + next(jit) % 2  # parameter rows follow the header, model, dist and options
            formula, expected = f"=INDEX({spill_ref(*fit_at)}, {k}, 2)", [[fit[k - 1][1]]]
        elif kind == "nested_index":
            formula, expected = f"=INDEX({fn('VOLFIT')}({ref}, {fit_args}), 5, 2)*2", [[fit[4][1] * 2]]
        elif kind == "sum":
            formula, expected = f"=SUM({spill_ref(*fc_at)})", [[sum(r[0] for r in fc)]]
        elif kind == "series":
            formula, expected = f'={fn("VOLSERIES")}({ref}, {spill_ref(*fit_at)}, "vol")', VOLSERIES(cells, fit, "vol")
        elif kind == "loglik":
            formula, expected = f"={fn('VOLLOGLIK')}({ref}, {spill_ref(*fit_at)})", VOLLOGLIK(cells, fit)
        else:
            formula, expected = f"={fn('VOLRISK')}({ref}, {spill_ref(*fit_at)}, 0.99, 1)", VOLRISK(cells, fit, 0.99, 1)
        h, w = _shape(expected)
        while any(row < r2 and r1 < row + h and ccol < c2 and c1 < ccol + w for r1, c1, r2, c2 in taken):
            row += 1  # never on top of an earlier result
        taken.append((row, ccol, row + h, ccol + w))
        cs.cell(row, ccol, formula)
        blocks.append((calc, row, ccol, expected, formula))
        if kind == "fit":
            fit_at = fit_at or (row, ccol)
        if kind == "forecast":
            fc_at = fc_at or (row, ccol)
        gap = 1 + next(jit)
        place = lay["placement"] if lay["placement"] != "mixed" else ("stack" if next(jit) % 2 else "side")
        if place == "stack":
            row += h + gap
        else:
            ccol += w + gap
    return wb, blocks


def _same(got, want, where):
    if isinstance(want, float):
        if isinstance(got, int) and not isinstance(got, bool):
            got = float(got)  # a file stores 0.0 as 0
        assert isinstance(got, float) and math.isclose(got, want, rel_tol=1e-12, abs_tol=1e-300), (where, got, want)
    else:
        assert got == want, (where, got, want)


def _overlapping(blocks):
    cells = set()
    for sheet, r, c, expected, _ in blocks:
        h, w = _shape(expected)
        region = {(sheet, r + i, c + j) for i in range(h) for j in range(w)}
        if region & cells:
            return True
        cells |= region
    return False


@given(lay=layouts())
@settings(max_examples=int(os.environ.get("VOLCAST_PARITY_EXAMPLES", "60")), deadline=None, suppress_health_check=[HealthCheck.too_slow])
def test_generated_layouts_equal_direct_calls(lay):
    built = _build(lay)
    if built is None:
        return
    assert not _overlapping(built[1])
    wb, blocks = built
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "g.xlsx"
        wb.save(path)
        book = Workbook(path).evaluate_all()
        for sheet, r, c, expected, formula in blocks:
            for i, row in enumerate(expected):
                for j, want in enumerate(row):
                    _same(book.values.get((sheet, r + i, c + j)), want, f"{sheet}!{cell_name(r + i, c + j)} {formula}")
        # what the file stores is what was computed
        out, report = recalc(path, Path(d) / "out.xlsx")
        stored = openpyxl.load_workbook(out, data_only=True)
        for sheet, r, c, expected, formula in blocks:
            for i, row in enumerate(expected):
                for j, want in enumerate(row):
                    got = stored[sheet].cell(r + i, c + j).value
                    _same(got, want, f"stored {sheet}!{cell_name(r + i, c + j)} {formula}")
        assert report.error_cells == [], report.error_cells
