"""Bounded worksheet calls and bounded ERROR texts.

Each bound of ``xlfuncs/sheet/bounds.py`` is enforced: a call just past it answers one ``ERROR:``
cell that names the bound (number and what it counts), before any long work starts; a call at the
bound passes the check (checked on the check itself, so that no test spends seconds fitting).  The
times behind the bounds are measured by ``benchmarks/bounds_timing.py``, never here.

ERROR texts quote at most a short printable excerpt of what the user gave, and say values in a
spreadsheet user's words (TRUE, 2020-01-31, NaN, infinity).
"""

import datetime as dt
import re

import numpy as np
import pytest

from xlfuncs import VOLBACKTEST, VOLCOMPARE, VOLFIT, VOLFORECAST, VOLLOGLIK, VOLRISK, VOLSERIES, VOLSIM, VOLTESTS
from xlfuncs.core import get_distribution, parse_model
from xlfuncs.core.errors import EXCERPT_CHARS, excerpt
from xlfuncs.core.simulate import simulate
from xlfuncs.sheet import bounds
from xlfuncs.sheet.bounds import BoundError
from xlfuncs.sheet.cells import CHAINED_ERROR_CHARS, MAX_ERROR_CHARS, shown
from xlfuncs.sheet.functions import fit_from_cells


def _returns(n, seed=5):
    x = simulate(parse_model("GARCH(1,1)"), get_distribution("normal"), np.array([0.0, 0.1, 0.1, 0.8]), n,
                 rng=np.random.default_rng(seed))[:, 0]
    return [[float(v)] for v in x]


R = _returns(300)


def _error(result) -> str:
    assert len(result) == 1 and len(result[0]) == 1, result
    text = result[0][0]
    assert isinstance(text, str) and text.startswith("ERROR: "), text
    return text


def _egarch_table(paths=None):
    rows = [["model", "EGARCH(1,1)"], ["mu", 0.0], ["omega", 0.01], ["alpha1", 0.1], ["gamma1", -0.05],
            ["beta1", 0.9]]
    return rows + ([["options", f"paths={paths}"]] if paths else [])


def _spec(model, dist="normal"):
    return parse_model(model), get_distribution(dist)


# ---------------------------------------------------------------------------------------------
# model size


@pytest.mark.parametrize("model, dist, k, limit", [
    ("AR(12)-ARCH(4)", "normal", 18, bounds.FIT_PARAMS),  # 1 + 12 + 1 + 4
    ("ARMA(6,6)-GARCH(1,1)", "t", 17, bounds.FIT_PARAMS),  # 1 + 12 + 3 + nu
    ("EGARCH(3,3)", "normal", 11, bounds.EGARCH_FIT_PARAMS),  # mu, omega, 3 alpha, 3 gamma, 3 beta
    ("MA(2)-EGARCH(2,2)", "ged", 11, bounds.EGARCH_FIT_PARAMS),
    ("ARMA(1,1)-EGARCH(2,2)", "skewt", 12, bounds.EGARCH_FIT_PARAMS),
])
def test_a_model_past_the_size_bound_is_refused_before_fitting(model, dist, k, limit):
    text = _error(VOLFIT(R, model, dist))
    assert f"has {k} parameters" in text and f"of at most {limit}" in text
    assert ("EGARCH models" in text) == ("EGARCH" in model)


@pytest.mark.parametrize("model, dist", [("ARMA(6,6)-GARCH(1,1)", "normal"), ("ARMA(5,5)-GARCH(1,1)", "skewt"),
                                         ("GJR-GARCH(3,3)", "skewt"),
                                         ("EGARCH(1,2)", "normal"), ("EGARCH(1,1)", "t"),
                                         ("AR(2)-EGARCH(2,1)", "t"), ("EGARCH(2,2)", "skewt"),
                                         ("ARMA(1,1)-EGARCH(1,2)", "skewt")])
