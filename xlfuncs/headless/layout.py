"""How a refreshed workbook looks and prints, and its values copy.

* ``fit_to_data``: the charts drawn over the data's rows (the conditional-volatility history)
  end at the last observation instead of the template's last row, and the Data and History
  sheets print the rows that hold something (the Data sheet its latest ``DATA_PRINT_ROWS``).
* ``format_results``: number formats that depend on computed values, set once every value is
  known: TRUE/FALSE cells shown as such (LibreOffice shows a stored boolean as 1 otherwise), and
  whole-number rows of our tables (``nobs``, ``params``, ``horizon``...) without decimals.
* ``write_values_copy``: NAME-values.xlsx beside a recalculated workbook, for applications
  without the add-in (LibreOffice, Excel without Volcast): the same sheets, formats, charts and
  names, each formula replaced by the value it computed.  LibreOffice recomputes array formulas
  when it opens a file and does not know our functions, so the workbook with formulas shows
  ``#NAME?`` there; the values copy does not.
"""

from __future__ import annotations

import os
import re
import tempfile
from pathlib import Path

from .contract import HISTORY_HEADER as HISTORY_COLUMNS

__all__ = ["DATA_PRINT_ROWS", "BOOL_FORMAT", "fit_to_data", "format_results", "values_copy_path",
           "write_values_copy"]

#: rows of the Data sheet a printout shows: the latest, under the repeated header
DATA_PRINT_ROWS = 60
#: a TRUE/FALSE cell shows as TRUE/FALSE in Excel and in LibreOffice (not 1/0)
BOOL_FORMAT = '"TRUE";"TRUE";"FALSE"'
#: rows of our tables (first column) whose figures are whole numbers
_WHOLE_ROWS = {"nobs", "params", "horizon", "forecasts", "exceptions", "lags", "fits", "rank_bic", "df"}

_REF_RE = re.compile(r"^((?:'(?:[^']|'')+'|[^!']+)!)\$([A-Z]{1,3})\$(\d+):\$([A-Z]{1,3})\$(\d+)$")


def _sheet_of(ref: str) -> str:
    return ref.split("!", 1)[0].strip("'").replace("''", "'")


def _chart_refs(chart):
    for s in chart.series:
        for part in (s.val, s.cat, s.tx):
            if part is None:
                continue
            for refname in ("numRef", "strRef"):
                ref = getattr(part, refname, None)
                if ref is not None and ref.f:
                    yield ref


def fit_to_data(wb, data_sheet: str, first_row: int, data_end: int) -> None:
    """Charts over the data's rows end at ``data_end``; print areas follow the data.

    A chart series over the data's rows reads a column range that starts on the data's first row
    (``first_row``, the first row of ``returns``) on any sheet: the Volatility sheet's dates and
    figures sit row for row beside the Data sheet's.  Each such range is set to end at
    ``data_end``, the last observation, so the plot spans the data present; a range that starts
    elsewhere (the forecast's term structure) is left as it is."""
    end = max(data_end, first_row + 1)
    for ws in wb.worksheets:
        for chart in getattr(ws, "_charts", []):
            for r in _chart_refs(chart):
                m = _REF_RE.match(r.f)
                if m and int(m.group(3)) == first_row and m.group(2) == m.group(4):
                    r.f = f"{m.group(1)}${m.group(2)}${m.group(3)}:${m.group(4)}${end}"
    if data_sheet in wb.sheetnames:
        ws = wb[data_sheet]
        if ws.print_area:
            cols = re.findall(r"\$?([A-Z]{1,3})\$?\d+", ws.print_area.split(",")[0].split("!")[-1])
            if len(cols) == 2:
                ws.print_area = f"{cols[0]}{max(first_row, end - DATA_PRINT_ROWS + 1)}:{cols[1]}{end}"
    if "History" in wb.sheetnames:
        from openpyxl.utils import get_column_letter

        h = wb["History"]
        last = max((r for r in range(1, h.max_row + 1) if h.cell(r, 1).value is not None), default=1)
        width = max((c for c in range(1, h.max_column + 1) if h.cell(1, c).value is not None), default=1)
        h.print_area = f"A1:{get_column_letter(width)}{max(last, 2)}"
        # the estimates print on pages of their own: each starts with the run's time and date
        h.print_title_cols = "A:B"
        for c in range(len(HISTORY_COLUMNS) + 1, width + 1):  # the estimates' columns, added by name
            letter = get_column_letter(c)
            text = str(h.cell(1, c).value or "")
            if not h.column_dimensions[letter].width or h.column_dimensions[letter].width < len(text) + 2:
                h.column_dimensions[letter].width = max(10, len(text) + 2)


