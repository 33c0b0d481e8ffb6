"""Cleaning of Excel-shaped inputs and the one ``ERROR:`` helper.

Every worksheet function takes its range arguments through :func:`returns_column` and its
scalars through the small readers here, and is wrapped by :func:`sheet_function`, which turns
any exception into a one-cell ``ERROR:`` text: a :class:`~xlfuncs.core.errors.VolcastError`
with its own message, anything else as an internal problem with its type and message (never
a traceback).
"""

from __future__ import annotations

import functools
import inspect
import math
import operator
import warnings
from dataclasses import dataclass

import numpy as np

from ..core.errors import EXCERPT_CHARS, InputError, VolcastError, describe_value, excerpt, value_words

__all__ = [
    "SheetError",
    "sheet_function",
    "error_cell",
    "is_blank",
    "as_rows",
    "Returns",
    "returns_column",
    "regressors_block",
    "future_block",
    "text_arg",
    "int_arg",
    "float_arg",
    "is_error_text",
    "shown",
    "describe",
    "excerpt",
    "CHAINED_ERROR_CHARS",
    "MAX_ERROR_CHARS",
]

#: the longest ERROR text a cell shows (a safety net: echoes of input are already excerpts)
MAX_ERROR_CHARS = 1000
#: how much of another cell's ERROR text a message quotes (its reason is worth reading)
CHAINED_ERROR_CHARS = 120


class SheetError(InputError):
    """An input problem found while reading cells; the message is shown after ``ERROR:``."""


def error_cell(message: str) -> list:
    text = message if message.startswith("ERROR:") else f"ERROR: {message}"
    return [[excerpt(text, MAX_ERROR_CHARS)]]


def shown(value, limit: int = EXCERPT_CHARS) -> str:
    """A cell's value in a spreadsheet user's words, short enough for a message.

    The one helper through which the worksheet layer echoes input: text in double quotes, cut to
    ``limit`` characters with "..." and its control characters escaped; TRUE/FALSE for logical
    values; a date as 2020-01-31 (with the time only when it is not midnight); "not a number",
    "infinity" and "minus infinity" for the numbers that are not finite; "a blank cell" for an
    empty one; an error value as Excel writes it (#N/A).  See ``core.errors.value_words``.
    """
    if value is None:
        return "a blank cell"
    if _is_excel_error(value):
        return excerpt(str(value).strip(), limit)
    return value_words(value, limit)


def is_error_text(value) -> bool:
    return isinstance(value, str) and value.strip().upper().startswith("ERROR:")


def sheet_function(func):
    """Wrap a worksheet function so that it never raises into the spreadsheet."""
    sig = inspect.signature(func)
    usage = f"{func.__name__}(" + ", ".join(
        name if p.default is p.empty else f"[{name}]" for name, p in sig.parameters.items()) + ")"

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:  # a call with too many arguments (a headless recalculation reads what the cell says)
            sig.bind(*args, **kwargs)
        except TypeError:
            return error_cell(f"{usage} takes {_count_words(sig)}, got {len(args) + len(kwargs)}")
        try:
            with np.errstate(all="ignore"), warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return func(*args, **kwargs)
        except VolcastError as exc:
            return error_cell(str(exc))
        except RecursionError:  # pragma: no cover - defensive
            return error_cell(f"{func.__name__}: input too deeply nested")
        except Exception as exc:  # noqa: BLE001 - a cell must never see a traceback
            return error_cell(
                f"{func.__name__} hit an internal problem ({type(exc).__name__}: {excerpt(exc, 200)}); "
                "please report it with the inputs that caused it"
            )

    return wrapper


def _count_words(sig) -> str:
    """How many arguments a signature takes, in words: "2 to 7 arguments"."""
    params = list(sig.parameters.values())
    need = sum(p.default is p.empty for p in params)
    return f"{need} argument{'s' if need != 1 else ''}" if need == len(params) else f"{need} to {len(params)} arguments"


def is_blank(v) -> bool:
    return v is None or (isinstance(v, str) and v.strip() == "")


