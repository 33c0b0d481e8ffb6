"""Columns of same-shape formulas over numbers, evaluated with NumPy (the common case, made fast).

A workbook's return column (``=IF(OR(B3="",B2=""),"",LN(B3/B2)*100)`` down thousands of rows) is
one formula *shape*: the texts differ only in their row numbers.  :func:`shape_key` groups such
cells without parsing them (the text with its digit runs masked); :class:`ColumnShape` parses one
member, says which digit runs are the rows of its references, and evaluates the whole column as
NumPy arrays.

This is a fast path, not a second engine.  It takes only what it can compute exactly as the
formula engine (:mod:`xlfuncs.headless.engine`) would:

* inputs that are floats (rows with a blank, a text, a boolean or an error in any input are left
  to the engine, which knows Excel's rules for them); a whole number (a workbook gives one back
  as an int) is taken as its float where the formula only computes with it (arithmetic, the
  functions, comparisons: the engine turns it into a float there too) and left to the engine
  where the formula may show it as it is (=A3, =+A3, a branch of IF or IFERROR: ``raw``);
* the operators ``+ - * / ^ %``, unary minus and plus, the comparisons between numbers (on 15
  significant digits, as the engine compares them; and ``=``/``<>`` of a number with a text
  literal, FALSE/TRUE whatever the text), and the functions
  IF, IFERROR, OR, AND, ISNUMBER, ISBLANK, LN, LOG10, EXP, SQRT, ABS, SIGN, POWER;
* rows whose evaluation meets no error on the branches it takes (a division by zero, LN of a
  non-positive number, an overflow: every non-finite or complex intermediate marks the row, and a
  marked row goes to the engine, which then decides the error and what IFERROR does with it).

Anything else raises :class:`Unsupported` when the shape is parsed or evaluated, and its cells go
the general route.  ``tests/test_headless.py`` compares this route with the engine cell by cell on
the shipped templates and on generated layouts.

Elementwise NumPy arithmetic is IEEE double arithmetic as the engine's per-cell Python floats are;
``x ** y`` is the exception (NumPy's vector power may differ in the last digit), so powers are
taken element by element in Python, as the engine does.
"""

from __future__ import annotations

import re

import numpy as np

__all__ = ["Unsupported", "ColumnShape", "shape_key", "shape_groups", "digit_patterns", "digit_runs"]


class Unsupported(Exception):
    """A formula shape (or an operation met while evaluating it) the fast path does not take."""


_DIGITS_RE = re.compile(r"\d+")


def shape_key(text: str) -> str:
    """The formula text with every run of digits masked: one key for a column's shape."""
    return _DIGITS_RE.sub("#", text)


_ZERO_DIGITS = str.maketrans("123456789", "000000000")


def digit_patterns(texts) -> list:
    """Each text with every ASCII digit written 0 (its *digit pattern*), made in one pass over
    the join of all the texts."""
    texts = list(texts)
    joined = "\x00".join(texts)
    if texts and joined.count("\x00") == len(texts) - 1:  # no text holds the separator
        return joined.translate(_ZERO_DIGITS).split("\x00")
    return [t.translate(_ZERO_DIGITS) for t in texts]


def shape_groups(keys, texts) -> dict:
    """The formula cells ``keys`` ((sheet, row, col), with their ``texts``) grouped by sheet and
    :func:`shape_key`: {(sheet, shape key): [(digit pattern, [key, ...]), ...]}.

    Each group is split by *digit pattern*, the text with every ASCII digit written 0 (=LN(B9/B8)
    and =LN(B10/B9) share a shape, not a pattern): members of one pattern hold their digit runs at
    the same places (:func:`digit_runs`).  The patterns are made in one pass over all the texts
    (``str.translate`` of their join), and the shape key once per pattern: a shape key is a
    function of the pattern (runs of digits stay runs of digits), so the groups are exactly those
    of :func:`shape_key` applied to each text, at a fraction of its cost."""
    by_pattern: dict = {}
    for key, pattern in zip(keys, digit_patterns(texts)):
        by_pattern.setdefault((key[0], pattern), []).append(key)
    groups: dict = {}
    for (sheet, pattern), members in by_pattern.items():
        groups.setdefault((sheet, shape_key(pattern)), []).append((pattern, members))
    return groups


