"""The adapter over the formula-engine library (``formulas``, EUPL 1.1+; see DEVELOPERS.md).

Everything the headless mode needs from a formula engine goes through this module, so the
library could be swapped: :func:`compile_formula` turns one cell's formula text into a
:class:`Compiled` with the references it reads, and :meth:`Compiled.__call__` evaluates it on
values supplied by the caller.  Values crossing the adapter are plain Python: ``float``,
``int``, ``str``, ``bool``, ``None`` (an empty cell), :class:`ExcelError`, or lists of rows of
those for an array result.

Our worksheet functions are registered into the engine through the worksheet layer, so a
headless recalculation computes exactly what Excel with the add-in computes.
"""

from __future__ import annotations

import importlib
import math
import re
import sys
import types
from dataclasses import dataclass

import numpy as np

__all__ = ["ExcelError", "Compiled", "compile_formula", "FormulaError", "our_function_names",
           "top_level_call", "calls_ours", "ERROR_LITERALS", "number_text"]

from .xlsxpost import ERROR_LITERALS, ExcelError  # one error value for the engine and the writer


class FormulaError(Exception):
    """A formula the engine cannot compile or evaluate (unsupported function, bad syntax)."""


_FUNC_RE = re.compile(r"(?<![A-Za-z0-9_.!$:])([A-Za-z_][A-Za-z0-9_.]*)\s*\(")
_STRING_RE = re.compile(r'"(?:[^"]|"")*"')
# our functions as files spell them: any case (LibreOffice writes volfit), with the prefixes
# Excel and LibreOffice put before add-in and future functions
_OURS_RE = re.compile(r"^\s*=\s*(?:_xludf\.|_xlfn\.|_xlws\.)*(VOL[A-Z]+)\s*\(", re.IGNORECASE)
_PREFIXES = ("_XLUDF.", "_XLFN._XLWS.", "_XLFN.", "_XLWS.")


def _engine():
    import formulas

    return formulas


_REGISTERED = False

#: the SciPy subpackages the engine's statistics module imports when its function table is built
#: (``from scipy import stats, linalg``; ``from scipy.interpolate import interp1d``): about 1.0-1.4 s
#: CPU here, paid by every recalculation with a formula for the engine, though only its statistical
#: distribution functions, regressions and forecasts use them, and only when called
_DEFERRED = ("scipy.stats", "scipy.linalg", "scipy.interpolate")


class _Deferred(types.ModuleType):
    """Stands in sys.modules for a SciPy subpackage while the engine's function table is built.

    A module bound to it (``from scipy import stats``) reaches the real subpackage at its first
    attribute read after the build, importing it then; a name taken from it during the build
    (``from scipy.interpolate import interp1d``) is a function that does the same when called.  Once
    the table is built the stand-ins leave sys.modules, so every other import gets the real
    subpackage."""

    def __init__(self, name):
        super().__init__(name)
        self.__dict__["_building"] = True

    def __getattr__(self, attr):
        if attr.startswith("__"):  # no __path__, __spec__...: the import system sees a plain module
            raise AttributeError(attr)
        name = self.__name__
        if self.__dict__.get("_building"):
            def later(*args, **kwargs):
                return getattr(importlib.import_module(name), attr)(*args, **kwargs)

            later.__name__ = attr
            return later
        return getattr(importlib.import_module(name), attr)


def _function_table():
    """The engine's table of functions, its SciPy subpackages imported only when first used."""
    standing = {}
    for name in _DEFERRED:
        if name not in sys.modules:
            standing[name] = sys.modules[name] = _Deferred(name)
    try:
        return _engine().get_functions()
    finally:
        for name, mod in standing.items():
            mod.__dict__["_building"] = False
            if sys.modules.get(name) is mod:
                del sys.modules[name]


_OUR_NAMES: tuple = ()


def our_function_names() -> tuple:
    """The catalogue names of our worksheet functions (read once from the worksheet layer)."""
    global _OUR_NAMES
    if not _OUR_NAMES:
        from .. import sheet

        _OUR_NAMES = tuple(sheet.__all__)
    return _OUR_NAMES


