"""`volcast refresh`: true or refuses.

Figures are found through the template contract (DESIGN.md, "Templates": defined names) and
checked against direct calls of the worksheet functions on the same returns.  The series are
seeded simulations from the fitted-model simulator (xlfuncs.core.simulate), turned into levels;
the percent log return 100 ln(P[t]/P[t-1]) is the templates' stated convention (common practice).
"""

import calendar
import csv
import datetime as dt
import hashlib
import math
import re
import shutil
import subprocess

import numpy as np
import openpyxl
import pytest
from numpy.testing import assert_allclose

from xlfuncs import VOLFIT, VOLFORECAST, VOLRISK
from xlfuncs.cli import main
from xlfuncs.core.distributions import get_distribution
from xlfuncs.core.simulate import simulate
from xlfuncs.core.spec import parse_model
from xlfuncs.demo import load_levels, template_file
from xlfuncs.headless.contract import HISTORY_HEADER, figures_from_file, name_range
from xlfuncs.headless.recalc import RecalcError, recalc
from xlfuncs.headless.refresh import refresh

MONTHLY_MODEL = ("AR(1)-GJR-GARCH(1,1)", "t")
ROWS = 300  # the return formulas of the test's monthly template reach this row


@pytest.fixture(scope="module")
def short_template(tmp_path_factory):
    """The monthly template from the shipped builder, with its return formulas to row 300 rather
    than 1,200, so that growing past them stays cheap to test."""
    import importlib.util
    from pathlib import Path

    spec = importlib.util.spec_from_file_location(
        "build_templates", Path(__file__).resolve().parent.parent / "workbook_templates" / "build_templates.py")
    builder = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(builder)
    return builder.build(tmp_path_factory.mktemp("tpl") / "monthly_short.xlsx", dict(builder.MONTHLY, last_row=ROWS))


def _levels(model, params, n, seed, start=100.0):
    spec, dist = parse_model(model), get_distribution("t")
    r = simulate(spec, dist, params, n - 1, 1, rng=np.random.default_rng(seed))[:, 0]
    return start * np.exp(np.concatenate([[0.0], np.cumsum(r / 100.0)]))


def _month_ends(n, year=1920):
    out, y, m = [], year, 1
    for _ in range(n):
        out.append(dt.date(y, m, calendar.monthrange(y, m)[1]))
        y, m = (y + 1, 1) if m == 12 else (y, m + 1)
    return out


def _business_days(n, start=dt.date(2008, 1, 1)):
    out, d = [], start
    while len(out) < n:
        if d.weekday() < 5:
            out.append(d)
        d += dt.timedelta(days=1)
    return out


def _csv(path, dates, levels):
    path.write_text("date,level\n" + "".join(f"{d},{v:.6f}\n" for d, v in zip(dates, levels)))
    return path


def _returns(book):
    """The returns column the workbook's `returns` name covers, as cells for a direct call."""
    wb = openpyxl.load_workbook(book, data_only=True)
    sheet, r1, c, r2, _ = name_range(wb, "returns")
    return [[wb[sheet].cell(r, c).value] for r in range(r1, r2 + 1)]


def _direct(cells, model, dist, periods, month, year, level=0.99):
    fit = VOLFIT(cells, model, dist, f"periods={periods}; returns=log100")
    cum = [row[0] for row in VOLFORECAST(cells, fit, year, "cumvar")]
    risk = {row[0]: row[1] for row in VOLRISK(cells, fit, level, month)}
    fit_rows = {row[0]: row for row in fit}
    return fit_rows, cum, risk


def _history(book):
    rows = list(openpyxl.load_workbook(book, data_only=True)["History"].iter_rows(values_only=True))
    header = [h for h in rows[0] if h is not None]
    return header, [dict(zip(header, r)) for r in rows[1:] if r[0] is not None]


# --------------------------------------------------------------------------- monthly, past the template's rows
@pytest.fixture(scope="module")
def monthly(tmp_path_factory, short_template):
    """A first load of 320 month-ends into the empty monthly template whose return formulas
    reach row 300."""
    d = tmp_path_factory.mktemp("monthly")
    dates = _month_ends(320)
    levels = _levels("AR(1)-GJR-GARCH(1,1)", [0.5, 0.1, 0.5, 0.05, 0.1, 0.85, 8.0], 320, seed=11)
    data = _csv(d / "history.csv", dates, levels)
    res = refresh(short_template, data, d / "first.xlsx")
    return d, dates, levels, res


def test_first_load_past_the_template_rows_keeps_every_return(monthly):
    d, dates, levels, res = monthly
    assert res.added == 320 and res.report.error_cells == [] and res.report.unread == []
    figures = figures_from_file(res.out)
    assert figures["nobs"] == 319  # every return of 320 levels
    assert figures["last_date"].date() == dates[-1]
    cells = _returns(res.out)
    numbers = [c[0] for c in cells if isinstance(c[0], float)]
    # common practice: percent log returns from the levels (the CSV holds them to 6 decimals)
    expected = 100 * np.diff(np.log(np.round(levels, 6)))
    assert_allclose(numbers, expected, rtol=1e-9)
    check = openpyxl.load_workbook(res.out, data_only=True)
    sheet, r, c, _, _ = name_range(check, "data_check")
    assert check[sheet].cell(r, c).value.startswith("OK: all 319 returns")
    assert name_range(check, "returns")[3] > 320  # the returns range grew with the data


