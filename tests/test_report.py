"""Tests of ``volcast report`` (DESIGN.md "Command line"): the model-validation pack.

The report's numbers are checked against the worksheet functions called directly on the same
returns (VOLFIT with each kind of standard error, VOLTESTS, VOLSTABILITY, VOLBACKTEST, VOLDM on
VOLBACKTEST's QLIKE columns, VOLCOMPARE, VOLNEWS, VOLFORECAST, VOLRISK), the data summary
against NumPy/SciPy, and the workbook case also against the headline figures the workbook itself
stores under the template's defined names.  The HTML is checked to be self-contained, and bad
inputs to end with exit status 2 and one line, no traceback.  Where Chromium is installed the
report is rendered headless to PDF and PNG and the images are checked not to be blank.
"""

import math
import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from xlfuncs import (VOLBACKTEST, VOLCOMPARE, VOLDM, VOLFIT, VOLFORECAST, VOLNEWS, VOLRISK, VOLSTABILITY,
                     VOLTESTS)
from xlfuncs.cli import load_returns_csv, main

ROOT = Path(__file__).resolve().parents[1]
LEVELS = ROOT / "demo_data" / "equity_composite_monthly.csv"
RETURNS = ROOT / "demo_data" / "demo_returns.csv"


class _Tables(HTMLParser):
    """{table id: [[cell text, ...], ...]} of an HTML text, header row included."""

    def __init__(self):
        super().__init__()
        self.tables, self.cur, self.row, self.cell = {}, None, None, None

    def handle_starttag(self, tag, attrs):
        if tag == "table":
            self.cur = dict(attrs).get("id")
            self.tables[self.cur] = []
        elif tag == "tr" and self.cur is not None:
            self.row = []
            self.tables[self.cur].append(self.row)
        elif tag in ("td", "th") and self.row is not None:
            self.cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self.cell is not None:
            self.row.append("".join(self.cell).strip())
            self.cell = None
        elif tag == "table":
            self.cur = None

    def handle_data(self, data):
        if self.cell is not None:
            self.cell.append(data)


def tables(text):
    p = _Tables()
    p.feed(text)
    return p.tables


def same(text, value, rel=1e-5):
    """The report's cell (6 significant digits) shows ``value``."""
    if value is None:
        return text == ""
    if isinstance(value, bool):
        return text == ("TRUE" if value else "FALSE")
    if isinstance(value, (int, float)):
        if isinstance(value, float) and not math.isfinite(value):
            return text in ("", "infinity", "-infinity")
        return math.isclose(float(text), value, rel_tol=rel, abs_tol=1e-12)
    return text == str(value)


def measures(rows):
    """{measure: value} of a worksheet function's measure, value rows (header dropped)."""
    return {r[0]: r[1] for r in rows[1:]}


def cells(r):
    return [[float(x)] for x in r]


def run(argv, capsys):
    try:
        rc = main(argv)
    except SystemExit as exc:
        rc = exc.code
    out, err = capsys.readouterr()
    return rc, out, err


@pytest.fixture(scope="module")
def workbook_report(tmp_path_factory):
    """The demo workbook (volcast demo's first load of the bundled series) and its report."""
    from xlfuncs.demo import run_demo

    d = tmp_path_factory.mktemp("report-book")
    book = run_demo(d)["workbook"]
    out = d / "report.html"
    assert main(["report", str(book), "-o", str(out)]) == 0
    return Path(book), out.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def book_inputs(workbook_report):
    """Returns, model, dist, options and VaR level read from the workbook through the contract's
    defined names, independently of the report's own reader."""
    import openpyxl

    from xlfuncs.headless.contract import name_range

    book, _ = workbook_report
    wb = openpyxl.load_workbook(book, data_only=True)
    sheet, r1, c1, r2, _ = name_range(wb, "returns")
    vals = [wb[sheet].cell(r, c1).value for r in range(r1, r2 + 1)]
    r = [float(v) for v in vals if isinstance(v, (int, float))]
    fs, fr, fc, _, _ = name_range(wb, "fit")
    fit = {}
    for row in range(fr, fr + 40):
        k = wb[fs].cell(row, fc).value
        if k is None:
            break
        fit[k] = wb[fs].cell(row, fc + 1).value
    ls, lr, lc, _, _ = name_range(wb, "var_level")
    return {"r": r, "model": fit["model"], "dist": fit["dist"], "options": fit["options"],
            "level": float(wb[ls].cell(lr, lc).value)}