def _register_ours():
    """Register the worksheet functions (catalogue names, and with the _xludf. prefix)."""
    global _REGISTERED
    if _REGISTERED:
        return
    from .. import sheet

    funcs = _function_table()
    _excel_power()
    _excel_rounding(funcs)
    _excel_number_arguments(funcs)
    _excel_arithmetic(funcs)
    _excel_comparison_and_text()
    for name in sheet.__all__:
        fn = getattr(sheet, name)
        wrapped = _wrap_ours(fn)
        funcs[name] = wrapped
        for prefix in _PREFIXES:
            funcs[f"{prefix}{name}"] = wrapped
    _REGISTERED = True


def _excel_power():
    """The engine's ^ operator made Excel's, as the engine's own POWER already is: 0^0 is #NUM!,
    zero to a negative power #DIV/0!, a negative number to a power that is not whole #NUM!
    (Excel's rules, from memory), and an overflow #NUM!.  The library's operator is Python's
    ``**``, which gives 1.0, raises, or returns a complex number there, and a complex number
    then stopped the recalculation when it was written."""
    from formulas.functions import Error, wrap_ufunc
    from formulas.functions.operators import OPERATORS

    def power(x, y):
        if x == 0:
            if y == 0:
                return Error.errors["#NUM!"]
            if y < 0:
                return Error.errors["#DIV/0!"]
        try:  # as Python floats: an overflow raises (NumPy's scalars would warn and give inf)
            v = float(x) ** float(y)
        except OverflowError:
            return Error.errors["#NUM!"]
        if isinstance(v, complex):
            return Error.errors["#NUM!"]
        return v

    OPERATORS["^"] = wrap_ufunc(power, input_parser=lambda *a: map(_to_float, a))


def _excel_rounding(funcs):
    """ROUND, ROUNDUP and ROUNDDOWN as Excel computes them: on the number as Excel holds it, to 15
    significant digits, so that ROUND(1.005, 2) is 1.01 and ROUND(2.675, 2) is 2.68 (from memory;
    half away from zero).  The engine's own rounded the binary double (1.00499999999999989...),
    giving 1 and 2.67."""
    from decimal import ROUND_DOWN, ROUND_HALF_UP, ROUND_UP, Context, Decimal, InvalidOperation

    from formulas.functions import wrap_ufunc

    context = Context(prec=400)

    def rounding(mode):
        def fn(x, digits):
            x, digits = float(x), int(digits)  # Excel truncates the digits towards zero
            if not math.isfinite(x):
                return x
            held = Decimal(format(x, ".15g"))
            try:
                return float(held.quantize(Decimal(1).scaleb(-digits), rounding=mode, context=context))
            except InvalidOperation:  # more digits than the number holds: as it is
                return float(held)
        return fn

    funcs["ROUND"] = wrap_ufunc(rounding(ROUND_HALF_UP))
    funcs["ROUNDUP"] = wrap_ufunc(rounding(ROUND_UP))
    funcs["ROUNDDOWN"] = wrap_ufunc(rounding(ROUND_DOWN))


# ---------------------------------------------------------------- numbers in function arguments
_NUMBER_TEXT_RE = re.compile(
    r"^\s*([+-]?)(\d{1,3}(?:,\d{3})+(?:\.\d*)?|\d+(?:\.\d*)?|\.\d+)([eE][+-]?\d+)?\s*(%?)\s*$")


_TIME_TEXT = r"(?:\s+\d{1,2}:\d{2}(?::\d{2})?(?:\s*[AaPp][Mm])?)?"
# the date texts read as dates: 2026-01-05, 1/5/2026 (month first, en-US), 5-Jan-2026 or
# 5 January 2026, each perhaps with a time.  The library's date reader takes far more ("May",
# "1 2", "12,34", "10:30" as today's date and time), numbers Excel would not give: such texts are
# #VALUE! here, an error rather than a wrong number
_DATE_TEXT_RE = re.compile(r"^\s*(?:\d{4}-\d{1,2}-\d{1,2}|\d{1,2}/\d{1,2}/\d{4}|\d{1,2}[- ][A-Za-z]{3,9}[- ]\d{4})"
                           + _TIME_TEXT + r"\s*$")