def test_monthly_figures_equal_direct_calls(monthly):
    _, _, _, res = monthly
    figures = figures_from_file(res.out)
    fit, cum, risk = _direct(_returns(res.out), *MONTHLY_MODEL, 12, 1, 12)
    assert_allclose(figures["vol_1m"], math.sqrt(cum[0]), rtol=1e-10)
    assert_allclose(figures["vol_1m_ann"], math.sqrt(cum[0]) * math.sqrt(12), rtol=1e-10)
    assert_allclose(figures["vol_12m"], math.sqrt(cum[11]), rtol=1e-10)
    assert_allclose(figures["var_1m"], risk["VaR_value"], rtol=1e-10)
    assert_allclose(figures["es_1m"], risk["ES_value"], rtol=1e-10)
    # the loss as % of value of a log-return VaR: 100 (1 - exp(-VaR/100)) (common practice)
    assert_allclose(figures["var_1m"], 100 * (1 - math.exp(-risk["VaR"] / 100)), rtol=1e-12)
    assert figures["var_1m"] < risk["VaR"]
    assert figures["converged"] is fit["converged"][1] is True


def test_history_row_follows_the_contract(monthly):
    _, dates, _, res = monthly
    header, rows = _history(res.out)
    assert header[: len(HISTORY_HEADER)] == HISTORY_HEADER
    assert len(rows) == 1
    row = rows[0]
    figures = figures_from_file(res.out)
    for name in ("nobs", "vol_1m", "vol_12m", "var_1m", "es_1m"):
        assert_allclose(row[name], figures[name], rtol=1e-12)
    assert row["last_date"].date() == dates[-1] and row["converged"] is True
    fit = {r[0]: r for r in VOLFIT(_returns(res.out), *MONTHLY_MODEL, "periods=12; returns=log100")}
    for name in ("mu", "phi[1]", "omega", "alpha[1]", "gamma[1]", "beta[1]", "nu"):
        assert_allclose(row[name], fit[name][1], rtol=1e-12)
        assert_allclose(row[f"se_{name}"], fit[name][2], rtol=1e-12)


def test_refresh_with_nothing_new_adds_no_history_row(monthly, tmp_path, capsys):
    d, dates, levels, res = monthly
    again = refresh(res.out, d / "history.csv", tmp_path / "again.xlsx")
    assert again.added == 0 and again.history is None
    assert len(_history(again.out)[1]) == 1
    header_only = tmp_path / "empty.csv"
    header_only.write_text("date,level\n")
    assert main(["refresh", str(res.out), "--data", str(header_only), "-o", str(tmp_path / "h.xlsx")]) == 0
    assert "no History row added" in capsys.readouterr().out
    assert len(_history(tmp_path / "h.xlsx")[1]) == 1


def test_next_month_appends_and_flags_moves(monthly, tmp_path):
    d, dates, levels, res = monthly
    nxt = _csv(tmp_path / "next.csv", [dates[-1], dt.date(1946, 9, 30)], [round(levels[-1], 6), levels[-1] * 1.01])
    before = hashlib.sha256(res.out.read_bytes()).hexdigest()
    out = refresh(res.out, nxt, tmp_path / "next.xlsx")
    assert hashlib.sha256(res.out.read_bytes()).hexdigest() == before  # the input is never written over
    assert out.added == 1 and figures_from_file(out.out)["nobs"] == 320
    _, rows = _history(out.out)
    assert len(rows) == 2 and rows[1]["last_date"].date() == dt.date(1946, 9, 30)
    # pretend last month's beta was far away: the new row names it
    wb = openpyxl.load_workbook(out.out)
    hist = wb["History"]
    header = [c.value for c in hist[1]]
    hist.cell(3, header.index("beta[1]") + 1, 0.2)
    wb.save(tmp_path / "edited.xlsx")
    moved = refresh(tmp_path / "edited.xlsx", _csv(tmp_path / "n2.csv", [dt.date(1946, 10, 31)], [levels[-1]]),
                    tmp_path / "moved.xlsx")
    assert "beta[1]" in moved.history["moved"]


# --------------------------------------------------------------------------- round trips
def _next_month_figures(book, dates, levels, tmp_path, tag):
    nxt = _csv(tmp_path / f"{tag}.csv", [dt.date(1946, 9, 30)], [levels[-1] * 0.97])
    return figures_from_file(refresh(book, nxt, tmp_path / f"{tag}.xlsx").out)


def test_openpyxl_resave_refreshes_to_the_same_figures(monthly, tmp_path):
    d, dates, levels, res = monthly
    wb = openpyxl.load_workbook(res.out)  # openpyxl drops the dynamic-array metadata
    wb.save(tmp_path / "resaved.xlsx")
    a = _next_month_figures(res.out, dates, levels, tmp_path, "plain")
    b = _next_month_figures(tmp_path / "resaved.xlsx", dates, levels, tmp_path, "after_resave")
    for k in a:
        assert a[k] == b[k], k


