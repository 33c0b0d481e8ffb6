"""``volcast refresh BOOK.xlsx --data NEW.csv -o OUT.xlsx``: the monthly refresh, headless.

Appends the observations of NEW.csv dated after the workbook's last date, recalculates, and adds
a row to the estimate history.  Rows of NEW.csv on dates the workbook already has are skipped when
their level is the same and refused when it differs; an older date missing from the workbook, a
date out of order or an unparseable row is refused with the line named, and nothing is written.
The history row flags every parameter that moved by more than two standard errors since the
previous row.

Works on workbooks laid out as the monthly template: a Data sheet with dates in column A and
levels in column B from row 2, the fit table spilled from Model!A3, the forecast table from
Forecast!A3, the one-month risk table from Forecast!I3, and a History sheet.
"""

from __future__ import annotations

import csv
import datetime as dt
import math
import os
import tempfile
from pathlib import Path

from .recalc import RecalcError, recalc
from .xlsxpost import dynamic_anchors

__all__ = ["refresh", "HISTORY_HEADER"]

HISTORY_HEADER = ["run time", "last date", "nobs", "model", "dist", "loglik", "vol 1m (%)", "vol 12m (%)",
                  "VaR 1m (%)", "flag"]
_TOL = 1e-9


def _date(v):
    if isinstance(v, dt.datetime):
        return v.date()
    if isinstance(v, dt.date):
        return v
    return None


def _read_new(path: Path) -> list:
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except OSError as exc:
        raise RecalcError(f"{path}: cannot be read ({exc})") from None
    if not rows:
        raise RecalcError(f"{path}: empty file; expected columns date,level")
    header = [h.strip().lower() for h in rows[0]]
    if "date" in header and "level" in header:
        di, li = header.index("date"), header.index("level")
        body = rows[1:]
        first = 2
    else:
        raise RecalcError(f"{path}: needs a header row with columns date and level")
    out = []
    for lineno, r in enumerate(body, start=first):
        if not any(c.strip() for c in r):
            continue
        try:
            d = dt.date.fromisoformat(r[di].strip())
            v = float(r[li])
            if not math.isfinite(v) or v <= 0:
                raise ValueError
        except (ValueError, IndexError):
            raise RecalcError(f"{path} line {lineno}: cannot read a date (YYYY-MM-DD) and a positive level "
                              f"from {','.join(r)!r}") from None
        out.append((lineno, d, v))
    return out


def _fit_rows(cell):
    """{name: (estimate, std_error)} and the model/dist from a recalculated fit table at A3;
    ``cell(row, col)`` reads the Model sheet's computed values."""
    params, info = {}, {}
    in_params = False
    for r in range(3, 80):
        name = cell(r, 1)
        if name is None:
            break
        if name in ("model", "dist", "loglik", "nobs"):
            info[name] = cell(r, 2)
        if name == "options":
            in_params = True
            continue
        if name == "loglik":
            in_params = False
        if in_params:
            se = cell(r, 3)
            params[name] = (cell(r, 2), se if isinstance(se, (int, float)) else None)
    return params, info