def _text_number(text: str):
    """The number Excel (en-US) reads in a text, or None: "3", " 2.5 ", "1E3", "10,900.50" (the
    thousands separator), "15%" (0.15), or a date in one of the forms of ``_DATE_TEXT_RE``
    ("2026-01-05", as its serial number).
    Python's float() would also take "nan", "inf" and "1_000", which Excel does not."""
    m = _NUMBER_TEXT_RE.match(text)
    if m:
        sign, digits, exponent, percent = m.groups()
        v = float(sign + digits.replace(",", "") + (exponent or ""))
        return v / 100.0 if percent else v
    if not _DATE_TEXT_RE.match(text):
        return None
    from formulas.functions.date import _text2datetime, xdate, xtime

    try:
        parts = _text2datetime(text)
        return float(xdate(*parts[:3]) + xtime(*parts[3:]))
    except Exception:  # noqa: BLE001 - no date either
        return None


def _to_float(v) -> float:
    """An operand of an arithmetic operator as Excel converts it: a text by :func:`_text_number`
    (ValueError, hence #VALUE!, if it holds no number), TRUE as 1."""
    if isinstance(v, str):
        x = _text_number(v)
        if x is None:
            raise ValueError(v)
        return x
    return float(v)


def _is_reference(arg) -> bool:
    """Whether an argument reached the engine as cells: every reference is passed in by
    :func:`to_engine` as a plain ndarray, while the engine's own arrays (an array constant, an
    expression over a range) are its ndarray subclass, and typed values are scalars."""
    return type(arg) is np.ndarray


def _number_arguments(args, *, count=False):
    """The numbers of a SUM-like function's arguments, by Excel's rule (its function reference
    for SUM, AVERAGE, COUNT, MIN, MAX: "If an argument is an array or reference, only numbers in
    that array or reference are counted. Empty cells, logical values, or text in the array or
    reference are ignored"; a value typed as an argument, TRUE or "3", is converted, and a text
    that is no number is #VALUE!).  An error value anywhere is the result (an XlError is
    returned).  ``count``: COUNT's rule, errors and unreadable texts not counted, never raised."""
    from formulas.functions import Error, XlError

    out = []
    for arg in args:
        if isinstance(arg, np.ndarray) and (_is_reference(arg) or arg.size != 1):
            for v in arg.ravel().tolist():
                if isinstance(v, XlError):
                    if not count:
                        return v
                elif isinstance(v, (int, float)) and not isinstance(v, bool):
                    out.append(float(v))
            continue
        v = arg.ravel()[0] if isinstance(arg, np.ndarray) else arg
        if isinstance(v, (np.generic,)):
            v = v.item()
        if isinstance(v, XlError):
            if not count:
                return v
        elif isinstance(v, bool):
            out.append(float(v))
        elif isinstance(v, (int, float)):
            out.append(float(v))
        elif isinstance(v, str):
            x = _text_number(v)
            if x is not None:
                out.append(x)
            elif not count:
                return Error.errors["#VALUE!"]
    return out


#: the engine's functions over numbers given as any mix of ranges, arrays and typed values; the
#: engine read a text "3" in a range as the number 3 (SUM 9 where Excel gives 6) or failed on it
#: (#VALUE! for AVERAGE and MIN, where Excel ignores it)
_NUMBER_FUNCTIONS = ("SUM", "PRODUCT", "SUMSQ", "AVERAGE", "COUNT", "MIN", "MAX", "MEDIAN",
                     "STDEV", "STDEV.S", "STDEV.P", "STDEVP", "VAR", "VAR.S", "VAR.P", "VARP",
                     "DEVSQ", "AVEDEV", "GEOMEAN", "HARMEAN", "KURT", "SKEW", "SKEW.P")
#: functions whose first argument is such a set of numbers and whose others are typed values
_FIRST_ARGUMENT_FUNCTIONS = ("PERCENTILE", "PERCENTILE.INC", "PERCENTILE.EXC", "QUARTILE",
                             "QUARTILE.INC", "QUARTILE.EXC", "LARGE", "SMALL")