def digit_runs(texts, pattern: str, n_runs: int):
    """The digit runs of ``texts`` (all of one digit ``pattern``, :func:`shape_groups`) as an
    int64 array, one row per text, ``n_runs`` columns; None where they are not ``n_runs`` each.

    An ASCII pattern puts every digit run of every member at the same place, so the runs are
    read column by column from the texts' characters as a NumPy array (no regular expression, no
    ``int`` per run); any other pattern (a digit outside ASCII, which ``\\d`` also matches) is
    read with the regular expression, as ``int`` reads each run."""
    texts = list(texts)
    m = len(texts)
    spans = [r.span() for r in re.finditer("0+", pattern)] if pattern.isascii() else None
    if spans is not None and all(b - a <= 18 for a, b in spans):  # an int64 holds 18 digits
        if len(spans) != n_runs:
            return None
        chars = np.frombuffer("".join(texts).encode("ascii"), dtype=np.uint8).reshape(m, len(pattern))
        out = np.zeros((m, n_runs), dtype=np.int64)
        for j, (a, b) in enumerate(spans):
            v = out[:, j]
            for at in range(a, b):
                v *= 10
                v += chars[:, at] - 48
        return out
    flat = _DIGITS_RE.findall("\x00".join(texts))
    if len(flat) != m * n_runs:
        return None
    try:
        return np.fromiter(map(int, flat), dtype=np.int64, count=len(flat)).reshape(m, n_runs)
    except OverflowError:  # a run of more digits than an int64 holds: no row number
        return None


_TOKEN_RE = re.compile(
    r"""\s*(?:
      (?P<str>"(?:[^"]|"")*")
    | (?P<ref>(?:(?P<sheet>'(?:[^']|'')+'|[A-Za-z_][A-Za-z0-9_.]*)!)?\$?(?P<col>[A-Za-z]{1,3})\$?(?P<row>\d+)(?![A-Za-z0-9_.(!:$]))
    | (?P<func>[A-Za-z_][A-Za-z0-9_.]*)\s*\(
    | (?P<num>\d+(?:\.\d*)?|\.\d+)(?![A-Za-z0-9_.(:$])
    | (?P<op><>|<=|>=|[-+*/^%=<>(),&:])
    )""",
    re.VERBOSE,
)

_FUNCS = {"IF", "IFERROR", "OR", "AND", "ISNUMBER", "ISBLANK", "LN", "LOG10", "EXP", "SQRT", "ABS", "SIGN",
          "POWER"}
_UFUNCS = {"LN": np.log, "LOG10": np.log10, "EXP": np.exp, "SQRT": np.sqrt, "ABS": np.abs, "SIGN": np.sign}
_ARITY = {"IF": (2, 3), "IFERROR": (2, 2), "OR": (1, 255), "AND": (1, 255), "ISNUMBER": (1, 1),
          "ISBLANK": (1, 1), "POWER": (2, 2), **{f: (1, 1) for f in _UFUNCS}}
_COMPARE = ("=", "<>", "<", ">", "<=", ">=")


def _tokens(text: str):
    """(kind, value, match) tokens of a formula body; Unsupported for anything not recognised."""
    out, pos = [], 0
    while pos < len(text):
        if text[pos:].strip() == "":
            break
        m = _TOKEN_RE.match(text, pos)
        if not m or m.end() == pos:
            raise Unsupported(f"cannot read {text[pos:pos + 10]!r}")
        kind = m.lastgroup if m.lastgroup not in ("sheet", "col", "row") else "ref"
        for k in ("str", "ref", "func", "num", "op"):
            if m.group(k) is not None:
                kind = k
                break
        out.append((kind, m))
        pos = m.end()
    return out


def _col_index(letters: str) -> int:
    n = 0
    for ch in letters.upper():
        n = n * 26 + (ord(ch) - 64)
    return n