@pytest.mark.skipif(shutil.which("soffice") is None, reason="LibreOffice (soffice) is not installed here; CI installs it")
def test_libreoffice_resave_refreshes_to_the_same_figures(monthly, tmp_path):
    """A workbook opened and saved by LibreOffice (function names lower-cased, spills written as
    plain array formulas, _xlfn.anchorarray) refreshes next month to the figures of the route
    without LibreOffice, and those equal direct calls."""
    d, dates, levels, res = monthly
    subprocess.run(["soffice", "--headless", "--convert-to", "xlsx", "--outdir", str(tmp_path / "lo"), str(res.out)],
                   check=True, capture_output=True, timeout=300)
    lo = tmp_path / "lo" / res.out.name
    text = openpyxl.load_workbook(lo)["Model"]["A3"].value
    assert "volfit" in getattr(text, "text", text)  # LibreOffice's spelling, which must be understood
    a = _next_month_figures(res.out, dates, levels, tmp_path, "plain")
    b = _next_month_figures(lo, dates, levels, tmp_path, "lo")
    for k in a:
        assert a[k] == b[k], k
    fit, cum, risk = _direct(_returns(tmp_path / "lo.xlsx"), *MONTHLY_MODEL, 12, 1, 12)
    assert_allclose(b["vol_1m"], math.sqrt(cum[0]), rtol=1e-10)
    assert_allclose(b["var_1m"], risk["VaR_value"], rtol=1e-10)


# --------------------------------------------------------------------------- refusals
def test_values_only_workbook_is_refused(monthly, tmp_path, capsys):
    _, dates, levels, res = monthly
    vo, _ = recalc(res.out, tmp_path / "vo.xlsx", values_only=True)
    nxt = _csv(tmp_path / "n.csv", [dt.date(1946, 9, 30)], [levels[-1]])
    assert main(["refresh", str(vo), "--data", str(nxt), "-o", str(tmp_path / "out.xlsx")]) == 2
    err = capsys.readouterr().err
    assert "holds values where its formulas should be" in err and "Traceback" not in err
    assert not (tmp_path / "out.xlsx").exists()


def test_a_workbook_without_the_contract_is_refused(tmp_path):
    wb = openpyxl.Workbook()
    wb.active.title = "Data"
    wb.save(tmp_path / "plain.xlsx")
    with pytest.raises(RecalcError, match="lacks the template's defined name"):
        refresh(tmp_path / "plain.xlsx", _csv(tmp_path / "a.csv", _month_ends(3), [1, 2, 3]), tmp_path / "o.xlsx")


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    d = tmp_path_factory.mktemp("small")
    dates = _month_ends(240, 1990)
    levels = _levels("AR(1)-GJR-GARCH(1,1)", [0.5, 0.1, 0.5, 0.05, 0.1, 0.85, 8.0], 240, seed=11)
    res = refresh(template_file(), _csv(d / "h.csv", dates, levels), d / "book.xlsx")
    return res.out, dates, levels


def _bad(small, tmp_path, rows, *flags):
    book, dates, levels = small
    path = tmp_path / "bad.csv"
    path.write_text("date,level\n" + "".join(f"{a},{b}\n" for a, b in rows))
    out = tmp_path / "x.xlsx"
    code = main(["refresh", str(book), "--data", str(path), "-o", str(out), *flags])
    return code, out


@pytest.mark.parametrize("rows,pattern", [
    # a misplaced decimal point: the level x 10,000
    (lambda L, D: [(dt.date(2010, 1, 31), f"{L[-1] * 1e4:.4f}")], "robust standard deviations"),
    (lambda L, D: [(dt.date(2010, 1, 31), "1e300")], "robust standard deviations"),
    # five months missing, taken as one return
    (lambda L, D: [(dt.date(2010, 6, 30), f"{L[-1]:.4f}")], "days after"),
    (lambda L, D: [(dt.date(2010, 1, 31), "-5")], "must be a positive finite number"),
    (lambda L, D: [(dt.date(2010, 1, 31), "inf")], "must be a positive finite number"),
    (lambda L, D: [(D[-1], f"{L[-1] * 2:.4f}")], "already in the workbook with level"),
    (lambda L, D: [(dt.date(1980, 1, 31), "100")], "older than the workbook's last date"),
    (lambda L, D: [(dt.date(2010, 2, 28), "100"), (dt.date(2010, 1, 31), "100")], "not after the previous new date"),
    (lambda L, D: [("31/01/2010", "100")], "cannot read a date"),
    # a run before the month's end: half a month taken as a whole month's return
    (lambda L, D: [(dt.date(2010, 1, 15), f"{L[-1]:.4f}")], "comes only 15 day(s) after"),
    # daily rows among month ends
    (lambda L, D: [(dt.date(2010, 1, 4), f"{L[-1]:.4f}"), (dt.date(2010, 1, 5), f"{L[-1]:.4f}")], "comes only 4 day(s)"),
])
def test_suspicious_or_bad_rows_stop_the_run(small, tmp_path, capsys, rows, pattern):
    book, dates, levels = small
    code, out = _bad(small, tmp_path, rows(levels, dates))
    err = capsys.readouterr().err
    assert code == 2 and pattern in err and ("line 2" in err or "line 3" in err), err
    assert err.startswith("volcast: ") and "Traceback" not in err and err.count("\n") == 1
    assert not out.exists()