def _is_excel_error(v) -> bool:
    if isinstance(v, str):
        s = v.strip().upper()
        return s in ("#N/A", "#VALUE!", "#REF!", "#DIV/0!", "#NUM!", "#NAME?", "#NULL!", "#SPILL!", "#CALC!", "#GETTING_DATA")
    return type(v).__name__ == "XlError"


def as_rows(value) -> list:
    """Any Excel-shaped value as a list of rows (a scalar is one cell)."""
    if isinstance(value, np.ndarray):
        value = value.tolist()
    if isinstance(value, (list, tuple)):
        if not value:
            return []
        kinds = set(map(type, value))
        if kinds <= {list}:
            return value
        if all(isinstance(r, (list, tuple, np.ndarray)) for r in value):
            return [list(r) for r in value]
        return [[v] for v in value]
    return [[value]]


@dataclass
class Returns:
    """Cleaned numbers and where they came from in the range."""

    values: np.ndarray  # the numbers used
    positions: np.ndarray  # index of each number in the flattened range
    length: int  # cells in the flattened range
    orientation: str  # 'column' or 'row'

    def spread(self, series, blank=None) -> list:
        """Lay a series aligned with ``values`` back over the range shape (blank elsewhere)."""
        out = [blank] * self.length
        for pos, v in zip(self.positions, series):
            out[pos] = blank if v is None or (isinstance(v, float) and not math.isfinite(v)) else float(v)
        if self.orientation == "row":
            return [out]
        return [[v] for v in out]


def describe(v) -> str:
    """What a cell holds, for "returns row 3 holds ...": the value's kind and ``shown`` value."""
    if v is None:
        return "a blank cell"
    if _is_excel_error(v):
        return f"the error {shown(v)}"
    if is_error_text(v):
        return f"an error from another cell: {excerpt(v.strip()[6:].strip(), CHAINED_ERROR_CHARS)}"
    return describe_value(v)


def _got(v) -> str:
    """A value for "must be ..., got ...": a finite number as it is (2.5), anything else with its
    kind (the date 2020-01-31, a value that is not a number, infinity)."""
    if isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_)) \
            and math.isfinite(float(v)):
        return shown(v)
    return describe(v)


def _chained(value) -> str:
    """The reason of another cell's ERROR text, as a message quotes it."""
    return excerpt(str(value).strip()[6:].strip(), CHAINED_ERROR_CHARS)


_first = operator.itemgetter(0)


def returns_column(value, arg: str = "returns", missing: str = "error") -> Returns:
    """Read a one-column or one-row range of numbers, most recent last.

    Leading and trailing blanks are trimmed; blanks inside are an error unless
    ``missing='skip'``; text, logical values and error values are errors naming the row.
    """
    if is_error_text(value):
        raise SheetError(f"{arg} holds an error from another cell: {_chained(value)}")
    rows = as_rows(value)
    if len(rows) > 1:
        # the common case first: a column of one-cell rows of plain numbers (the unpacking fails
        # on any row that is not one cell, and the careful path below then reads the range)
        try:
            fast = _fast_numbers([v for (v,) in rows], "column")
        except ValueError:
            fast = None
        if fast is not None:
            return fast
    lengths = set(map(len, rows))
    if not rows or lengths == {0}:
        raise SheetError(f"{arg} is empty; select a column of numbers")
    width = max(lengths)
    height = len(rows)
    if width > 1 and height > 1:
        raise SheetError(f"{arg} must be a single column or a single row, got {height} rows by {width} columns")
    orientation = "row" if height == 1 and width > 1 else "column"
    if orientation == "row":
        flat = rows[0]
    elif lengths == {1}:  # a plain column: every row one cell
        flat = list(map(_first, rows))
    else:
        flat = [r[0] if r else None for r in rows]
    unit = "column" if orientation == "row" else "row"
    n = len(flat)
    fast = _fast_numbers(flat, orientation)
    if fast is not None:
        return fast
    first = next((i for i, v in enumerate(flat) if not is_blank(v)), None)
    if first is None:
        raise SheetError(f"{arg} holds no numbers (every cell is blank)")
    last = max(i for i, v in enumerate(flat) if not is_blank(v))
    vals, pos = [], []
    for i in range(first, last + 1):
        v = flat[i]
        if is_blank(v):
            if missing == "skip":
                continue
            raise SheetError(
                f"{arg} {unit} {i + 1} is blank inside the data; fill it, or add missing=skip to the options"
            )
        if isinstance(v, (bool, np.bool_)) or _is_excel_error(v) or isinstance(v, str) and not _number_text(v):
            raise SheetError(f"{arg} {unit} {i + 1} holds {describe(v)}; numbers only")
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise SheetError(f"{arg} {unit} {i + 1} holds {describe(v)}; numbers only") from None
        if not math.isfinite(x):
            raise SheetError(f"{arg} {unit} {i + 1} holds {describe(x)}; finite numbers only")
        vals.append(x)
        pos.append(i)
    return Returns(np.array(vals), np.array(pos, dtype=int), n, orientation)


