"""Build the template workbooks (openpyxl).  Run from the repository root:

    python workbook_templates/build_templates.py

Writes ``monthly_variance.xlsx`` and ``daily_variance.xlsx`` beside this script.  The template's formulas read the model
inputs from labelled cells, and its ranges reach well past the data so that a new month needs no
formula edits.
"""

from __future__ import annotations

from pathlib import Path

from openpyxl import Workbook
from openpyxl.chart import LineChart, Reference
from openpyxl.styles import Font, PatternFill

HERE = Path(__file__).resolve().parent
MONTHLY = dict(name="Monthly", last_row=1200, periods=12, horizon=12, risk=(1, 3, 12), unit="month",
               model="AR(1)-GJR-GARCH(1,1)", note="12 for monthly data")
# daily data: next month is the next 21 trading days, a year 252
DAILY = dict(name="Daily", last_row=4000, periods=252, horizon=252, risk=(21, 63, 252), unit="trading day",
             model="GJR-GARCH(1,1)", note="252 for daily data")

TITLE = Font(bold=True, size=14, color="1F3A5F")
HEAD = Font(bold=True, color="FFFFFF")
HEAD_FILL = PatternFill("solid", fgColor="1F3A5F")
INPUT_FILL = PatternFill("solid", fgColor="FFF2CC")
NOTE = Font(italic=True, color="555555")

CAUTION = (
    "Caution: every figure in this workbook is a model estimate, not investment advice and not a "
    "guarantee of future risk. Forecasts and Value-at-Risk depend on the model, the data and the sample, "
    "and can be badly wrong in a crisis. Validate any use under your firm's model-risk policy and the "
    "regulation that applies to you."
)


def _header(ws, row, labels, col=1):
    for j, text in enumerate(labels):
        c = ws.cell(row, col + j, text)
        c.font, c.fill = HEAD, HEAD_FILL


