"""Recalculate a workbook with no Excel: read, evaluate every formula, write formulas and values.

Array results behave as Excel 365 shows them:

* a plain formula whose top-level call is one of our functions spills over the rows and columns
  its result needs; if a cell in the way is not empty the anchor shows ``#SPILL!``;
* a legacy array formula over a fixed range fills that range, padding with ``#N/A``;
* the spill reference ``E2#`` (stored in files as ``_xlfn.ANCHORARRAY(E2)``) reads the spilled
  range.

Standard formulas go through the formula engine (:mod:`xlfuncs.headless.engine`); their array
results, where Excel 365 would spill them too, are reduced to their top-left value here.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
import re
import tempfile
from collections import ChainMap
from itertools import compress, repeat
from operator import add, is_, itemgetter, not_
from dataclasses import dataclass, field
from pathlib import Path

from .engine import _OURS_RE, ExcelError, FormulaError, calls_ours, compile_formula, top_level_call

__all__ = ["RecalcError", "Workbook", "recalc", "RecalcReport"]

_REF_RE = re.compile(
    r"^(?:(?P<sheet>'(?:[^']|'')+'|[^!]+)!)?"
    r"(?:(?P<c1>[A-Z]{1,3})?(?P<r1>\d+)?(?::(?P<c2>[A-Z]{1,3})?(?P<r2>\d+)?)?)(?P<spill>#)?$"
)


class RecalcError(Exception):
    """Bad input for a recalculation: one line, naming the cell where it applies."""


class _Deferred(Exception):
    """A spill looked at only to know its extent needs a formula still being computed."""


def _col_index(letters: str) -> int:
    n = 0
    for ch in letters:
        n = n * 26 + (ord(ch) - 64)
    return n


def _col_letters(n: int) -> str:
    out = ""
    while n:
        n, rem = divmod(n - 1, 26)
        out = chr(65 + rem) + out
    return out


_LETTERS: dict = {}


def cell_name(row: int, col: int) -> str:
    letters = _LETTERS.get(col)
    if letters is None:
        letters = _LETTERS[col] = _col_letters(col)
    return f"{letters}{row}"


def _cell_names(rows, cols) -> list:
    """cell_name of each (row, column) pair, with maps rather than a call per cell."""
    letters = {c: _LETTERS.get(c) or _col_letters(c) for c in set(cols)}
    return list(map(add, map(letters.__getitem__, cols), map(str, rows)))


def _parse_cell(ref: str):
    m = re.fullmatch(r"\$?([A-Z]{1,3})\$?(\d+)", ref.upper())
    return int(m.group(2)), _col_index(m.group(1))


def _parse_range(ref: str):
    a, _, b = ref.partition(":")
    r1, c1 = _parse_cell(a)
    r2, c2 = _parse_cell(b) if b else (r1, c1)
    return min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)


@dataclass
class RecalcReport:
    error_cells: list = field(default_factory=list)  # (address, shown value)
    formulas: int = 0
    spills: int = 0
    # numbers lying below a range that a formula of ours reads: data left out of a fit
    unread: list = field(default_factory=list)  # one sentence each
    # results a cell cannot hold as they are (too long, control characters), stored cut or cleaned
    altered: list = field(default_factory=list)  # (address, what was done)
    # the workbook's own data check (the templates' name data_check) where it reads WARNING
    warnings: list = field(default_factory=list)  # (address, its text)


class Workbook:
    """The cells of a workbook, evaluated on demand."""

    def __init__(self, path, dynamic_hint=(), fast: bool = True, book=None):
        """``book``: the workbook ``path`` holds, already loaded by openpyxl and perhaps edited
        in memory since (a refresh's new rows), read instead of loading ``path`` again; the
        cells are then read from it, and ``path`` serves for what openpyxl does not keep (the
        spill marking, the application that saved it)."""
        from .xlsxpost import check_package, dynamic_anchors

        self.path = Path(path)
        try:  # refused from the zip directory, before openpyxl unpacks a package too large for memory
            check_package(self.path)
        except ValueError as exc:
            raise RecalcError(str(exc)) from None
        self._book = book
        data = None
        if fast and book is None and not os.environ.get("VOLCAST_OPENPYXL_READ"):
            from .fastread import NotPlain, read_cells

            try:  # the cells read straight from the package's XML; openpyxl where that reader declines
                data = read_cells(self.path)
            except (NotPlain, ValueError, KeyError, IndexError, UnicodeDecodeError, OSError):
                data = None
        self.fast_read = data is not None
        if data is None:
            book = self.book
            titles = [ws.title for ws in book.worksheets]
            names = _defined_names(book)
            sheets = {ws.title: (ws.max_row, ws.max_column, _openpyxl_cells(ws)) for ws in book.worksheets}
            self.marked = None
        else:
            titles, names = data["titles"], data["names"]
            sheets = {t: (mr, mc, _fast_cells(cells, arrays)) for t, (cells, arrays, mr, mc, _) in data["sheets"].items()}
            self.marked = {t: set(v[4]) for t, v in data["sheets"].items()}
        self.sheets = {t.upper(): t for t in titles}
        # spills stored by Excel 365 (or by us); a caller that re-saved the file through openpyxl,
        # which drops the cell metadata, passes the anchors it read before
        dynamic = dynamic_anchors(self.path) | set(dynamic_hint)
        self.names = names
        # LibreOffice and openpyxl drop the dynamic-array marking and keep each spill as a plain
        # array formula over its last size.  In a file saved by LibreOffice, or in a workbook of
        # our templates (built for Excel 365 spills), an unmarked array formula whose top-level
        # call is ours is read as the spill it was, so its size follows the data again.  Elsewhere
        # an unmarked array formula is a legacy array over a fixed range.
        unmarked = not dynamic and ((None, "FIT") in self.names or _saved_by_calc(self.path))
        self.inputs: dict = {}  # (sheet, row, col) -> constant value
        self.formulas: dict = {}  # (sheet, row, col) -> formula text
        self.arrays: dict = {}  # anchor -> (r1, c1, r2, c2) of a legacy array formula
        self.array_cells: set = set()  # cells read with an array formula
        self.max_row: dict = {}
        self.max_col: dict = {}
        residue = []
        inputs, formulas = self.inputs, self.formulas
        for t, (max_row, max_col, cells) in sheets.items():
            self.max_row[t] = max_row
            self.max_col[t] = max_col
            if type(cells) is dict:  # the fast reader's cells, none an array formula: (row, col) -> value
                for (row, column), v in cells.items():
                    if type(v) is float:
                        inputs[(t, row, column)] = v
                    elif isinstance(v, str) and v.startswith("=") and len(v) > 1:
                        formulas[(t, row, column)] = v
                    else:
                        inputs[(t, row, column)] = _constant(v)
                continue
            for row, column, v, array_ref in cells:
                key = (t, row, column)
                if array_ref is not None:
                    self.array_cells.add(key)
                    self.formulas[key] = v if v.startswith("=") else "=" + v
                    if (t, cell_name(row, column)) in dynamic or (unmarked and top_level_call(self.formulas[key])):
                        residue.append((t, _parse_range(array_ref), key))
                    else:
                        self.arrays[key] = _parse_range(array_ref)
                elif type(v) is float:
                    self.inputs[key] = v
                elif isinstance(v, str) and v.startswith("=") and len(v) > 1:
                    self.formulas[key] = v
                else:
                    self.inputs[key] = _constant(v)
        # the values a stored spill left in its range are results, not inputs: recomputed here
        for t, (r1, c1, r2, c2), anchor in residue:
            for r in range(r1, r2 + 1):
                for c in range(c1, c2 + 1):
                    if (t, r, c) != anchor:
                        self.inputs.pop((t, r, c), None)
        self.values: dict = {}
        self.spills: dict = {}  # anchor -> (r1, c1, r2, c2)
        self.owner: dict = {}  # spilled cell -> anchor
        self._stack: set = set()
        self._templates: dict = {}
        self._anchors = _spilling_calls(self.formulas, self.arrays)
        self.report = RecalcReport(formulas=len(self.formulas))
        self._reader = None  # the formula of ours whose arguments are being read
        self._names_open: list = []  # the names being resolved, outermost first
        self._settled: set = set()  # sheets whose spills are all computed
        self._settling = 0  # depth of spill settling in progress
        self._open_reads: dict = {}  # anchor -> empty cells read while it was being computed
        self._reported: set = set()  # addresses already in report.error_cells
        self.reads: list = []  # (formula key, sheet, r1, c1, r2, c2) read by formulas of ours
        self._column_rest: set = set()  # cells of a NumPy column left to the engine (blanks, texts, errors)
        self._source = self.inputs  # what the batches read: the constants (and computed values once settled)
        self._batch_parsed: dict = {}  # formula key -> (template, tokens) of the element-wise batch, or None

    @property
    def book(self):
        """The workbook loaded by openpyxl, on first use (writing through openpyxl, the estimate
        history); the recalculation itself reads the cells read at construction."""
        if self._book is None:
            import openpyxl

            try:
                self._book = openpyxl.load_workbook(self.path, data_only=False)
            except Exception as exc:  # noqa: BLE001 - any unreadable file is one line of bad input
                raise RecalcError(f"{self.path.name} is not a readable .xlsx workbook ({type(exc).__name__}: {exc})") from None
        return self._book

    # ------------------------------------------------------------------ evaluation
    def evaluate_all(self):
        self._batch_elementwise()
        values = self.values
        if (self._anchors or self.arrays) and len(self.formulas) - len(values) >= 16:
            # the spills and array formulas first, then one more batch: the columns that read
            # their results (=IF(ISNUMBER(B2),B2*SQRT(12),"") beside a spilled series) are
            # evaluated as columns too, not cell by cell (every spill's extent is known by then)
            for key in sorted(k for k in (*self._anchors, *self.arrays) if k not in values):
                self.value(key)
            self._batch_elementwise(settled=True)
        # in the order of (sheet, row, column), those the batches left (value() of a computed cell
        # returns at once, so skipping them here changes nothing)
        for key in sorted([k for k in self.formulas if k not in values]):
            self.value(key)
        return self

    def value(self, key):
        if key in self.values:
            return self.values[key]
        if key in self.formulas:
            return self._evaluate(key)
        if key in self.inputs:
            return self.inputs[key]
        self._settle_spills(key[0], key[1:])
        anchor = self.owner.get(key)
        if anchor is not None:
            return self.values.get(key)
        # an empty cell read while a spill of its sheet is being computed: if that spill turns
        # out to cover it, the spill depends on itself (a circular reference, as Excel says)
        for a in self._stack:
            if a in self._anchors and a[0] == key[0] and a[1] <= key[1] and a[2] <= key[2]:
                self._open_reads.setdefault(a, []).append(key)
        return None

    def _settle_spills(self, sheet, cell=None):
        """Evaluate the spilling formulas of a sheet that could fill ``cell`` (those above and to
        the left of it; all of them without ``cell``), so that an empty cell knows if a spill
        fills it.

        An anchor may be evaluated by the recursion of an earlier one: each is checked again
        before it is evaluated, so none is evaluated twice (which would block its own spill).
        An anchor that turns out to need a formula still being computed is left for later
        (``_Deferred``): it cannot be part of what that formula reads."""
        if sheet in self._settled:
            return
        todo = sorted(k for k in self._anchors if k[0] == sheet and k not in self.values and k not in self._stack
                      and (cell is None or (k[1] <= cell[0] and k[2] <= cell[1])))
        for a in todo:
            if a in self.values or a in self._stack:
                continue
            self._settling += 1
            try:
                self._evaluate(a)
            except _Deferred:
                pass
            finally:
                self._settling -= 1
        if not any(k[0] == sheet and k not in self.values for k in self._anchors):
            self._settled.add(sheet)

    def _evaluate(self, key):
        sheet, row, col = key
        where = f"{sheet}!{cell_name(row, col)}"
        if key in self._stack:
            if self._settling:
                raise _Deferred(key)
            self.values[key] = ExcelError("#VALUE!")
            self._error(where, "circular reference")
            return self.values[key]
        self._stack.add(key)
        try:
            text = self.formulas[key]
            direct = self._direct_call(sheet, text) if key in self._anchors or key in self.arrays else None
            if direct is not None:
                result = self._call_direct(key, text, where, *direct)
            else:
                try:
                    compiled, names = self._compiled_for(key, text)
                except FormulaError as exc:
                    raise RecalcError(f"{where}: {exc}") from None
                self._text = text
                outer, self._reader = self._reader, (key if calls_ours(text) else None)
                try:
                    args = [self._read(sheet, name, where) for name in names]
                finally:
                    self._reader = outer
                result = compiled(*args)
        finally:
            self._stack.discard(key)
        if key in self.arrays:
            self._fill_array(key, result)
        elif key in self._anchors:
            self._spill(key, result)
        else:
            self.values[key] = _shown(_top_left(result))
        return self.values[key]

    def _direct_call(self, sheet, text: str):
        """(function name, arguments) of a formula that is one call of ours whose arguments are
        all references, defined names, string literals, TRUE/FALSE or unsigned numbers, such as
        =VOLFIT(Data!C3:C2502, "GARCH(1,1)", "t"); None for any other formula (the engine's).

        Each argument is ("ref", engine name) or ("value", value): the values the engine would
        pass (a whole number as an int, a decimal as a float, as its parser gives them)."""
        if os.environ.get("VOLCAST_ENGINE_CALLS"):
            return None
        name = top_level_call(text)
        if name is None:
            return None
        m = _OURS_RE.match(text)
        if m is None:
            return None
        body = text[m.end():].rstrip()
        if not body.endswith(")"):
            return None
        body = body[:-1]
        masked = _STRING_RE.sub(lambda s: "_" * len(s.group(0)), body)
        if "(" in masked or ")" in masked or "{" in masked:
            return None
        args, start = [], 0
        for i, ch in enumerate(masked + ","):
            if ch != ",":
                continue
            piece = body[start:i].strip()
            start = i + 1
            if not piece:
                return None  # a missing argument: the engine's rules
            if piece.startswith('"'):
                if not _STRING_RE.fullmatch(piece):
                    return None
                args.append(("value", piece[1:-1].replace('""', '"')))
            elif piece.upper() in ("TRUE", "FALSE"):
                args.append(("value", piece.upper() == "TRUE"))
            elif _INT_RE.fullmatch(piece):
                args.append(("value", int(piece)))
            elif _DECIMAL_RE.fullmatch(piece):
                args.append(("value", float(piece)))
            elif _REF_ARG_RE.fullmatch(piece):
                args.append(("ref", _engine_name(piece)))
            elif _NAME_ARG_RE.fullmatch(piece) and self._name_target(sheet, piece) is not None:
                args.append(("ref", piece.upper()))
            else:
                return None
        return name, args

    def _call_direct(self, key, text, where, name, args):
        """A call of ours evaluated as the engine evaluates it, without the engine: each
        reference read (once, in the engine's order: sorted by name), passed as rows of plain values
        (a single cell as [[v]], an error as its literal), the result read back as the engine's."""
        from .. import sheet as functions
        from .engine import _as_array, _scalar_cell, from_engine

        sheet = key[0]
        self._text = text
        outer, self._reader = self._reader, key
        try:
            read = {}
            for v in sorted({v for kind, v in args if kind == "ref"}):  # in the engine's order of its inputs
                read[v] = self._read(sheet, v, where)
        finally:
            self._reader = outer
        values = []
        for kind, v in args:
            if kind == "value":
                values.append(v)
                continue
            got = read[v]
            rows = got if isinstance(got, list) else [[got]]
            if {type(c) for row in rows for c in row} <= _PLAIN:
                values.append([list(row) for row in rows] if isinstance(got, list) and values and any(
                    x is got for x in values) else rows)
            else:
                values.append([[c if type(c) in _PLAIN else _scalar_cell(c) for c in row] for row in rows])
        try:
            return from_engine(_as_array(getattr(functions, name)(*values)))
        except Exception:  # noqa: BLE001 - as the engine: a failure is #VALUE!
            return ExcelError("#VALUE!")

    def _read(self, sheet, name: str, where: str):
        target_name = self._name_target(sheet, name)
        if target_name is not None:
            return self._read_name(sheet, name, target_name, where)
        m = _REF_RE.match(name.replace("$", ""))
        if not m:
            raise RecalcError(f"{where}: reference {name} is not understood")
        target = sheet
        if m.group("sheet"):
            s = m.group("sheet")
            if s.startswith("'"):
                s = s[1:-1].replace("''", "'")
            title = self.sheets.get(s.upper())
            if title is None:
                m2 = re.search(re.escape(s) + r"'?!", getattr(self, "_text", ""), re.IGNORECASE)
                s = m2.group(0).rstrip("!").strip("'") if m2 else s
                raise RecalcError(f"{where}: the formula refers to a sheet named {s} that the workbook does not have")
            target = title
        c1, r1, c2, r2 = m.group("c1"), m.group("r1"), m.group("c2"), m.group("r2")
        if m.group("spill"):
            anchor = (target, int(r1), _col_index(c1))
            self.value(anchor)
            if anchor in self.spills:
                return self._block(target, *self.spills[anchor])
            if anchor in self.arrays:
                return self._block(target, *self.arrays[anchor])
            if anchor not in self.formulas:
                return ExcelError("#REF!")
            return self.values.get(anchor)
        # whole columns and whole rows stop at the sheet's used area
        top = int(r1) if r1 else 1
        left = _col_index(c1) if c1 else 1
        if c2 is None and r2 is None:
            if c1 and r1:
                return self.value((target, top, left))
            raise RecalcError(f"{where}: reference {name} is not understood")
        bottom = int(r2) if r2 else max(self.max_row[target], self._spill_extent(target)[0])
        right = _col_index(c2) if c2 else max(self.max_col[target], self._spill_extent(target)[1])
        return self._block(target, top, left, bottom, right)

    def _name_target(self, sheet, name: str):
        """The text a defined name stands for (sheet scope first), or None if ``name`` is no name."""
        if not self.names:
            return None
        bare = name.replace("$", "")
        scope, _, nm = bare.rpartition("!")
        key = nm.upper()
        if scope:
            title = self.sheets.get(scope.strip("'").replace("''", "'").upper())
            return self.names.get((title, key))
        return self.names.get((sheet, key), self.names.get((None, key)))

    def _read_name(self, sheet, name, text, where):
        """The value of a defined name: the range it refers to, or its formula evaluated."""
        ref = text.strip()
        if ref.startswith("="):
            ref = ref[1:].strip()
        if "#REF!" in ref.upper() or not ref:
            raise RecalcError(f"{where}: the name {name} refers to {text}, a reference that no longer exists; "
                              "define the name again (Formulas > Name Manager)")
        if len(self._names_open) > 20:  # a chain of names that never reaches a reference
            raise RecalcError(f"{where}: the name {name} refers to itself, through a chain of names ({text})")
        self._names_open.append(name.upper())
        try:
            if _REF_RE.match(ref.replace("$", "")) and "!" in ref and not any(ch in ref for ch in "(,&+*/^<>= "):
                return self._read(sheet, ref, where)
            try:
                compiled = compile_formula("=" + ref)
            except FormulaError as exc:
                raise RecalcError(f"{where}: the name {name} refers to {text}, which cannot be evaluated here ({exc})") from None
            return compiled(*[self._read(sheet, n, where) for n in compiled.inputs])
        finally:
            self._names_open.pop()

    def _spill_extent(self, sheet):
        self._settle_spills(sheet)
        rows = [ext[2] for a, ext in self.spills.items() if a[0] == sheet]
        cols = [ext[3] for a, ext in self.spills.items() if a[0] == sheet]
        return max(rows, default=0), max(cols, default=0)

    def _block(self, sheet, r1, c1, r2, c2):
        if self._reader is not None and (r2 > r1 or c2 > c1):
            self.reads.append((self._reader, sheet, r1, c1, r2, c2))
        # self.value of each cell, with the common cases (a value computed, a constant) inline
        values, inputs, formulas, value = self.values, self.inputs, self.formulas, self.value
        if c1 == c2:  # one column (the common case): the values computed and the constants read at once
            keys = list(zip(repeat(sheet), range(r1, r2 + 1), repeat(c1)))
            # a cell is a formula or a constant, never both: a value computed, else a constant, else
            # (a formula not computed yet, an empty cell) value() of the cell
            column = list(map(values.get, keys, map(inputs.get, keys, repeat(_MISSING))))
            missing = list(map(is_, column, repeat(_MISSING)))
            if any(missing):
                for i in compress(range(len(keys)), missing):
                    column[i] = value(keys[i])
            return list(map(list, zip(column)))
        out = []
        for r in range(r1, r2 + 1):  # row by row, as Excel reads a range
            row = []
            for c in range(c1, c2 + 1):
                k = (sheet, r, c)
                v = values.get(k, _MISSING)
                if v is _MISSING:
                    v = value(k) if k in formulas else inputs.get(k, _MISSING)
                    if v is _MISSING:
                        v = value(k)
                row.append(v)
            out.append(row)
        return out

    def _batch_elementwise(self, min_size: int = 16, vector: bool = True, settled: bool = False):
        """Evaluate a column of same-shape element-wise formulas over constants in one call.

        =LN(A3/A2)*100 down 5,000 rows is one engine call on two columns rather than 5,000 calls.
        Only formulas made of element-wise functions and operators, reading single cells that
        hold constants, are batched; everything else is evaluated cell by cell.  With
        ``settled`` (every spill and array formula evaluated), a cell whose value is already
        computed counts as a constant too, and an empty cell is empty whatever its sheet.
        """
        from .engine import function_names

        # settled: the values computed so far (a live view: a column batched here may be read by the next)
        self._source = ChainMap(self.values, self.inputs) if settled else self.inputs
        if vector:
            self._batch_vector(min_size)
        spilling = {a[0] for a in self._anchors} | {a[0] for a in self.arrays}
        groups: dict = {}
        parsed = self._batch_parsed  # each formula's (template, tokens), or None, read once for both passes
        for key, text in self.formulas.items():
            if key in self.arrays or key in self._anchors or key in self.values:
                continue
            hit = parsed.get(key, _MISSING)
            if hit is _MISSING:
                hit = None
                if function_names(text) <= _ELEMENTWISE | _LOGICAL:
                    tokens = _ref_tokens(text)
                    if tokens and not any(":" in t or t.endswith("#") for _, _, t in tokens):
                        hit = (_template(text, tokens, key[1], key[2]), tokens)
                parsed[key] = hit
            if hit is not None:
                groups.setdefault(hit[0], []).append((key, text, hit[1]))
        rest = self._column_rest
        for members in groups.values():
            # a group this small is batched only as what the NumPy columns left of a larger one
            if len(members) < min_size and not all(m[0] in rest for m in members):
                continue
            key0, text0, tokens0 = members[0]
            if function_names(text0) & _LOGICAL:
                # OR/AND reduce a whole array: batched only as element-wise arithmetic, which reads
                # the same references in the same order (one rewrite serves the group's shape)
                text0 = elementwise_logic(text0)
                if text0 is None:
                    continue
            try:
                compiled = compile_formula(text0)
            except FormulaError:
                continue
            # a reference may appear more than once (=IF(B5="","",LN(B5/B4))): one input each
            first = list(dict.fromkeys(_engine_name(t) for _, _, t in tokens0))
            if sorted(first) != sorted(compiled.inputs):
                continue
            order = [first.index(n) for n in compiled.inputs]
            columns = [[] for _ in order]
            ok = True
            for key, _, tokens in members:
                sheet = key[0]
                unique = list(dict.fromkeys(t for _, _, t in tokens))
                if len(unique) != len(first):
                    ok = False
                    break
                for slot, idx in enumerate(order):
                    ref = unique[idx]
                    target = sheet
                    if "!" in ref:
                        sname, _, ref = ref.rpartition("!")
                        target = self.sheets.get(sname.strip("'").replace("''", "'").upper())
                        if target is None:
                            ok = False
                            break
                    cell = (target, *_parse_cell(ref.replace("$", "")))
                    # only constants: a formula (unless computed), or an empty cell that a spill
                    # may fill (unless the spills are settled), is evaluated cell by cell
                    if cell in self.formulas and cell not in self.values or (
                            not settled and cell not in self.inputs and target in spilling):
                        ok = False
                        break
                    columns[slot].append([self._source.get(cell)])
                if not ok:
                    break
            if not ok:
                continue
            result = compiled(*columns)
            if len(members) == 1 and type(result) in _SHARED:  # a column of one row gives its value
                result = [[result]]
            if not (isinstance(result, list) and len(result) == len(members)):
                continue
            for (key, _, _), row in zip(members, result):
                self.values[key] = _shown(_cell_value(row[0]))

    def _batch_vector(self, min_size: int = 16):
        """Columns of one formula shape over floats, evaluated as NumPy arrays (``columns.py``).

        Cells are grouped by their text with the digits masked (no parsing per cell); one member
        is parsed, and each member's references are read from its own digit runs.  Rows that read
        anything but a number constant (a blank, a text, a formula, a cell a spill may fill; a
        whole number where the formula may show it as it is, ``ColumnShape.raw``), and rows whose
        evaluation meets an error, are left to the engine's batch (which takes them whatever
        their number) and to the cell by cell evaluation.  The formula engine is not loaded for
        the columns this route answers whole; with ``VOLCAST_CHECK_COLUMNS=1`` three rows of each
        column are evaluated by the engine too and must agree in type and value, or the column
        is left whole (``tests/test_columns.py`` compares the two routes cell by cell).
        """
        from .columns import ColumnShape, Unsupported, digit_runs, shape_groups

        import numpy as np

        spread = self._anchors | set(self.arrays)  # cells that are no member of a column

        spilling = {a[0] for a in self._anchors} | {a[0] for a in self.arrays}
        done, formulas = self.values, self.formulas
        todo = [k for k in formulas if k not in done]
        columns: dict = {}  # (sheet, column) -> its cells as arrays (_column_arrays), shared by the groups
        for (sheet, _), parts in shape_groups(todo, [formulas[k] for k in todo]).items():
            if sum(len(members) for _, members in parts) < min_size:
                continue
            parts = [(pattern, members if spread.isdisjoint(members) else [k for k in members if k not in spread])
                     for pattern, members in parts]
            keys = [k for _, members in parts for k in members]
            if len(keys) < min_size:
                continue
            text0 = formulas[keys[0]]
            try:
                shape = ColumnShape(text0)
            except (Unsupported, RecursionError):
                continue
            if not shape.refs:
                continue
            targets = []
            for ref_sheet, col, _ in shape.refs:
                title = sheet if ref_sheet is None else self.sheets.get(ref_sheet.upper())
                if title is None:
                    break
                targets.append((title, col))
            else:
                # the members share their text but for the digit runs (shape_key), so they hold as
                # many runs each: read one digit pattern at a time, one row of runs per member
                runs = [digit_runs([formulas[k] for k in members], pattern, shape.n_runs)
                        for pattern, members in parts if members]
                if any(r is None for r in runs):
                    continue
                runs = np.concatenate(runs)
                if shape.fixed and not (runs[:, shape.fixed] == runs[0, shape.fixed]).all():
                    continue
                self._vector_group(keys, shape, targets, runs, spilling, columns)

    def _column_arrays(self, title, col, cache):
        """(values, floats, numbers) of column ``col`` of sheet ``title``, rows 0 to its last
        (row 0 an empty cell), as _vector_group reads a reference's cells: the cells' floats (a
        whole number as its float, anything else 1.0), which cells hold a float, which a float or
        a whole number within the doubles' exact range."""
        hit = cache.get((title, col))
        if hit is None:
            got = list(map(self._source.get, [(title, r, col) for r in range(self.max_row.get(title, 0) + 1)]))
            hit = cache[(title, col)] = _typed_column(got)
        return hit

    def _vector_group(self, keys, shape, targets, runs, spilling, cache=None):
        import numpy as np

        from .columns import Unsupported

        inputs = self._source  # constants only (and, once settled, computed values): no formula cell to compute
        cache = {} if cache is None else cache
        n = len(keys)
        ok = np.ones(n, dtype=bool)
        columns, seen = [], {}
        for idx, ((title, col), (_, _, run)) in enumerate(zip(targets, shape.refs)):
            hit = seen.get((title, col, run))  # the same cell read twice (=IF(A3="","",LN(A3/A2)))
            if hit is None:
                rows = runs[:, run]
                last = self.max_row.get(title, 0)
                if last <= 4 * n + 1024:  # the whole column read once (shared by the references to it)
                    values, floats, numbers = self._column_arrays(title, col, cache)
                    at = np.where((rows >= 1) & (rows <= last), rows, 0)  # row 0: an empty cell
                    hit = values[at], floats[at], numbers[at]
                else:  # a few rows of a long column: those rows only
                    hit = _typed_column(list(map(inputs.get, [(title, r, col) for r in rows.tolist()])))
                seen[(title, col, run)] = hit
            values, floats, numbers = hit
            ok &= floats if idx in shape.raw else numbers
            columns.append(values)
        # rows reading a blank, a text...: computed once for each distinct reading (not left to
        # the engine's batch)
        shared = [] if ok.all() else self._same_readings(keys, shape, targets, runs, np.flatnonzero(~ok).tolist(),
                                                         spilling)
        if ok.sum() < 1:
            return
        try:
            out, bad = shape.evaluate(columns)
        except (Unsupported, RecursionError, ValueError, TypeError):
            return
        ok &= ~np.asarray(bad)
        rows = np.flatnonzero(ok)
        if not len(rows):
            return
        if os.environ.get("VOLCAST_CHECK_COLUMNS"):
            # three rows through the engine too, which must agree in type and value, or the column
            # is left whole: a check of this route against the engine while developing it (the
            # tests compare the two cell by cell); off by default, as it loads the engine
            if not self._engine_agrees(keys, out, rows):
                return
        values = self.values
        if len(rows) == n and not any(v != v for v in out):  # every row, no NaN for _cell_value to turn
            values.update(zip(keys, out))
        else:
            for i in rows.tolist():
                values[keys[i]] = _cell_value(out[i])
        if len(rows) < n:
            done = set(shared)
            self._column_rest.update(keys[i] for i in np.flatnonzero(~ok).tolist() if i not in done)

    def _same_readings(self, keys, shape, targets, runs, left, spilling) -> list:
        """The rows ``left`` of a column (indices into ``keys``) that read the same values as
        another of them, each distinct reading evaluated once by the general route and its value
        given to every row that reads it; returns the indices so computed.

        A column shape is a function of the values its references read and of nothing else (only
        references, literals, operators and element-wise functions: :class:`columns.ColumnShape`),
        so rows reading equal values (of equal types: 1 and 1.0 and TRUE apart) have equal
        results.  This serves the rows a template holds beyond the data, which read blanks or
        the texts "" of the rows above: thousands of cells, one engine call.  A row reading a
        formula not yet computed, or an empty cell a spill may still fill, is left as it is."""
        settled = self._source is not self.inputs
        source, formulas = self._source, self.formulas
        groups: dict = {}
        refs = [(title, col, run) for (title, col), (_, _, run) in zip(targets, shape.refs)]
        for i in left:
            reading = []
            for title, col, run in refs:
                cell = (title, int(runs[i, run]), col)
                v = source.get(cell, _MISSING)
                if v is _MISSING:
                    if cell in formulas or (not settled and title in spilling):
                        break
                    v = None
                reading.append((type(v), v))
            else:
                groups.setdefault(tuple(reading), []).append(i)
        done = []
        for rows in groups.values():
            if len(rows) < 2:
                continue
            try:
                value = self.value(keys[rows[0]])
            except RecalcError:
                continue  # the cell by cell route says why, in its turn
            if type(value) not in _SHARED:
                continue
            values = self.values
            for i in rows[1:]:
                values[keys[i]] = value
            done.extend(rows)
        return done

    def _engine_agrees(self, keys, out, rows) -> bool:
        try:
            compiled = compile_formula(self.formulas[keys[0]])
        except FormulaError:
            return False
        first = list(dict.fromkeys(_engine_name(t) for _, _, t in _ref_tokens(self.formulas[keys[0]])))
        if sorted(first) != sorted(compiled.inputs):
            return False
        order = [first.index(name) for name in compiled.inputs]
        for i in {int(rows[0]), int(rows[len(rows) // 2]), int(rows[-1])}:
            key = keys[i]
            mine = list(dict.fromkeys(t for _, _, t in _ref_tokens(self.formulas[key])))
            if len(mine) != len(first):
                return False
            try:
                args = [self._read(key[0], mine[j], key[0]) for j in order]
            except RecalcError:
                return False
            mine = _cell_value(out[i])
            theirs = _cell_value(_top_left(compiled(*args)))
            if type(mine) is not type(theirs) or mine != theirs:
                return False
        return True

    def _compiled_for(self, key, text):
        """Compile once per formula *shape*: a column of =LN(B3/B2)*100, =LN(B4/B3)*100, ...
        shares one compiled formula, each cell reading its own references."""
        _, row, col = key
        tokens = _ref_tokens(text)
        template = _template(text, tokens, row, col)
        hit = self._templates.get(template)
        if hit is not None:
            compiled, first_names = hit
            mine = [_engine_name(t) for _, _, t in tokens]
            mapping = {}
            for a, b in zip(first_names, mine):
                if mapping.setdefault(a, b) != b:
                    break
            else:
                if all(n in mapping for n in compiled.inputs):
                    return compiled, [mapping[n] for n in compiled.inputs]
        compiled = compile_formula(text)
        self._templates[template] = (compiled, [_engine_name(t) for _, _, t in tokens])
        return compiled, list(compiled.inputs)

    # ------------------------------------------------------------------ arrays
    def _fill_array(self, key, result):
        sheet, _, _ = key
        r1, c1, r2, c2 = self.arrays[key]
        rows = result if isinstance(result, list) else [[result]]
        single = not isinstance(result, list) or (len(rows) == 1 and len(rows[0]) == 1)
        for r in range(r1, r2 + 1):
            for c in range(c1, c2 + 1):
                i, j = r - r1, c - c1
                if single:
                    v = rows[0][0]  # Excel repeats a single value over the array range
                elif i < len(rows) and j < len(rows[i]):
                    v = rows[i][j]
                else:
                    v = ExcelError("#N/A")
                self.values[(sheet, r, c)] = _cell_value(v)
                if (sheet, r, c) != key:
                    self.owner[(sheet, r, c)] = key

    def _spill(self, key, result):
        sheet, row, col = key
        rows = result if isinstance(result, list) else [[result]]
        height = len(rows)
        width = max((len(r) for r in rows), default=1)
        r2, c2 = row + height - 1, col + width - 1
        if height == 1 and width == 1:
            self.values[key] = _cell_value(rows[0][0])
            return
        circular = [c for c in self._open_reads.pop(key, []) if row <= c[1] <= r2 and col <= c[2] <= c2]
        if circular:
            self.values[key] = ExcelError("#VALUE!")
            self._error(f"{sheet}!{cell_name(row, col)}",
                        f"circular reference: its spill would cover {cell_name(*circular[0][1:])}, which its own "
                        "inputs read")
            return
        blocked = [
            cell_name(r, c) for r in range(row, r2 + 1) for c in range(col, c2 + 1)
            if (r, c) != (row, col)
            and ((sheet, r, c) in self.inputs or (sheet, r, c) in self.formulas or (sheet, r, c) in self.owner)
        ]
        if blocked:
            self.values[key] = ExcelError("#SPILL!")
            self._error(f"{sheet}!{cell_name(row, col)}", f"#SPILL! (blocked by {blocked[0]})")
            return
        self.spills[key] = (row, col, r2, c2)
        self.report.spills += 1
        for i in range(height):
            for j in range(width):
                v = rows[i][j] if j < len(rows[i]) else None
                self.values[(sheet, row + i, col + j)] = _cell_value(v)
                if (i, j) != (0, 0):
                    self.owner[(sheet, row + i, col + j)] = key

    # ------------------------------------------------------------------ report
    def check_unread(self):
        """Numbers below a column range that a formula of ours reads: data the range leaves out.

        For each such range, the column itself and the columns its own formulas read (a return
        column computed from a level column) are looked at below its last row.  Each finding is
        one sentence in ``report.unread``.
        """
        seen = set()
        for key, sheet, r1, c1, r2, c2 in self.reads:
            if c1 != c2 or (sheet, r1, c1, r2) in seen:
                continue
            seen.add((sheet, r1, c1, r2))
            columns = {c1}
            for r in range(r2, r1 - 1, -1):  # the last formula inside the range says what it reads
                text = self.formulas.get((sheet, r, c1))
                if text is not None:
                    for _, _, token in _ref_tokens(text):
                        if "!" not in token:
                            for part in token.rstrip("#").split(":"):
                                columns.add(_parse_cell(part.replace("$", ""))[1])
                    break
            bottom = self.max_row.get(sheet, 0)
            for col in sorted(columns):
                rows = [r for r in range(r2 + 1, bottom + 1) if _is_number(self.value((sheet, r, col)))]
                if rows:
                    self.report.unread.append(
                        f"{key[0]}!{cell_name(key[1], key[2])} reads {sheet}!{cell_name(r1, c1)}:{cell_name(r2, c1)}, "
                        f"but {len(rows)} number(s) lie below it in {sheet}!{cell_name(rows[0], col)}:"
                        f"{cell_name(rows[-1], col)}; they are left out: extend the range (and its formulas) to row {rows[-1]}")
                    break
        return self.report.unread

    def _error(self, where: str, shown: str):
        if where not in self._reported:
            self._reported.add(where)
            self.report.error_cells.append((where, shown))

    def data_checks(self) -> list:
        """[(address, text)] of the cell the workbook-scope name ``data_check`` (the templates'
        visible data check) points at, where it reads WARNING; [] without such a name."""
        text = self.names.get((None, "DATA_CHECK")) if self.names else None
        m = _ONE_CELL_NAME_RE.fullmatch(text.strip().lstrip("=")) if isinstance(text, str) else None
        title = self.sheets.get((m.group(1) or m.group(2)).replace("''", "'").upper()) if m else None
        if title is None:
            return []
        key = (title, int(m.group(4)), _col_index(m.group(3)))
        v = self.value(key)
        if isinstance(v, str) and v.strip().upper().startswith("WARNING"):
            return [(f"{title}!{cell_name(key[1], key[2])}", v.strip())]
        return []

    def collect_errors(self):
        """Every cell that shows an error, once each (linear in the cells computed)."""
        items = list(self.values.items())
        numbers = frozenset((float, int, bool, type(None)))
        # only the cells that may show an error are looked at one by one: those holding neither a
        # number, a truth value nor nothing (their types found in one pass)
        for key, v in compress(items, map(not_, map(numbers.__contains__, map(type, self.values.values())))):
            shown = None
            if isinstance(v, ExcelError):
                shown = v.code
            elif isinstance(v, str) and v.startswith("ERROR:"):
                shown = v
            if shown:
                self._error(f"{key[0]}!{cell_name(key[1], key[2])}", shown)
        return self.report


# a defined name that is one cell: 'Sheet name'!$B$3 or Sheet!B3
_ONE_CELL_NAME_RE = re.compile(r"(?:'((?:[^']|'')+)'|([^!'=]+))!\$?([A-Za-z]{1,3})\$?(\d+)")

# the arguments a call of ours is evaluated with directly (Workbook._direct_call): a cell or
# range reference (a sheet before it, a spill after it), a defined name, whole and decimal numbers
_REF_ARG_RE = re.compile(r"(?:(?:'(?:[^']|'')+'|[A-Za-z0-9_.]+)!)?\$?[A-Za-z]{1,3}\$?\d+(?::\$?[A-Za-z]{1,3}\$?\d+)?#?")
_NAME_ARG_RE = re.compile(r"[A-Za-z_\\][A-Za-z0-9_.]*")
_INT_RE = re.compile(r"\d+")
_DECIMAL_RE = re.compile(r"\d+\.\d+")

_MISSING = object()
_EXACT = 2**53  # whole numbers below this in size are exactly doubles


def _typed_column(got):
    """(values, floats, numbers) of cell values ``got`` as the NumPy columns read them: a float as
    it is; a whole number within the doubles' exact range as its float (it counts as a number
    where a formula only computes with it, ColumnShape.raw); anything else (a blank, a text, a
    bool, an error, a formula) as 1.0, left to the engine's rules."""
    import numpy as np

    n = len(got)
    types = list(map(type, got))
    if set(types) == {float}:
        floats = np.ones(n, dtype=bool)
        return np.array(got, dtype=float), floats, floats
    floats = np.fromiter(map(is_, types, repeat(float)), dtype=bool, count=n)
    values = np.ones(n)
    at = np.flatnonzero(floats)
    values[at] = np.array(got, dtype=object)[at].astype(float)  # floats as they are
    whole = np.zeros(n, dtype=bool)
    for i in np.flatnonzero(np.fromiter(map(is_, types, repeat(int)), dtype=bool, count=n)).tolist():
        if -_EXACT < got[i] < _EXACT:
            whole[i] = True
            values[i] = float(got[i])
    return values, floats, floats | whole
_PLAIN = frozenset((float, int, str, bool, type(None)))  # cell values passed to our functions as they are
_SHARED = frozenset((float, int, str, bool, type(None), ExcelError))  # values several cells may hold as one object

_ELEMENTWISE = {"LN", "LOG", "LOG10", "EXP", "SQRT", "ABS", "IF", "IFERROR", "ROUND", "ISNUMBER", "ISBLANK", "SIGN", "POWER"}
_LOGICAL = {"OR", "AND"}
_STRING_RE = re.compile(r'"(?:[^"]|"")*"')
_LOGIC_RE = re.compile(r"(?<![A-Za-z0-9_.!$:])(OR|AND)\s*\(", re.IGNORECASE)


def elementwise_logic(text: str) -> str | None:
    """``text`` with each OR(...) and AND(...) whose arguments are all comparisons written as
    element-wise arithmetic, so that a column of such formulas can be evaluated in one call;
    None if some OR or AND has an argument that is not a comparison (or nests another).

    In Excel, OR and AND reduce every value of their arguments (a range, an array) to one
    TRUE or FALSE, so a batch of cells cannot go through them as they are.  An argument that is
    a comparison (its top level holds =, <>, <, >, <= or >=, which bind last) is one TRUE, FALSE
    or error per cell, never a blank or a text, which OR and AND would skip; on such arguments
    OR(c1, ..., cn) is ((c1)+...+(cn))<>0 and AND(c1, ..., cn) is ((c1)*...*(cn))<>0: TRUE and
    FALSE count as 1 and 0 in arithmetic, and an error in any argument is the result, as in
    OR and AND.  ``tests/test_headless.py`` checks the batch against the engine cell by cell.
    """
    masked = _STRING_RE.sub(lambda m: "_" * len(m.group(0)), text)
    calls = list(_LOGIC_RE.finditer(masked))
    if not calls:
        return text
    pieces, pos = [], 0
    for m in calls:
        if m.start() < pos:  # inside the previous call's arguments: a nested OR/AND
            return None
        depth, args, start, end = 0, [], m.end(), None
        for i in range(m.end(), len(masked)):
            ch = masked[i]
            if ch == "(":
                depth += 1
            elif ch == ")":
                if depth == 0:
                    args.append((start, i))
                    end = i + 1
                    break
                depth -= 1
            elif ch == "," and depth == 0:
                args.append((start, i))
                start = i + 1
        if end is None:
            return None
        for a, b in args:
            if not _is_comparison(masked[a:b]):
                return None
        op = "+" if m.group(1).upper() == "OR" else "*"
        pieces.append(text[pos:m.start()])
        pieces.append("((" + f"){op}(".join(text[a:b].strip() for a, b in args) + ")<>0)")
        pos = end
    pieces.append(text[pos:])
    return "".join(pieces)


def _is_comparison(masked: str) -> bool:
    """Whether an argument (string literals masked) has a comparison operator at its top level."""
    depth = 0
    for ch in masked:
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
        elif depth == 0 and ch in "=<>":
            return True
    return False


_TOKEN_RE = re.compile(
    r"(?<![A-Za-z0-9_.$])((?:'(?:[^']|'')+'|[A-Za-z0-9_.]+)!)?(\$?[A-Za-z]{1,3}\$?\d+(?::\$?[A-Za-z]{1,3}\$?\d+)?)(#?)(?![A-Za-z0-9_(!])"
)


def _ref_tokens(text: str):
    """(start, end, token) of each cell or range reference outside string literals."""
    masked = _STRING_RE.sub(lambda m: " " * len(m.group(0)), text)
    out = []
    for m in _TOKEN_RE.finditer(masked):
        token = m.group(0)
        if masked[: m.start()].rstrip().upper().endswith("ANCHORARRAY(") and not token.endswith("#"):
            token += "#"  # the engine names a spill reference E2#
        out.append((m.start(), m.end(), token))
    return out


def _engine_name(token: str) -> str:
    """A reference token as the engine names its inputs: upper case, no $, E2# for a spill."""
    sheet, _, ref = token.rpartition("!")
    ref = ref.replace("$", "").upper()
    if sheet:
        return f"{sheet.upper()}!{ref}"
    return ref


def _template(text, tokens, row, col) -> str:
    parts, pos = [], 0
    for start, end, token in tokens:
        parts.append(text[pos:start])
        sheet, _, ref = token.rpartition("!")
        sig = []
        for cell in ref.rstrip("#").split(":"):
            m = re.fullmatch(r"(\$?)([A-Za-z]{1,3})(\$?)(\d+)", cell)
            c = _col_index(m.group(2).upper())
            r = int(m.group(4))
            sig.append(f"{'C' + str(c) if m.group(1) else 'c' + str(c - col)}{'R' + str(r) if m.group(3) else 'r' + str(r - row)}")
        parts.append(f"<{sheet.upper()}|{':'.join(sig)}|{'#' if ref.endswith('#') else ''}>")
        pos = end
    parts.append(text[pos:])
    return "".join(parts)


def file_formula(text: str) -> str:
    """A formula as Excel stores it in a file: the spill reference E2# as _xlfn.ANCHORARRAY(E2)."""
    if "#" not in text:
        return text
    masked = _STRING_RE.sub(lambda m: " " * len(m.group(0)), text)
    out, pos = [], 0
    for m in re.finditer(r"((?:'(?:[^']|'')+'!|[A-Za-z0-9_.]+!)?\$?[A-Za-z]{1,3}\$?\d+)#", masked):
        out.append(text[pos:m.start()])
        out.append(f"_xlfn.ANCHORARRAY({text[m.start(1):m.end(1)]})")
        pos = m.end()
    out.append(text[pos:])
    return "".join(out)


def _spilling_calls(formulas: dict, arrays) -> set:
    """The formula cells (not legacy arrays) whose top-level call is ours, which spill.

    ``top_level_call`` looks at letters, parentheses, quotes and spaces, never at a digit, so it
    gives the same answer for a formula and for its digit pattern (its digits written 0,
    ``columns.digit_patterns``): it is asked once per pattern, not once per cell of a column."""
    from .columns import digit_patterns

    keys = [k for k in formulas if k not in arrays]
    answers: dict = {}
    out = set()
    for key, pattern in zip(keys, digit_patterns([formulas[k] for k in keys])):
        hit = answers.get(pattern)
        if hit is None:
            hit = answers[pattern] = bool(top_level_call(pattern))
        if hit:
            out.add(key)
    return out


def _openpyxl_cells(ws):
    """(row, column, value, array ref or None) of each cell openpyxl holds a value for."""
    from openpyxl.worksheet.formula import ArrayFormula

    for row in ws.iter_rows():
        for c in row:
            v = c.value
            if v is None:
                continue
            if isinstance(v, ArrayFormula):
                yield c.row, c.column, v.text, v.ref
            else:
                yield c.row, c.column, v, None


def _fast_cells(cells, arrays):
    """The fast reader's cells in row-major order: as a dict where no array formula is among
    them (read as they are by Workbook), else as (row, column, value, array ref or None)."""
    keys = list(cells)
    if keys != sorted(keys):  # a package not written in row order
        cells = dict(sorted(cells.items()))
    if not arrays:
        return cells
    return ((row, column, v, arrays.get((row, column))) for (row, column), v in cells.items())


def _constant(v):
    if isinstance(v, _dt.datetime) or isinstance(v, _dt.date) or isinstance(v, _dt.time):
        from openpyxl.utils.datetime import to_excel

        return float(to_excel(v))
    if isinstance(v, str):
        if v in ("#N/A", "#VALUE!", "#REF!", "#DIV/0!", "#NUM!", "#NAME?", "#NULL!"):
            return ExcelError(v)
        return v
    if isinstance(v, (bool, int, float)):
        return v
    return str(v)


# a cell holds at most 32,767 characters (Excel's specification limit, common practice) and no
# control characters other than tab, line feed and carriage return (the file format's XML)
MAX_CELL_TEXT = 32767
_CONTROL_RE = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f\ufffe\uffff]")


def _cell_text(text: str, where, report) -> str:
    """``text`` as a cell can hold it; what was changed is recorded in ``report.altered``."""
    done = []
    if _CONTROL_RE.search(text):
        text = _CONTROL_RE.sub("\ufffd", text)
        done.append("control characters replaced by \ufffd")
    if len(text) > MAX_CELL_TEXT:
        note = f" ...[cut: {len(text):,} characters]"
        done.append(f"cut from {len(text):,} to {MAX_CELL_TEXT:,} characters")
        text = text[: MAX_CELL_TEXT - len(note)] + note
    if done and where is not None and report is not None:
        report.altered.append((where, "; ".join(done)))
    return text


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _saved_by_calc(path) -> bool:
    """Whether LibreOffice Calc wrote the package (its workbook part names the application)."""
    import zipfile

    try:
        with zipfile.ZipFile(path) as z:
            names = [n for n in z.namelist() if n.lower() == "xl/workbook.xml"]
            head = z.read(names[0])[:4096] if names else b""
    except (zipfile.BadZipFile, OSError, KeyError):
        return False
    return b'appName="Calc"' in head


def _defined_names(book) -> dict:
    """{(sheet title or None, NAME): text} of the workbook's defined names (print areas and
    other built-in names left out)."""
    out = {}
    try:
        items = list(book.defined_names.items())
    except AttributeError:  # pragma: no cover - older openpyxl
        items = [(d.name, d) for d in book.defined_names.definedName]
    for name, dn in items:
        if not name.startswith("_xlnm") and dn.attr_text:
            out[(None, name.upper())] = dn.attr_text
    for ws in book.worksheets:
        for name, dn in getattr(ws, "defined_names", {}).items():
            if not name.startswith("_xlnm") and dn.attr_text:
                out[(ws.title, name.upper())] = dn.attr_text
    return out


def _cell_value(v):
    if isinstance(v, float) and v != v:
        return ExcelError("#NUM!")
    return v


def _shown(v):
    """What a formula cell shows for its result: an empty cell's value (=A5 with A5 empty, an
    INDEX of an empty cell) shows as 0 in Excel (from memory), never as an empty cell."""
    return 0 if v is None else v


def _top_left(result):
    if isinstance(result, list):
        if not result or not result[0]:
            return None
        return _cell_value(result[0][0])
    return _cell_value(result)


# ---------------------------------------------------------------------- writing
def recalc(src, dst=None, values_only: bool = False, dynamic_hint=(), before_write=None, book=None) -> tuple:
    """Recalculate ``src`` and write ``dst`` (default BOOK.recalc.xlsx beside it); never the input.

    Returns (output path, report).  Writes to a temporary file and renames it into place.
    ``before_write(workbook)``, if given, runs once every value is computed and may set constant
    cells of ``workbook.book`` (the estimate history does).  ``book``: ``src`` as openpyxl loaded
    it, perhaps edited in memory (a refresh's new rows): recalculated and written as it stands,
    without saving and loading it again (see :class:`Workbook`); the openpyxl route writes it.
    """
    src = Path(src)
    if not src.exists():
        raise RecalcError(f"{src}: no such file")
    if src.suffix.lower() not in (".xlsx", ".xlsm"):
        raise RecalcError(f"{src.name}: not an .xlsx workbook")
    dst = Path(dst) if dst else src.with_name(src.stem + ".recalc.xlsx")
    if dst.suffix.lower() != ".xlsx":
        raise RecalcError(f"{dst.name}: the output must be an .xlsx file")
    if dst.resolve() == src.resolve():
        raise RecalcError(f"{dst}: refusing to write over the input; choose another output with -o")

    # the openpyxl route writes through the book openpyxl loads: read with it then
    wb = Workbook(src, dynamic_hint, fast=before_write is None and not values_only and book is None,
                  book=book).evaluate_all()
    report = wb.collect_errors()
    wb.check_unread()
    report.warnings = wb.data_checks()
    if before_write is not None:
        before_write(wb)
    elif not values_only and wb.fast_read and book is None and not os.environ.get("VOLCAST_OPENPYXL_WRITE"):
        if _write_patched(wb, src, dst, report):
            return dst, report
    from openpyxl.worksheet.formula import ArrayFormula

    from .xlsxpost import place_values, store_values

    book = wb.book
    book.calculation.fullCalcOnLoad = False
    # Excel recalculates a whole file on load when its calcId is older than Excel's own (from
    # memory: 191029 is the engine of Excel 2019 and 365), which without the add-in would turn
    # the stored values into #NAME?; openpyxl writes an Excel 2010 value
    book.calculation.calcId = max(int(book.calculation.calcId or 0), 191029)
    formula_values = {}
    dynamic = {}
    exact = {}  # (sheet, "B3") -> each computed number openpyxl writes (spilled values; all with values_only)

    def plain(v, where=None):
        if isinstance(v, ExcelError):
            return v.code
        if isinstance(v, str):
            return _cell_text(v, where, report)
        return v

    for (sheet, row, col), text in wb.formulas.items():
        ws = book[sheet]
        text = file_formula(text)
        if not values_only and (sheet, row, col) not in wb.spills and (sheet, row, col) not in wb.arrays:
            cell = ws.cell(row=row, column=col)
            if cell.data_type != "f" or cell.value != text:  # most formulas are written back as read
                cell.value = text
        raw = wb.values.get((sheet, row, col))
        v = raw if isinstance(raw, ExcelError) else plain(raw, f"{sheet}!{cell_name(row, col)}")
        if values_only:
            ws.cell(row=row, column=col).value = v = plain(v)
            if type(v) is float and math.isfinite(v):
                exact[(sheet, cell_name(row, col))] = v
            continue
        if (sheet, row, col) in wb.arrays:
            r1, c1, r2, c2 = wb.arrays[(sheet, row, col)]
            ws.cell(row=row, column=col).value = ArrayFormula(
                ref=f"{cell_name(r1, c1)}:{cell_name(r2, c2)}", text=text)
        if (sheet, row, col) in wb.spills:
            r1, c1, r2, c2 = wb.spills[(sheet, row, col)]
            ref = f"{cell_name(r1, c1)}:{cell_name(r2, c2)}"
            ws.cell(row=row, column=col).value = ArrayFormula(ref=ref, text=text)
            dynamic[(sheet, cell_name(row, col))] = ref
        formula_values[(sheet, cell_name(row, col))] = v
    for cell, anchor in wb.owner.items():
        sheet, row, col = cell
        if not values_only and anchor in wb.arrays and cell in wb.formulas:
            continue
        v = plain(wb.values.get(cell), f"{sheet}!{cell_name(row, col)}")
        book[sheet].cell(row=row, column=col).value = v
        if type(v) is float and math.isfinite(v):
            exact[(sheet, cell_name(row, col))] = v

    tmp1, tmp2 = _temp_pair(dst)
    try:
        book.save(tmp1)
        # openpyxl writes a number with 16 significant digits: the package editor stores the
        # computed numbers it wrote again, to the last digit (as the formulas' values are)
        if values_only:
            place_values(tmp1, tmp2, exact)
        else:
            store_values(tmp1, tmp2, formula_values, dynamic, constants=exact)
        os.replace(tmp2, dst)
    finally:
        for t in (tmp1, tmp2):
            if os.path.exists(t):
                os.remove(t)
    return dst, report



def _temp_pair(dst: Path) -> tuple:
    """Two temporary paths beside ``dst`` (the first made, empty), so that the output is written
    whole and moved into place; a folder that cannot be written to is refused in one line."""
    try:
        dst.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp1 = tempfile.mkstemp(suffix=".xlsx", dir=dst.parent, prefix=".volcast-")
    except OSError as exc:
        raise RecalcError(f"{dst}: cannot write there ({exc.strerror or type(exc).__name__})") from None
    os.close(fd)
    return tmp1, tmp1 + ".post.xlsx"

_OPENPYXL_ERRORS = ("#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A")
_CALC_ID = 191029  # see recalc(): Excel 2019 and 365's engine, so that Excel keeps the stored values


def _write_patched(wb, src: Path, dst: Path, report) -> bool:
    """Write ``dst`` by editing the input package (formula values, spills, spilled values, calcId)
    rather than saving it through openpyxl: every part and cell not computed is copied as it was.

    Gives the cells the values the openpyxl route writes.  Returns False, having written nothing,
    where that route must write: a cell the input holds as an array formula or with cell metadata
    that is no longer a spill or a legacy array (its formula changes form), a formula whose text
    changes when written (a spill reference), a spilled text that starts with "=" (openpyxl
    would write it as a formula), or a package the editors refuse.
    """
    from .xlsxpost import store_values

    altered = RecalcReport()

    def plain(v, where=None):
        if isinstance(v, ExcelError):
            return v
        if isinstance(v, str):
            return _cell_text(v, where, altered)
        return v

    keep_form = set(wb.spills) | set(wb.arrays)
    if any(cell not in keep_form for cell in wb.array_cells):
        return False
    for sheet, marked in (wb.marked or {}).items():
        if any((sheet, r, c) not in wb.spills for r, c in marked):
            return False
    formula_values, dynamic, constants = {}, {}, {}
    formulas = wb.formulas
    if "#" in "\x00".join(formulas.values()):  # a spill reference E2#, written in another form
        for text in formulas.values():
            if "#" in text and file_formula(text) != text:
                return False
    # each formula's (sheet, "B3") and value, in the formulas' order, with maps rather than a
    # loop in Python (50,000 cells in a workbook of returns): a text goes through plain()
    keys = list(formulas)
    sheets = list(map(itemgetter(0), keys))
    names = _cell_names(list(map(itemgetter(1), keys)), list(map(itemgetter(2), keys)))
    raws = list(map(wb.values.get, keys))
    formula_values = dict(zip(zip(sheets, names), raws))
    for i in compress(range(len(keys)), map(isinstance, raws, repeat(str))):
        formula_values[(sheets[i], names[i])] = plain(raws[i], f"{sheets[i]}!{names[i]}")
    for i in compress(range(len(keys)), map(wb.spills.__contains__, keys)):
        r1, c1, r2, c2 = wb.spills[keys[i]]
        dynamic[(sheets[i], names[i])] = f"{cell_name(r1, c1)}:{cell_name(r2, c2)}"
    for cell, anchor in wb.owner.items():
        if anchor in wb.arrays and cell in wb.formulas:
            continue
        sheet, row, col = cell
        v = plain(wb.values.get(cell), f"{sheet}!{cell_name(row, col)}")
        if isinstance(v, str) and v.startswith("=") and len(v) > 1:
            return False
        if isinstance(v, str) and v in _OPENPYXL_ERRORS:  # openpyxl stores such a text as an error
            v = ExcelError(v)
        constants[(sheet, cell_name(row, col))] = v
    tmp1, tmp2 = _temp_pair(dst)
    try:
        store_values(src, tmp1, formula_values, dynamic, constants=constants, calc_id=_CALC_ID)
        os.replace(tmp1, dst)
    except ValueError:
        return False
    finally:
        for t in (tmp1, tmp2):
            if os.path.exists(t):
                os.remove(t)
    report.altered.extend(altered.altered)
    return True