class _Parser:
    """Recursive descent over Excel's precedence: comparison < & < + - < * / < ^ < unary < %."""

    def __init__(self, tokens):
        self.t = tokens
        self.i = 0
        self.refs = []  # (sheet text or None, column index, span of the row digits)

    def peek(self):
        return self.t[self.i] if self.i < len(self.t) else (None, None)

    def op(self):
        kind, m = self.peek()
        return m.group("op") if kind == "op" else None

    def take(self, want=None):
        kind, m = self.peek()
        if kind is None or (want is not None and (kind != "op" or m.group("op") != want)):
            raise Unsupported("unexpected end or token")
        self.i += 1
        return kind, m

    def parse(self):
        node = self.compare()
        if self.i != len(self.t):
            raise Unsupported("trailing tokens")
        return node

    def compare(self):
        node = self.additive()
        while self.op() in _COMPARE:
            o = self.take()[1].group("op")
            node = ("cmp", o, node, self.additive())
        if self.op() == "&":
            raise Unsupported("text concatenation")
        return node

    def additive(self):
        node = self.mult()
        while self.op() in ("+", "-"):
            o = self.take()[1].group("op")
            node = ("bin", o, node, self.mult())
        return node

    def mult(self):
        node = self.power()
        while self.op() in ("*", "/"):
            o = self.take()[1].group("op")
            node = ("bin", o, node, self.power())
        return node

    def power(self):
        node = self.unary()
        while self.op() == "^":
            self.take()
            node = ("pow", node, self.unary())
        return node

    def unary(self):
        if self.op() in ("-", "+"):
            o = self.take()[1].group("op")
            if self.op() in ("-", "+"):
                raise Unsupported("repeated signs")  # the engine folds some of them away
            return ("neg", self.percent()) if o == "-" else ("pos", self.percent())
        return self.percent()

    def percent(self):
        node = self.primary()
        while self.op() == "%":
            self.take()
            node = ("pct", node)
        return node

    def primary(self):
        kind, m = self.take()
        if kind == "num":
            text = m.group("num")
            return ("const", "num", float(text)) if "." in text else ("const", "int", int(text))
        if kind == "str":
            return ("const", "str", m.group("str")[1:-1].replace('""', '"'))
        if kind == "ref":
            col = _col_index(m.group("col"))
            if col > 16384:
                raise Unsupported("no such column")
            sheet = m.group("sheet")
            if sheet is not None and sheet.startswith("'"):
                sheet = sheet[1:-1].replace("''", "'")
            self.refs.append((sheet, col, m.span("row")))
            return ("ref", len(self.refs) - 1)
        if kind == "func":
            name = m.group("func").upper()
            if name not in _FUNCS:
                raise Unsupported(f"function {name}")
            args = []
            if self.op() != ")":
                args.append(self.compare())
                while self.op() == ",":
                    self.take()
                    args.append(self.compare())
            self.take(")")
            lo, hi = _ARITY[name]
            if not lo <= len(args) <= hi:
                raise Unsupported(f"{name} with {len(args)} arguments")
            return ("call", name, args)
        if kind == "op" and m.group("op") == "(":
            node = self.compare()
            self.take(")")
            return node
        raise Unsupported("unexpected token")


def _raw_refs(node) -> set:
    """Indices of the references whose value may be the formula's result as read: the reference
    itself, under a unary plus, or a branch of IF or IFERROR.  Every other node computes a number
    or a truth value from its operands."""
    tag = node[0]
    if tag == "ref":
        return {node[1]}
    if tag == "pos":
        return _raw_refs(node[1])
    if tag == "call" and node[1] == "IF":
        return set().union(*(_raw_refs(a) for a in node[2][1:]))
    if tag == "call" and node[1] == "IFERROR":
        return set().union(*(_raw_refs(a) for a in node[2]))
    return set()


def _held_pair(x, y, n):
    """Two number columns as the engine compares them, each number rounded to 15 significant
    digits (Excel's held value: 0.1+0.2 = 0.3 is TRUE).  Rounding keeps the order, so only pairs
    within a few units of the 15th digit of each other are rounded (one format per such row)."""
    x, y = np.broadcast_to(x, (n,)).copy(), np.broadcast_to(y, (n,)).copy()
    with np.errstate(all="ignore"):
        near = (np.abs(x - y) <= 1e-14 * np.maximum(np.abs(x), np.abs(y))) & (x != y)
    for i in np.flatnonzero(near).tolist():
        x[i], y[i] = float(format(x[i], ".15g")), float(format(y[i], ".15g"))
    return x, y