def test_a_decimal_comma_gets_a_hint(small, tmp_path, capsys):
    book, _, _ = small
    path = tmp_path / "semi.csv"
    # a semicolon file that mixes a decimal comma with a decimal point: which is meant cannot be told
    path.write_text("date;level\n2010-01-31;12,5\n2010-02-28;12.75\n")
    assert main(["refresh", str(book), "--data", str(path), "-o", str(tmp_path / "x.xlsx")]) == 2
    err = capsys.readouterr().err
    assert "line 2" in err and "decimal comma" in err and "line 3" in err and "Traceback" not in err


def test_a_decimal_comma_file_refreshes_as_its_point_twin(small, tmp_path):
    """A semicolon file with decimal commas (the usual export where the comma is the decimal mark)
    gives the same workbook as the comma file with decimal points (common practice)."""
    book, dates, levels = small
    nxt = [(dates[-1] + dt.timedelta(days=31), levels[-1] * 1.01)]
    point, comma = tmp_path / "point.csv", tmp_path / "comma.csv"
    point.write_text("date,level\n" + "".join(f"{d},{v:.4f}\n" for d, v in nxt))
    comma.write_text("date;level\n" + "".join(f"{d};{v:.4f}\n".replace(".", ",") for d, v in nxt))
    outs = []
    now = dt.datetime.now()

    def kept(v):  # the run's own time stamp differs between the two runs
        return None if isinstance(v, dt.datetime) and abs((now - v).total_seconds()) < 3600 else v

    for src in (point, comma):
        out = tmp_path / f"{src.stem}.xlsx"
        assert main(["refresh", str(book), "--data", str(src), "-o", str(out)]) == 0
        wb = openpyxl.load_workbook(out.with_name(f"{out.stem}-values.xlsx"))  # the values copy: numbers
        outs.append([[kept(c.value) for c in row] for ws in wb for row in ws.iter_rows()])
    assert outs[0] == outs[1]


def test_accept_flags_take_what_was_checked(small, tmp_path, capsys):
    book, dates, levels = small
    code, out = _bad(small, tmp_path, [(dt.date(2010, 6, 30), f"{levels[-1]:.4f}")], "--accept-gaps")
    assert code == 0 and out.exists()
    assert "accepted" in capsys.readouterr().err
    out.unlink()
    code, out = _bad(small, tmp_path, [(dt.date(2010, 1, 15), f"{levels[-1]:.4f}")], "--accept-gaps")
    assert code == 0 and out.exists()
    assert "comes only 15 day(s)" in capsys.readouterr().err
    code, out = _bad(small, tmp_path, [(dt.date(2010, 1, 31), f"{levels[-1] * 1.8:.4f}")], "--accept-jumps")
    assert code == 0


def test_recalc_reports_rows_below_the_returns_range(tmp_path, capsys, short_template):
    """Levels pasted below the template's return formulas (as a person would in a spreadsheet)
    are reported on standard error and in the workbook's visible data check."""
    dates = _month_ends(ROWS + 11, 1900)
    levels = _levels("AR(1)-GJR-GARCH(1,1)", [0.5, 0.1, 0.5, 0.05, 0.1, 0.85, 8.0], ROWS + 11, seed=5)
    load_levels(short_template, _csv(tmp_path / "p.csv", dates, levels), tmp_path / "pasted.xlsx")
    assert main(["recalc", str(tmp_path / "pasted.xlsx"), "-o", str(tmp_path / "out.xlsx")]) == 0
    err = capsys.readouterr().err
    assert "data left out" in err and f"Data!B{ROWS + 1}:B{ROWS + 12}" in err
    wb = openpyxl.load_workbook(tmp_path / "out.xlsx", data_only=True)
    sheet, r, c, _, _ = name_range(wb, "data_check")
    assert wb[sheet].cell(r, c).value.startswith("WARNING: 12 level(s)")
    # the next refresh extends the return formulas over the pasted rows: none is left out
    nxt = dates[-1] + dt.timedelta(days=31)
    res = refresh(tmp_path / "pasted.xlsx", _csv(tmp_path / "n.csv", [nxt], [levels[-1]]), tmp_path / "r.xlsx")
    assert res.report.unread == [] and figures_from_file(res.out)["nobs"] == ROWS + 11
    wb = openpyxl.load_workbook(res.out, data_only=True)
    assert wb[sheet].cell(r, c).value.startswith(f"OK: all {ROWS + 11} returns")


# --------------------------------------------------------------------------- daily
def test_daily_first_load_of_4100_levels(tmp_path):
    """4,100 daily levels into the empty daily template: every return in the fit, and the
    next month is the cumulative variance of the next 21 trading days (common practice: 21
    trading days a month, 252 a year)."""
    dates = _business_days(4100)
    levels = _levels("GJR-GARCH(1,1)", [0.03, 0.02, 0.05, 0.08, 0.88, 7.0], 4100, seed=7)
    assert main(["template", "daily", "-o", str(tmp_path / "empty.xlsx")]) == 0
    res = refresh(tmp_path / "empty.xlsx", _csv(tmp_path / "d.csv", dates, levels), tmp_path / "daily.xlsx")
    figures = figures_from_file(res.out)
    assert figures["nobs"] == 4099 and res.report.unread == []
    fit, cum, risk = _direct(_returns(res.out), "GJR-GARCH(1,1)", "t", 252, 21, 252)
    assert_allclose(figures["vol_1m"], math.sqrt(cum[20]), rtol=1e-10)
    assert_allclose(figures["vol_1m_ann"], math.sqrt(cum[20]) * math.sqrt(252 / 21), rtol=1e-10)
    assert_allclose(figures["vol_12m"], math.sqrt(cum[251]), rtol=1e-10)
    assert_allclose(figures["var_1m"], risk["VaR_value"], rtol=1e-10)
    assert risk["horizon"] == 21
    with open(tmp_path / "d.csv") as fh:
        assert len(list(csv.reader(fh))) == 4101