def _excel_number_arguments(funcs):
    """The functions above, and SUMPRODUCT and ISNUMBER, given Excel's rule for text and logical
    values in ranges (:func:`_number_arguments`); each then computes as the engine's own does, on
    the numbers alone."""
    import functools

    from formulas.functions import XlError, wrap_ranges_func
    from formulas.functions.info import FalseArray, iserror

    def numbers_first(fn, count):
        @functools.wraps(fn)
        def call(*args):
            nums = _number_arguments(args, count=count)
            if isinstance(nums, XlError):
                return nums
            return fn(np.array(nums, dtype=float).reshape(1, -1))
        return call

    def first_argument(fn):
        @functools.wraps(fn)
        def call(values, *rest):
            nums = _number_arguments((values,) if _is_reference(values) or isinstance(values, np.ndarray)
                                     else (np.asarray([[values]], dtype=object),))
            if isinstance(nums, XlError):
                return nums
            return fn(np.array(nums, dtype=float).reshape(1, -1), *rest)
        return call

    def sumproduct(fn):
        # "treats array entries that are not numeric as if they were zeros" (Excel's reference
        # for SUMPRODUCT): a text "3" in a range is 0, not 3; an error is the result
        def entry(v):
            if isinstance(v, XlError) or (isinstance(v, (int, float)) and not isinstance(v, bool)):
                return v
            return 0.0

        @functools.wraps(fn)
        def call(*args):
            cleaned = []
            for a in args:
                arr = np.asarray(a, dtype=object)
                cleaned.append(np.frompyfunc(entry, 1, 1)(arr).astype(object) if arr.ndim else entry(arr.item()))
            return fn(*cleaned)
        return call

    for names, wrap in ((_NUMBER_FUNCTIONS, lambda fn, n: numbers_first(fn, n == "COUNT")),
                        (_FIRST_ARGUMENT_FUNCTIONS, lambda fn, n: first_argument(fn)),
                        (("SUMPRODUCT",), lambda fn, n: sumproduct(fn))):
        for name in names:
            for key in (name, f"_XLFN.{name}"):
                if key in funcs:
                    funcs[key] = wrap(funcs[key], name)

    def is_number(v):  # ISNUMBER("19") is FALSE: "Value arguments are not converted" (Excel's IS functions)
        return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))

    funcs["ISNUMBER"] = wrap_ranges_func(functools.partial(iserror, check=is_number, array=FalseArray))


def _excel_arithmetic(funcs):
    """The arithmetic operators and VALUE convert a text as Excel (en-US) does (:func:`_to_float`):
    "10,900.50"+0 is 10900.5 and VALUE("15%") 0.15, where the library's float() gave #VALUE!, and
    "nan"+0 is #VALUE!, not the library's #NUM!."""
    from formulas.functions import Error, XlError, wrap_ufunc
    from formulas.functions.operators import OPERATORS

    ops = {"+": lambda x, y: x + y, "-": lambda x, y: x - y, "*": lambda x, y: x * y,
           "/": lambda x, y: (x / y) if y else Error.errors["#DIV/0!"],
           "U-": lambda x: -x, "%": lambda x: x / 100.0}
    for op, fn in ops.items():
        OPERATORS[op] = wrap_ufunc(fn, input_parser=lambda *a: map(_to_float, a))

    def value(v):
        if isinstance(v, XlError):
            return v
        if isinstance(v, (bool, np.bool_)):  # VALUE(TRUE) is #VALUE! (from memory)
            raise ValueError
        return _to_float(v)

    funcs["VALUE"] = wrap_ufunc(value, input_parser=lambda *a: a)


def _held(x):
    """A number as Excel holds and shows it: rounded to 15 significant digits."""
    if isinstance(x, (bool, np.bool_)) or not isinstance(x, (int, float, np.integer, np.floating)):
        return x
    x = float(x)
    return float(format(x, ".15g")) if math.isfinite(x) else x


def number_text(x: float) -> str:
    """A number as Excel turns it into text (=\"x\"&A1, CONCATENATE, LEN): at most 15 significant
    digits, no trailing zeros, "0.3" for 0.1+0.2 and "0.333333333333333" for 1/3 (LibreOffice gives
    the same); outside 1E-4 <= |x| < 1E15 in the form 1E+15, 1.5E-07 (Excel from
    memory; LibreOffice writes such numbers out in full)."""
    x = float(x)
    if x == 0:
        return "0"
    text = format(x, ".15g")
    if "e" in text:
        mantissa, exponent = text.split("e")
        text = f"{mantissa}E{exponent[0]}{exponent[1:].zfill(2)}"
    return text