def _cell_number(v, where: str) -> float:
    """A cell of a block of numbers, or a SheetError naming ``where`` it is."""
    if isinstance(v, (bool, np.bool_)) or _is_excel_error(v) or is_error_text(v) or (
            isinstance(v, str) and not _number_text(v)):
        raise SheetError(f"{where} holds {describe(v)}; numbers only")
    try:
        x = float(v)
    except (TypeError, ValueError):
        raise SheetError(f"{where} holds {describe(v)}; numbers only") from None
    if not math.isfinite(x):
        raise SheetError(f"{where} holds {describe(x)}; finite numbers only")
    return x


def _blank_block(value) -> bool:
    return all(is_blank(v) for row in as_rows(value) for v in row)


def regressors_block(value, data: Returns, arg: str = "regressors") -> "np.ndarray | None":
    """The regressors beside the returns ``data``: one column per regressor and one row per
    returns row (a returns *row* takes one row per regressor).  Rows line up with the returns'
    range; the rows of blank returns (trimmed, or skipped under missing=skip) are left out with
    them.  None when the argument is missing or blank; a blank or non-number cell in a row whose
    return is used is refused with its row and column named."""
    if value is None or _blank_block(value):
        return None
    if is_error_text(value):
        raise SheetError(f"{arg} holds an error from another cell: {_chained(value)}")
    rows = as_rows(value)
    if data.orientation == "row":  # one row per regressor, one column per return
        width = max(map(len, rows))
        rows = [[r[j] if j < len(r) else None for r in rows] for j in range(width)]
        unit, other = "column", "row"
    else:
        unit, other = "row", "column"
    if len(rows) != data.length:
        raise SheetError(f"{arg} must have one {unit} per returns {unit} so that they line up: returns has "
                         f"{data.length} {unit}s, {arg} {len(rows)}")
    used = [rows[pos] for pos in data.positions]
    width = max((len(r) for r in rows), default=0)
    # columns blank in every used row at the right edge of the range are not regressors
    while width and all(len(r) < width or is_blank(r[width - 1]) for r in used):
        width -= 1
    if width == 0:
        raise SheetError(f"{arg} has no numbers beside the returns; give one {other} per regressor")
    X = np.empty((len(used), width))
    for i, (pos, row) in enumerate(zip(data.positions, used)):
        for k in range(width):
            v = row[k] if k < len(row) else None
            where = f"{arg} {unit} {int(pos) + 1}, {other} {k + 1}"
            if is_blank(v):
                raise SheetError(f"{where} is blank where returns has a number; the rows must line up (fill it, or "
                                 "leave the return blank too)")
            X[i, k] = _cell_number(v, where)
    return X


def future_block(value, arg: str = "future") -> "np.ndarray | None":
    """Future regressor values: one row per forecast step, one column per regressor (blank rows
    after the last filled one are not steps).  None when missing or blank."""
    if value is None or _blank_block(value):
        return None
    if is_error_text(value):
        raise SheetError(f"{arg} holds an error from another cell: {_chained(value)}")
    rows = as_rows(value)
    last = max(i for i, r in enumerate(rows) if any(not is_blank(v) for v in r))
    rows = rows[: last + 1]
    width = max(len(r) for r in rows)
    while width and all(len(r) < width or is_blank(r[width - 1]) for r in rows):
        width -= 1
    X = np.empty((len(rows), width))
    for i, row in enumerate(rows):
        for k in range(width):
            v = row[k] if k < len(row) else None
            where = f"{arg} row {i + 1}, column {k + 1}"
            if is_blank(v):
                raise SheetError(f"{where} is blank; give a value for every step and regressor")
            X[i, k] = _cell_number(v, where)
    return X