def test_workbook_report_fit_equals_volfit(workbook_report, book_inputs):
    _, text = workbook_report
    t = tables(text)
    b = book_inputs
    c = cells(b["r"])
    assert same(t["summary"][1][1], len(b["r"]))
    kinds = {}
    for kind in ("hessian", "opg", "robust"):
        opts = "; ".join(p for p in b["options"].split("; ") if not p.startswith("se=")) + f"; se={kind}"
        kinds[kind] = {row[0]: row for row in VOLFIT(c, b["model"], b["dist"], opts)[1:]}
    rows = t["fit"]
    assert rows[0] == ["parameter", "estimate", "se Hessian", "se OPG", "se robust", "t (robust)", "p (robust)"]
    assert [r[0] for r in rows[1:]] == ["mu", "phi[1]", "omega", "alpha[1]", "gamma[1]", "beta[1]", "nu"]
    for row in rows[1:]:
        name = row[0]
        assert same(row[1], kinds["robust"][name][1])
        assert same(row[2], kinds["hessian"][name][2])
        assert same(row[3], kinds["opg"][name][2])
        assert same(row[4], kinds["robust"][name][2])
        assert same(row[5], kinds["robust"][name][3])
        assert same(row[6], kinds["robust"][name][4])
    # the three kinds differ (the sandwich is not the Hessian under t shocks): not one column copied
    assert rows[3][2] != rows[3][3] != rows[3][4]
    stats_rows = dict((r[0], r[1]) for r in t["fitstats"][1:])
    for key in ("loglik", "aic", "bic", "nobs", "persistence", "uncond_variance", "half_life"):
        assert same(stats_rows[key], kinds["robust"][key][1])


def test_workbook_report_summary_against_numpy_scipy(workbook_report, book_inputs):
    # reference: NumPy and SciPy (scipy.stats.skew / kurtosis, population moments, Fisher's excess)
    from scipy import stats

    _, text = workbook_report
    s = dict((r[0], r[1]) for r in tables(text)["summary"][1:])
    r = np.array(book_inputs["r"])
    assert same(s["mean"], float(r.mean()))
    assert same(s["standard deviation (n - 1)"], float(r.std(ddof=1)))
    assert same(s["skewness"], float(stats.skew(r)))
    assert same(s["excess kurtosis"], float(stats.kurtosis(r)))
    assert same(s["minimum"], float(r.min())) and same(s["maximum"], float(r.max()))
    assert s["first date"] == "1996-02-29" and s["last date"] == "2026-10-30"  # demo_data/README.md


def test_workbook_report_tests_and_stability_equal_the_functions(workbook_report, book_inputs):
    _, text = workbook_report
    t = tables(text)
    b = book_inputs
    c = cells(b["r"])
    fit = VOLFIT(c, b["model"], b["dist"], b["options"])
    want = VOLTESTS(c, fit)
    assert t["tests"][0] == want[0]
    assert len(t["tests"]) == len(want)
    for got, row in zip(t["tests"][1:], want[1:]):
        assert got[0] == row[0] and got[4] == row[4]
        assert all(same(g, w) for g, w in zip(got[1:4], row[1:4]))
    # the README's point about readings: normality rejected under t shocks reads as expected
    jb = [r for r in t["tests"] if r[0] == "Jarque-Bera"][0]
    assert float(jb[3]) < 0.05 and "expected with t shocks" in jb[4]
    want = VOLSTABILITY(c, fit)
    assert t["stability"][0] == want[0]
    for got, row in zip(t["stability"][1:], want[1:]):
        assert got[0] == row[0] and got[4] == row[4]
        assert all(same(g, w) for g, w in zip(got[1:4], row[1:4]))
    assert t["stability"][-1][0] == "joint"


def _backtest_setup(text):
    repro = dict((r[0], r[1]) for r in tables(text)["repro"][1:])
    m = re.match(r"rolling window (\d+), refit every (\d+), (\d+) estimations", repro["backtest"])
    decay = re.search(r"decay=([0-9.]+)", repro["EWMA baseline"]).group(1)
    return int(m.group(1)), int(m.group(2)), int(m.group(3)), decay