def refresh(book, data, out) -> tuple:
    """Refresh ``book`` with ``data`` into ``out``; returns (out, history row as a dict, report)."""
    import openpyxl

    book, data, out = Path(book), Path(data), Path(out)
    if out.resolve() == book.resolve():
        raise RecalcError(f"{out}: refusing to write over the input; choose another output with -o")
    try:
        wb = openpyxl.load_workbook(book)
    except Exception as exc:  # noqa: BLE001
        raise RecalcError(f"{book.name} is not a readable .xlsx workbook ({type(exc).__name__}: {exc})") from None
    spills = dynamic_anchors(book)  # openpyxl drops this marking when it saves
    for name in ("Data", "Model", "Forecast", "History"):
        if name not in wb.sheetnames:
            raise RecalcError(f"{book.name} has no {name} sheet; refresh works on the monthly template's layout")
    ws = wb["Data"]
    have, last_row = {}, 1
    for r in range(2, ws.max_row + 1):
        d = _date(ws.cell(r, 1).value)
        if d is None:
            break
        have[d] = ws.cell(r, 2).value
        last_row = r
    if not have:
        raise RecalcError(f"{book.name}: the Data sheet has no dates in column A from row 2")
    last = max(have)
    new = []
    for lineno, d, v in _read_new(data):
        if d in have:
            if abs(float(have[d]) - v) > _TOL * max(1.0, abs(v)):
                raise RecalcError(f"{data} line {lineno}: {d} is already in the workbook with level {have[d]}, "
                                  f"but the file says {v}; nothing was written")
            continue
        if d < last:
            raise RecalcError(f"{data} line {lineno}: {d} is older than the workbook's last date {last} and not in it; "
                              "nothing was written")
        if new and d <= new[-1][0]:
            raise RecalcError(f"{data} line {lineno}: {d} is not after the previous new date {new[-1][0]}; nothing was written")
        new.append((d, v))
    for i, (d, v) in enumerate(new, start=last_row + 1):
        ws.cell(i, 1, d).number_format = "yyyy-mm-dd"
        ws.cell(i, 2, v)
    last_date = new[-1][0] if new else last

    row: dict = {}

    def add_history(book):
        """Runs inside the recalculation, with every value computed: one evaluation in all."""
        params, info = _fit_rows(lambda r, c: book.value(("Model", r, c)))

        def fc(r, c):
            return book.value(("Forecast", r, c))

        risk = {fc(r, 9): fc(r, 10) for r in range(3, 11)}
        hist = book.book["History"]
        header = [c.value for c in hist[1]]
        if header[: len(HISTORY_HEADER)] != HISTORY_HEADER:
            for j, h in enumerate(HISTORY_HEADER, start=1):
                hist.cell(1, j, h)
            header = HISTORY_HEADER[:]
        header = [h for h in header if h is not None]
        prev_row = hist.max_row if hist.max_row >= 2 and hist.cell(hist.max_row, 1).value else None
        prev = {h: hist.cell(prev_row, j).value for j, h in enumerate(header, start=1)} if prev_row else {}
        moved = []
        for name, (est, se) in params.items():
            old = prev.get(name)
            if isinstance(old, (int, float)) and isinstance(est, (int, float)) and se:
                if abs(est - old) > 2 * se:
                    moved.append(f"{name} {(est - old) / se:+.1f} SE")
        for name in params:
            if name not in header:
                header.append(name)
                hist.cell(1, len(header), name)
        cum12 = fc(15, 5)
        row.update({
            "run time": dt.datetime.now().replace(microsecond=0),
            "last date": last_date,
            "nobs": info.get("nobs"),
            "model": info.get("model"),
            "dist": info.get("dist"),
            "loglik": info.get("loglik"),
            "vol 1m (%)": fc(4, 4),
            "vol 12m (%)": math.sqrt(cum12) if isinstance(cum12, (int, float)) else None,
            "VaR 1m (%)": risk.get("VaR"),
            "flag": ("moved more than 2 SE: " + "; ".join(moved)) if moved else "",
        })
        row.update({name: est for name, (est, _) in params.items()})
        r = (prev_row or 1) + 1
        for j, h in enumerate(header, start=1):
            c = hist.cell(r, j, row.get(h))
            if h == "last date":
                c.number_format = "yyyy-mm-dd"
            elif h == "run time":
                c.number_format = "yyyy-mm-dd hh:mm"

    out.parent.mkdir(parents=True, exist_ok=True)
    fd, staged = tempfile.mkstemp(suffix=".xlsx", dir=out.parent, prefix=".volcast-refresh-")
    os.close(fd)
    try:
        wb.save(staged)
        out_path, report = recalc(staged, out, dynamic_hint=spills, before_write=add_history)
    finally:
        if os.path.exists(staged):
            os.remove(staged)
    return out_path, row, report, len(new)