class ColumnShape:
    """One formula shape parsed once: its references and the digit runs that are their rows.

    ``refs`` lists (sheet text or None, column index, digit-run index) per reference in the
    order of the text; ``fixed`` the indices of the other digit runs (literals, digits in sheet
    or function names), which must be the same in every member of a column.
    """

    def __init__(self, text: str):
        if not text.startswith("="):
            raise Unsupported("not a formula")
        body_at = 1
        parser = _Parser(_tokens(text[body_at:]))
        self.tree = parser.parse()
        runs = [m.span() for m in _DIGITS_RE.finditer(text)]
        index = {span: i for i, span in enumerate(runs)}
        self.refs = []
        for sheet, col, (a, b) in parser.refs:
            self.refs.append((sheet, col, index[(a + body_at, b + body_at)]))
        used = {r[2] for r in self.refs}
        self.fixed = [i for i in range(len(runs)) if i not in used]
        self.n_runs = len(runs)
        # the references whose value the formula may give as it is (not computed with)
        self.raw = _raw_refs(self.tree)

    # ------------------------------------------------------------------ evaluation
    def evaluate(self, columns: list) -> tuple:
        """(values, bad) for one float64 array per reference: ``values`` a list of plain cell
        values, ``bad`` a boolean array of the rows the fast path cannot answer."""
        n = len(columns[0]) if columns else 0
        self._cols, self._n = columns, n
        with np.errstate(all="ignore"):
            kind, val, bad = self._eval(self.tree)
        if kind in ("num", "bool"):
            out = val.tolist() if isinstance(val, np.ndarray) else [val] * n
        elif kind == "obj":
            out = val.tolist()
        elif kind in ("str", "int"):
            out = [val] * n
        else:  # pragma: no cover - every kind is handled above
            raise Unsupported(kind)
        return out, bad

    def _full_bad(self):
        return np.zeros(self._n, dtype=bool)

    def _num(self, kv):
        kind, val, bad = kv
        if kind == "num":
            return val, bad
        if kind == "bool":
            return val.astype(float), bad
        if kind == "int":
            return float(val), bad
        raise Unsupported(f"arithmetic on {kind}")

    def _truth(self, kv):
        kind, val, bad = kv
        if kind == "bool":
            return val, bad
        if kind == "num":
            return np.asarray(val) != 0, bad
        if kind == "int":
            return np.full(self._n, val != 0), bad
        raise Unsupported(f"a condition of {kind}")

    def _obj(self, kv):
        kind, val, _ = kv
        if kind == "obj":
            return val
        if kind in ("num", "bool"):
            if isinstance(val, np.ndarray):
                out = np.empty(self._n, dtype=object)
                out[:] = val.tolist()
                return out
            return np.full(self._n, float(val) if kind == "num" else bool(val), dtype=object)
        out = np.empty(self._n, dtype=object)
        out[:] = [val] * self._n
        return out

    @staticmethod
    def _finite_bad(x, bad):
        return bad | ~np.isfinite(x)

    def _eval(self, node):
        tag = node[0]
        if tag == "ref":
            return "num", self._cols[node[1]], self._full_bad()
        if tag == "const":
            return node[1], node[2], self._full_bad()
        if tag == "bin":
            (x, bx), (y, by) = self._num(self._eval(node[2])), self._num(self._eval(node[3]))
            o = node[1]
            r = x + y if o == "+" else x - y if o == "-" else x * y if o == "*" else x / y
            r = np.broadcast_to(np.asarray(r, dtype=float), (self._n,))
            return "num", r, self._finite_bad(r, bx | by)
        if tag == "pow":
            (x, bx), (y, by) = self._num(self._eval(node[1])), self._num(self._eval(node[2]))
            return self._power(x, y, bx | by)
        if tag == "neg":
            x, bx = self._num(self._eval(node[1]))
            r = np.broadcast_to(-np.asarray(x, dtype=float), (self._n,))
            return "num", r, bx
        if tag == "pos":
            kind, val, b = self._eval(node[1])
            if kind not in ("num", "bool"):
                raise Unsupported(f"unary plus on {kind}")
            return kind, val, b
        if tag == "pct":
            x, bx = self._num(self._eval(node[1]))
            r = np.broadcast_to(np.asarray(x, dtype=float) / 100.0, (self._n,))
            return "num", r, bx
        if tag == "cmp":
            return self._compare(node[1], self._eval(node[2]), self._eval(node[3]))
        if tag == "call":
            return self._call(node[1], node[2])
        raise Unsupported(tag)  # pragma: no cover

    def _power(self, x, y, bad):
        xs = np.broadcast_to(np.asarray(x, dtype=float), (self._n,)).tolist()
        ys = np.broadcast_to(np.asarray(y, dtype=float), (self._n,)).tolist()
        out = np.empty(self._n)
        bad = bad.copy()
        for i, (a, b) in enumerate(zip(xs, ys)):
            if a == 0 and b == 0:  # Excel's #NUM!: the engine decides
                out[i] = float("nan")
                continue
            try:
                v = a ** b
            except (ZeroDivisionError, OverflowError):
                v = float("nan")
            if not isinstance(v, float):  # a complex root of a negative number
                v = float("nan")
            out[i] = v
        return "num", out, self._finite_bad(out, bad)

    def _compare(self, o, a, b):
        ka, kb = a[0], b[0]
        numeric = ("num", "int")
        if ka in numeric and kb in numeric:
            x, y = _held_pair(np.asarray(a[1], dtype=float), np.asarray(b[1], dtype=float), self._n)
            r = {"=": np.equal, "<>": np.not_equal, "<": np.less, ">": np.greater,
                 "<=": np.less_equal, ">=": np.greater_equal}[o](x, y)
            return "bool", np.broadcast_to(r, (self._n,)), a[2] | b[2]
        if {ka, kb} == {"num", "str"} and o in ("=", "<>"):
            # a number is never equal to a text (the engine compares types first)
            return "bool", np.full(self._n, o == "<>"), a[2] | b[2]
        raise Unsupported(f"comparison of {ka} with {kb}")

    def _call(self, name, args):
        if name in _UFUNCS:
            x, bx = self._num(self._eval(args[0]))
            r = np.broadcast_to(np.asarray(_UFUNCS[name](np.asarray(x, dtype=float)), dtype=float), (self._n,))
            return "num", r, self._finite_bad(r, bx)
        if name == "POWER":
            (x, bx), (y, by) = self._num(self._eval(args[0])), self._num(self._eval(args[1]))
            return self._power(x, y, bx | by)
        if name in ("OR", "AND"):
            acc, bad = None, self._full_bad()
            for a in args:
                kv = self._eval(a)
                if kv[0] not in ("bool", "num"):
                    raise Unsupported(f"{name} of {kv[0]}")
                t, b = self._truth(kv)
                bad = bad | b
                acc = t if acc is None else ((acc | t) if name == "OR" else (acc & t))
            return "bool", np.broadcast_to(acc, (self._n,)), bad
        if name == "ISNUMBER":
            kind, _, b = self._eval(args[0])
            if kind == "obj":
                raise Unsupported("ISNUMBER of a mixed column")
            return "bool", np.full(self._n, kind in ("num", "int")), b
        if name == "ISBLANK":
            if args[0][0] != "ref":
                raise Unsupported("ISBLANK of an expression")
            return "bool", np.zeros(self._n, dtype=bool), self._full_bad()  # every input is a number
        if name == "IFERROR":
            kind, val, b = self._eval(args[0])  # a row with an error goes to the engine
            if kind == "obj":
                raise Unsupported("IFERROR of a mixed column")
            return kind, val, b
        if name == "IF":
            c, bc = self._truth(self._eval(args[0]))
            a = self._eval(args[1])
            f = self._eval(args[2]) if len(args) == 3 else ("bool", np.zeros(self._n, dtype=bool), self._full_bad())
            c = np.broadcast_to(c, (self._n,))
            bad = bc | np.where(c, a[2], f[2])
            if a[0] == f[0] == "num":
                x = np.broadcast_to(np.asarray(a[1], dtype=float), (self._n,))
                y = np.broadcast_to(np.asarray(f[1], dtype=float), (self._n,))
                return "num", np.where(c, x, y), bad
            return "obj", np.where(c, self._obj(a), self._obj(f)), bad
        raise Unsupported(name)  # pragma: no cover