_PLAIN_NUMBER_TYPES = {float, int, type(None), np.float64, np.float32, np.int64, np.int32}


def _fast_numbers(flat, orientation) -> "Returns | None":
    """The common case, a block of plain numbers with blank cells only at the ends."""
    kinds = set(map(type, flat))
    if not kinds <= _PLAIN_NUMBER_TYPES:
        return None
    arr = np.array(flat, dtype=float)  # None becomes nan
    good = ~np.isnan(arr)
    if int(good.size - good.sum()) != (flat.count(None) if type(None) in kinds else 0):
        return None  # a nan that is not a blank cell
    idx = np.flatnonzero(good)
    if idx.size == 0:
        return None
    first, last = int(idx[0]), int(idx[-1])
    if idx.size != last - first + 1:
        return None  # blanks inside: the careful path words the message
    vals = arr[first:last + 1]
    if not np.all(np.isfinite(vals)):
        return None
    return Returns(vals, np.arange(first, last + 1), len(flat), orientation)


def _number_text(s: str) -> bool:
    # numbers stored as text (a common import artefact) are accepted when they parse cleanly
    try:
        return math.isfinite(float(s.strip()))
    except ValueError:
        return False


_MISSING = object()


def _one_cell(value, arg: str):
    """The single filled cell of a scalar argument, or _MISSING when every cell is blank."""
    cells = [v for r in as_rows(value) for v in r if not is_blank(v)]
    if not cells:
        return _MISSING
    if len(cells) > 1:
        raise SheetError(f"{arg} must be one cell, got {len(cells)} filled cells")
    return cells[0]


def _number(v, arg: str, wanted: str) -> float:
    """A cell's number, or a SheetError saying what was ``wanted`` instead."""
    if isinstance(v, (bool, np.bool_)) or _is_excel_error(v) or is_error_text(v):
        raise SheetError(f"{arg} must be {wanted}, got {describe(v)}")
    try:
        return float(v)
    except (TypeError, ValueError):
        raise SheetError(f"{arg} must be {wanted}, got {describe(v)}") from None


def text_arg(value, arg: str, default=None):
    """A one-cell text argument (blank means the default)."""
    v = _one_cell(value, arg)
    if v is _MISSING:
        return default
    if is_error_text(v):
        raise SheetError(f"{arg} holds an error from another cell: {_chained(v)}")
    if _is_excel_error(v):
        raise SheetError(f"{arg} holds an error from another cell: {shown(v)}")
    if isinstance(v, (bool, np.bool_)) or not isinstance(v, str):
        raise SheetError(f"{arg} must be text, got {describe(v)}")
    return v.strip()


def int_arg(value, arg: str, lo: int, hi: int, default=None) -> int:
    """A one-cell whole number in [lo, hi] (Excel passes numbers as floats)."""
    wanted = f"a whole number from {lo} to {hi}"
    v = _one_cell(value, arg)
    if v is _MISSING:
        if default is None:
            raise SheetError(f"{arg} is required: {wanted}")
        return default
    x = _number(v, arg, wanted)
    if not math.isfinite(x) or not x.is_integer() or not lo <= x <= hi:
        whole = math.isfinite(x) and x.is_integer() and abs(x) < 1e15
        raise SheetError(f"{arg} must be {wanted}, got {shown(int(x)) if whole else _got(v)}")
    return int(x)


def float_arg(value, arg: str, default=None, example: str = "") -> float:
    """A one-cell number (range checks belong to the core, which words them)."""
    wanted = "a number" + (f", e.g. {example}" if example else "")
    v = _one_cell(value, arg)
    if v is _MISSING:
        if default is None:
            raise SheetError(f"{arg} is required: {wanted}")
        return default
    x = _number(v, arg, wanted)
    if not math.isfinite(x):
        raise SheetError(f"{arg} must be a finite number, got {describe(x)}")
    return x