def test_a_model_at_the_size_bound_passes(model, dist):
    spec, d = _spec(model, dist)
    k = len(spec.param_names) + len(d.param_names)
    assert k == (bounds.EGARCH_FIT_PARAMS if spec.variance == "egarch" else bounds.FIT_PARAMS) or k < bounds.FIT_PARAMS
    bounds.check_fit(spec, d)  # no exception


def test_the_command_line_is_not_bounded():
    result, _ = fit_from_cells(R, "AR(12)-ARCH(4)", None, None, bounded=False)
    assert len(result.names) == 18 > bounds.FIT_PARAMS
    with pytest.raises(BoundError, match="has 18 parameters"):
        fit_from_cells(R, "AR(12)-ARCH(4)")


# ---------------------------------------------------------------------------------------------
# VOLCOMPARE


def test_compare_candidates_bound():
    models = ", ".join(["GARCH(1,1)", "ARCH(1)", "GJR-GARCH(1,1)", "IGARCH(1,1)", "ARCH(2)", "GARCH(2,1)", "CONST"])
    text = _error(VOLCOMPARE(R, models, "normal, t, ged, skewt"))  # 7 x 4 = 28
    assert f"28 candidates; at most {bounds.COMPARE_CANDIDATES}" in text
    bounds.check_compare(bounds.COMPARE_CANDIDATES, [_spec("GARCH(1,1)")] * bounds.COMPARE_CANDIDATES)


def test_compare_work_bound():
    # EGARCH(2,2) (k = 8, 9, 9), AR(2)-EGARCH(2,1) (9, 10, 10) and ARMA(1,1)-EGARCH(1,2) (8, 9, 9):
    # 3 x (64 + 81 + 81 + 81 + 100 + 100 + 64 + 81 + 81)
    text = _error(VOLCOMPARE(R, "EGARCH(2,2), AR(2)-EGARCH(2,1), ARMA(1,1)-EGARCH(1,2)", "normal, t, ged"))
    assert f"weigh 2,199 units of work (9 EGARCH among them); at most {bounds.COMPARE_WORK:,}" in text
    text = _error(VOLCOMPARE(R, [["ARMA(6,6)-GARCH(1,1)"]] * 7))  # 7 x 16 x 16
    assert "weigh 1,792 units" in text
    bounds.check_compare(6, [_spec("ARMA(6,6)-GARCH(1,1)")] * 6)  # 1,536: passes
    # 3 EGARCH(1,1) (k = 5, 6, 6) and GARCH(1,1) (k = 4, 5, 5): 3 x (25 + 36 + 36) + 16 + 25 + 25 = 357: passes
    bounds.check_compare(6, [_spec(m, d) for m in ("GARCH(1,1)", "EGARCH(1,1)") for d in ("normal", "t", "ged")])
    bounds.check_compare(5, [_spec("AR(2)-EGARCH(2,1)", "t")] * 5)  # 5 x 3 x 100 = 1,500: passes
    with pytest.raises(BoundError, match="1,800 units"):  # six EGARCH models of 10 parameters: 6 x 3 x 100
        bounds.check_compare(6, [_spec("AR(2)-EGARCH(2,1)", "t")] * 6)


def test_the_templates_comparison_passes():
    # workbook_templates/build_templates.py compares GARCH(1,1), GJR-GARCH(1,1) and EGARCH(1,1) with normal and t
    pairs = [_spec(m, d) for m in ("GARCH(1,1)", "GJR-GARCH(1,1)", "EGARCH(1,1)") for d in ("normal", "t")]
    # 16 + 25 (GARCH), 25 + 36 (GJR), 3 x (25 + 36) (EGARCH)
    assert sum(bounds.weight(s, d) for s, d in pairs) == 285 <= bounds.COMPARE_WORK
    bounds.check_compare(6, pairs)