# --------------------------------------------------------------------------- the command line on bad files
def _bad_files(tmp, book):
    (tmp / "text.xlsx").write_text("not a workbook")
    import zipfile

    with zipfile.ZipFile(tmp / "zip.xlsx", "w") as z:
        z.writestr("hello.txt", "a zip, not a workbook")
    (tmp / "binary.csv").write_bytes(bytes(range(256)) * 20)
    (tmp / "long.csv").write_text("date,level\n2010-01-31," + "9" * 200_000 + "\n")
    (tmp / "nolevel.csv").write_text("date,price\n2010-01-31,5\n")
    (tmp / "a_file").write_text("x")
    ok = tmp / "ok.csv"
    ok.write_text("date,level\n2010-01-31,100\n")
    return {
        "missing book": [str(tmp / "nope.xlsx"), "--data", str(ok), "-o", str(tmp / "o.xlsx")],
        "text as xlsx": [str(tmp / "text.xlsx"), "--data", str(ok), "-o", str(tmp / "o.xlsx")],
        "zip not xlsx": [str(tmp / "zip.xlsx"), "--data", str(ok), "-o", str(tmp / "o.xlsx")],
        "missing csv": [str(book), "--data", str(tmp / "nope.csv"), "-o", str(tmp / "o.xlsx")],
        "binary csv": [str(book), "--data", str(tmp / "binary.csv"), "-o", str(tmp / "o.xlsx")],
        "huge field": [str(book), "--data", str(tmp / "long.csv"), "-o", str(tmp / "o.xlsx")],
        "no level column": [str(book), "--data", str(tmp / "nolevel.csv"), "-o", str(tmp / "o.xlsx")],
        "parent is a file": [str(book), "--data", str(ok), "-o", str(tmp / "a_file" / "o.xlsx")],
        "not xlsx out": [str(book), "--data", str(ok), "-o", str(tmp / "o.csv")],
        "over the input": [str(book), "--data", str(ok), "-o", str(book)],
    }


@pytest.mark.parametrize("case", ["missing book", "text as xlsx", "zip not xlsx", "missing csv", "binary csv",
                                  "huge field", "no level column", "parent is a file", "not xlsx out",
                                  "over the input"])
def test_bad_files_exit_2_with_one_line(small, tmp_path, capsys, case):
    book, _, _ = small
    before = hashlib.sha256(book.read_bytes()).hexdigest()
    args = _bad_files(tmp_path, book)[case]
    assert main(["refresh", *args]) == 2
    err = capsys.readouterr().err
    assert err.startswith("volcast: ") and err.count("\n") == 1 and "Traceback" not in err, err
    assert len(err) < 600
    assert hashlib.sha256(book.read_bytes()).hexdigest() == before
    assert not (tmp_path / "o.xlsx").exists()


def test_a_cp1252_csv_is_read(small, tmp_path, capsys):
    book, dates, levels = small
    path = tmp_path / "w.csv"
    path.write_bytes("date,level,comment\n2010-01-31,{:.4f},caf\xe9 \u20ac\n".format(levels[-1]).encode("cp1252"))
    assert main(["refresh", str(book), "--data", str(path), "-o", str(tmp_path / "w.xlsx")]) == 0


def test_a_fit_that_did_not_converge_is_flagged(small, tmp_path, capsys, monkeypatch):
    """The optimiser's verdict reaches the History row and the terminal.  The estimator is made
    to report failure (a stand-in for a real non-convergence, which no public series here
    produces reliably), so the test checks the refresh's handling, not the optimiser."""
    import dataclasses

    from xlfuncs.sheet import functions
    from xlfuncs.sheet.cache import FIT_CACHE

    real = functions.core_fit

    def failing(*args, **kwargs):
        return dataclasses.replace(real(*args, **kwargs), converged=False, message="iteration limit reached")

    monkeypatch.setattr(functions, "core_fit", failing)
    FIT_CACHE.clear()
    try:
        book, dates, levels = small
        path = _csv(tmp_path / "n.csv", [dt.date(2010, 1, 31)], [levels[-1]])
        assert main(["refresh", str(book), "--data", str(path), "-o", str(tmp_path / "nc.xlsx")]) == 0
    finally:
        FIT_CACHE.clear()
    err = capsys.readouterr().err
    assert "did NOT converge" in err
    _, rows = _history(tmp_path / "nc.xlsx")
    assert rows[-1]["converged"] is False and rows[-1]["moved"].startswith("NOT CONVERGED: iteration limit")
    assert figures_from_file(tmp_path / "nc.xlsx")["converged"] is False


def _chart_cells(wb, ref):
    """The cells of a chart's column reference such as 'Volatility'!$C$2:$C$321."""
    sheet, rng = ref.rsplit("!", 1)
    return [c for row in wb[sheet.strip("'")][rng.replace("$", "")] for c in row]


