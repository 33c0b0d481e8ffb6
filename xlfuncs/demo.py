"""The main job on the bundled demo data: ``volcast demo [--out DIR]``.

Copies the monthly template, loads the synthetic equity composite's month-end levels into its
Data sheet, recalculates it headlessly and returns the headline figures.  Writes the workbook
(formulas, for Excel with the Volcast add-in), its values copy (volcast-demo-values.xlsx, for
LibreOffice or Excel without the add-in) and a PNG chart.
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
    """Copy ``template`` to ``book`` with the dates and levels of the CSV ``series`` typed into its
    Data sheet, as a person pasting them would (no recalculation); returns the CSV rows."""
    import openpyxl

    from .headless.contract import name_range

    shutil.copyfile(template, book)
    wb = openpyxl.load_workbook(book)
    sheet, r1, col, _, _ = name_range(wb, "returns")
    ws = wb[sheet]
    with open(series, newline="") as fh:
        rows = list(csv.DictReader(fh))
    for i, row in enumerate(rows, start=max(r1, 2)):
        ws.cell(i, col - 2, dt.date.fromisoformat(row["date"])).number_format = "yyyy-mm-dd"
        ws.cell(i, col - 1, float(row["level"]))
    wb.save(book)
    return rows


def run_demo(out_dir) -> dict:
    """The monthly template refreshed with the demo series' whole history (a first load), headless;
    the headline read through the template's defined names."""
    import openpyxl

    from .headless.contract import figures_from_file
    from .headless.refresh import refresh

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    res = refresh(template_file(), data_file(), out_dir / "volcast-demo.xlsx")
    values = openpyxl.load_workbook(res.out, data_only=True)
    figures = figures_from_file(res.out)
    chart = write_chart(values, out_dir / "volcast-demo.png")
    hist = res.history or {}
    return {
        "workbook": res.out,
        "values_copy": res.values_copy,
        "chart": chart,
        "last_date": res.last_date.isoformat(),
        "model": hist.get("model"),
        "dist": hist.get("dist"),
        "converged": figures["converged"],
        "nobs": figures["nobs"],
        "vol_1m": figures["vol_1m"],
        "vol_1m_annualised": figures["vol_1m_ann"],
        "vol_12m": figures["vol_12m"],
        "var_1m": figures["var_1m"],
        "es_1m": figures["es_1m"],
        "var_level": figures["var_level"],
        "error_cells": res.report.error_cells,
        "unread": res.report.unread,
    }


def write_chart(wb, png) -> Path:
    """A PNG of the in-sample conditional volatility with the forecast, annualised (matplotlib),
    from a recalculated workbook opened with data_only=True."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    vol, fc = wb["Volatility"], wb["Forecast"]
    dates, hist = [], []
    for r in range(2, vol.max_row + 1):
        d, v = vol.cell(r, 1).value, vol.cell(r, 3).value  # date, annualised volatility (%)
        if isinstance(d, (dt.datetime, dt.date)) and isinstance(v, (int, float)) and not isinstance(v, bool):
            dates.append(d)
            hist.append(v)
    steps = [fc.cell(r, 6).value for r in range(4, 64) if isinstance(fc.cell(r, 6).value, (int, float))]
    if not dates:
        raise ValueError("the workbook holds no in-sample volatility to chart")
    last = dates[-1]
    fdates = [dt.datetime(last.year + (last.month + k - 1) // 12, (last.month + k - 1) % 12 + 1, 28)
              for k in range(1, len(steps) + 1)]
    fig, ax = plt.subplots(figsize=(10, 4.2), dpi=110)
    ax.plot(dates, hist, color="#1F3A5F", lw=1.2, label="in-sample conditional volatility")
    ax.plot([last] + fdates, [hist[-1]] + steps, color="#C0504D", lw=2, label="forecast")
    ax.set_ylabel("annualised volatility (%)")
    ax.set_xlabel("month end")
    ax.set_title("Synthetic demo series: conditional volatility and forecast (model estimates, not advice)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left")
    fig.tight_layout()
    png = Path(png)
    fig.savefig(png)
    plt.close(fig)
    return png