def test_an_in_mean_egarch_keeps_its_differenced_weight():
    # an in-mean EGARCH runs one observation at a time with numerical derivatives, as every EGARCH
    # did before its compiled derivatives: k x k x (25 + IN_MEAN_WEIGHT), and at most 6 parameters
    spec, d = _spec("EGARCH(1,1)-M")  # mu, lambda_m, omega, alpha, gamma, beta
    assert bounds.weight(spec, d) == 36 * (25 + bounds.IN_MEAN_WEIGHT) == 1260
    assert bounds.weight(*_spec("EGARCH(1,1)")) == 25 * 3
    with pytest.raises(BoundError, match="EGARCH models of at most 6"):
        bounds.check_fit(*_spec("EGARCH(1,1)-M", "t"))


def test_a_candidate_past_the_size_bound_gets_its_own_error_row():
    rows = VOLCOMPARE(R, "GARCH(1,1), EGARCH(3,3)")
    assert rows[1][0] == "GARCH(1,1)" and isinstance(rows[1][2], float)
    assert rows[2][0] == "EGARCH(3,3)" and rows[2][2].startswith("ERROR: EGARCH(3,3) with normal shocks has 11")


def test_candidates_that_do_not_parse_count_but_do_not_stop_the_others():
    rows = VOLCOMPARE(R, "GARCH(1,1), FOO")
    assert isinstance(rows[1][2], float) and rows[2][2].startswith("ERROR: model \"FOO\"")
    models = ", ".join(["FOO"] * 20 + ["GARCH(1,1)"] * 5)
    assert "25 candidates" in _error(VOLCOMPARE(R, models))


# ---------------------------------------------------------------------------------------------
# VOLBACKTEST


def test_backtest_estimation_bound():
    r = _returns(1600)
    text = _error(VOLBACKTEST(r, "GARCH(1,1)", 1000))  # 600 estimations x 1,000 returns x 16 units
    assert f"weighs 9,600,000 units of work (estimations 9,600,000); a worksheet call does at most " \
           f"{bounds.BACKTEST_WORK:,}" in text
    spec, d = _spec("GARCH(1,1)")
    bounds.check_backtest(spec, d, 1100, 500, "rolling", 1, True, 20000)  # 600 x 500 x 16 = 4,800,000
    with pytest.raises(BoundError, match="estimations 5,996,000"):  # expanding windows grow: 16 x sum(500..999)
        bounds.check_backtest(spec, d, 1000, 500, "expanding", 1, True, 20000)
    with pytest.raises(BoundError, match="estimations 6,250,000"):  # GJR-GARCH(1,1): 25 units a return
        bounds.check_backtest(*_spec("GJR-GARCH(1,1)"), 1000, 500, "rolling", 1, True, 20000)


def test_backtest_egarch_bound():
    # 250 estimations x 500 returns x 75 (3 x 5 x 5), 500 evaluations x 500 x (2 + 2) / 2, 500 x 20,000
    # draws x 5 / 100
    text = _error(VOLBACKTEST(_returns(1000), "EGARCH(1,1)", 500, 0.99, "refit=2"))
    assert "weighs 10,375,000 units of work (estimations 9,375,000, EGARCH evaluations 500,000, simulated " \
           "draws 500,000)" in text
    spec, d = _spec("EGARCH(1,1)")
    bounds.check_backtest(spec, d, 1000, 500, "rolling", 5, True, 20000)  # 100 estimations: 3,750,000 + 1,000,000


def test_backtest_from_an_egarch_table_is_bounded_too():
    # no estimation: 1,250 evaluations on 250 returns x (2 + 2) / 2, and 1,250 x 1,000,000 draws x 5 / 100
    text = _error(VOLBACKTEST(_returns(1500), _egarch_table(paths=1_000_000), 250))
    assert "(estimations 0, EGARCH evaluations 625,000, simulated draws 62,500,000)" in text
    rows = VOLBACKTEST(_returns(300), _egarch_table(), 250)  # 50 forecasts: well within
    assert rows[1] == ["forecasts", 50]