def test_charts_over_the_data_grow_with_it_and_end_at_the_last_observation(monthly):
    """Past the template's rows, the chart over the data's rows (found through its references,
    not a fixed cell) reads one number per return, up to the last observation, with a date for
    each; the values copy beside the output holds the same values and no formulas."""
    d, dates, levels, res = monthly
    wb = openpyxl.load_workbook(res.out, data_only=True)
    sheet, r1, _, _, _ = name_range(wb, "returns")
    last = r1 + len(levels) - 1  # the first level has no return, its row still holds a date
    series = [s for ws in wb for ch in ws._charts for s in ch.series if s.cat is not None
              and f"${r1}:" in s.val.numRef.f]
    assert series
    nobs = figures_from_file(res.out)["nobs"]
    for s in series:
        assert s.val.numRef.f.endswith(f"${last}") and s.cat.numRef.f.endswith(f"${last}")
        vals = [c.value for c in _chart_cells(wb, s.val.numRef.f)]
        cats = [c.value for c in _chart_cells(wb, s.cat.numRef.f)]
        assert sum(isinstance(v, float) for v in vals) == nobs == len(levels) - 1
        assert [c.date() for c in cats] == dates
    copy = res.values_copy
    assert copy == res.out.with_name(res.out.stem + "-values.xlsx") and copy.exists()
    vals = openpyxl.load_workbook(copy)
    assert not any(isinstance(c.value, str) and c.value.startswith("=") for ws in vals for row in ws.iter_rows()
                   for c in row)
    a, b = figures_from_file(copy), figures_from_file(res.out)
    assert a == b  # the package edited, each stored value kept to its last digit


def _sheet_parts(path):
    import zipfile

    with zipfile.ZipFile(path) as z:
        return {n: z.read(n) for n in z.namelist()}


def _styled_cells(path):
    """{(sheet, coordinate): (value, number format, font, fill, border, alignment)} of every cell
    with a value or a style (styles as text: openpyxl's style proxies compare by identity)."""
    wb = openpyxl.load_workbook(path)
    return {(ws.title, c.coordinate): (c.value, c.number_format, str(c.font), str(c.fill), str(c.border), str(c.alignment))
            for ws in wb for row in ws.iter_rows() for c in row if c.value is not None or c.has_style}


def test_the_values_copy_is_the_workbook_with_its_formulas_taken_out(monthly, tmp_path, monkeypatch):
    """The values copy (layout.write_values_copy) edits the package: no formula left, every part
    but the sheets and the workbook part byte for byte the workbook's, each cell's value exactly
    the value the workbook stores with its formula, and the same formats as the copy openpyxl
    writes (which loads the stored values with data_only=True and saves them; its numbers keep 16
    significant digits, so they agree with the stored ones to 1e-15)."""
    from xlfuncs.headless.layout import write_values_copy

    d, dates, levels, res = monthly
    book, copy = _sheet_parts(res.out), _sheet_parts(res.values_copy)
    assert book.keys() == copy.keys()
    for name, data in copy.items():
        if name.startswith("xl/worksheets/"):
            assert b"<f>" not in data and b"<f " not in data, name
        elif name != "xl/workbook.xml":
            assert data == book[name], name
    stored = openpyxl.load_workbook(res.out, data_only=True)
    cells = _styled_cells(res.values_copy)
    n_numbers = 0
    for (sheet, coord), (value, *_) in cells.items():
        want = stored[sheet][coord].value
        assert value == want and type(value) is type(want), (sheet, coord, value, want)
        n_numbers += isinstance(value, float)
    assert n_numbers > 300  # the returns at least
    monkeypatch.setenv("VOLCAST_OPENPYXL_WRITE", "1")
    other = _styled_cells(write_values_copy(res.out, tmp_path / "openpyxl-values.xlsx"))
    assert other.keys() == cells.keys()
    for key, (value, *formats) in cells.items():
        assert other[key][1:] == tuple(formats), key
        if isinstance(value, float):
            assert math.isclose(other[key][0], value, rel_tol=1e-15, abs_tol=1e-300), key
        else:
            assert other[key][0] == value, key


def test_a_boolean_not_yet_shown_as_such_takes_the_openpyxl_route(monthly, tmp_path):
    """A TRUE/FALSE cell in a format that does not show it as TRUE/FALSE (LibreOffice shows 1):
    the package editor declines and openpyxl writes the copy, in the TRUE/FALSE format; the
    copy is readable by others (not the private mode of a temporary file)."""
    import os
    import stat

    from xlfuncs.headless.layout import BOOL_FORMAT, write_values_copy
    from xlfuncs.headless.xlsxpost import strip_formulas

    d, dates, levels, res = monthly
    wb = openpyxl.load_workbook(res.out)
    ws = wb["About"]
    cell = ws.cell(ws.max_row + 2, 1, True)
    wb.save(tmp_path / "with_bool.xlsx")
    with pytest.raises(ValueError, match="boolean"):
        strip_formulas(tmp_path / "with_bool.xlsx", tmp_path / "x.xlsx", BOOL_FORMAT)
    assert not (tmp_path / "x.xlsx").exists()
    out = write_values_copy(tmp_path / "with_bool.xlsx", tmp_path / "copy.xlsx")
    c = openpyxl.load_workbook(out)["About"][cell.coordinate]
    assert c.value is True and c.number_format == BOOL_FORMAT
    mask = os.umask(0o022)
    os.umask(mask)
    assert stat.S_IMODE(os.stat(out).st_mode) == 0o666 & ~mask