def format_results(book, tables, values=None) -> None:
    """Formats that depend on the computed values of ``book`` (an openpyxl workbook).

    ``tables``: (sheet, r1, c1, r2, c2) of the tables our functions spilled; their rows named by
    a whole-number field get format 0.  ``values``: {(sheet, row, col): value} of the computed
    cells (default: the cells' own values); every TRUE/FALSE among them shows as such."""
    for sheet, r1, c1, r2, c2 in tables:
        ws = book[sheet]
        for r in range(r1, r2 + 1):
            label = ws.cell(r, c1).value if values is None else values.get((sheet, r, c1))
            if isinstance(label, str) and label.strip().lower() in _WHOLE_ROWS:
                for c in range(c1 + 1, c2 + 1):
                    ws.cell(r, c).number_format = "0"
    cells = values.items() if values is not None else (
        ((ws.title, c.row, c.column), c.value) for ws in book.worksheets for row in ws.iter_rows() for c in row)
    for (sheet, r, c), v in cells:
        if isinstance(v, bool):
            book[sheet].cell(r, c).number_format = BOOL_FORMAT


def values_copy_path(out) -> Path:
    """Where the values copy of ``out`` goes: NAME-values.xlsx beside it."""
    out = Path(out)
    return out.with_name(out.stem + "-values.xlsx")


def write_values_copy(book_path, dst=None) -> Path:
    """The values copy of the recalculated workbook ``book_path`` (formulas replaced by the values
    stored with them; formats, charts, names and print setup kept), written to ``dst``
    (default NAME-values.xlsx beside it) through a temporary file.

    The package is edited (:func:`~xlfuncs.headless.xlsxpost.strip_formulas`): the formulas
    taken out of their cells, every other part copied byte for byte, each stored value exactly
    as the workbook holds it.  Where that would need a part rewritten (a TRUE/FALSE cell not yet
    in the TRUE/FALSE format, a calculation chain), or ``VOLCAST_OPENPYXL_WRITE`` is set,
    openpyxl loads the stored values and saves the copy (four to seven times the time on the daily
    template; its numbers keep 16 significant digits, the last of 17 sometimes lost)."""
    book_path = Path(book_path)
    dst = Path(dst) if dst else values_copy_path(book_path)
    if not os.environ.get("VOLCAST_OPENPYXL_WRITE"):
        from .xlsxpost import strip_formulas

        try:  # the package edited: the formulas taken out, every other part copied as it is
            strip_formulas(book_path, dst, BOOL_FORMAT)
            return dst
        except ValueError:
            pass  # a part it would have to edit (see strip_formulas): openpyxl writes the copy
    import openpyxl

    from .xlsxpost import _umask

    wb = openpyxl.load_workbook(book_path, data_only=True)
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, bool):
                    c.number_format = BOOL_FORMAT
    wb.calculation.fullCalcOnLoad = False
    fd, tmp = tempfile.mkstemp(suffix=".xlsx", dir=dst.parent, prefix=".volcast-values-")
    os.close(fd)
    try:
        wb.save(tmp)
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes the file private; give it the usual mode
        os.replace(tmp, dst)
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
    return dst