def test_workbook_report_backtest_and_dm_equal_the_functions(workbook_report, book_inputs):
    _, text = workbook_report
    t = tables(text)
    b = book_inputs
    c = cells(b["r"])
    window, refit, fits, decay = _backtest_setup(text)
    assert window == len(b["r"]) // 3 and fits >= 30
    opts = f"dist={b['dist']}; refit={refit}; {b['options']}"
    want = measures(VOLBACKTEST(c, b["model"], window, b["level"], opts))
    got = dict((r[0], r[1]) for r in t["backtest"][1:])
    for key in ("forecasts", "exceptions", "exception rate", "Kupiec LR", "Kupiec p_value", "independence p_value",
                "conditional coverage p_value", "zone", "mean QLIKE", "mean MSE", "estimations", "coverage reading",
                "McNeil-Frey t", "McNeil-Frey p_value", "Acerbi-Szekely Z2", "Z2 p_value", "Z2 null", "ES reading"):
        assert same(got[key], want[key]), key
    # Diebold-Mariano of the QLIKE columns of the two backtests, as a sheet would do it
    ser_m = VOLBACKTEST(c, b["model"], window, b["level"], opts + "; what=series")
    ser_e = VOLBACKTEST(c, "EWMA", window, b["level"], f"dist=normal; refit={refit}; decay={decay}; what=series")
    assert ser_m[0][6] == ser_e[0][6] == "QLIKE"
    assert [r[0] for r in ser_m[1:]] == [r[0] for r in ser_e[1:]]  # the same forecast rows
    dm = measures(VOLDM([[r[6]] for r in ser_m[1:]], [[r[6]] for r in ser_e[1:]]))
    got = dict((r[0], r[1]) for r in t["dm"][1:])
    for key in ("mean_diff", "statistic", "p_value", "lags", "pairs"):
        assert same(got[key], dm[key]), key
    ew = dict((r[0], r[2]) for r in t["ewma"][1:])
    want_e = measures(VOLBACKTEST(c, "EWMA", window, b["level"], f"dist=normal; refit={refit}; decay={decay}"))
    for key in ("exceptions", "Kupiec p_value", "zone", "mean QLIKE"):
        assert same(ew[key], want_e[key]), key


def test_workbook_report_comparison_news_and_forecasts_equal_the_functions(workbook_report, book_inputs):
    book, text = workbook_report
    t = tables(text)
    b = book_inputs
    c = cells(b["r"])
    rows = t["compare"][1:]
    assert {r[1] for r in rows} == {"t", "normal"} and len(rows) == 8
    from xlfuncs.sheet.functions import fit_from_cells

    for r in rows:  # VOLCOMPARE one candidate at a time (the eight together exceed its work bound)
        want = VOLCOMPARE(c, r[0], r[1], b["options"])[1]
        assert r[0] == want[0] and r[1] == want[1]
        if isinstance(want[2], str):
            # past a worksheet call's bound (AR(1)-EGARCH(1,1)-t has 7 parameters): the command line's
            # route, the same fit without the bound (as volcast fit estimates it)
            assert "a worksheet call estimates" in want[2]
            res, _ = fit_from_cells(c, r[0], r[1], b["options"], bounded=False)
            want = [None, None, res.loglik, res.n_free, res.aic, res.bic, res.persistence, res.converged]
        assert all(same(g, w) for g, w in zip(r[2:8], want[2:8])), r
    fit = VOLFIT(c, b["model"], b["dist"], b["options"])
    news = t["news"][1:]
    curve = VOLNEWS(fit, [[float(r[1])] for r in news])
    assert all(same(r[2], v[0], rel=1e-4) for r, v in zip(news, curve))  # shocks shown to 6 digits
    term = t["term"]
    assert "returns=log100" in b["options"].replace(" ", "")  # the template's definition: percent log returns
    assert term[0][3:] == ["VaR (log return, %)", "ES (log return, %)", "VaR (% of value)", "ES (% of value)"]
    H = int(term[-1][1])
    fc = VOLFORECAST(c, fit, H, "table")
    for row in term[1:]:
        h = int(row[1])
        rk = measures(VOLRISK(c, fit, b["level"], h))
        assert same(row[2], math.sqrt(fc[h][4]))
        assert same(row[3], rk["VaR"]) and same(row[4], rk["ES"])
        assert same(row[5], rk["VaR_value"]) and same(row[6], rk["ES_value"])
        # units: a log-return quantile in percent is a loss of 100 (1 - exp(-VaR/100)) % of value
        # (README "VaR units"; the quantile of a monotone transform is the transform of the quantile)
        assert math.isclose(float(row[5]), 100 * (1 - math.exp(-float(row[3]) / 100)), rel_tol=1e-4)
        assert float(row[6]) < 100 * (1 - math.exp(-float(row[4]) / 100)) + 1e-6  # Jensen: mean of a concave map
    # the workbook's own headline figures, read by name (DESIGN.md "Templates"), agree
    from xlfuncs.headless.contract import figures_from_file

    f = figures_from_file(book)
    assert same(term[1][5], f["var_1m"]) and same(term[1][6], f["es_1m"])
    assert same(term[1][2], f["vol_1m"]) and same(term[12][2], f["vol_12m"])


