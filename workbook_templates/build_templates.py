"""Build the template workbooks (openpyxl).  Run from the repository root:

    python workbook_templates/build_templates.py

Writes ``monthly_variance.xlsx`` and ``daily_variance.xlsx`` beside this script.

The templates carry the contract of DESIGN.md ("Templates"): workbook-scope defined names for the
returns range, the fit table's anchor and every headline figure (see ``CONTRACT`` in
``xlfuncs/headless/contract.py``), and the History header.  Every formula of ours reads the
returns through the name ``returns``, so ``volcast refresh`` grows the data by extending the
return formulas and that one name; the Summary sheet's ``data_check`` cell says, in Excel too,
when levels lie below the return formulas and would be left out of the fit.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

from openpyxl import Workbook
from openpyxl.chart import LineChart, Reference
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.workbook.defined_name import DefinedName

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
from xlfuncs.headless.contract import HISTORY_HEADER, return_formula  # noqa: E402
from xlfuncs.headless.xlsxpost import store_values  # noqa: E402

# steps: how many periods make a month and a year of the headline figures
MONTHLY = dict(name="Monthly", last_row=1200, periods=12, horizon=12, month=1, year=12, unit="month",
               model="AR(1)-GJR-GARCH(1,1)", note="12 for monthly data")
# daily data: a month is the next 21 trading days, a year 252 (common practice)
DAILY = dict(name="Daily", last_row=6000, periods=252, horizon=252, month=21, year=252, unit="trading day",
             model="GJR-GARCH(1,1)", note="252 for daily data")

TITLE = Font(bold=True, size=14, color="1F3A5F")
HEAD = Font(bold=True, color="FFFFFF")
HEAD_FILL = PatternFill("solid", fgColor="1F3A5F")
INPUT_FILL = PatternFill("solid", fgColor="FFF2CC")
NOTE = Font(italic=True, color="555555")
WARN = Font(bold=True, color="9C0006")

CAUTION = (
    "Caution: every figure in this workbook is a model estimate, not investment advice and not a "
    "guarantee of future risk. Forecasts and Value-at-Risk depend on the model, the data and the sample, "
    "and can be badly wrong in a crisis. Validate any use under your firm's model-risk policy and the "
    "regulation that applies to you."
)


def spill(ref: str) -> str:
    """A spill reference as Excel stores it in a file (typed as Model!$A$3# in Excel)."""
    return f"_xlfn.ANCHORARRAY({ref})"


def _header(ws, row, labels, col=1):
    for j, text in enumerate(labels):
        c = ws.cell(row, col + j, text)
        c.font, c.fill = HEAD, HEAD_FILL


def _name(wb, name, ref):
    wb.defined_names[name] = DefinedName(name, attr_text=ref)


def build(path: Path, cfg: dict) -> Path:
    N = cfg["last_row"]
    unit = cfg["unit"]
    month, year = cfg["month"], cfg["year"]
    FIT = spill("Model!$A$3")
    wb = Workbook()

    # ------------------------------------------------------------------ Summary (first)
    summ = wb.active
    summ.title = "Summary"
    summ["A1"] = f"{cfg['name']} volatility summary"
    summ["A1"].font = TITLE
    month_words = "month" if month == 1 else f"month ({month} {unit}s)"
    year_words = "12 months" if year == 12 else f"12 months ({year} {unit}s)"
    rows = [
        ("last_date", "as of (date of the last return)", "=MAX(Data!$A$2:$A$%d)" % N, "yyyy-mm-dd", ""),
        (None, "model", f'=VLOOKUP("model", {FIT}, 2, FALSE)', None, ""),
        (None, "distribution", f'=VLOOKUP("dist", {FIT}, 2, FALSE)', None, ""),
        ("nobs", "returns in the fit", f'=VLOOKUP("nobs", {FIT}, 2, FALSE)', "0", ""),
        ("converged", "estimation converged", f'=VLOOKUP("converged", {FIT}, 2, FALSE)', '"TRUE";"TRUE";"FALSE"',
         "must be TRUE; otherwise see the Model sheet"),
        ("vol_1m", f"volatility of the next {month_words}, %", None, "0.00",
         "standard deviation of the cumulative log return, not annualised"),
        ("vol_1m_ann", "  the same, annualised, %", None, "0.00", f"x sqrt({cfg['periods']})" if month == 1 else f"x sqrt({cfg['periods']}/{month})"),
        ("vol_12m", f"volatility of the next {year_words}, %", None, "0.00",
         "standard deviation of the cumulative log return"),
        ("var_level", "VaR confidence level", "=Inputs!$B$7", "0.0%", "set on the Inputs sheet"),
        ("var_1m", f"one-{month_words} VaR, loss in % of value", f'=VLOOKUP("VaR_value", {spill("Forecast!$I$3")}, 2, FALSE)',
         "0.00", "loss of the position's value exceeded with probability 1 - level"),
        ("es_1m", f"one-{month_words} expected shortfall, % of value",
         f'=VLOOKUP("ES_value", {spill("Forecast!$I$3")}, 2, FALSE)', "0.00", "mean loss beyond the VaR, % of value"),
        ("data_check", "data check", None, None, ""),
    ]
    cum = spill("Forecast!$R$3")
    computed = {
        "vol_1m": f"=SQRT(INDEX({cum}, {month}))",
        "vol_1m_ann": f"=vol_1m*SQRT(Inputs!$B$8/{month})",
        "vol_12m": f"=SQRT(INDEX({cum}, {year}))",
        "data_check": (
            f'=IF(COUNT(Data!$B:$B)-1>COUNT(returns),"WARNING: "&(COUNT(Data!$B:$B)-1-COUNT(returns))'
            f'&" level(s) on the Data sheet have no return in the fit: copy the return formula of column C down '
            f'and extend the name returns (volcast refresh does both)","OK: all "&COUNT(returns)&" returns are in the fit")'
        ),
    }
    for i, (name, label, formula, fmt, note) in enumerate(rows, start=3):
        summ.cell(i, 1, label)
        c = summ.cell(i, 2, formula if formula else computed[name])
        if fmt:
            c.number_format = fmt
        c.alignment = Alignment(horizontal="right") if name != "data_check" else Alignment(horizontal="left")
        if note:
            summ.cell(i, 3, note).font = NOTE
        if name:
            _name(wb, name, f"Summary!$B${i}")
    summ.cell(len(rows) + 4, 1, CAUTION).font = WARN
    summ.cell(len(rows) + 4, 1).alignment = Alignment(wrap_text=True, vertical="top")
    summ.merge_cells(start_row=len(rows) + 4, start_column=1, end_row=len(rows) + 4, end_column=3)
    summ.row_dimensions[len(rows) + 4].height = 64
    summ.column_dimensions["A"].width = 44
    summ.column_dimensions["B"].width = 24
    summ.column_dimensions["C"].width = 60
    summ.page_setup.orientation = "landscape"
    summ.page_setup.fitToWidth, summ.page_setup.fitToHeight = 1, 1
    summ.sheet_properties.pageSetUpPr.fitToPage = True

    # ------------------------------------------------------------------ About
    about = wb.create_sheet("About")
    about["A1"] = f"{cfg['name']} variance forecast"
    about["A1"].font = TITLE
    lines = [
        f"Purpose: estimate an ARCH/GARCH-family model on {cfg['name'].lower()} returns, forecast the variance for the next",
        "month and out to a year, and turn it into volatility, Value-at-Risk and expected shortfall.",
        "",
        "First time: load your whole history of dates and levels (one row per %s), either by pasting it into the" % unit,
        "Data sheet (columns A and B from row 2), or headless: volcast refresh THIS_TEMPLATE.xlsx --data history.csv -o book.xlsx",
        "Each month after that:",
        "1. Add the new dates and levels under the last row of the Data sheet, or: volcast refresh book.xlsx --data new.csv -o next.xlsx",
        "2. Recalculate: in Excel with the Volcast add-in (F9), or headless: volcast recalc BOOK.xlsx -o OUT.xlsx.",
        "3. Read the Summary sheet: its data check must say OK and converged must be TRUE.",
        "4. Check the Model sheet's diagnostics and the comparison of candidates; the Forecast sheet has the term structure.",
        "5. volcast refresh also appends a row to the History sheet (estimates, standard errors, headline figures).",
        "",
        "Returns (column C) are log returns in percent: 100 x ln(level / previous level). VOLRISK reports VaR and ES",
        "both in those log-return units (rows VaR, ES) and as a loss in % of the position's value (rows VaR_value,",
        "ES_value); the Summary's VaR and ES are the % of value figures.",
        "Model inputs are the yellow cells on the Inputs sheet.",
        "",
        CAUTION,
    ]
    for i, text in enumerate(lines, start=3):
        about.cell(i, 1, text)
    about.cell(3 + len(lines) - 1, 1).font = WARN
    about.column_dimensions["A"].width = 120

    # ------------------------------------------------------------------ Data
    data = wb.create_sheet("Data")
    _header(data, 1, ["date", "level", "return (log, %)"])
    for r in range(3, N + 1):
        data.cell(r, 3, return_formula(r)).number_format = "0.000"
    data.column_dimensions["A"].width = 12
    data.column_dimensions["B"].width = 14
    data.column_dimensions["C"].width = 16
    data.freeze_panes = "A2"
    _name(wb, "returns", f"Data!$C$2:$C${N}")

    # ------------------------------------------------------------------ Inputs
    inp = wb.create_sheet("Inputs")
    inp["A1"] = "Model inputs (yellow cells)"
    inp["A1"].font = TITLE
    rows = [
        ("model", cfg["model"], "model string, e.g. GARCH(1,1)"),
        ("distribution", "t", "normal, t, skewt or ged"),
        ("more options", None, "optional, e.g. se=hessian; nu=8"),
        (f"forecast horizon ({unit}s)", cfg["horizon"], "rows of the Forecast table, 1 to 600"),
        ("VaR level", 0.99, "e.g. 0.99"),
        ("periods per year", cfg["periods"], cfg["note"]),
        ("returns are", "log100", "log returns in percent, as column C of the Data sheet computes them"),
    ]
    for i, (label, value, hint) in enumerate(rows, start=3):
        inp.cell(i, 1, label)
        c = inp.cell(i, 2, value)
        if label != "returns are":
            c.fill = INPUT_FILL
        inp.cell(i, 3, hint).font = NOTE
    inp["B7"].number_format = "0.0%"
    inp["A10"] = "options used"
    inp["B10"] = '="periods="&$B$8&"; returns="&$B$9&IF(ISBLANK($B$5),"","; "&$B$5)'
    inp["C10"] = "what the fit is given (computed)"
    inp["C10"].font = NOTE
    inp.column_dimensions["A"].width = 28
    inp.column_dimensions["B"].width = 30
    inp.column_dimensions["C"].width = 62
    OPTS = "Inputs!$B$10"

    # ------------------------------------------------------------------ Model
    model = wb.create_sheet("Model")
    model["A1"] = "Fit table"
    model["A1"].font = TITLE
    model["A3"] = f"=VOLFIT(returns, Inputs!$B$3, Inputs!$B$4, {OPTS})"
    _name(wb, "fit", "Model!$A$3")
    model["H1"] = "Diagnostics of the standardised residuals"
    model["H1"].font = TITLE
    model["H3"] = f"=VOLTESTS(returns, {FIT})"
    model["H14"] = "Candidate models (ranked by BIC)"
    model["H14"].font = TITLE
    # EWMA is the practitioner's baseline the fitted models are compared with
    model["H16"] = f'=VOLCOMPARE(returns, "EWMA, GARCH(1,1), GJR-GARCH(1,1), EGARCH(1,1)", "normal, t", {OPTS})'
    for col, w in zip("ABCDEFGH", (16, 22, 12, 10, 12, 2, 2, 22)):
        model.column_dimensions[col].width = w

    # ------------------------------------------------------------------ Forecast
    fc = wb.create_sheet("Forecast")
    fc["A1"] = "Variance forecast (log returns in percent)"
    fc["A1"].font = TITLE
    fc["A3"] = f'=VOLFORECAST(returns, {FIT}, Inputs!$B$6, "table")'
    _header(fc, 2, ["annualised vol (%)", "cumulative vol (%)"], col=6)
    last_fc = 3 + max(2 * cfg["horizon"], 60)
    for r in range(4, last_fc + 1):
        fc.cell(r, 6, f'=IF(ISNUMBER(D{r}),D{r}*SQRT(Inputs!$B$8),"")').number_format = "0.00"
        fc.cell(r, 7, f'=IF(ISNUMBER(E{r}),SQRT(E{r}),"")').number_format = "0.00"
    fc["I1"] = "VaR and ES: rows VaR, ES in log-return %; rows VaR_value, ES_value as loss in % of value"
    fc["I1"].font = TITLE
    for j, (months, steps) in enumerate(zip((1, 3, 12), (month, 3 * month, year))):
        col = 9 + 3 * j
        label = f"{months} month{'s' if months > 1 else ''}" + (f" ({steps} {unit}s)" if steps != months else "")
        fc.cell(2, col, label).font = Font(bold=True)
        fc.cell(3, col, f"=VOLRISK(returns, {FIT}, Inputs!$B$7, {steps})")
    fc.cell(2, 18, f"cumulative variance, {unit}s 1..{year} (%^2)").font = Font(bold=True)
    fc.cell(3, 18, f'=VOLFORECAST(returns, {FIT}, {year}, "cumvar")')
    fc.column_dimensions["R"].width = 16
    fc.cell(16, 9, CAUTION).font = NOTE

    # ------------------------------------------------------------------ Volatility
    vol = wb.create_sheet("Volatility")
    vol["A1"] = f"in-sample conditional volatility (% per {unit})"
    vol["A1"].font = HEAD
    vol["A1"].fill = HEAD_FILL
    vol["A2"] = f'=VOLSERIES(returns, {FIT}, "vol")'

    # native charts: the history of conditional volatility, and the forecast term structure
    chart = LineChart()
    chart.title = f"Conditional volatility (% per {unit})"
    chart.y_axis.title = "%"
    chart.x_axis.number_format = "yyyy"
    chart.add_data(Reference(vol, min_col=1, min_row=1, max_row=N), titles_from_data=True)
    chart.set_categories(Reference(data, min_col=1, min_row=2, max_row=N))
    chart.width, chart.height = 24, 9
    vol.add_chart(chart, "C2")
    term = LineChart()
    term.title = "Forecast term structure: annualised volatility (%)"
    term.x_axis.title = f"{unit}s ahead"
    term.add_data(Reference(fc, min_col=6, min_row=2, max_row=3 + cfg["horizon"]), titles_from_data=True)
    term.set_categories(Reference(fc, min_col=1, min_row=4, max_row=3 + cfg["horizon"]))
    term.width, term.height = 16, 8
    fc.add_chart(term, "I18")

    # ------------------------------------------------------------------ History
    hist = wb.create_sheet("History")
    # one row per refresh (volcast refresh); parameter and se_ columns are added by name
    _header(hist, 1, HISTORY_HEADER)
    hist.column_dimensions["A"].width = 18
    hist.column_dimensions["B"].width = 12

    # the formulas of ours spill (Excel 365 dynamic arrays): mark them so in the file
    anchors = {(ws.title, c.coordinate): c.coordinate for ws in wb.worksheets for row in ws.iter_rows()
               for c in row if isinstance(c.value, str) and c.value.startswith("=VOL")}
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(suffix=".xlsx", dir=path.parent, prefix=".build-")
    os.close(fd)
    try:
        wb.save(tmp)
        store_values(tmp, path, {}, anchors)
    finally:
        os.remove(tmp)
    return path


def main():
    print(build(HERE / "monthly_variance.xlsx", MONTHLY))
    print(build(HERE / "daily_variance.xlsx", DAILY))


if __name__ == "__main__":
    main()
