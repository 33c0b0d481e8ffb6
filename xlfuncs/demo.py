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


def load_levels(template, series, book) -> list:
    """Copy ``template`` to ``book`` with the dates and levels of the CSV ``series`` in its Data sheet."""
    import openpyxl

    shutil.copyfile(template, book)
    wb = openpyxl.load_workbook(book)
    ws = wb["Data"]
    with open(series, newline="") as fh:
        rows = list(csv.DictReader(fh))
    for i, row in enumerate(rows, start=2):
        ws.cell(i, 1, dt.date.fromisoformat(row["date"])).number_format = "yyyy-mm-dd"
        ws.cell(i, 2, float(row["level"]))
    wb.save(book)
    return rows


def run_demo(out_dir) -> dict:
    import openpyxl

    from .headless.recalc import recalc

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    book = out_dir / "volcast-demo-input.xlsx"
    rows = load_levels(template_file(), data_file(), book)
    out, report = recalc(book, out_dir / "volcast-demo.xlsx")
    book.unlink()
    values = openpyxl.load_workbook(out, data_only=True)
    fc, inp = values["Forecast"], values["Inputs"]
    periods = float(inp["B8"].value)
    risk = {fc.cell(r, 9).value: fc.cell(r, 10).value for r in range(3, 11)}
    vol1 = float(fc["D4"].value)
    cum12 = float(fc["E15"].value) ** 0.5
    chart = write_chart(values, out_dir / "volcast-demo.png")
    return {
        "workbook": out,
        "chart": chart,
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


def write_chart(wb, png) -> Path:
    """A PNG of the in-sample conditional volatility with the forecast, annualised (matplotlib),
    from a recalculated workbook opened with data_only=True."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    data, vol, fc, inp = wb["Data"], wb["Volatility"], wb["Forecast"], wb["Inputs"]
    scale = float(inp["B8"].value) ** 0.5
    dates, hist = [], []
    for r in range(2, data.max_row + 1):
        d, v = data.cell(r, 1).value, vol.cell(r, 1).value
        if isinstance(d, dt.datetime) and isinstance(v, (int, float)):
            dates.append(d)
            hist.append(v * scale)
    steps = [fc.cell(r, 6).value for r in range(4, 64) if isinstance(fc.cell(r, 6).value, (int, float))]
    last = dates[-1]
    fdates = [dt.datetime(last.year + (last.month + k - 1) // 12, (last.month + k - 1) % 12 + 1, 28)
              for k in range(1, len(steps) + 1)]
    fig, ax = plt.subplots(figsize=(10, 4.2), dpi=110)
    ax.plot(dates, hist, color="#1F3A5F", lw=1.2, label="in-sample conditional volatility")
    ax.plot([last] + fdates, [hist[-1]] + steps, color="#C0504D", lw=2, label="forecast")
    ax.set_ylabel("annualised volatility (%)")
    ax.set_title("Synthetic demo series: conditional volatility and forecast (model estimates, not advice)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left")
    fig.tight_layout()
    png = Path(png)
    fig.savefig(png)
    plt.close(fig)
    return png