def test_report_is_self_contained(workbook_report):
    _, text = workbook_report
    assert text.startswith("<!DOCTYPE html>")
    low = text.lower()
    assert "<script" not in low and "<link" not in low and "@import" not in low and "<iframe" not in low
    refs = re.findall(r"""\b(?:src|href)\s*=\s*["']([^"']*)["']""", text, flags=re.I)
    assert refs and all(r.startswith(("data:image/png;base64,", "#")) for r in refs), \
        [r[:40] for r in refs if not r.startswith(("data:", "#"))]
    assert not re.search(r"url\(\s*['\"]?(?!data:)", low)
    assert low.count("<img") == 5
    for section in ("Data", "Fit and standard errors", "Diagnostics", "Parameter stability", "Walk-forward backtest",
                    "Model comparison", "News-impact curve", "Forecast term structure", "Cautions",
                    "Reproducibility"):
        assert section in text
    assert "model estimate, not investment advice" in text and "model-risk policy" in text
    assert "@media print" in text and "break-before: page" in text


def test_report_reproducibility_block(workbook_report, book_inputs):
    import hashlib

    import scipy

    book, text = workbook_report
    repro = dict((r[0], r[1]) for r in tables(text)["repro"][1:])
    assert repro["SHA-256 of the input file"] == hashlib.sha256(book.read_bytes()).hexdigest()
    data = "\n".join(f"{x:.17g}" for x in book_inputs["r"]) + "\n"
    assert repro["SHA-256 of the returns as used"].split()[0] == hashlib.sha256(data.encode()).hexdigest()
    assert repro["model"] == book_inputs["model"] and repro["dist"] == book_inputs["dist"]
    assert repro["SciPy"] == scipy.__version__ and repro["NumPy"] == np.__version__
    assert repro["simulation seed (VaR/ES beyond one period)"] == "20240531"
    from xlfuncs.core.esbacktest import BOOTSTRAP, SEED, SIMULATIONS  # what the ES tests ran with

    assert repro[f"ES test seed (bootstrap {BOOTSTRAP:,}, Z2 {SIMULATIONS:,} samples)"] == str(SEED)


def test_report_states_the_paths_volrisk_simulated(workbook_report, book_inputs):
    """The paths the report says its VaR/ES beyond one period come from are the ones each VOLRISK
    call states in its method row (a stale default once stood there: 20,000 against 131,072)."""
    _, text = workbook_report
    b = book_inputs
    c = cells(b["r"])
    fit = VOLFIT(c, b["model"], b["dist"], b["options"])
    used = set()
    for row in tables(text)["term"][1:]:
        h = int(row[1])
        if h > 1:
            method = measures(VOLRISK(c, fit, b["level"], h))["method"]
            used.add(int(re.search(r"\((\d+) paths", method).group(1)))
    repro = dict((r[0], r[1]) for r in tables(text)["repro"][1:])
    stated = repro["simulated paths (VaR/ES beyond one period)"]
    assert {int(x.replace(",", "")) for x in re.findall(r"([\d,]+) simulated paths", stated)} == used
    assert f"(seed {b.get('seed', 20240531)}) with {stated}." in text or re.search(r"\(seed \d+\) with " + re.escape(stated), text)


