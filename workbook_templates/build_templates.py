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
from openpyxl.chart.text import RichText
from openpyxl.drawing.text import CharacterProperties, Paragraph, ParagraphProperties, RichTextProperties
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.workbook.defined_name import DefinedName

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
from xlfuncs.headless.contract import HISTORY_HEADER, return_formula  # noqa: E402
from xlfuncs.headless.layout import BOOL_FORMAT, DATA_PRINT_ROWS  # noqa: E402
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


PCT = '0.00" %"'  # a figure already in percent units (5.24 means 5.24 %)
DEC4 = "0.0000"
PVAL = '[<0.0001]"<0.0001";0.0000'
DATE = "yyyy-mm-dd"
BOOL = BOOL_FORMAT  # a TRUE/FALSE cell shows as such in every application (not 1/0)


def _fmt(ws, rng: str, fmt: str):
    for row in ws[rng]:
        for c in row:
            c.number_format = fmt


def _widths(ws, widths: dict):
    for col, w in widths.items():
        ws.column_dimensions[col].width = w


def _page(ws, area: str, landscape: bool = True, tall: int = 1, titles: str | None = None):
    """Print setup: A4, fitted to one page wide (and ``tall`` pages high, 0 for as many as needed),
    over ``area`` only."""
    ws.page_setup.paperSize = ws.PAPERSIZE_A4
    ws.page_setup.orientation = "landscape" if landscape else "portrait"
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.page_setup.fitToWidth, ws.page_setup.fitToHeight = 1, tall
    ws.page_margins.left = ws.page_margins.right = 0.5
    ws.page_margins.top = ws.page_margins.bottom = 0.6
    ws.print_area = area
    if titles:
        ws.print_title_rows = titles
    ws.print_options.gridLines = False


def _line_chart(title: str, x_title: str, y_title: str, skip: int = 1):
    """A line chart with titled axes; ``skip``: label (and tick) every skip-th category, e.g. one
    date a year.  A category axis, not a date axis: LibreOffice writes a date axis's cache as
    text, which openpyxl (and so a later refresh) cannot read back."""
    chart = LineChart()
    chart.title = title
    chart.y_axis.title = y_title
    chart.x_axis.title = x_title
    chart.y_axis.number_format = "0"
    if skip > 1:
        chart.x_axis.number_format = "yyyy-mm"
        chart.x_axis.tickLblSkip = skip  # Excel honours it; LibreOffice labels every year, so
        chart.x_axis.tickMarkSkip = skip  # the labels are also turned 45 degrees to stay apart
        chart.x_axis.txPr = RichText(bodyPr=RichTextProperties(rot=-2700000, vert="horz"),
                                     p=[Paragraph(pPr=ParagraphProperties(defRPr=CharacterProperties(sz=800)),
                                                  endParaRPr=CharacterProperties())])
    chart.x_axis.delete = False  # openpyxl 3.1 leaves axes hidden unless told
    chart.y_axis.delete = False
    chart.legend = None
    return chart


