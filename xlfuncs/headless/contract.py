"""The template contract (DESIGN.md, "Templates"): where a reader finds a workbook's figures.

Every shipped template defines workbook-scope names for the returns range the functions read
(``returns``), the fit table's anchor (``fit``) and each headline figure.  ``volcast refresh``,
``volcast demo`` and the tests find figures through these names only, never through fixed cells.

| name | holds |
| --- | --- |
| ``returns`` | the range of returns every formula of ours reads (Data sheet, column C) |
| ``fit`` | the anchor of the fit table VOLFIT spills |
| ``last_date`` | the date of the last return |
| ``nobs``, ``converged`` | from the fit table |
| ``vol_1m`` | volatility of the next month's cumulative return, %, not annualised (a month is 21 trading days in the daily template) |
| ``vol_1m_ann`` | the same, annualised |
| ``vol_12m`` | volatility of the next 12 months' cumulative return, % |
| ``var_level``, ``var_1m``, ``es_1m`` | one-month VaR and ES at ``var_level``, loss as % of value |
"""

from __future__ import annotations

import re

__all__ = ["NAMES", "FIGURES", "HISTORY_HEADER", "return_formula", "name_range", "missing_names",
           "figures_from_file"]

FIGURES = ("last_date", "nobs", "converged", "vol_1m", "vol_1m_ann", "vol_12m", "var_level", "var_1m", "es_1m")
NAMES = ("returns", "fit") + FIGURES
HISTORY_HEADER = ["run_at", "last_date", "nobs", "model", "dist", "converged", "loglik", "vol_1m", "vol_12m",
                  "var_1m", "es_1m", "moved"]

_RANGE_RE = re.compile(r"^(?:'((?:[^']|'')+)'|([^!']+))!\$?([A-Za-z]{1,3})\$?(\d+)(?::\$?([A-Za-z]{1,3})\$?(\d+))?$")


def return_formula(row: int) -> str:
    """The Data sheet's return in percent log terms at ``row`` (levels in column B).

    Blank where either level is blank; a level that is not a positive number shows an error, so
    a typo is never silently skipped.  Nested IFs rather than OR keep it element-wise, so the
    headless engine evaluates the whole column in one call."""
    return f'=IF(B{row}="","",IF(B{row - 1}="","",LN(B{row}/B{row - 1})*100))'


def _col(letters: str) -> int:
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n


def name_range(book, name: str):
    """(sheet title, r1, c1, r2, c2) that the workbook-scope ``name`` of an openpyxl workbook
    refers to, or None when it is not defined or not a plain reference."""
    dn = book.defined_names.get(name)
    if dn is None or not dn.attr_text:
        return None
    m = _RANGE_RE.match(dn.attr_text.strip().lstrip("="))
    if not m:
        return None
    sheet = (m.group(1) or "").replace("''", "'") or m.group(2)
    c1, r1 = _col(m.group(3)), int(m.group(4))
    c2, r2 = (_col(m.group(5)), int(m.group(6))) if m.group(5) else (c1, r1)
    titles = {ws.title.upper(): ws.title for ws in book.worksheets}
    if sheet.upper() not in titles:
        return None
    return titles[sheet.upper()], r1, c1, r2, c2


def missing_names(book) -> list:
    """The contract names an openpyxl workbook lacks (or that do not point at a cell range)."""
    return [n for n in NAMES if name_range(book, n) is None]


def figures_from_file(path) -> dict:
    """{name: stored value} of the headline names of a recalculated workbook on disk."""
    import openpyxl

    book = openpyxl.load_workbook(path, data_only=True)
    out = {}
    for n in FIGURES:
        ref = name_range(book, n)
        out[n] = None if ref is None else book[ref[0]].cell(ref[1], ref[2]).value
    return out