def test_paths_in_words_name_each_count_with_its_horizons():
    from xlfuncs.report import _paths_words

    steps = [21 * k for k in range(1, 13)]  # a daily series' months
    assert _paths_words({h: 131072 for h in steps}, steps, "month") == "131,072 simulated paths"
    mixed = {h: (131072 if h <= 63 else 65536) for h in steps}
    assert _paths_words(mixed, steps, "month") == \
        "131,072 simulated paths at months 1-3, 65,536 simulated paths at months 4-12"
    one = {h: (131072 if h <= 231 else 65536) for h in steps}
    assert _paths_words(one, steps, "month").endswith("65,536 simulated paths at month 12")
    assert _paths_words({2: 131072}, [1, 2], "period") == "131,072 simulated paths"  # one period is exact


def test_csv_report_with_levels_and_dates(tmp_path, capsys):
    out = tmp_path / "r.html"
    # 2,000 simulated paths instead of 20,000 keep the test short; the figures are checked against
    # VOLFIT, whose estimate the paths do not touch
    rc, stdout, err = run(["report", str(LEVELS), "--levels", "--model", "GARCH(1,1)", "--dist", "t",
                           "--options", "paths=2000", "-o", str(out)], capsys)
    assert rc == 0, err
    assert "report: walk-forward backtest" in err  # progress lines on standard error
    text = out.read_text(encoding="utf-8")
    t = tables(text)
    r = load_returns_csv(str(LEVELS), levels=True).returns
    s = dict((x[0], x[1]) for x in t["summary"][1:])
    assert s["returns"] == str(len(r)) and s["last date"] == "2026-10-30"
    # --levels gives percent log returns, so returns=log100 is added and VaR in % of value shown
    fit = {row[0]: row for row in VOLFIT(cells(r), "GARCH(1,1)", "t", "paths=2000; returns=log100")[1:]}
    for row in t["fit"][1:]:
        assert same(row[1], fit[row[0]][1]) and same(row[4], fit[row[0]][2])
    assert "VaR (% of value)" in t["term"][0]
    # monthly dates: 12 periods a year, horizons 1..12 months
    assert [row[1] for row in t["term"][1:]] == [str(k) for k in range(1, 13)]


