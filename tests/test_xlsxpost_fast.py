"""The quick routes of xlfuncs.headless.xlsxpost against its general ones.

* Formula cells in openpyxl's form are edited from one split of each block of rows; the general
  route parses every cell's attributes.  Reference: that general route (the one every formula
  cell took before), on generated sheets -- the edited sheet XML must be the same text.
* Keys already canonical are checked in one pass per sheet; reference: the general per-key loop,
  whose result (or error message) must be the same for generated keys, canonical or not.
"""

from __future__ import annotations

import re
import zipfile

import openpyxl
import pytest
from hypothesis import HealthCheck, example, given, settings, strategies as st

from xlfuncs.headless import xlsxpost
from xlfuncs.headless.xlsxpost import ExcelError, store_values

_VALUES = st.one_of(st.none(), st.floats(allow_nan=False, allow_infinity=False), st.integers(-10**6, 10**6),
                    st.booleans(), st.text(alphabet="ab <&>\"'", max_size=6),
                    st.sampled_from([ExcelError("#N/A"), ExcelError("#DIV/0!")]))


def _sheet_xml(path, part="xl/worksheets/sheet1.xml"):
    with zipfile.ZipFile(path) as z:
        return z.read(part).decode("utf-8")


@given(cells=st.lists(st.tuples(st.integers(1, 40), st.integers(1, 30), st.booleans(), st.sampled_from([None, "0.00", "@"]),
                                st.booleans(), _VALUES), min_size=1, max_size=30),
       stored_before=st.booleans())
@example(cells=[(1, 1, True, None, True, None), (1, 1, False, None, False, None)], stored_before=False)  # CI's find
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_plain_formula_cells_are_edited_as_the_general_route_edits_them(tmp_path_factory, monkeypatch, cells,
                                                                         stored_before):
    tmp = tmp_path_factory.mktemp("plain")
    wb = openpyxl.Workbook()
    ws = wb.active
    chosen = {}
    for row, col, formula, fmt, store, value in cells:
        c = ws.cell(row, col, f"=ROW()*{row}+{col}" if formula else 1.5)
        if fmt:
            c.number_format = fmt
        chosen.pop(("Sheet", c.coordinate), None)  # a later tuple may rewrite the same cell as a plain value
        if formula and store:
            chosen[("Sheet", c.coordinate)] = value
    src = tmp / "src.xlsx"
    wb.save(src)
    if stored_before:  # cells that already hold a value (and a type) from an earlier run
        again = tmp / "again.xlsx"
        store_values(src, again, {k: "old" for k in chosen})
        src = again
    quick, general = tmp / "quick.xlsx", tmp / "general.xlsx"
    store_values(src, quick, chosen)
    with monkeypatch.context() as m:  # a pattern that never matches: every cell the general route's
        m.setattr(xlsxpost, "_PLAIN_F_CELL_RE", re.compile(r"(?!)(a)(b)(c)(d)(e)"))
        store_values(src, general, chosen)
    assert _sheet_xml(quick) == _sheet_xml(general)


_REFS = st.one_of(
    st.builds(lambda c, r: f"{c}{r}", st.sampled_from(["A", "B", "Z", "AA", "XFD", "XFE", "ZZZ", "b", "$C"]),
              st.sampled_from(["1", "2", "10", "1048576", "1048577", "0", "007", "$5", "999999"])),
    st.sampled_from(["A1", "B3", "A1:B2", "", "1A"]),
)


@given(keys=st.lists(st.tuples(st.sampled_from(["S", "T", "U", 5]), _REFS), min_size=1, max_size=12, unique=True),
       odd=st.sampled_from([None, "str", "triple"]))
@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_canonical_keys_give_what_the_general_loop_gives(monkeypatch, keys, odd):
    mapping = {k: i for i, k in enumerate(keys)}
    if odd == "str":
        mapping["B3"] = -1
    elif odd == "triple":
        mapping[("S", "B3", 1)] = -1
    titles = {"S": "xl/worksheets/sheet1.xml", "T": "xl/worksheets/sheet2.xml"}

    def outcome():
        try:
            return xlsxpost._check_keys(mapping, "values", titles)
        except ValueError as exc:
            return str(exc)

    quick = outcome()
    with monkeypatch.context() as m:
        m.setattr(xlsxpost, "_canonical_keys", lambda *a: None)
        general = outcome()
    assert quick == general
    if isinstance(quick, dict):  # the same order of sheets and of cells too
        assert [(s, list(c)) for s, c in quick.items()] == [(s, list(c)) for s, c in general.items()]


def test_canonical_keys_take_the_common_case():
    mapping = {("S", f"{c}{r}"): 1.0 for c in ("A", "AB") for r in range(1, 3000)}
    assert xlsxpost._canonical_keys(mapping, {"S": "x"}) is not None
    for bad in (("S", "A0"), ("S", "a1"), ("S", "$A$1"), ("S", "XFD1"), ("S", "A1048576"), ("T", "A1")):
        assert xlsxpost._canonical_keys({**mapping, bad: 1.0}, {"S": "x"}) is None, bad


def _attrs_general(text):
    """The general attribute loop (both quote styles), the reference for the quick split."""
    out = {}
    for m in xlsxpost._ATTR_RE.finditer(text):
        raw = m.group(2) if m.group(2) is not None else m.group(3)
        out[m.group(1)] = raw.replace('"', "&quot;")
    return out


_ATTR_NAMES = st.sampled_from(["r", "s", "t", "cm", "x:y", "_a.b-c", "vm"])
_ATTR_VALUES = st.text(alphabet="A1$ '\"&;x", max_size=5)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(_ATTR_NAMES, _ATTR_VALUES, st.sampled_from(['"', "'"]), st.sampled_from([" ", "  ", "\n"]),
                          st.sampled_from(["=", " = "])), max_size=5))
@example([("r", "A1", '"', " ", "="), ("r", "B2", '"', " ", "=")])
def test_attributes_split_as_the_general_loop_splits_them(parts):
    """_attrs' quick split (every value double-quoted) gives the general loop's dict, order and
    repeated names included; a value that could not be written in its quotes is left out."""
    text = "".join(f"{sp}{name}{eq}{q}{v}{q}" for name, v, q, sp, eq in parts if q not in v)
    got = xlsxpost._attrs(text)
    assert got == _attrs_general(text)
    assert list(got) == list(_attrs_general(text))


@pytest.mark.parametrize("head", [' r="$C7" s="4"', " r='C7' s='4'", ' s="4" r="C7"', ' r="c7" s="4"'])
def test_merge_row_reads_a_reference_in_any_form(head):
    """A cell whose reference is not in the quick form (a $, single quotes, not first, lower case)
    is still placed by its column: the value set in C7 replaces it and keeps its style."""
    out = xlsxpost._merge_row("S", 7, ' r="7"', f'<c r="A7"/><c{head}><v>1</v></c><c r="E7"/>', {3: (None, "2.5")})
    assert out == '<row r="7"><c r="A7"/><c r="C7" s="4"><v>2.5</v></c><c r="E7"/></row>'
    with pytest.raises(ValueError, match="outside the sheet"):
        xlsxpost._merge_row("S", 7, ' r="7"', '<c r="ZZZ7"/>', {3: (None, "2.5")})