def build(path: Path, cfg: dict) -> Path:
    N = cfg["last_row"]
    unit = cfg["unit"]
    month, year = cfg["month"], cfg["year"]
    FIT = spill("Model!$A$3")
    DIAG = spill("Model!$G$3")
    STAB = spill("Model!$G$16")
    RISK = spill("Forecast!$I$3")
    wb = Workbook()

    # ------------------------------------------------------------------ Summary (first)
    summ = wb.active
    summ.title = "Summary"
    summ["A1"] = f"{cfg['name']} volatility summary"
    summ["A1"].font = TITLE
    summ["A2"] = ("Model estimates, not advice. Volatility in % of the log return; VaR and expected shortfall as a "
                  "loss in % of the position's value.")
    summ["A2"].font = NOTE
    _header(summ, 3, ["figure", "value", "what it is"])
    month_words = "month" if month == 1 else f"month ({month} {unit}s)"
    year_words = "12 months" if year == 12 else f"12 months ({year} {unit}s)"
    ann = f"x sqrt({cfg['periods']})" if month == 1 else f"x sqrt({cfg['periods']}/{month})"
    rows = [
        ("last_date", "as of (date of the last return)", "=MAX(Data!$A$2:$A$%d)" % N, DATE, ""),
        (None, "model", f'=VLOOKUP("model", {FIT}, 2, FALSE)', None, "set on the Inputs sheet"),
        (None, "distribution of the shocks", f'=VLOOKUP("dist", {FIT}, 2, FALSE)', None, ""),
        ("nobs", "returns in the fit", f'=VLOOKUP("nobs", {FIT}, 2, FALSE)', "0", ""),
        ("converged", "estimation converged", f'=VLOOKUP("converged", {FIT}, 2, FALSE)', BOOL,
         "must be TRUE; otherwise see the Model sheet"),
        ("vol_1m", f"volatility of the next {month_words}", None, PCT,
         "standard deviation of the cumulative log return, not annualised"),
        ("vol_1m_ann", "  the same, annualised", None, PCT, ann),
        ("vol_12m", f"volatility of the next {year_words}", None, PCT,
         "standard deviation of the cumulative 12-month log return"),
        ("var_level", "VaR confidence level", "=Inputs!$B$7", "0.0%", "set on the Inputs sheet"),
        ("var_1m", f"one-{month_words} VaR, % of value", f'=VLOOKUP("VaR_value", {RISK}, 2, FALSE)', PCT,
         "loss of the position's value exceeded with probability 1 - level"),
        ("es_1m", f"one-{month_words} expected shortfall, % of value", f'=VLOOKUP("ES_value", {RISK}, 2, FALSE)', PCT,
         "mean loss beyond the VaR, % of value"),
        ("data_check", "data check", None, None, ""),
    ]
    cum = spill("Forecast!$R$3")
    computed = {
        "vol_1m": f"=SQRT(INDEX({cum}, {month}))",
        "vol_1m_ann": f"=vol_1m*SQRT(Inputs!$B$8/{month})",
        "vol_12m": f"=SQRT(INDEX({cum}, {year}))",
        "data_check": (
            f'=IF(COUNT(Data!$A:$A)<COUNT(Data!$B:$B),"WARNING: "&(COUNT(Data!$B:$B)-COUNT(Data!$A:$A))'
            f'&" level(s) on the Data sheet have no date (a blank, or a date typed as text): the as-of date '
            f'would be stale; give each level its date",'
            f'IF(COUNT(Data!$B:$B)-1>COUNT(returns),"WARNING: "&(COUNT(Data!$B:$B)-1-COUNT(returns))'
            f'&" level(s) on the Data sheet have no return in the fit: copy the return formula of column C down '
            f'and extend the name returns (volcast refresh does both)","OK: all "&COUNT(returns)&" returns are in the fit"))'
        ),
    }
    for i, (name, label, formula, fmt, note) in enumerate(rows, start=4):
        summ.cell(i, 1, label)
        c = summ.cell(i, 2, formula if formula else computed[name])
        if fmt:
            c.number_format = fmt
        c.alignment = Alignment(horizontal="right") if name != "data_check" else Alignment(horizontal="left")
        if note:
            summ.cell(i, 3, note).font = NOTE
            summ.cell(i, 3).alignment = Alignment(horizontal="left", indent=1)
        if name:
            _name(wb, name, f"Summary!$B${i}")
    r = 4 + len(rows) + 1
    summ.cell(r, 1, "Diagnostics of the fit (details on the Model sheet)").font = Font(bold=True, color="1F3A5F")
    n_tests = 8
    p1, p2 = r + 3, r + 2 + n_tests
    summ.cell(r + 1, 1, "verdict")
    v = summ.cell(r + 1, 2, f'=IF(COUNT(B{p1}:B{p2})=0,"no test could be computed",IF(COUNTIF(B{p1}:B{p2},"<0.05")=0,'
                            f'"no test rejects at 5%",COUNTIF(B{p1}:B{p2},"<0.05")&" of "&COUNT(B{p1}:B{p2})'
                            f'&" tests reject at 5%"))')
    v.alignment = Alignment(horizontal="right")
    summ.cell(r + 1, 3, "a rejection is a reading, not a failure: read what each one means below").font = NOTE
    summ.cell(r + 1, 3).alignment = Alignment(horizontal="left", indent=1)
    _header(summ, r + 2, ["test", "p-value", "reading"])
    for k in range(n_tests):
        i = r + 3 + k
        summ.cell(i, 1, f'=IFERROR(""&INDEX({DIAG}, {k + 2}, 1), "")')
        c = summ.cell(i, 2, f'=IFERROR(IF(ISNUMBER(INDEX({DIAG}, {k + 2}, 4)), INDEX({DIAG}, {k + 2}, 4), ""), "")')
        c.number_format = PVAL
        c.alignment = Alignment(horizontal="right")
        summ.cell(i, 3, f'=IFERROR(""&INDEX({DIAG}, {k + 2}, 5), "")').alignment = Alignment(horizontal="left", indent=1)
    i = p2 + 1
    summ.cell(i, 1, "parameter stability (Nyblom, joint)")
    c = summ.cell(i, 2, f'=IFERROR(VLOOKUP("joint", {STAB}, 2, FALSE), "")')
    c.number_format, c.alignment = "0.000", Alignment(horizontal="right")
    summ.cell(i, 3, f'=IFERROR("5% critical value "&FIXED(VLOOKUP("joint", {STAB}, 3, FALSE), 2)&": "'
                    f'&VLOOKUP("joint", {STAB}, 5, FALSE), "")').alignment = Alignment(horizontal="left", indent=1)
    last = i + 2
    summ.cell(last, 1, CAUTION).font = WARN
    summ.cell(last, 1).alignment = Alignment(wrap_text=True, vertical="top")
    summ.merge_cells(start_row=last, start_column=1, end_row=last, end_column=3)
    summ.row_dimensions[last].height = 48
    # column A as wide as its longest label (the daily template's "one-month (21 trading days)
    # expected shortfall, % of value"), so that no label is cut off by the value beside it
    _widths(summ, {"A": max(42, max(len(row[1]) for row in rows) + 2), "B": 24, "C": 88})
    _page(summ, f"A1:C{last}")

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
        "4. Check the Model sheet's diagnostics and stability readings, the Compare sheet's candidates; the Forecast sheet",
        "   has the term structure.",
        "5. volcast refresh also appends a row to the History sheet (estimates, standard errors, headline figures).",
        "",
        "Where to open it: this workbook's formulas need the Volcast add-in (Excel). volcast refresh and volcast demo also",
        "write a values copy beside it (NAME-values.xlsx: the same sheets, formulas replaced by their values) for LibreOffice",
        "or Excel without Volcast; refresh always the workbook with formulas, never the values copy.",
        "",
        "Returns (column C) are log returns in percent: 100 x ln(level / previous level). VOLRISK reports VaR and ES",
        "both in those log-return units (rows VaR, ES) and as a loss in % of the position's value (rows VaR_value,",
        "ES_value); the Summary's VaR and ES are the % of value figures.",
        "Model inputs are the yellow cells on the Inputs sheet.",
        "",
    ]
    for i, text in enumerate(lines, start=3):
        about.cell(i, 1, text).alignment = Alignment(wrap_text=True, vertical="top")
    last = 3 + len(lines)
    about.cell(last, 1, CAUTION).font = WARN
    about.cell(last, 1).alignment = Alignment(wrap_text=True, vertical="top")
    about.row_dimensions[last].height = 48
    about.column_dimensions["A"].width = 120
    _page(about, f"A1:A{last}")

    # ------------------------------------------------------------------ Data
    data = wb.create_sheet("Data")
    _header(data, 1, ["date", "level", "return (log, %)"])
    for r in range(3, N + 1):
        data.cell(r, 3, return_formula(r)).number_format = "0.000"
    _fmt(data, f"A2:A{N}", DATE)
    _fmt(data, f"B2:B{N}", "0.00")
    _widths(data, {"A": 12, "B": 14, "C": 17})
    data.freeze_panes = "A2"
    _name(wb, "returns", f"Data!$C$2:$C${N}")
    # the printout shows the header and the latest rows (volcast refresh moves the window)
    _page(data, f"A2:C{1 + DATA_PRINT_ROWS}", landscape=False, titles="1:1")

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
    inp["B6"].number_format = "0"
    inp["B7"].number_format = "0.0%"
    inp["B8"].number_format = "0"
    inp["A10"] = "options used"
    inp["B10"] = '="periods="&$B$8&"; returns="&$B$9&IF(ISBLANK($B$5),"","; "&$B$5)'
    inp["C10"] = "what the fit is given (computed)"
    inp["C10"].font = NOTE
    _widths(inp, {"A": 28, "B": 34, "C": 66})
    _page(inp, "A1:C10")
    OPTS = "Inputs!$B$10"

    # ------------------------------------------------------------------ Model
    model = wb.create_sheet("Model")
    model["A1"] = "Fit table"
    model["A1"].font = TITLE
    model["A2"] = "std_error: the options' kind (robust by default); p_value two-sided"
    model["A2"].font = NOTE
    model["A3"] = f"=VOLFIT(returns, Inputs!$B$3, Inputs!$B$4, {OPTS})"
    _name(wb, "fit", "Model!$A$3")
    _fmt(model, "B4:B45", DEC4)
    _fmt(model, "C4:D45", DEC4)
    _fmt(model, "E4:E45", PVAL)
    model["G1"] = "Diagnostics of the standardised residuals"
    model["G1"].font = TITLE
    model["G3"] = f"=VOLTESTS(returns, {FIT})"
    _fmt(model, "H4:H13", "0.000")
    _fmt(model, "I4:I13", "0")
    _fmt(model, "J4:J13", PVAL)
    model["G14"] = "Parameter stability (Nyblom-Hansen; reject: statistic above the 5% critical value)"
    model["G14"].font = TITLE
    model["G16"] = f"=VOLSTABILITY(returns, {FIT})"
    _fmt(model, "H17:I45", "0.000")
    _fmt(model, "J17:J45", BOOL)
    for r in range(4, 46):
        model.cell(r, 11).alignment = Alignment(horizontal="left", indent=1)
    _widths(model, {"A": 16, "B": 22, "C": 11, "D": 9, "E": 10, "F": 3, "G": 20, "H": 10, "I": 9, "J": 9, "K": 96})
    # two pages, each at its own scale: the fit table, then the diagnostics and stability
    _page(model, "A1:E34")
    model.print_area = ["A1:E34", "G1:K34"]

    # ------------------------------------------------------------------ Compare
    comp = wb.create_sheet("Compare")
    comp["A1"] = "Candidate models (ranked by BIC; lower is better)"
    comp["A1"].font = TITLE
    comp["A2"] = "EWMA is the practitioner's baseline the fitted models are compared with"
    comp["A2"].font = NOTE
    comp["A3"] = f'=VOLCOMPARE(returns, "EWMA, GARCH(1,1), GJR-GARCH(1,1), EGARCH(1,1)", "normal, t", {OPTS})'
    _fmt(comp, "C4:C20", "0.00")
    _fmt(comp, "D4:D20", "0")
    _fmt(comp, "E4:F20", "0.00")
    _fmt(comp, "G4:G20", DEC4)
    _fmt(comp, "H4:H20", BOOL)
    _fmt(comp, "I4:I20", "0")
    _widths(comp, {"A": 18, "B": 8, "C": 11, "D": 8, "E": 10, "F": 10, "G": 11, "H": 10, "I": 9})
    _page(comp, "A1:I14")

    # ------------------------------------------------------------------ Forecast
    fc = wb.create_sheet("Forecast")
    fc["A1"] = "Variance forecast (log returns in percent)"
    fc["A1"].font = TITLE
    fc["A3"] = f'=VOLFORECAST(returns, {FIT}, Inputs!$B$6, "table")'
    last_fc = 3 + max(2 * cfg["horizon"], 60)
    _header(fc, 3, ["annualised vol (%)", "cumulative vol (%)"], col=6)
    for r in range(4, last_fc + 1):
        fc.cell(r, 6, f'=IF(ISNUMBER(D{r}),D{r}*SQRT(Inputs!$B$8),"")').number_format = "0.00"
        fc.cell(r, 7, f'=IF(ISNUMBER(E{r}),SQRT(E{r}),"")').number_format = "0.00"
    _fmt(fc, f"A4:A{last_fc}", "0")
    _fmt(fc, f"B4:C{last_fc}", "0.000")
    _fmt(fc, f"D4:E{last_fc}", "0.00")
    fc["I1"] = "VaR and expected shortfall at the Inputs' level"
    fc["I1"].font = TITLE
    fc["I14"] = "rows VaR, ES: loss in log-return %; VaR_value, ES_value: loss in % of value"
    fc["I14"].font = NOTE
    fc["I15"] = "how each block was computed (VOLRISK's method row, in full):"
    fc["I15"].font = NOTE
    for j, (months, steps) in enumerate(zip((1, 3, 12), (month, 3 * month, year))):
        col = 9 + 3 * j
        label = f"{months} month{'s' if months > 1 else ''}" + (f" ({steps} {unit}s)" if steps != months else "")
        fc.cell(2, col, label).font = Font(bold=True)
        fc.cell(3, col, f"=VOLRISK(returns, {FIT}, Inputs!$B$7, {steps})")
        for r in range(4, 16):
            fc.cell(r, col + 1).number_format = "0.00"
        # the method row (VOLRISK's 10th) holds a longer text than its column shows (seed, path
        # count, variance reduction): each block's in full on a wide row of its own below
        row = 16 + j
        short = label.split(" (")[0]
        block = spill(f"${get_column_letter(col)}$3")
        m = fc.cell(row, 9, f'="{short}: "&VLOOKUP("method", {block}, 2, FALSE)')
        m.font = NOTE
        m.alignment = Alignment(wrap_text=True, vertical="top")
        fc.merge_cells(start_row=row, start_column=9, end_row=row, end_column=16)
        fc.row_dimensions[row].height = 26
    fc.cell(2, 18, f"cumulative variance (%^2), {unit}s 1..{year}").font = Font(bold=True)
    fc.cell(2, 18).alignment = Alignment(wrap_text=True, vertical="bottom")
    fc.row_dimensions[2].height = 45
    fc.cell(3, 18, f'=VOLFORECAST(returns, {FIT}, {year}, "cumvar")')
    _fmt(fc, f"R3:R{3 + year}", "0.00")
    fc.cell(20, 9, CAUTION).font = NOTE
    fc.cell(20, 9).alignment = Alignment(wrap_text=True, vertical="top")
    fc.merge_cells("I20:P22")  # not R: the cumulative variance spills down R
    for r in (20, 21, 22):
        fc.row_dimensions[r].height = 20
    _widths(fc, {"A": 6, "B": 9, "C": 9, "D": 8, "E": 9, "F": 11, "G": 11, "H": 2, "I": 11, "J": 14, "K": 2,
                 "L": 11, "M": 14, "N": 2, "O": 11, "P": 14, "Q": 2, "R": 18})
    fc.row_dimensions[3].height = 30
    for c in ("F3", "G3"):
        fc[c].alignment = Alignment(wrap_text=True, vertical="bottom")
    term = _line_chart(f"Forecast: annualised volatility of each {unit} ahead (%)", f"{unit}s ahead",
                       "annualised volatility (%)")
    term.add_data(Reference(fc, min_col=6, min_row=4, max_row=3 + cfg["horizon"]))
    term.set_categories(Reference(fc, min_col=1, min_row=4, max_row=3 + cfg["horizon"]))
    term.y_axis.number_format = "0.0"
    term.width, term.height = 17, 7.5
    fc.add_chart(term, "I24")
    # the printout: the first 60 steps at most (the daily template's year is 252 rows on screen)
    shown = min(cfg["horizon"], 60)
    if shown < cfg["horizon"]:
        fc["A2"] = f"the printout shows {unit}s 1 to {shown}; all {cfg['horizon']} are on screen"
        fc["A2"].font = NOTE
    _page(fc, f"A1:R{max(3 + shown, 40)}", tall=0)  # the chart ends near row 39

    # ------------------------------------------------------------------ Volatility
    vol = wb.create_sheet("Volatility")
    _header(vol, 1, ["date", f"vol (% per {unit})", "annualised (%)"])
    vol["B2"] = f'=VOLSERIES(returns, {FIT}, "vol")'
    for r in range(2, N + 1):
        vol.cell(r, 1, f'=IF(Data!A{r}="","",Data!A{r})').number_format = DATE
        vol.cell(r, 3, f'=IF(ISNUMBER(B{r}),B{r}*SQRT(Inputs!$B$8),"")').number_format = "0.00"
    _fmt(vol, f"B2:B{N}", "0.00")
    _widths(vol, {"A": 12, "B": 15, "C": 15})
    vol.freeze_panes = "A2"
    # native chart over the data's rows (volcast refresh fits its range to the data present)
    chart = _line_chart("In-sample conditional volatility, annualised (%), model estimates", "date",
                        "annualised volatility (%)", skip=2 * cfg["periods"])
    chart.add_data(Reference(vol, min_col=3, min_row=2, max_row=N))
    chart.set_categories(Reference(vol, min_col=1, min_row=2, max_row=N))
    chart.width, chart.height = 24, 10
    vol.add_chart(chart, "E2")
    vol["E23"] = "Columns A-C: one row per return; the printout shows the chart."
    vol["E23"].font = NOTE
    _page(vol, "E1:R23")

    # ------------------------------------------------------------------ History
    hist = wb.create_sheet("History")
    # one row per refresh (volcast refresh); parameter and se_ columns are added by name
    _header(hist, 1, HISTORY_HEADER)
    _widths(hist, {"A": 17, "B": 11, "C": 6, "D": 22, "E": 6, "F": 10, "G": 10, "H": 8, "I": 8, "J": 8, "K": 8,
                   "L": 24})
    hist.freeze_panes = "A2"
    # two pages wide: the headline figures, then the estimates and their standard errors
    _page(hist, f"A1:{get_column_letter(len(HISTORY_HEADER))}2", tall=0, titles="1:1")
    hist.page_setup.fitToWidth = 2

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