def _excel_comparison_and_text():
    """Numbers compared and turned into text as Excel holds them, to 15 significant digits:
    =0.1+0.2=0.3 is TRUE (Excel, from memory; LibreOffice gives TRUE) and ="x"&(0.1+0.2) is
    "x0.3"; the library compared the binary doubles and wrote Python's shortest repr
    ("x0.30000000000000004").  The library's text functions all convert through its ``_str``,
    which is put in its place here."""
    from formulas.functions import replace_empty, wrap_ufunc
    from formulas.functions import text as text_functions
    from formulas.functions.operators import LOGIC_OPERATORS, OPERATORS, logic_input_parser

    def as_text(v):
        if isinstance(v, (bool, np.bool_)):
            return str(bool(v)).upper()
        if isinstance(v, (int, float, np.integer, np.floating)):
            return number_text(v)
        return str(v)

    text_functions._str = as_text

    def held_input(x, y):
        (tx, x), (ty, y) = logic_input_parser(x, y)
        return (tx, _held(x)), (ty, _held(y))

    for op, fn in LOGIC_OPERATORS.items():
        OPERATORS[op] = wrap_ufunc(fn, input_parser=held_input, args_parser=lambda *a: a)
    OPERATORS["&"] = wrap_ufunc(lambda x, y: x + y, input_parser=lambda *a: map(as_text, a),
                                args_parser=lambda *a: (replace_empty(v, "") for v in a))


def _wrap_ours(fn):
    """Our function as the engine calls it.  Its rows come back as a 2-D object array, the
    engine's own array value, so that a call nested in another (=VOLFORECAST(R, VOLFIT(R), 3),
    =INDEX(VOLFIT(R), 5, 2)) receives the whole table, as in Excel."""
    def call(*args):
        return _as_array(fn(*[_to_cells(a) for a in args]))

    call.__name__ = fn.__name__
    return call


def _as_array(rows):
    if not isinstance(rows, list):
        rows = [[rows]]
    width = max((len(r) for r in rows), default=1) or 1
    arr = np.empty((max(len(rows), 1), width), dtype=object)
    arr[:] = None
    for i, row in enumerate(rows):
        for j, v in enumerate(row):
            arr[i, j] = v
    return arr


def _to_cells(value):
    """An engine value as an Excel-shaped argument (lists of rows; errors as their literal)."""
    if isinstance(value, np.ndarray):
        if value.ndim == 0:
            return _to_cells(value.item() if value.dtype != object else value[()])
        if value.ndim == 1:
            value = value.reshape(1, -1)
        return [[_scalar_cell(v) for v in row] for row in value.tolist()]
    return _scalar_cell(value)


def _scalar_cell(v):
    if isinstance(v, np.ndarray):
        return _to_cells(v)
    if v is None or _is_empty(v):
        return None
    if isinstance(v, ExcelError):
        return v.code
    if type(v).__name__ == "XlError":
        return str(v)
    if isinstance(v, (np.floating, np.integer)):
        return v.item()
    if isinstance(v, np.bool_):
        return bool(v)
    return v


def _is_empty(v) -> bool:
    return type(v).__name__ == "Token" and str(v) == "empty"


def _empty():
    import schedula

    return schedula.EMPTY


def to_engine(value):
    """A plain value (or list of rows) as the engine wants its inputs: a 2-D object array."""
    if isinstance(value, list):
        arr = np.empty((len(value), max((len(r) for r in value), default=0)), dtype=object)
        for i, row in enumerate(value):
            for j, v in enumerate(row):
                arr[i, j] = _engine_scalar(v)
        return arr
    arr = np.empty((1, 1), dtype=object)
    arr[0, 0] = _engine_scalar(value)
    return arr


def _engine_scalar(v):
    if v is None:
        return _empty()
    if isinstance(v, ExcelError):
        return _engine().XlError(v.code) if hasattr(_engine(), "XlError") else v.code
    return v


def from_engine(value):
    """An engine result as a plain value, or a list of rows for an array result."""
    if isinstance(value, np.ndarray):
        if value.ndim == 0:
            return from_engine(value[()])
        if value.size == 1:
            return from_engine(value.reshape(-1)[0])
        if value.ndim == 1:
            value = value.reshape(1, -1)
        return [[_plain(v) for v in row] for row in value.tolist()]
    return _plain(value)


def _plain(v):
    if isinstance(v, np.ndarray):
        return from_engine(v)
    if v is None or _is_empty(v):
        return None
    if type(v).__name__ == "XlError":
        code = str(v)
        return ExcelError(code if code in ERROR_LITERALS else "#VALUE!")
    if isinstance(v, np.bool_):
        return bool(v)
    if isinstance(v, (np.floating, np.integer)):
        v = v.item()
    if isinstance(v, float) and not np.isfinite(v):
        return ExcelError("#NUM!")
    return v


