"""`volcast refresh`: new months appended, duplicates skipped, conflicts refused with nothing
written, and an estimate-history row with the two-standard-error flag."""

import csv
import datetime as dt
import hashlib

import openpyxl
import pytest

from xlfuncs.cli import main
from xlfuncs.demo import data_file, run_demo
from xlfuncs.headless.recalc import RecalcError
from xlfuncs.headless.refresh import refresh


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    return run_demo(tmp_path_factory.mktemp("r"))["workbook"]


def _last(path=None):
    rows = list(csv.DictReader(open(data_file())))
    return dt.date.fromisoformat(rows[-1]["date"]), float(rows[-1]["level"])


def _csv(path, rows):
    path.write_text("date,level\n" + "".join(f"{d},{v}\n" for d, v in rows))
    return path


def test_new_months_are_appended_and_history_grows(book, tmp_path):
    d0, v0 = _last()
    new = _csv(tmp_path / "n.csv", [(d0, v0), ("2026-11-30", v0 * 1.01), ("2026-12-31", v0 * 0.99)])
    before = hashlib.sha256(book.read_bytes()).hexdigest()
    out, row, report, added = refresh(book, new, tmp_path / "o.xlsx")
    assert hashlib.sha256(book.read_bytes()).hexdigest() == before
    assert added == 2 and report.error_cells == []
    wb = openpyxl.load_workbook(out, data_only=True)
    data = wb["Data"]
    dates = [data.cell(r, 1).value for r in range(2, data.max_row + 1) if data.cell(r, 1).value]
    assert dates[-1].date() == dt.date(2026, 12, 31) and len(dates) == len(set(dates))
    hist = list(wb["History"].iter_rows(values_only=True))
    assert hist[0][:10] == ("run time", "last date", "nobs", "model", "dist", "loglik", "vol 1m (%)",
                            "vol 12m (%)", "VaR 1m (%)", "flag")
    assert len(hist) == 2 and hist[1][2] == len(dates) - 1  # one return fewer than levels
    assert {"mu", "omega", "beta[1]", "nu"} <= set(hist[0])
    # a second refresh with the same file adds nothing new but another history row
    out2, row2, _, added2 = refresh(out, new, tmp_path / "o2.xlsx")
    assert added2 == 0
    assert len(list(openpyxl.load_workbook(out2)["History"].iter_rows())) == 3
    assert not row2["flag"]  # the same data: no parameter moved


def test_a_parameter_that_moved_is_flagged(book, tmp_path):
    d0, v0 = _last()
    out, _, _, _ = refresh(book, _csv(tmp_path / "a.csv", [("2026-11-30", v0)]), tmp_path / "a.xlsx")
    wb = openpyxl.load_workbook(out)
    hist = wb["History"]
    header = [c.value for c in hist[1]]
    hist.cell(2, header.index("beta[1]") + 1, 0.2)  # pretend last month's beta was far away
    wb.save(tmp_path / "edited.xlsx")
    _, row, _, _ = refresh(tmp_path / "edited.xlsx", _csv(tmp_path / "b.csv", [("2026-12-31", v0)]),
                           tmp_path / "b.xlsx")
    assert row["flag"].startswith("moved more than 2 SE") and "beta[1]" in row["flag"]


@pytest.mark.parametrize("rows,pattern", [
    ([("2026-10-30", 1.0)], "already in the workbook with level"),
    ([("1990-01-31", 100.0)], "older than the workbook's last date"),
    ([("2026-12-31", 100.0), ("2026-11-30", 100.0)], "not after the previous new date"),
    ([("30/11/2026", 100.0)], "line 2: cannot read a date"),
    ([("2026-11-30", -5)], "line 2: cannot read a date"),
])
def test_bad_rows_are_refused_and_nothing_is_written(book, tmp_path, rows, pattern):
    out = tmp_path / "x.xlsx"
    with pytest.raises(RecalcError, match=pattern):
        refresh(book, _csv(tmp_path / "bad.csv", rows), out)
    assert not out.exists()


def test_cli_refresh(book, tmp_path, capsys):
    d0, v0 = _last()
    assert main(["refresh", str(book), "--data", str(_csv(tmp_path / "c.csv", [("2026-11-30", v0)])),
                 "-o", str(tmp_path / "c.xlsx")]) == 0
    assert "added 1 new observation" in capsys.readouterr().out
    assert main(["refresh", str(book), "--data", str(_csv(tmp_path / "d.csv", [("2026-10-30", 1.0)])),
                 "-o", str(tmp_path / "d.xlsx")]) == 2
    assert capsys.readouterr().err.startswith("volcast: ")
