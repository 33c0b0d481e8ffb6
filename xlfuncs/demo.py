"""The main job on the bundled demo data: ``volcast demo [--out DIR]``.

Copies the monthly template, loads the synthetic equity composite's month-end levels into its
Data sheet, recalculates it headlessly and returns the headline figures.
"""

from __future__ import annotations

import csv
import datetime as dt
import shutil
from importlib import resources
from pathlib import Path

__all__ = ["run_demo", "data_file", "template_file"]

_SERIES = "equity_composite_monthly.csv"
_TEMPLATE = "monthly_variance.xlsx"


def _packaged(package: str, name: str, repo_dir: str) -> Path:
    try:
        p = resources.files(package) / name
        if p.is_file():
            return Path(str(p))
    except (ModuleNotFoundError, TypeError):
        pass
    return Path(__file__).resolve().parent.parent / repo_dir / name  # a source checkout


def data_file(name: str = _SERIES) -> Path:
    return _packaged("xlfuncs.demo_data", name, "demo_data")


def template_file(name: str = _TEMPLATE) -> Path:
    return _packaged("xlfuncs.workbook_templates", name, "workbook_templates")


def run_demo(out_dir) -> dict:
    import openpyxl

    from .headless.recalc import recalc

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    book = out_dir / "volcast-demo-input.xlsx"
    shutil.copyfile(template_file(), book)
    wb = openpyxl.load_workbook(book)
    ws = wb["Data"]
    with open(data_file(), newline="") as fh:
        rows = list(csv.DictReader(fh))
    for i, row in enumerate(rows, start=2):
        ws.cell(i, 1, dt.date.fromisoformat(row["date"])).number_format = "yyyy-mm-dd"
        ws.cell(i, 2, float(row["level"]))
    wb.save(book)
    out, report = recalc(book, out_dir / "volcast-demo.xlsx")
    book.unlink()
    values = openpyxl.load_workbook(out, data_only=True)
    fc, inp = values["Forecast"], values["Inputs"]
    periods = float(inp["B8"].value)
    risk = {fc.cell(r, 9).value: fc.cell(r, 10).value for r in range(3, 11)}
    vol1 = float(fc["D4"].value)
    cum12 = float(fc["E15"].value) ** 0.5
    return {
        "workbook": out,
        "last_date": rows[-1]["date"],
        "model": values["Model"]["B4"].value,
        "dist": values["Model"]["B5"].value,
        "vol_1m": vol1,
        "vol_1m_annualised": vol1 * periods ** 0.5,
        "vol_12m": cum12,
        "var_1m": float(risk["VaR"]),
        "var_level": float(risk["level"]),
        "error_cells": report.error_cells,
    }