def test_csv_report_without_a_returns_definition_shows_no_value_figures(tmp_path, capsys):
    out = tmp_path / "r.html"
    lines = RETURNS.read_text(encoding="utf-8").splitlines()[:151]  # the first 150 returns: a short run
    (tmp_path / "r.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    rc, _, err = run(["report", str(tmp_path / "r.csv"), "--options", "paths=1000", "-o", str(out)], capsys)
    assert rc == 0, err
    text = out.read_text(encoding="utf-8")
    term = tables(text)["term"]
    assert term[0] == ["horizon (months)", "periods", "cumulative vol", "VaR (return units)", "ES (return units)"]
    assert "% of value" not in " ".join(term[0]) and "returns=log100" in text


# The units each returns definition gives (common practice, the usual definitions): a log return is
# ln(p[t]/p[t-1]), a simple one p[t]/p[t-1] - 1, "100" meaning in percent; a position's value changes
# by exp(R) - 1 over a cumulative log return R, and over one period by the simple return itself.
UNIT_CASES = [
    # (returns=..., the units section 8 states, the VaR column's label, words that must not appear)
    (None, "VaR and ES (in the units of the returns given)", "VaR (return units)", ["log return", "simple return"]),
    ("log100", "VaR and ES (log returns in percent)", "VaR (log return, %)", ["simple return"]),
    ("log", "VaR and ES (log returns)", "VaR (log return)", ["simple return", "in percent"]),
    ("simple100", "VaR and ES (simple returns in percent)", "VaR (simple return, %)", ["log return", "exp("]),
    ("simple", "VaR and ES (simple returns)", "VaR (simple return)", ["log return", "exp(", "in percent"]),
]


@pytest.mark.parametrize("returns, said, column, absent", UNIT_CASES, ids=[str(c[0]) for c in UNIT_CASES])
def test_csv_report_states_the_units_of_the_returns_definition(tmp_path, capsys, returns, said, column, absent):
    lines = RETURNS.read_text(encoding="utf-8").splitlines()[:151]  # the first 150 returns: a short run
    if returns in ("log", "simple"):  # the demo's percentages as fractions
        lines = lines[:1] + [f"{d},{float(r) / 100!r}" for d, r in (x.split(",") for x in lines[1:])]
    (tmp_path / "r.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    options = "periods=12; paths=1000" + (f"; returns={returns}" if returns else "")
    rc, _, err = run(["report", str(tmp_path / "r.csv"), "--options", options, "-o", str(tmp_path / "r.html")], capsys)
    assert rc == 0, err
    text = (tmp_path / "r.html").read_text(encoding="utf-8")
    s8 = re.sub(r"<[^>]+>", "", re.search(r'<section id="s8">(.*?)</section>', text, re.S).group(1))
    s1 = re.sub(r"<[^>]+>", "", re.search(r'<section class="first" id="s1">(.*?)</section>', text, re.S).group(1))
    assert said in s8 and "log-return units" not in text
    for words in absent:
        assert words not in s1 + s8, words
    term = tables(text)["term"]
    assert term[0][3] == column and term[0][4] == column.replace("VaR", "ES")
    if returns is None:
        assert "% of value" not in s8.replace("no figure is in % of value", "") and len(term[0]) == 5
        return
    assert term[0][5:] == ["VaR (% of value)", "ES (% of value)"]
    # the "% of value" columns are value losses: one period's from its VaR as the definition says
    var, var_value = float(term[1][3]), float(term[1][5])
    c = 0.01 if returns.endswith("100") else 1.0
    expected = 100 * (1 - math.exp(-c * var)) if returns.startswith("log") else 100 * c * var
    assert math.isclose(var_value, expected, rel_tol=1e-4), (var_value, expected)


@pytest.mark.parametrize("make, argv, words", [
    (None, ["report", "{d}/nosuch.xlsx", "-o", "{d}/r.html"], "no such file"),
    (None, ["report", "{d}/nosuch.csv", "-o", "{d}/r.html"], "no such file"),
    ("plain", ["report", "{d}/plain.xlsx", "-o", "{d}/r.html"], "defined names returns, fit"),
    ("corrupt", ["report", "{d}/bad.xlsx", "-o", "{d}/r.html"], "not a readable .xlsx"),
    ("few", ["report", "{d}/few.csv", "-o", "{d}/r.html"], "too few returns"),
    (None, ["report", str(RETURNS), "--model", "FOO(1)", "-o", "{d}/r.html"], "not understood"),
    (None, ["report", str(RETURNS), "--dist", "cauchy", "-o", "{d}/r.html"], "unknown distribution"),
    (None, ["report", str(RETURNS), "--level", "1.5", "-o", "{d}/r.html"], "VaR level"),
    (None, ["report", str(RETURNS), "-o", "{d}/r.txt"], ".html"),
    (None, ["report", str(RETURNS)], "required"),
    ("template", ["report", "{d}/empty.xlsx", "-o", "{d}/r.html"], "holds no numbers"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, make, argv, words):
    import openpyxl

    if make == "plain":
        wb = openpyxl.Workbook()
        wb.active["A1"] = 1.5
        wb.save(tmp_path / "plain.xlsx")
    elif make == "corrupt":
        (tmp_path / "bad.xlsx").write_text("not a zip")
    elif make == "few":
        (tmp_path / "few.csv").write_text("date,return\n2020-01-31,1.0\n2020-02-28,-0.5\n2020-03-31,0.3\n")
    elif make == "template":
        from xlfuncs.demo import template_file

        shutil.copyfile(template_file(), tmp_path / "empty.xlsx")
    rc, out, err = run([a.replace("{d}", str(tmp_path)) for a in argv], capsys)
    assert rc == 2
    lines = [x for x in err.splitlines() if not x.startswith("report:")]
    assert len(lines) == 1 and lines[0].startswith("volcast: ") and words in lines[0], err
    assert "Traceback" not in err
    assert not (tmp_path / "r.html").exists()


def test_bad_workbook_in_a_process_prints_no_traceback(tmp_path):
    (tmp_path / "bad.xlsx").write_bytes(b"PK\x03\x04 broken")
    proc = subprocess.run([sys.executable, "-m", "xlfuncs.cli", "report", str(tmp_path / "bad.xlsx"), "-o",
                           str(tmp_path / "r.html")], capture_output=True, text=True, timeout=120, cwd=str(ROOT))
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1


def test_warm_start_reaches_the_same_maximum(simulated):
    # the rolling re-estimation's warm start: a start at the estimate itself returns that estimate
    from xlfuncs.core import fit

    r = simulated("GARCH(1,1)", "normal", [0.1, 0.2, 0.1, 0.8], 600, 11)
    a = fit(r, "GARCH(1,1)", "normal")
    b = fit(r, "GARCH(1,1)", "normal", starts=(a.params,))
    assert a.converged and b.converged
    assert math.isclose(a.loglik, b.loglik, rel_tol=1e-10)
    np.testing.assert_allclose(a.params, b.params, rtol=1e-5, atol=1e-8)
    # a start of the wrong length is ignored, not an error
    c = fit(r, "GARCH(1,1)", "normal", starts=(np.ones(2),))
    assert math.isclose(a.loglik, c.loglik, rel_tol=1e-10)


@pytest.mark.skipif(shutil.which("chromium") is None, reason="chromium is not installed (Debian package chromium)")
def test_report_renders_in_headless_chromium(workbook_report, tmp_path):
    from PIL import Image

    _, text = workbook_report
    html_file = tmp_path / "report.html"
    html_file.write_text(text, encoding="utf-8")
    common = ["chromium", "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars"]
    png, pdf = tmp_path / "shot.png", tmp_path / "report.pdf"
    subprocess.run(common + [f"--screenshot={png}", "--window-size=1200,9000", html_file.as_uri()],
                   capture_output=True, timeout=180)
    subprocess.run(common + ["--no-pdf-header-footer", f"--print-to-pdf={pdf}", html_file.as_uri()],
                   capture_output=True, timeout=180)
    assert png.is_file() and pdf.is_file()
    data = pdf.read_bytes()
    pages = len(re.findall(rb"/Type\s*/Page(?!s)", data))
    assert 6 <= pages <= 20, pages  # one section a page or more, not one endless page
    im = np.asarray(Image.open(png).convert("L"), dtype=float)
    # content all the way down: every 1,000-pixel band of the first 7,000 holds dark pixels (text, figures)
    for top in range(0, 7000, 1000):
        assert (im[top: top + 1000] < 128).mean() > 0.002, top
    # the figures were decoded: the embedded images give large non-white areas, not broken-image icons
    assert (im < 250).mean() > 0.05


def test_an_egarch_report_is_written_when_its_backtest_cannot_run(tmp_path, capsys, monkeypatch):
    """A backtest whose forecasts cannot all be computed (here every refit given the estimate an
    EGARCH fit reported, not converged, on a 123-month window of the demo returns) stops the
    backtest section with its reason; the rest of the report is written (exit 0), where the
    model-against-EWMA loss comparison used to stop the command with an internal error."""
    import numpy as np

    import xlfuncs.core.backtest as bmod
    from xlfuncs.demo import data_file

    real_fit = bmod.fit

    class Stuck:
        def __init__(self, res):
            self.params = np.array([0.18533187, 0.04330948, -0.22604702, -0.28469345, 0.97768951])
            self.converged = False
            self.names = res.names

    monkeypatch.setattr(bmod, "fit", lambda *a, **k: Stuck(real_fit(*a, **k)) if a[1].canonical.startswith("EGARCH")
                        else real_fit(*a, **k))
    out = tmp_path / "eg.html"
    rc, stdout, err = run(["report", str(data_file("demo_returns.csv")), "--model", "EGARCH(1,1)", "--dist", "normal",
                           "--options", "paths=2000", "-o", str(out)], capsys)
    assert rc == 0 and "internal error" not in err, err
    text = out.read_text(encoding="utf-8")
    assert "the backtest cannot be run" in text.lower() and "is not a number" in text