@dataclass
class Compiled:
    text: str
    inputs: tuple  # reference texts as the engine names them, e.g. 'A1:B3', "'MY SHEET'!A1", 'E2#'
    _fn: object

    def __call__(self, *values):
        try:
            # NumPy's overflow and invalid-value warnings are the engine's to turn into errors
            # (10^400 is #NUM!), not lines on the terminal
            with np.errstate(all="ignore"):
                return from_engine(self._fn(*[to_engine(v) for v in values]))
        except Exception:  # noqa: BLE001 - the engine's own failures become #VALUE!
            return ExcelError("#VALUE!")


_CACHE: dict = {}


def function_names(text: str) -> set:
    """Function names called in a formula (string literals ignored), upper-case."""
    bare = _STRING_RE.sub('""', text)
    return {m.group(1).upper() for m in _FUNC_RE.finditer(bare)}


def _known(name: str, funcs) -> bool:
    n = name.upper()
    for prefix in _PREFIXES:
        if n.startswith(prefix):
            n = n[len(prefix):]
    return n in funcs or n == "ANCHORARRAY"


# a number literal whose exponent has no sign (1e3, 2.5E10): outside texts and quoted sheet names,
# not part of a name or reference (x1e3) and not followed by one
_UNSIGNED_EXPONENT_RE = re.compile(r"(?<![A-Za-z0-9_.$:!\\])(\d+(?:\.\d*)?|\.\d+)[eE](\d+)(?![A-Za-z0-9_.(:!$])")
_QUOTED_RE = re.compile(r'"(?:[^"]|"")*"|\'(?:[^\']|\'\')*\'')


def signed_exponents(text: str) -> str:
    """The formula with every number literal's exponent signed (=1e3 as =1E+3): Excel reads both
    forms, the library only the signed one ("Not a valid formula" stopped the recalculation)."""
    if "e" not in text.lower():
        return text
    out, pos = [], 0
    for m in _QUOTED_RE.finditer(text):
        out.append(_UNSIGNED_EXPONENT_RE.sub(r"\1E+\2", text[pos:m.start()]))
        out.append(m.group(0))
        pos = m.end()
    out.append(_UNSIGNED_EXPONENT_RE.sub(r"\1E+\2", text[pos:]))
    return "".join(out)


def compile_formula(text: str) -> Compiled:
    """Compile a formula ("=...") once; raise FormulaError if it cannot be evaluated here."""
    hit = _CACHE.get(text)
    if hit is not None:
        return hit
    _register_ours()
    eng = _engine()
    funcs = eng.get_functions()
    unknown = sorted(n for n in function_names(text) if not _known(n, funcs))
    if unknown:
        raise FormulaError(f"function {', '.join(unknown)} is not supported by the headless engine")
    try:
        with np.errstate(all="ignore"):  # constants are folded here: 10^400 is the engine's #NUM!
            fn = eng.Parser().ast(signed_exponents(text))[1].compile()
    except Exception as exc:  # noqa: BLE001
        raise FormulaError(f"formula {text} cannot be read ({type(exc).__name__}: {exc})") from None
    out = Compiled(text=text, inputs=tuple(fn.inputs), _fn=fn)
    _CACHE[text] = out
    return out


def calls_ours(text: str) -> bool:
    """Whether a formula calls one of our functions anywhere (any case, any prefix)."""
    ours = set(our_function_names())
    for n in function_names(text):
        for prefix in _PREFIXES:
            if n.startswith(prefix):
                n = n[len(prefix):]
        if n in ours:
            return True
    return False


def top_level_call(text: str) -> str | None:
    """The name of our function if it is the formula's top-level call (such a formula spills)."""
    m = _OURS_RE.match(text)
    if not m:
        return None
    name = m.group(1).upper()
    if name not in our_function_names():
        return None
    # the call's closing parenthesis must end the formula
    depth = 0
    body = _STRING_RE.sub('""', text[m.end() - 1:])
    for i, ch in enumerate(body):
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
            if depth == 0:
                return name if body[i + 1:].strip() == "" else None
    return None