def build(path: Path, cfg: dict) -> Path:
    LAST_ROW = cfg["last_row"]
    RET = f"Data!$C$2:$C${LAST_ROW}"
    unit = cfg["unit"]
    wb = Workbook()
    about = wb.active
    about.title = "About"
    about["A1"] = f"{cfg['name']} variance forecast"
    about["A1"].font = TITLE
    lines = [
        f"Purpose: estimate an ARCH/GARCH-family model on {cfg['name'].lower()} returns, forecast the variance for the next",
        "month and out to a year, and turn it into volatility, Value-at-Risk and expected shortfall.",
        "",
        "Each month:",
        f"1. Paste the new dates and levels (one row per {unit}) at the bottom of the Data sheet (columns A and B).",
        "2. Recalculate: in Excel with the Volcast add-in (F9), or headless: volcast recalc BOOK.xlsx -o OUT.xlsx.",
        "3. Read the Forecast sheet; check the Model sheet's diagnostics and the comparison of candidates.",
        "4. Keep the estimate history (volcast refresh appends a row each month).",
        "",
        "Model inputs are the yellow cells on the Inputs sheet. Returns are percent log returns.",
        "",
        CAUTION,
    ]
    for i, text in enumerate(lines, start=3):
        about.cell(i, 1, text)
    about.cell(3 + len(lines) - 1, 1).font = Font(bold=True, color="9C0006")
    about.column_dimensions["A"].width = 110

    data = wb.create_sheet("Data")
    _header(data, 1, ["date", "level", "return (%)"])
    for r in range(3, LAST_ROW + 1):
        data.cell(r, 3, f'=IF(OR(B{r}="",B{r - 1}=""),"",LN(B{r}/B{r - 1})*100)').number_format = "0.000"
    data.column_dimensions["A"].width = 12
    data.column_dimensions["C"].width = 12
    data.freeze_panes = "A2"

    inp = wb.create_sheet("Inputs")
    inp["A1"] = "Model inputs (yellow cells)"
    inp["A1"].font = TITLE
    rows = [
        ("model", cfg["model"], "model string, e.g. GARCH(1,1)"),
        ("distribution", "t", "normal, t, skewt or ged"),
        ("options", f"periods={cfg['periods']}", "e.g. se=hessian; nu=8"),
        (f"forecast horizon ({unit}s)", cfg["horizon"], "1 to 600"),
        ("VaR level", 0.99, "e.g. 0.99"),
        ("periods per year", cfg["periods"], cfg["note"]),
    ]
    for i, (label, value, hint) in enumerate(rows, start=3):
        inp.cell(i, 1, label)
        c = inp.cell(i, 2, value)
        c.fill = INPUT_FILL
        inp.cell(i, 3, hint).font = NOTE
    inp.column_dimensions["A"].width = 28
    inp.column_dimensions["B"].width = 24
    inp.column_dimensions["C"].width = 30

    model = wb.create_sheet("Model")
    model["A1"] = "Fit table"
    model["A1"].font = TITLE
    model["A3"] = f"=VOLFIT({RET}, Inputs!$B$3, Inputs!$B$4, Inputs!$B$5)"
    model["H1"] = "Diagnostics of the standardised residuals"
    model["H1"].font = TITLE
    model["H3"] = f"=VOLTESTS({RET}, A3#)"
    model["H14"] = "Candidate models (ranked by BIC)"
    model["H14"].font = TITLE
    model["H16"] = f'=VOLCOMPARE({RET}, "GARCH(1,1), GJR-GARCH(1,1), EGARCH(1,1)", "normal, t", Inputs!$B$5)'
    for col, w in zip("ABCDEFGH", (16, 22, 12, 10, 12, 2, 2, 22)):
        model.column_dimensions[col].width = w

    fc = wb.create_sheet("Forecast")
    fc["A1"] = "Variance forecast (returns in percent)"
    fc["A1"].font = TITLE
    fc["A3"] = f'=VOLFORECAST({RET}, Model!$A$3#, Inputs!$B$6, "table")'
    _header(fc, 3, ["annualised vol (%)", "cumulative vol (%)"], col=6)
    for r in range(4, 4 + cfg["horizon"]):
        fc.cell(r, 6, f'=IF(ISNUMBER(D{r}),D{r}*SQRT(Inputs!$B$8),"")').number_format = "0.00"
        fc.cell(r, 7, f'=IF(ISNUMBER(E{r}),SQRT(E{r}),"")').number_format = "0.00"
    fc["I1"] = "Value-at-Risk and expected shortfall (losses, % of value)"
    fc["I1"].font = TITLE
    for j, (months, steps) in enumerate(zip((1, 3, 12), cfg["risk"])):
        col = 9 + 3 * j
        label = f"{months} month{'s' if months > 1 else ''}" + (f" ({steps} {unit}s)" if steps != months else "")
        fc.cell(2, col, label).font = Font(bold=True)
        fc.cell(3, col, f"=VOLRISK({RET}, Model!$A$3#, Inputs!$B$7, {steps})")
    if cfg["risk"][0] != 1:
        # next month = the cumulative variance of the next trading days
        n = cfg["risk"][0]
        fc["I31"] = f"next month's variance ({n} {unit}s, %^2)"
        fc["L31"] = f"=INDEX(_xlfn.ANCHORARRAY(A3), {n + 1}, 5)"
        fc["I32"] = "next month's volatility (%)"
        fc["L32"] = "=SQRT(L31)"
        fc["I33"] = "annualised (%)"
        fc["L33"] = f"=L32*SQRT(Inputs!$B$8/{n})"
    fc.cell(5 + cfg["horizon"], 1, CAUTION).font = NOTE

    vol = wb.create_sheet("Volatility")
    vol["A1"] = "in-sample conditional volatility (%)"
    vol["A1"].font = HEAD
    vol["A1"].fill = HEAD_FILL
    vol["A2"] = f'=VOLSERIES({RET}, Model!$A$3#, "vol")'

    # native charts: the history of conditional volatility, and the forecast term structure
    chart = LineChart()
    chart.title = f"Conditional volatility (% per {unit})"
    chart.y_axis.title = "%"
    chart.x_axis.number_format = "yyyy"
    chart.add_data(Reference(vol, min_col=1, min_row=1, max_row=LAST_ROW), titles_from_data=True)
    chart.set_categories(Reference(data, min_col=1, min_row=2, max_row=LAST_ROW))
    chart.width, chart.height = 24, 9
    vol.add_chart(chart, "C2")
    term = LineChart()
    term.title = "Forecast term structure: annualised volatility (%)"
    term.x_axis.title = f"{unit}s ahead"
    term.add_data(Reference(fc, min_col=6, min_row=3, max_row=3 + cfg["horizon"]), titles_from_data=True)
    term.set_categories(Reference(fc, min_col=1, min_row=4, max_row=3 + cfg["horizon"]))
    term.width, term.height = 16, 8
    fc.add_chart(term, "I13")

    hist = wb.create_sheet("History")
    # one row per refresh (volcast refresh); parameter columns are added by name as they appear
    _header(hist, 1, ["run time", "last date", "nobs", "model", "dist", "loglik", "vol 1m (%)", "vol 12m (%)",
                      "VaR 1m (%)", "flag"])

    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)
    return path


def main():
    print(build(HERE / "monthly_variance.xlsx", MONTHLY))
    print(build(HERE / "daily_variance.xlsx", DAILY))


if __name__ == "__main__":
    main()
