"""Cleaning of Excel-shaped inputs and the one ``ERROR:`` helper.

Every worksheet function takes its range arguments through :func:`returns_column` and its
scalars through the small readers here, and is wrapped by :func:`sheet_function`, which turns
any exception into a one-cell ``ERROR:`` text: a :class:`~xlfuncs.core.errors.VolcastError`
with its own message, anything else as an internal problem with its type and message (never
a traceback).
"""

from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError, VolcastError

__all__ = [
    "SheetError",
    "sheet_function",
    "error_cell",
    "is_blank",
    "as_rows",
    "Returns",
    "returns_column",
    "text_arg",
    "int_arg",
    "float_arg",
    "is_error_text",
]


class SheetError(InputError):
    """An input problem found while reading cells; the message is shown after ``ERROR:``."""


def error_cell(message: str) -> list:
    text = message if message.startswith("ERROR:") else f"ERROR: {message}"
    return [[text]]


def is_error_text(value) -> bool:
    return isinstance(value, str) and value.strip().upper().startswith("ERROR:")


def sheet_function(func):
    """Wrap a worksheet function so that it never raises into the spreadsheet."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
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
                f"{func.__name__} hit an internal problem ({type(exc).__name__}: {exc}); "
                "please report it with the inputs that caused it"
            )

    return wrapper


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


def _describe(v) -> str:
    if isinstance(v, bool):
        return f"the logical value {'TRUE' if v else 'FALSE'}"
    if _is_excel_error(v):
        return f"the error {v}"
    if isinstance(v, str):
        s = v if len(v) <= 30 else v[:27] + "..."
        return f'text "{s}"'
    return f"{type(v).__name__} {v!r}"


def returns_column(value, arg: str = "returns", missing: str = "error") -> Returns:
    """Read a one-column or one-row range of numbers, most recent last.

    Leading and trailing blanks are trimmed; blanks inside are an error unless
    ``missing='skip'``; text, logical values and error values are errors naming the row.
    """
    if is_error_text(value):
        raise SheetError(f"{arg} holds an error from another cell: {str(value).strip()[6:].strip()}")
    rows = as_rows(value)
    lengths = set(map(len, rows))
    if not rows or lengths == {0}:
        raise SheetError(f"{arg} is empty; select a column of numbers")
    width = max(lengths)
    height = len(rows)
    if width > 1 and height > 1:
        raise SheetError(f"{arg} must be a single column or a single row, got {height} rows by {width} columns")
    orientation = "row" if height == 1 and width > 1 else "column"
    flat = rows[0] if orientation == "row" else [r[0] if r else None for r in rows]
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
        if isinstance(v, bool) or _is_excel_error(v) or isinstance(v, str) and not _number_text(v):
            raise SheetError(f"{arg} {unit} {i + 1} holds {_describe(v)}; numbers only")
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise SheetError(f"{arg} {unit} {i + 1} holds {_describe(v)}; numbers only") from None
        if not math.isfinite(x):
            raise SheetError(f"{arg} {unit} {i + 1} is not a finite number ({v}); numbers only")
        vals.append(x)
        pos.append(i)
    return Returns(np.array(vals), np.array(pos, dtype=int), n, orientation)


_PLAIN_NUMBER_TYPES = {float, int, type(None), np.float64, np.float32, np.int64, np.int32}


def _fast_numbers(flat, orientation) -> "Returns | None":
    """The common case, a block of plain numbers with blank cells only at the ends."""
    kinds = set(map(type, flat))
    if not kinds <= _PLAIN_NUMBER_TYPES:
        return None
    arr = np.array(flat, dtype=float)  # None becomes nan
    good = ~np.isnan(arr)
    if int(good.size - good.sum()) != flat.count(None):
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
    if isinstance(v, bool) or _is_excel_error(v) or is_error_text(v):
        raise SheetError(f"{arg} must be {wanted}, got {_describe(v)}")
    try:
        return float(v)
    except (TypeError, ValueError):
        raise SheetError(f"{arg} must be {wanted}, got {_describe(v)}") from None


def text_arg(value, arg: str, default=None):
    """A one-cell text argument (blank means the default)."""
    v = _one_cell(value, arg)
    if v is _MISSING:
        return default
    if is_error_text(v) or _is_excel_error(v):
        raise SheetError(f"{arg} holds an error from another cell: {v}")
    if isinstance(v, bool) or not isinstance(v, str):
        raise SheetError(f"{arg} must be text, got {_describe(v)}")
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
        shown = int(x) if math.isfinite(x) and x.is_integer() else v
        raise SheetError(f"{arg} must be {wanted}, got {shown}")
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
        raise SheetError(f"{arg} must be a finite number, got {v}")
    return x