# ---------------------------------------------------------------------------------------------
# simulations


def test_sim_periods_paths_and_cells_bounds():
    table = _egarch_table()
    assert f"from 1 to {bounds.SIM_PERIODS}, got {bounds.SIM_PERIODS + 1}" in _error(VOLSIM(table, bounds.SIM_PERIODS + 1))
    assert f"from 1 to {bounds.SIM_PATHS}, got {bounds.SIM_PATHS + 1}" in _error(VOLSIM(table, 10, bounds.SIM_PATHS + 1))
    assert f"2,000,000 cells; at most {bounds.SIM_CELLS:,}" in _error(VOLSIM(table, 2000, 1000))
    bounds.check_sim(1000, 1000)  # at the bound


@pytest.mark.parametrize("func", ["VOLRISK", "VOLFORECAST"])
def test_simulated_draws_bound(func):
    table = _egarch_table(paths=1_000_000)
    h = bounds.SIM_DRAWS // 1_000_000 + 1
    text = _error(VOLRISK(R, table, 0.99, h) if func == "VOLRISK" else VOLFORECAST(R, table, h))
    assert f"1,000,000 paths x {h} periods" in text and f"at most {bounds.SIM_DRAWS:,}" in text
    bounds.check_draws(1_000_000, h - 1, func)  # at the bound


def test_one_period_risk_of_a_linear_model_is_exact_and_not_bounded():
    table = VOLFIT(R, "GARCH(1,1)", None, "paths=1000000")
    rows = VOLRISK(R, table, 0.99, 1)
    assert rows[1][0] == "VaR" and isinstance(rows[1][1], float)


# ---------------------------------------------------------------------------------------------
# ERROR texts: short printable excerpts of the input, spreadsheet words

HUGE = "GARCH" * 16_000  # 80,000 characters
CONTROL = "GAR\nCH\x00(1,\t1)\x1b"


def _calls(text):
    table = VOLFIT(R, "ARCH(1)")
    return {
        "VOLFIT model": VOLFIT(R, text),
        "VOLFIT dist": VOLFIT(R, "ARCH(1)", text),
        "VOLFIT options": VOLFIT(R, "ARCH(1)", None, text),
        "VOLFIT options value": VOLFIT(R, "ARCH(1)", None, "se=" + text),
        "VOLFIT returns cell": VOLFIT(R[:10] + [[text]] + R[10:]),
        "VOLSERIES what": VOLSERIES(R, table, text),
        "VOLSERIES fit": VOLSERIES(R, text),
        "VOLFORECAST horizon": VOLFORECAST(R, table, text),
        "VOLFORECAST fit cell": VOLFORECAST(R, [["model", "ARCH(1)"], ["omega", text], ["alpha1", 0.1]], 3),
        "VOLLOGLIK fit model": VOLLOGLIK(R, [["model", text], ["omega", 1.0]]),
        "VOLTESTS lags": VOLTESTS(R, table, text),
        "VOLRISK level": VOLRISK(R, table, text),
        "VOLCOMPARE models": VOLCOMPARE(R, [[text]]),
        "VOLCOMPARE dist": VOLCOMPARE(R, "ARCH(1)", text),
        "VOLBACKTEST model": VOLBACKTEST(R, text, 100),
        "VOLBACKTEST options": VOLBACKTEST(R, "ARCH(1)", 100, 0.99, "scheme=" + text),
        "VOLSIM periods": VOLSIM(table, text),
        "chained error": VOLFIT("ERROR: " + text),
    }