def test_the_history_shows_converged_as_true_or_false(monthly):
    d, dates, levels, res = monthly
    ws = openpyxl.load_workbook(res.out)["History"]
    col = [c.value for c in ws[1]].index("converged") + 1
    cells = [ws.cell(r, col) for r in range(2, ws.max_row + 1) if ws.cell(r, col).value is not None]
    assert cells and all(isinstance(c.value, bool) and c.number_format == '"TRUE";"TRUE";"FALSE"' for c in cells)


def test_the_terminal_says_which_file_to_open_where(monthly, tmp_path, capsys):
    d, dates, levels, res = monthly
    data = _csv(tmp_path / "next.csv", dates[-3:] + [dt.date(1946, 9, 30)], list(levels[-3:]) + [levels[-1] * 1.01])
    out = tmp_path / "next.xlsx"
    assert main(["refresh", str(res.out), "--data", str(data), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert f"{out} in Excel with the Volcast add-in" in text
    assert f"{tmp_path / 'next-values.xlsx'} (values, no formulas) in LibreOffice" in text
    assert (tmp_path / "next-values.xlsx").exists()


def test_a_values_copy_that_would_overwrite_the_input_is_refused(monthly, tmp_path, capsys):
    d, dates, levels, res = monthly
    book = tmp_path / "book-values.xlsx"
    shutil.copyfile(res.out, book)
    data = _csv(tmp_path / "same.csv", dates[-2:], levels[-2:])
    assert main(["refresh", str(book), "--data", str(data), "-o", str(tmp_path / "book.xlsx")]) == 2
    assert "would write over the input" in capsys.readouterr().err
    assert not (tmp_path / "book.xlsx").exists()


# --------------------------------------------------------------------------- data against the template's horizons
@pytest.mark.parametrize("kind,dates", [
    ("daily", _month_ends(60, 2000)),  # month ends into the daily template: a "month" of 21 months
    ("monthly", _business_days(400)),  # trading days into the monthly template: a "year" of 12 days
], ids=["monthly-data-daily-template", "daily-data-monthly-template"])
def test_data_of_another_frequency_is_refused(tmp_path, capsys, kind, dates):
    """The templates' horizons are periods: 21 and 252 in the daily one, 1 and 12 in the monthly
    one (common practice: 21 trading days a month).  Data of the other spacing would give figures
    for the wrong horizons under the same labels; the refresh refuses, names both spacings, and
    writes nothing."""
    levels = _levels("GJR-GARCH(1,1)", [0.03, 0.02, 0.05, 0.08, 0.88, 7.0], len(dates), seed=3)
    assert main(["template", kind, "-o", str(tmp_path / "empty.xlsx")]) == 0
    out = tmp_path / "book.xlsx"
    code = main(["refresh", str(tmp_path / "empty.xlsx"), "--data", str(_csv(tmp_path / "d.csv", dates, levels)),
                 "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "wrong horizon" in err and "Traceback" not in err and err.count("\n") == 1, err
    assert ("usually 31 days apart" in err) == (kind == "daily")
    assert not out.exists() and not out.with_name("book-values.xlsx").exists()


def _inputs_row(ws, label):
    """The row of the Inputs sheet whose label (column A) starts with ``label``."""
    return next(r for r in range(1, ws.max_row + 1) if str(ws.cell(r, 1).value or "").startswith(label))


def test_periods_unlike_the_template_year_are_refused(small, tmp_path, capsys):
    """A monthly book whose Inputs say 52 periods a year: its one-month figures would be one week's
    and its 'annualised' ones scaled by 52 under labels that say months; refused."""
    book, dates, levels = small
    wb = openpyxl.load_workbook(book)
    ws = wb["Inputs"]
    ws.cell(_inputs_row(ws, "periods per year"), 2).value = 52
    edited = tmp_path / "weekly.xlsx"
    wb.save(edited)
    path = _csv(tmp_path / "n.csv", [dt.date(2010, 1, 31)], [levels[-1] * 1.01])
    code = main(["refresh", str(edited), "--data", str(path), "-o", str(tmp_path / "x.xlsx")])
    err = capsys.readouterr().err
    assert code == 2 and "periods=52" in err and "would not be months" in err and "Traceback" not in err, err
    assert not (tmp_path / "x.xlsx").exists()


def test_a_fit_that_cannot_run_gives_its_own_reason(tmp_path, capsys):
    """Three levels into the monthly template: the fit's own message (too few returns for the
    model), not the #REF! of the figures that read it."""
    out = tmp_path / "book.xlsx"
    path = _csv(tmp_path / "h.csv", _month_ends(3, 2000), [100.0, 101.0, 99.5])
    code = main(["refresh", str(template_file()), "--data", str(path), "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "needs at least" in err and "#REF!" not in err and "Traceback" not in err, err
    assert not out.exists()


def test_a_known_date_with_another_level_shows_where_they_differ(small, tmp_path, capsys):
    """The book's level and the file's, printed to the digit where they part (both read 10775.9
    at six digits)."""
    book, dates, levels = small
    code, out = _bad(small, tmp_path, [(dates[-1], f"{levels[-1] * (1 + 3e-7):.10f}")])
    err = capsys.readouterr().err
    assert code == 2 and "already in the workbook" in err
    shown = re.findall(r"level ([0-9.e+-]+), but the file says ([0-9.e+-]+);", err)
    assert shown and shown[0][0] != shown[0][1], err


@pytest.mark.parametrize("date_cell", [None, "2010-01-31"], ids=["blank", "text"])
def test_a_level_without_a_date_is_flagged_by_the_data_check(small, tmp_path, capsys, date_cell):
    """A level pasted in Excel below the data with its date left blank or typed as text: its
    return enters the fit but the as-of date (the largest date) stays last month's.  The
    workbook's visible data check (the name data_check) says so, and `volcast recalc` repeats it
    on standard error (a refresh refuses such rows before)."""
    book, dates, levels = small
    wb = openpyxl.load_workbook(book)
    sheet, r1, rcol, r2, _ = name_range(wb, "returns")
    ws = wb[sheet]
    last = max(r for r in range(r1, r2 + 1) if isinstance(ws.cell(r, rcol - 1).value, (int, float)))
    ws.cell(last + 1, rcol - 2).value = date_cell
    ws.cell(last + 1, rcol - 1).value = levels[-1] * 1.01
    edited = tmp_path / "pasted.xlsx"
    wb.save(edited)
    out = tmp_path / "out.xlsx"
    assert main(["recalc", str(edited), "-o", str(out)]) == 0
    err = capsys.readouterr().err
    assert "have no date" in err and "WARNING" in err, err
    check = figures_from_file(out)
    nobs = check["nobs"]
    assert nobs == len(dates)  # the pasted return is in the fit ...
    assert check["last_date"].date() == dates[-1]  # ... while the as-of date stays the month before
    cwb = openpyxl.load_workbook(out, data_only=True)
    s, r, c, _, _ = name_range(cwb, "data_check")
    assert str(cwb[s].cell(r, c).value).startswith("WARNING: 1 level(s) on the Data sheet have no date")


def _set_input(book, label, value, out):
    wb = openpyxl.load_workbook(book)
    ws = wb["Inputs"]
    ws.cell(_inputs_row(ws, label), 2).value = value
    wb.save(out)
    return out


def test_returns_said_unlike_the_data_formulas_are_refused(small, tmp_path, capsys):
    """The Inputs say the returns are simple (in percent) while the Data sheet's formulas compute
    percent log returns: the VaR in % of value would be converted as if from simple returns
    (exp(c r) - 1 against c r; common practice); refused, naming both."""
    book, dates, levels = small
    edited = _set_input(book, "returns are", "simple100", tmp_path / "simple.xlsx")
    path = _csv(tmp_path / "n.csv", [dt.date(2010, 1, 31)], [levels[-1] * 1.01])
    code = main(["refresh", str(edited), "--data", str(path), "-o", str(tmp_path / "x.xlsx")])
    err = capsys.readouterr().err
    assert code == 2 and "returns=simple100" in err and "compute log returns in percent" in err, err
    assert not (tmp_path / "x.xlsx").exists()


def test_a_new_var_level_is_noted_in_the_history(small, tmp_path):
    """The VaR level changed on the Inputs sheet between two refreshes: the History's var_1m and
    es_1m change basis, and the row's moved column says so; an unchanged level says nothing."""
    book, dates, levels = small
    first = refresh(book, _csv(tmp_path / "a.csv", [dt.date(2010, 1, 31)], [levels[-1] * 1.01]), tmp_path / "a.xlsx")
    assert "VaR level" not in first.history["moved"]
    edited = _set_input(first.out, "VaR level", 0.95, tmp_path / "a95.xlsx")
    second = refresh(edited, _csv(tmp_path / "b.csv", [dt.date(2010, 2, 28)], [levels[-1] * 1.02]), tmp_path / "b.xlsx")
    assert "VaR level 0.99 -> 0.95" in second.history["moved"] and "not comparable" in second.history["moved"]
    third = refresh(second.out, _csv(tmp_path / "c.csv", [dt.date(2010, 3, 31)], [levels[-1] * 1.0]), tmp_path / "c.xlsx")
    assert "VaR level" not in third.history["moved"]
    header, rows = _history(third.out)
    assert "VaR level 0.99 -> 0.95" in rows[-2]["moved"] and "VaR level" not in (rows[-1]["moved"] or "")
    # the note's row is as tall as its wrapped lines (LibreOffice and Excel do not fit it on opening)
    ws = openpyxl.load_workbook(third.out)["History"]
    noted = next(r for r in range(2, ws.max_row + 1) if "VaR level" in str(ws.cell(r, HISTORY_HEADER.index("moved") + 1).value))
    assert (ws.row_dimensions[noted].height or 15) >= 12.75 * 3


def test_the_history_prints_the_run_beside_the_estimates(monthly):
    """The History sheet prints on two pages wide: the run's time and date repeat on the second,
    and the estimates' headers added by name look like the template's."""
    _, _, _, res = monthly
    ws = openpyxl.load_workbook(res.out)["History"]
    assert ws.print_title_cols in ("$A:$B", "A:B")
    added = [c for c in ws[1] if c.value and c.value not in HISTORY_HEADER]
    assert added and all(c.fill.fgColor.rgb == ws["A1"].fill.fgColor.rgb for c in added)
