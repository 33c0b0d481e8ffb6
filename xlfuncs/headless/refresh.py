"""``volcast refresh BOOK.xlsx --data NEW.csv -o OUT.xlsx``: the monthly refresh, headless.

A refresh is true or refuses; it never records a stale or wrong number.

* BOOK carries the template contract (``contract.NAMES``); figures are found through the names.
  An empty shipped template is a valid BOOK: the first load of a user's whole history.
* The observations of NEW.csv dated after BOOK's last date are appended.  Rows on dates BOOK has
  are skipped when their level is the same and refused when it differs; an older date missing
  from BOOK, a date out of order or an unreadable row is refused with the line named.
* Suspicious new data stops the run unless accepted: a return beyond a robust bound of the
  series (``JUMP_BOUND`` robust standard deviations from the median; a misplaced decimal point),
  a calendar gap much longer than the series' usual spacing (rows missing) or much shorter
  (``SHORT_GAP``: a date before the period's end, daily rows among month ends).
* Data whose spacing does not match the fit's ``periods`` a year, or ``periods`` that do not match
  the template's year (the periods its 12-month figures add up), are refused
  (:func:`frequency_problem`): every figure would be for the wrong horizon under its label.
* The return formulas and every range that ends with them grow with the data, so no row is left
  out of the fit; a recalculation that still finds numbers below a range a formula of ours reads
  is refused.
* A workbook whose formulas are gone (a values-only copy) is refused: it would record last
  month's figures under this month's date.
* With nothing new, no History row is added.  Otherwise the History sheet gains one row: run time,
  last date, nobs, model, dist, converged, loglik, the headline figures, the parameters that moved
  by more than two standard errors since the previous row, each estimate and its standard error.

Nothing is written when a refresh is refused.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from copy import copy
from dataclasses import dataclass, field
from pathlib import Path

from ..core.errors import value_words
from ..csvtext import date_spacing
from .contract import FIGURES, HISTORY_HEADER, missing_names, name_range
from .layout import BOOL_FORMAT, fit_to_data, format_results, values_copy_path, write_values_copy
from .recalc import RecalcError, cell_name, recalc
from .xlsxpost import ExcelError, check_package, dynamic_anchors

__all__ = ["refresh", "RefreshResult", "HISTORY_HEADER", "JUMP_BOUND", "suspicious"]

_TOL = 1e-9
# a new return further than this many robust standard deviations (1.4826 x the median absolute
# deviation) from the median of the series is taken for a typo: our own rule, chosen so that a
# misplaced decimal point is always caught and genuine crash days of ordinary series are rare
# enough to confirm by hand (--accept-jumps)
JUMP_BOUND = 10.0
# a new date closer than this share of the series' usual spacing to the one before is refused
# (our own rule, see suspicious)
SHORT_GAP = 0.6
_MAX_CSV_BYTES = 64 * 1024 * 1024


@dataclass
class RefreshResult:
    out: Path
    added: int
    last_date: dt.date
    history: dict | None  # the History row written, or None when nothing was new
    report: object
    figures: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)
    values_copy: Path | None = None  # NAME-values.xlsx: for applications without the add-in


def _date(v):
    if isinstance(v, dt.datetime):
        return v.date()
    if isinstance(v, dt.date):
        return v
    return None


def _read_new(path: Path) -> list:
    """[(line number, date, level)] from a CSV with a header naming columns date and level
    (read by the commands' shared reader: encoding and separator found)."""
    from ..csvtext import PanelError, decimal_comma_hint, read_csv_records

    try:
        if path.is_file() and path.stat().st_size > _MAX_CSV_BYTES:
            raise RecalcError(f"{path}: {path.stat().st_size:,} bytes is too large for a file of dates and levels")
        records = read_csv_records(path)
    except PanelError as exc:
        raise RecalcError(str(exc)) from None
    if not records:
        raise RecalcError(f"{path}: empty file; expected a header row with columns date and level")
    header = [h.lower() for h in records[0][1]]
    if "date" not in header or "level" not in header:
        shown = ", ".join(h for h in header if h)[:120]
        raise RecalcError(f"{path}: needs a header row with columns date and level (found: {shown})")
    di, li = header.index("date"), header.index("level")
    out = []
    for lineno, r in records[1:]:
        raw_d = r[di] if di < len(r) else ""
        raw_v = r[li] if li < len(r) else ""
        try:
            d = dt.date.fromisoformat(raw_d)
        except ValueError:
            raise RecalcError(f"{path} line {lineno}: cannot read a date (YYYY-MM-DD) from {value_words(raw_d)}") from None
        try:
            v = float(raw_v)
        except ValueError:
            raise RecalcError(f"{path} line {lineno}: the level {value_words(raw_v)} on {d} is not a number"
                              f"{decimal_comma_hint(raw_v)}") from None
        if not math.isfinite(v) or v <= 0:
            raise RecalcError(f"{path} line {lineno}: the level on {d} must be a positive finite number, got {raw_v[:40]}")
        out.append((lineno, d, v))
    return out


def suspicious(dates, levels, first_new: int, where) -> tuple:
    """(jumps, gaps): messages for the observations from index ``first_new`` on that look wrong.

    ``dates`` and ``levels`` are the whole series, old then new; ``where(i)`` names observation i
    for the user (the CSV line).  The scale comes from the old observations when there are
    enough of them (24 returns, 6 spacings), else from the whole series."""
    n = len(levels)
    rets = [100.0 * math.log(levels[i] / levels[i - 1]) for i in range(1, n)]
    old = rets[: max(first_new - 1, 0)]
    ref = old if len(old) >= 24 else rets
    jumps, gaps = [], []
    if len(ref) >= 8:
        med = _median(ref)
        scale = 1.4826 * _median([abs(x - med) for x in ref])
        if scale > 0:
            for i in range(max(first_new, 1), n):
                z = (rets[i - 1] - med) / scale
                if abs(z) > JUMP_BOUND:
                    jumps.append(
                        f"{where(i)}: the level {levels[i]:g} on {dates[i]} makes a return of {rets[i - 1]:+.2f} % since "
                        f"{dates[i - 1]} (level {levels[i - 1]:g}), {abs(z):.0f} robust standard deviations from the "
                        f"series' median (bound {JUMP_BOUND:g}); check the level (a misplaced decimal point?) "
                        "or pass --accept-jumps to take it")
    spans = [(dates[i] - dates[i - 1]).days for i in range(1, n)]
    old_spans = spans[: max(first_new - 1, 0)]
    ref_spans = old_spans if len(old_spans) >= 6 else spans
    if len(ref_spans) >= 3:
        usual = _median(ref_spans)
        # our own rule: one and a half usual spacings plus three days, at least six days, so
        # long weekends and holidays of daily data pass and a missing month or week does not
        bound = max(1.5 * usual + 3, 6)
        # and below SHORT_GAP of the usual spacing: a date mid-month (a run before the month's
        # end) or a day among months, whose return would count as a whole period's; month ends
        # (27 to 33 days apart) and holiday-shifted weeks (6 or 8 days) pass, daily data never stop
        low = SHORT_GAP * usual
        for i in range(max(first_new, 1), n):
            if spans[i - 1] > bound:
                gaps.append(
                    f"{where(i)}: {dates[i]} comes {spans[i - 1]} days after {dates[i - 1]}, while the series is usually "
                    f"{usual:g} days apart; the gap would be taken as one return (rows missing?); add the missing "
                    "dates or pass --accept-gaps to take it")
            elif spans[i - 1] < low:
                gaps.append(
                    f"{where(i)}: {dates[i]} comes only {spans[i - 1]} day(s) after {dates[i - 1]}, while the series is "
                    f"usually {usual:g} days apart; its return would be taken as a whole period's (a date before the "
                    "period's end, or data of another frequency?); remove the row, or pass --accept-gaps to take it")
    return jumps, gaps


_RETURN_WORDS = {"log100": "log returns in percent", "log": "log returns", "simple100": "simple returns in percent",
                 "simple": "simple returns"}
_BASIS_NAME = "volcast_risk_basis"  # the basis of the last History row's risk figures


def _basis_name(wb):
    """The risk figures' basis the previous refresh recorded (a text constant), or None."""
    dn = wb.defined_names.get(_BASIS_NAME)
    text = getattr(dn, "attr_text", None)
    if isinstance(text, str) and len(text) >= 2 and text[0] == text[-1] == '"':
        return text[1:-1].replace('""', '"')
    return None


def _set_basis_name(wb, basis: str) -> None:
    from openpyxl.workbook.defined_name import DefinedName

    if _BASIS_NAME in wb.defined_names:
        del wb.defined_names[_BASIS_NAME]
    wb.defined_names[_BASIS_NAME] = DefinedName(_BASIS_NAME, attr_text='"' + basis.replace('"', '""') + '"')


def _return_formula_kind(ws, col: int, r1: int, r2: int):
    """(definition, cell) of the return formulas in ``col`` (rows r1..r2): log100 for
    LN(B3/B2)*100, log without the 100, simple100 for (B3/B2-1)*100 or (B3-B2)/B2*100, simple without;
    (None, None) where the first formula has another shape (a user's own)."""
    for r in range(r1, min(r2, r1 + 50) + 1):
        v = ws.cell(r, col).value
        v = getattr(v, "text", v)
        if not (isinstance(v, str) and v.startswith("=")):
            continue
        f = re.sub(r"\s+", "", v.upper())
        pct = bool(re.search(r"\*100(?![0-9.])|100\*", f))
        if re.search(r"\bLN\(", f):
            kind = "log100" if pct else "log"
        elif re.search(r"/\$?[A-Z]{1,3}\$?\d+-1\b|\)/\$?[A-Z]{1,3}\$?\d+", f):
            kind = "simple100" if pct else "simple"
        else:
            return None, None
        return kind, cell_name(r, col)
    return None, None


def _digits(x: float, other: float) -> str:
    """``x`` with the fewest significant digits (at least 6) that tell it from ``other``."""
    for k in range(6, 18):
        if f"{x:.{k}g}" != f"{other:.{k}g}":
            return f"{x:.{k}g}"
    return repr(x)


def _option(options: str, key: str):
    """The value of ``key=`` in a fit table's options text, or None."""
    m = re.search(rf"(?:^|;)\s*{key}\s*=\s*([^;]*)", options or "", flags=re.IGNORECASE)
    return m.group(1).strip() if m else None


_INDEX_STEP_RE = re.compile(r"INDEX\(.*,\s*(\d+)\s*\)\s*\)\s*$", re.IGNORECASE | re.S)


def _template_steps(wb, name: str):
    """The number of periods a template's headline formula ``name`` reads from the cumulative
    variance (=SQRT(INDEX(cum, N)): 21 for the daily template's vol_1m, 252 for its vol_12m), or
    None where the formula has another shape (a user's own layout)."""
    ref = name_range(wb, name)
    if ref is None:
        return None
    v = wb[ref[0]].cell(ref[1], ref[2]).value
    v = getattr(v, "text", v)
    m = _INDEX_STEP_RE.search(v) if isinstance(v, str) and v.upper().startswith("=SQRT(") else None
    return int(m.group(1)) if m else None


def frequency_problem(dates, periods, month_steps=None, year_steps=None):
    """A message where the data's dates, the fit's ``periods`` a year and the template's horizons
    (``month_steps``, ``year_steps``: the periods its one- and twelve-month figures add up) do not
    agree, else None: the figures would be for the wrong horizons."""
    if year_steps and periods and abs(periods / year_steps - 1.0) > 0.1:
        return (f"the fit's options say periods={periods:g} a year, but the workbook's 12-month figures add up "
                f"{year_steps} periods and its 1-month figures {month_steps or year_steps / 12:g} (its template's "
                f"year is {year_steps} periods): those figures would not be months; set periods back to {year_steps} "
                "on the Inputs sheet, or start from the template of your data's frequency")
    found = date_spacing(dates, periods)
    if found is not None:
        usual, expected, kind = found
        where = f" ({month_steps} of them make its 'month')" if month_steps and month_steps > 1 else ""
        fix = (f"start from the {kind} template (volcast template {kind} -o BOOK.xlsx)" if kind in ("daily", "monthly")
               else "the shipped templates are for daily and monthly data")
        return (f"the dates are usually {usual:g} day{'s' if usual != 1 else ''} apart ({kind} data), but the fit's options say periods={periods:g} "
                f"a year, one every {expected:.1f} days{where}: every figure would be for the wrong horizon; load data "
                f"of that spacing into this workbook, or {fix}")
    return None


def _median(xs):
    s = sorted(xs)
    m = len(s) // 2
    return s[m] if len(s) % 2 else 0.5 * (s[m - 1] + s[m])


def _is_formula(v) -> bool:
    from openpyxl.worksheet.formula import ArrayFormula

    return isinstance(v, ArrayFormula) or (isinstance(v, str) and v.startswith("="))


def _check_formulas(book, name: str, wb) -> None:
    """Refuse a workbook whose formulas are gone (a values-only copy)."""
    ranges = {n: name_range(wb, n) for n in ("fit",) + FIGURES}
    gone = [f"{n} ({r[0]}!{cell_name(r[1], r[2])})" for n, r in ranges.items()
            if not _is_formula(wb[r[0]].cell(r[1], r[2]).value)]
    sheet, r1, c1, r2, _ = name_range(wb, "returns")
    ws = wb[sheet]
    cells = [ws.cell(r, c1).value for r in range(r1, r2 + 1)]
    if any(v is not None for v in cells) and not any(_is_formula(v) for v in cells):
        gone.append(f"returns ({sheet}!{cell_name(r1, c1)}:{cell_name(r2, c1)})")
    if gone:
        raise RecalcError(
            f"{name} holds values where its formulas should be ({', '.join(gone[:3])}"
            f"{' and more' if len(gone) > 3 else ''}), as in a --values-only copy: refreshing it would record "
            "stale figures. Refresh the workbook saved with its formulas, or start again from a shipped "
            "template (volcast template) with your whole history")


def _translate(formula: str, src: str, dst: str) -> str:
    from openpyxl.formula.translate import Translator

    return Translator(formula, origin=src).translate_formula(dst)


_END_RE = r"(\$?[A-Za-z]{{1,3}}\$?[123]:\$?[A-Za-z]{{1,3}}\$?){end}(?!\d)"


def _grow(wb, sheet: str, col: int, first: int, end: int, new_end: int) -> None:
    """Extend the formulas of ``sheet`` column ``col`` from row ``end`` down to ``new_end``, and
    every range in the workbook that starts in rows 1-3 and ends at ``end`` (the names, the
    formulas, the charts' series) to ``new_end``."""
    ws = wb[sheet]
    last = ws.cell(end, col)
    text = last.value.text if hasattr(last.value, "text") else last.value
    if not (isinstance(text, str) and text.startswith("=")):
        raise RecalcError(f"{sheet}!{cell_name(end, col)}, the last cell of the returns range, holds no formula "
                          "to extend; copy the return formula down to the last level and define returns over it")
    src = cell_name(end, col)
    for r in range(end + 1, new_end + 1):
        c = ws.cell(r, col, _translate(text, src, cell_name(r, col)))
        c.number_format = last.number_format
    # the other formula columns that run down to the returns' last row (the Volatility sheet's
    # dates and annualised figures) grow with them
    for w in wb.worksheets:
        for cc in range(1, w.max_column + 1):
            if w.title == sheet and cc == col:
                continue
            a, b = w.cell(end, cc).value, w.cell(end - 1, cc).value
            if not (isinstance(a, str) and a.startswith("=") and isinstance(b, str) and b.startswith("=")):
                continue
            if w.cell(end + 1, cc).value is not None:
                continue
            fmt = w.cell(end, cc).number_format
            for r in range(end + 1, new_end + 1):
                w.cell(r, cc, _translate(a, cell_name(end, cc), cell_name(r, cc))).number_format = fmt
    pattern = re.compile(_END_RE.format(end=end))

    def fix(s):
        return pattern.sub(lambda m: m.group(1) + str(new_end), s) if isinstance(s, str) else s

    for dn in wb.defined_names.values():
        dn.attr_text = fix(dn.attr_text)
    for w in wb.worksheets:
        for row in w.iter_rows():
            for c in row:
                v = c.value
                if isinstance(v, str) and v.startswith("="):
                    c.value = fix(v)
                elif hasattr(v, "text") and isinstance(getattr(v, "text", None), str):
                    v.text = fix(v.text)
        for chart in getattr(w, "_charts", []):
            for s in chart.series:
                for part in (s.val, s.cat, s.tx):
                    for refname in ("numRef", "strRef"):
                        ref = getattr(part, refname, None) if part is not None else None
                        if ref is not None and ref.f:
                            ref.f = fix(ref.f)


def _fit_rows(rows) -> tuple:
    """{name: (estimate, std_error)} and {model, dist, options, loglik, converged, message} from
    the computed fit table (a list of rows)."""
    params, info = {}, {}
    in_params = False
    for row in rows:
        name = row[0] if row else None
        if not isinstance(name, str):
            continue
        if name in ("model", "dist", "options", "loglik", "nobs", "converged"):
            info[name] = row[1]
            if name == "converged":
                info["message"] = row[2] if len(row) > 2 else None
        if name == "options":
            in_params = True
            continue
        if name == "loglik":
            in_params = False
        if in_params:
            se = row[2] if len(row) > 2 else None
            params[name] = (row[1], se if isinstance(se, (int, float)) and not isinstance(se, bool) else None)
    return params, info


def _shown(v) -> str:
    if isinstance(v, ExcelError):
        return v.code
    if v is None:
        return "an empty cell"
    return str(v)[:120]


def refresh(book, data, out, accept_jumps: bool = False, accept_gaps: bool = False,
            values_copy: bool = True) -> RefreshResult:
    """Refresh ``book`` with the dates and levels of ``data`` into ``out`` and, with
    ``values_copy``, its values copy NAME-values.xlsx beside it (``layout.write_values_copy``)."""
    import openpyxl

    book, data, out = Path(book), Path(data), Path(out)
    if not book.exists():
        raise RecalcError(f"{book}: no such file")
    if out.exists() and out.resolve() == book.resolve():
        raise RecalcError(f"{out}: refusing to write over the input; choose another output with -o")
    if values_copy and values_copy_path(out).exists() and values_copy_path(out).resolve() == book.resolve():
        raise RecalcError(f"{values_copy_path(out)}: the values copy of {out.name} would write over the input; "
                          "choose another output with -o")
    if out.suffix.lower() != ".xlsx":
        raise RecalcError(f"{out.name}: the output must be an .xlsx file")
    try:
        check_package(book)  # bounded: refuses before openpyxl inflates a package past the limit
    except ValueError as exc:
        raise RecalcError(str(exc)) from None
    try:
        wb = openpyxl.load_workbook(book)
    except Exception as exc:  # noqa: BLE001 - any unreadable file is one line of bad input
        raise RecalcError(f"{book.name} is not a readable .xlsx workbook ({type(exc).__name__}: {str(exc)[:200]})") from None
    missing = missing_names(wb)
    if missing:
        raise RecalcError(
            f"{book.name} lacks the template's defined name(s) {', '.join(missing[:4])}: refresh works on workbooks "
            "made from a shipped template; start from one (volcast template monthly -o book.xlsx) and load your "
            "whole history into it with volcast refresh")
    _check_formulas(book, book.name, wb)
    spills = dynamic_anchors(book)  # openpyxl drops this marking when it saves

    sheet, r1, rcol, r2, _ = name_range(wb, "returns")
    ws = wb[sheet]
    dcol, lcol = rcol - 2, rcol - 1
    if dcol < 1:
        raise RecalcError(f"{book.name}: the returns range {sheet}!{cell_name(r1, rcol)} needs dates and levels in the two columns to its left")
    first_row = max(r1, 2)
    have, order, last_row = {}, [], first_row - 1
    for r in range(first_row, ws.max_row + 1):
        a, b = ws.cell(r, dcol).value, ws.cell(r, lcol).value
        if a is None and b is None:
            break
        d = _date(a)
        if d is None or not isinstance(b, (int, float)) or isinstance(b, bool):
            raise RecalcError(f"{book.name}: {sheet}!{cell_name(r, dcol)}:{cell_name(r, lcol)} should hold a date and a level, "
                              f"found {_shown(a)} and {_shown(b)}; fix the row, then refresh again")
        if order and d <= order[-1][0]:
            raise RecalcError(f"{book.name}: {sheet}!{cell_name(r, dcol)} ({d}) is not after the row above it; "
                              "the Data sheet must run oldest first")
        have[d] = float(b)
        order.append((d, float(b)))
        last_row = r
    below = [r for r in range(last_row + 2, ws.max_row + 1)
             if ws.cell(r, dcol).value is not None or ws.cell(r, lcol).value is not None]
    if below:
        raise RecalcError(f"{book.name}: {sheet}!{cell_name(last_row + 1, dcol)} is blank but row {below[0]} below it holds "
                          "data; remove the blank row so every observation is read")
    last = order[-1][0] if order else None

    new = []
    for lineno, d, v in _read_new(data):
        if d in have:
            if abs(have[d] - v) > _TOL * max(1.0, abs(v)):
                raise RecalcError(f"{data} line {lineno}: {d} is already in the workbook with level {_digits(have[d], v)}, "
                                  f"but the file says {_digits(v, have[d])}; nothing was written")
            continue
        if last is not None and d < last:
            raise RecalcError(f"{data} line {lineno}: {d} is older than the workbook's last date {last} and not in it; "
                              "nothing was written")
        if new and d <= new[-1][1]:
            raise RecalcError(f"{data} line {lineno}: {d} is not after the previous new date {new[-1][1]}; nothing was written")
        new.append((lineno, d, v))
    if not order and len(new) < 2:
        raise RecalcError(f"{data}: a first load needs the history, at least two dated levels; found {len(new)}")

    dates = [d for d, _ in order] + [d for _, d, _ in new]
    levels = [v for _, v in order] + [v for _, _, v in new]
    lines = {len(order) + i: ln for i, (ln, _, _) in enumerate(new)}
    jumps, gaps = suspicious(dates, levels, len(order), lambda i: f"{data} line {lines[i]}")
    problems = ([] if accept_jumps else jumps) + ([] if accept_gaps else gaps)
    if problems:
        more = f" ({len(problems) - 1} more such row(s))" if len(problems) > 1 else ""
        raise RecalcError(problems[0] + more + "; nothing was written")
    warnings = [m.split(": ", 1)[1].split(";")[0] + " (accepted)" for m in jumps + gaps]

    for i, (_, d, v) in enumerate(new, start=last_row + 1):
        ws.cell(i, dcol, d).number_format = "yyyy-mm-dd"
        ws.cell(i, lcol, v)
    data_end = last_row + len(new)
    if data_end > r2:
        _grow(wb, sheet, rcol, r1, r2, data_end + max(120, (r2 - r1) // 5))
    last_date = dates[-1]

    result = RefreshResult(out=out, added=len(new), last_date=last_date, history=None, report=None, warnings=warnings)

    month_steps, year_steps = _template_steps(wb, "vol_1m"), _template_steps(wb, "vol_12m")
    formula_kind, formula_cell = _return_formula_kind(ws, rcol, r1, r2)

    def add_history(calc):
        """Runs inside the recalculation, with every value computed: one evaluation in all."""
        if calc.report.unread:
            raise RecalcError(calc.report.unread[0] + "; nothing was written")
        fs, fr, fc, _, _ = name_range(calc.book, "fit")
        anchor = (fs, fr, fc)
        fitted = calc.value(anchor)
        if isinstance(fitted, str) and fitted.upper().startswith("ERROR"):
            # the fit's own reason, not the #REF! of every figure that reads it
            raise RecalcError(f"the fit ({fs}!{cell_name(fr, fc)}) says {fitted[:300]}; nothing was written")
        r1_, c1_, r2_, c2_ = calc.spills.get(anchor, (fr, fc, fr, fc))
        table = [[calc.value((fs, r, c)) for c in range(c1_, c2_ + 1)] for r in range(r1_, r2_ + 1)]
        params, info = _fit_rows(table)
        try:
            periods = float(_option(info.get("options"), "periods"))
        except (TypeError, ValueError):
            periods = None
        problem = frequency_problem(dates, periods, month_steps, year_steps)
        if problem:
            raise RecalcError(problem + "; nothing was written")
        said = (_option(info.get("options"), "returns") or "").lower()
        if formula_kind and said and said != formula_kind:
            raise RecalcError(
                f"the fit's options say returns={said} ({_RETURN_WORDS.get(said, said)}), but the Data sheet's return "
                f"formulas ({sheet}!{formula_cell}) compute {_RETURN_WORDS[formula_kind]}: the VaR and ES in % of value "
                f"would be converted from the wrong kind of return; set returns={formula_kind} on the Inputs sheet "
                "(or change the formulas); nothing was written")
        figures = {}
        for n in FIGURES + ("data_check",):
            ref = name_range(calc.book, n)
            if ref is None:
                continue
            v = calc.value((ref[0], ref[1], ref[2]))
            where = f"{ref[0]}!{cell_name(ref[1], ref[2])}"
            if n == "data_check":
                if isinstance(v, str) and v.upper().startswith("WARNING"):
                    raise RecalcError(f"{where}: {v}; nothing was written")
                continue
            ok = isinstance(v, bool) if n == "converged" else (isinstance(v, (int, float)) and not isinstance(v, bool))
            if n == "last_date" and ok:
                from openpyxl.utils.datetime import from_excel

                v = from_excel(v).date()
            if not ok or (isinstance(v, float) and not math.isfinite(v)):
                raise RecalcError(f"{n} ({where}) evaluates to {_shown(v)}, not a {'TRUE/FALSE' if n == 'converged' else 'number'}; "
                                  "nothing was written (check the Model sheet's fit table and the Inputs)")
            figures[n] = v
        if figures.get("last_date") != last_date:
            raise RecalcError(f"last_date reads {figures.get('last_date')} but the data end on {last_date}; nothing was written")
        result.figures = figures
        if not new:
            return
        hist = calc.book["History"] if "History" in calc.book.sheetnames else calc.book.create_sheet("History")
        header = [c.value for c in hist[1]] if hist.max_row >= 1 else []
        header = [h for h in header if h is not None]
        if header[: len(HISTORY_HEADER)] != HISTORY_HEADER:
            if any(hist.cell(r, 1).value is not None for r in range(2, hist.max_row + 1)):
                raise RecalcError("the History sheet's header is not the template's "
                                  f"({', '.join(HISTORY_HEADER[:4])}, ...); nothing was written")
            header = HISTORY_HEADER[:]
        prev_row = max((r for r in range(2, hist.max_row + 1) if hist.cell(r, 1).value is not None), default=None)
        prev = {h: hist.cell(prev_row, j).value for j, h in enumerate(header, start=1)} if prev_row else {}
        moved = []
        basis = f"VaR level={figures['var_level']:.4g}; returns={said or 'not given'}"
        before = _basis_name(calc.book)
        if before is not None and before != basis:
            was = dict(p.split("=", 1) for p in before.split("; ") if "=" in p)
            changes = [f"{k} {was.get(k, '?')} -> {v}" for k, v in (p.split("=", 1) for p in basis.split("; "))
                       if was.get(k) != v]
            if was and changes:
                moved.append(f"{', '.join(changes)}: var_1m and es_1m not comparable with the rows above")
        _set_basis_name(calc.book, basis)
        for name, (est, se) in params.items():
            old = prev.get(name)
            if isinstance(old, (int, float)) and isinstance(est, (int, float)) and se:
                if abs(est - old) > 2 * se:
                    moved.append(f"{name} {(est - old) / se:+.1f} SE")
        for name in params:
            for col in (name, f"se_{name}"):
                if col not in header:
                    header.append(col)
        row = {
            "run_at": dt.datetime.now().replace(microsecond=0),
            "last_date": last_date,
            "nobs": figures["nobs"],
            "model": info.get("model"),
            "dist": info.get("dist"),
            "converged": figures["converged"],
            "loglik": info.get("loglik"),
            "vol_1m": figures["vol_1m"],
            "vol_12m": figures["vol_12m"],
            "var_1m": figures["var_1m"],
            "es_1m": figures["es_1m"],
            "moved": "; ".join(moved),
        }
        if not figures["converged"]:
            msg = re.sub(r"^\s*not converged\s*[:;,-]?\s*", "", str(info.get("message") or ""), flags=re.IGNORECASE)
            row["moved"] = ("NOT CONVERGED: " + msg[:200] + ("; " + row["moved"] if row["moved"] else "")).strip()
        for name, (est, se) in params.items():
            row[name] = est
            row[f"se_{name}"] = se
        for j, h in enumerate(header, start=1):
            hc = hist.cell(1, j, h)
            if j > len(HISTORY_HEADER) and hist.cell(1, 1).has_style:  # a column added by name
                hc._style = copy(hist.cell(1, 1)._style)
        r = (prev_row or 1) + 1
        for j, h in enumerate(header, start=1):
            c = hist.cell(r, j, row.get(h))
            if h == "last_date":
                c.number_format = "yyyy-mm-dd"
            elif h == "run_at":
                c.number_format = "yyyy-mm-dd hh:mm"
            elif h in ("nobs",):
                c.number_format = "0"
            elif h == "converged":  # TRUE/FALSE in LibreOffice too, in this row and the earlier ones
                for earlier in range(2, r + 1):
                    if isinstance(hist.cell(earlier, j).value, bool):
                        hist.cell(earlier, j).number_format = BOOL_FORMAT
            elif h in ("loglik", "vol_1m", "vol_12m", "var_1m", "es_1m"):
                c.number_format = "0.00"
            elif h == "moved":  # a long note wraps in its column instead of running under the estimates
                from openpyxl.styles import Alignment
                from openpyxl.utils import get_column_letter

                c.alignment = Alignment(wrap_text=True, vertical="top")
                width = hist.column_dimensions[get_column_letter(j)].width or 13
                lines = math.ceil(len(str(row.get(h) or "")) / max(width - 1, 8))
                if lines > 1:  # as tall as its lines (a row's height is not fitted to its text on opening)
                    hist.row_dimensions[r].height = 12.75 * lines
            elif h not in ("model", "dist", "converged", "moved"):
                c.number_format = "0.0000"
        result.history = row

    def before_write(calc):
        add_history(calc)
        fit_to_data(calc.book, sheet, first_row, max(data_end, first_row))
        tables = [(k[0],) + v for k, v in calc.spills.items()]
        format_results(calc.book, tables, calc.values)

    # the workbook as edited here is recalculated as it stands (not saved and loaded again)
    _, report = recalc(book, out, dynamic_hint=spills, before_write=before_write, book=wb)
    result.report = report
    if values_copy:
        result.values_copy = write_values_copy(out, values_copy_path(out))
    return result