@pytest.mark.parametrize("text", [HUGE, CONTROL], ids=["80000 characters", "control characters"])
def test_error_texts_quote_a_short_printable_excerpt(text):
    for where, result in _calls(text).items():
        cells = [c for row in result for c in row if isinstance(c, str) and c.startswith("ERROR:")]
        assert cells, (where, result)
        quoted = CHAINED_ERROR_CHARS if where == "chained error" else EXCERPT_CHARS
        for c in cells:
            assert len(c) <= 400, (where, len(c))
            assert not re.search(r"[\x00-\x1f\x7f]", c), (where, c)
            assert "GARCH" * (quoted // 5 + 1) not in c, (where, c)  # never more of it than an excerpt
            if text is CONTROL and "GAR" in c:
                assert "\\n" in c or "\\x00" in c, (where, c)


def test_excerpt_cuts_and_escapes():
    assert excerpt("a" * EXCERPT_CHARS) == "a" * EXCERPT_CHARS
    assert excerpt("a" * (EXCERPT_CHARS + 1)) == "a" * (EXCERPT_CHARS - 3) + "..."
    assert excerpt("x\ny\tz\x00\u2028") == "x\\ny\\tz\\x00\\u2028"
    assert len(excerpt("\x00" * 1000)) <= EXCERPT_CHARS
    assert excerpt("\u00e9t\u00e9 \U0001F600") == "\u00e9t\u00e9 \U0001F600"  # printable text is kept as it is


def test_a_chained_error_keeps_its_reason_but_not_all_of_it():
    reason = "returns row 14 holds text " + "x" * 5000
    text = _error(VOLFIT("ERROR: " + reason))
    assert text.startswith("ERROR: returns holds an error from another cell: returns row 14 holds text xxx")
    assert len(text) <= len("ERROR: returns holds an error from another cell: ") + CHAINED_ERROR_CHARS


def test_every_error_cell_is_capped():
    from xlfuncs.sheet.cells import error_cell

    assert len(error_cell("y" * 100_000)[0][0]) == MAX_ERROR_CHARS


@pytest.mark.parametrize("cell, words", [
    (dt.datetime(2020, 1, 31), "holds the date 2020-01-31;"),
    (dt.datetime(2020, 1, 31, 12, 30), "holds the date 2020-01-31 12:30:00;"),
    (dt.date(2020, 1, 31), "holds the date 2020-01-31;"),
    (True, "holds the logical value TRUE;"),
    (np.bool_(False), "holds the logical value FALSE;"),
    ("#N/A", "holds the error #N/A;"),
    ("n/a", 'holds text "n/a";'),
    (float("nan"), "holds a value that is not a number; finite"),
    (float("inf"), "holds infinity; finite"),
    (float("-inf"), "holds minus infinity; finite"),
    ("inf", 'holds text "inf";'),  # a spreadsheet takes "inf" as text
])
def test_returns_cells_are_echoed_in_spreadsheet_words(cell, words):
    text = _error(VOLFIT(R[:13] + [[cell]] + R[13:]))
    assert text == f"ERROR: returns row 14 {words} numbers only"


@pytest.mark.parametrize("value, words", [
    (True, "got the logical value TRUE"), (dt.datetime(2021, 3, 4), "got the date 2021-03-04"),
    (2.5, "got 2.5"), (float("nan"), "got a value that is not a number"), (1e300, "got 1e+300"), ("twelve", 'got text "twelve"'),
])
def test_scalar_arguments_are_echoed_in_spreadsheet_words(value, words):
    table = VOLFIT(R, "ARCH(1)")
    assert _error(VOLFORECAST(R, table, value)).endswith(words)


@pytest.mark.parametrize("value, text", [
    (None, "a blank cell"), (True, "TRUE"), (False, "FALSE"), (dt.datetime(2020, 1, 31), "2020-01-31"),
    (float("nan"), "not a number"), (float("inf"), "infinity"), (-float("inf"), "minus infinity"), (3, "3"), (0.1, "0.1"),
    ("a\nb", '"a\\nb"'), ("x" * 100, '"' + "x" * (EXCERPT_CHARS - 3) + '..."'),
])
def test_shown(value, text):
    assert shown(value) == text
