"""Storing formula values beside their formulas in an .xlsx package (xlfuncs.headless.xlsxpost).

Workbooks are built with openpyxl, post-processed, and read back with openpyxl and, where it is
installed, LibreOffice.  The cell contents are round-trip payloads, not model data.  Each check
names the part of the file format it relies on: ECMA-376 Part 1 (SpreadsheetML) and Part 2 (Open
Packaging Conventions), and the MS-XLSX extension for dynamic arrays.  Section numbers marked
"from memory" were not checked against the text.
"""

import contextlib
import csv
import hashlib
import math
import re
import shutil
import struct
import subprocess
import time
import tracemalloc
import zipfile
import zlib
import xml.etree.ElementTree as ET

import openpyxl
import pytest
from openpyxl.styles import Font
from openpyxl.worksheet.formula import ArrayFormula

from xlfuncs.headless import xlsxpost
from xlfuncs.headless.recalc import RecalcError, Workbook
from xlfuncs.headless.xlsxpost import ERROR_LITERALS, ExcelError, check_package, dynamic_anchors, store_values

MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
XDA = "{http://schemas.microsoft.com/office/spreadsheetml/2017/dynamicarray}"
CT = "{http://schemas.openxmlformats.org/package/2006/content-types}"
RELS = "{http://schemas.openxmlformats.org/package/2006/relationships}"
META_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/sheetMetadata"
META_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheetMetadata+xml"

FIRST = "Prices"
SECOND = "Q&A results 2"  # a space and an ampersand: written as "Q&amp;A results 2" in workbook.xml
PRICES = [100.0, 101.5, 99.75, 102.25, 103.0]
LOGRET = [math.log(PRICES[i] / PRICES[i - 1]) * 100 for i in range(1, len(PRICES))]
TEXT = '  lead & <tag> "q" \'a\' trail  '
FLOATS = [0.1 + 0.2, 1e-300, -0.0, 123456789.12345679, 1.7976931348623157e308, 2 ** 53 + 1, 5]


def _build_source(path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = FIRST
    ws["A1"] = "price"
    for i, p in enumerate(PRICES, start=2):
        ws.cell(i, 1, p)
    for r in range(3, 7):
        c = ws.cell(r, 2, f"=LN(A{r}/A{r - 1})*100")
        c.font = Font(bold=True)
        c.number_format = "0.000"
    ws["C2"] = '=" lead & <tag> ""q"" \'a\' trail "'
    ws["C3"] = "=A2>=100"
    ws["C4"] = "=A2>1000"
    ws["C5"] = "=1/0"
    ws["C6"] = "=NA()"
    ws["D2"] = "=VOLLOGLIK(B3:B6, J1:K6)"  # a function only the add-in knows
    ws["D3"] = '=IF(A2>0,"",1)'
    ws["E2"] = ArrayFormula("E2:E4", "=A2:A4*2")  # a legacy array formula
    ws["E3"], ws["E4"] = 203.0, 199.5
    for i, _ in enumerate(FLOATS, start=2):
        ws.cell(i, 6, f"=A{i}*0+{i}")
    ws["G2"] = "=VOLFORECAST(B3:B6, J1:K6, 3, \"table\")"  # spills over G2:H4
    ws["H2"], ws["G3"], ws["H3"], ws["G4"], ws["H4"] = 0.5, 2, 0.6, 3, 0.7
    other = wb.create_sheet(SECOND)
    other["A1"] = f"='{FIRST}'!A2*2"
    other["C1"] = f"=VOLSERIES('{FIRST}'!B3:B6, J1:K6)"  # spills over C1:C4
    other["C2"], other["C3"], other["C4"] = 1.5, 2.5, 3.5
    wb.save(path)


VALUES = {
    **{(FIRST, f"B{r}"): v for r, v in zip(range(3, 7), LOGRET)},
    (FIRST, "C2"): TEXT,
    (FIRST, "C3"): True,
    (FIRST, "C4"): False,
    (FIRST, "C5"): ExcelError("#DIV/0!"),
    (FIRST, "C6"): ExcelError("#N/A"),
    (FIRST, "D2"): -12.5,
    (FIRST, "D3"): None,
    (FIRST, "E2"): 200.0,
    **{(FIRST, f"F{i}"): v for i, v in enumerate(FLOATS, start=2)},
    (FIRST, "G2"): 1,
    (SECOND, "A1"): 200.0,
    (SECOND, "C1"): 0.25,
}
DYNAMIC = {(FIRST, "G2"): "G2:H4", (SECOND, "C1"): "c1:$C$4"}


def _digest(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _members(path):
    with zipfile.ZipFile(path) as z:
        return {i.filename: z.read(i.filename) for i in z.infolist()}


def _sheet_xml(path, n):
    return ET.fromstring(_members(path)[f"xl/worksheets/sheet{n}.xml"])


def _cell(root, ref):
    found = [c for c in root.iter(f"{MAIN}c") if c.get("r") == ref]
    assert len(found) == 1, ref
    return found[0]


@pytest.fixture(scope="module")
def books(tmp_path_factory):
    d = tmp_path_factory.mktemp("post")
    src, dst, again = d / "src.xlsx", d / "dst.xlsx", d / "again.xlsx"
    _build_source(src)
    before = _digest(src)
    store_values(src, dst, VALUES, DYNAMIC)
    store_values(dst, again, VALUES, DYNAMIC)  # the output processed a second time
    return {"src": src, "dst": dst, "again": again, "src_digest": before, "dir": d}


# ----------------------------------------------------------------------------- the package


def test_source_is_left_unchanged(books):
    assert _digest(books["src"]) == books["src_digest"]


def test_members_keep_their_order_and_compression(books):
    # ECMA-376 Part 2 (OPC) does not fix member order; keeping it keeps the copy a minimal edit.
    with zipfile.ZipFile(books["src"]) as a, zipfile.ZipFile(books["dst"]) as b:
        old = [(i.filename, i.compress_type) for i in a.infolist()]
        new = [(i.filename, i.compress_type) for i in b.infolist()]
        assert new[:len(old)] == old
        assert [n for n, _ in new[len(old):]] == ["xl/metadata.xml"]
        assert b.testzip() is None


def test_every_part_is_well_formed_and_unprefixed(books):
    # Well-formed XML 1.0 (W3C XML 1.0, 2.1); the parts keep the default-namespace form openpyxl
    # writes, with none of the ns0: prefixes an ElementTree rewrite would introduce.
    for name, data in _members(books["dst"]).items():
        if name.endswith((".xml", ".rels")):
            ET.fromstring(data)
            assert b"ns0:" not in data, name


def test_calcpr_loses_full_calc_on_load_only(books):
    # ECMA-376 Part 1, 18.2.2 calcPr (Calculation Properties): fullCalcOnLoad.
    old = ET.fromstring(_members(books["src"])["xl/workbook.xml"]).find(f"{MAIN}calcPr")
    new = ET.fromstring(_members(books["dst"])["xl/workbook.xml"]).find(f"{MAIN}calcPr")
    assert old.get("fullCalcOnLoad") == "1"  # openpyxl writes it, so the check below can fail
    assert new.get("fullCalcOnLoad") is None
    assert {k: v for k, v in old.attrib.items() if k != "fullCalcOnLoad"} == dict(new.attrib)


def test_only_changed_parts_differ(books):
    old, new = _members(books["src"]), _members(books["dst"])
    changed = {n for n in old if old[n] != new[n]}
    assert changed == {"xl/worksheets/sheet1.xml", "xl/worksheets/sheet2.xml", "xl/workbook.xml",
                       "xl/_rels/workbook.xml.rels", "[Content_Types].xml"}


# ----------------------------------------------------------------------------- formulas and values


def test_formulas_are_kept(books):
    a = openpyxl.load_workbook(books["src"])
    b = openpyxl.load_workbook(books["dst"])
    assert b.sheetnames == a.sheetnames == [FIRST, SECOND]
    anchors = {(s, c.upper()) for s, c in DYNAMIC}
    for ws in a.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                got = b[ws.title][cell.coordinate].value
                if (ws.title, cell.coordinate) in anchors:
                    # ECMA-376 Part 1, 18.3.1.40 f (Formula): a spilled anchor is an array formula
                    assert isinstance(got, ArrayFormula) and got.text == cell.value
                elif isinstance(cell.value, ArrayFormula):
                    assert (got.text, got.ref) == (cell.value.text, cell.value.ref)
                else:
                    assert got == cell.value, cell.coordinate


def test_stored_values_of_every_type(books):
    # ECMA-376 Part 1, 18.3.1.96 v (Cell Value) and 18.18.11 ST_CellType (b, e, n, str), read
    # back through openpyxl's data_only mode, which returns the stored value of a formula cell.
    ws = openpyxl.load_workbook(books["dst"], data_only=True)[FIRST]
    assert [ws[f"B{r}"].value for r in range(3, 7)] == LOGRET
    assert ws["C2"].value == TEXT  # &, <, >, quotes and the outer spaces survive
    assert ws["C3"].value is True and ws["C4"].value is False
    assert ws["C5"].value == "#DIV/0!" and ws["C6"].value == "#N/A"
    assert ws["D2"].value == -12.5
    assert ws["D3"].value is None
    assert ws["E2"].value == 200.0 and ws["E3"].value == 203.0
    assert ws["G2"].value == 1 and ws["H4"].value == 0.7
    other = openpyxl.load_workbook(books["dst"], data_only=True)[SECOND]
    assert other["A1"].value == 200.0 and other["C1"].value == 0.25


def test_numbers_round_trip_exactly(books):
    # Python's repr of a float is the shortest string that reads back to the same double
    # (Python tutorial, "Floating Point Arithmetic"); xsd:double lexical form (ECMA-376 Part 1,
    # 18.3.1.96 v holds a number as text).
    ws = openpyxl.load_workbook(books["dst"], data_only=True)[FIRST]
    got = [ws.cell(i, 6).value for i in range(2, 2 + len(FLOATS))]
    assert got == FLOATS
    assert [type(v) for v in got] == [type(v) for v in FLOATS]
    assert math.copysign(1.0, got[2]) == -1.0  # -0.0 keeps its sign


def test_cell_types_in_the_xml(books):
    # ECMA-376 Part 1, 18.3.1.4 c (Cell): t is absent for a number; str/b/e otherwise.
    root = _sheet_xml(books["dst"], 1)
    assert _cell(root, "B3").get("t") is None
    assert (_cell(root, "C2").get("t"), _cell(root, "C3").get("t"), _cell(root, "C5").get("t")) == ("str", "b", "e")
    assert _cell(root, "C3").findtext(f"{MAIN}v") == "1" and _cell(root, "C4").findtext(f"{MAIN}v") == "0"
    raw = _members(books["dst"])["xl/worksheets/sheet1.xml"].decode()
    assert "&amp; &lt;tag&gt; &quot;q&quot;" in raw


def test_none_leaves_the_cell_without_a_value(books):
    # ECMA-376 Part 1, 18.3.1.4 c: v is optional.
    cell = _cell(_sheet_xml(books["dst"], 1), "D3")
    assert cell.find(f"{MAIN}v") is None and cell.get("t") is None
    assert cell.findtext(f"{MAIN}f") == 'IF(A2>0,"",1)'


def test_storing_again_replaces_value_and_type(books, tmp_path):
    # ECMA-376 Part 1, 18.3.1.4 c: one t attribute and at most one v per cell.
    out = tmp_path / "retyped.xlsx"
    store_values(books["dst"], out, {(FIRST, "C2"): 4.0, (FIRST, "C3"): None, (FIRST, "B3"): "n/a",
                                     (FIRST, "C5"): ExcelError("#VALUE!")})
    root = _sheet_xml(out, 1)
    for ref, t, v in (("C2", None, "4.0"), ("C3", None, None), ("B3", "str", "n/a"), ("C5", "e", "#VALUE!")):
        cell = _cell(root, ref)
        assert (cell.get("t"), cell.findtext(f"{MAIN}v")) == (t, v), ref
        assert len(cell.findall(f"{MAIN}v")) == (0 if v is None else 1)
    ws = openpyxl.load_workbook(out, data_only=True)[FIRST]
    assert (ws["C2"].value, ws["C3"].value, ws["B3"].value, ws["C5"].value) == (4.0, None, "n/a", "#VALUE!")
    assert _cell(root, "G2").get("cm") == "1"  # marks of the first run stay


def test_styles_are_kept(books):
    # ECMA-376 Part 1, 18.3.1.4 c: s is the cell's style index.
    old, new = _sheet_xml(books["src"], 1), _sheet_xml(books["dst"], 1)
    styles = {c.get("r"): c.get("s") for c in old.iter(f"{MAIN}c")}
    assert styles["B3"] not in (None, "0")  # the bold, 0.000 cells carry a style, so this can fail
    assert styles == {c.get("r"): c.get("s") for c in new.iter(f"{MAIN}c")}
    cell = openpyxl.load_workbook(books["dst"])[FIRST]["B4"]
    assert cell.font.b and cell.number_format == "0.000"


# ----------------------------------------------------------------------------- dynamic arrays


def test_spilled_anchors_are_marked(books):
    # ECMA-376 Part 1, 18.3.1.4 c (cm, the cell-metadata index) and 18.3.1.40 f (t="array", ref);
    # MS-XLSX dynamic-array extension: Excel 365 stores a spill this way.
    for n, ref, spill in ((1, "G2", "G2:H4"), (2, "C1", "C1:C4")):
        cell = _cell(_sheet_xml(books["dst"], n), ref)
        f = cell.find(f"{MAIN}f")
        assert (cell.get("cm"), f.get("t"), f.get("ref")) == ("1", "array", spill)
    legacy = _cell(_sheet_xml(books["dst"], 1), "E2")
    assert legacy.get("cm") is None and legacy.find(f"{MAIN}f").get("ref") == "E2:E4"
    assert dynamic_anchors(books["dst"]) == {(FIRST, "G2"), (SECOND, "C1")}
    assert dynamic_anchors(books["src"]) == set()


def test_metadata_part_names_a_dynamic_array(books):
    # ECMA-376 Part 1, 18.9 Metadata (section number from memory): cm="1" is the first
    # cellMetadata block; its rc t="1" names metadataTypes[1] = XLDAPR, v="0" the first XLDAPR
    # futureMetadata block; MS-XLSX xda:dynamicArrayProperties fDynamic="1" fCollapsed="0".
    root = ET.fromstring(_members(books["dst"])["xl/metadata.xml"])
    types = root.findall(f"{MAIN}metadataTypes/{MAIN}metadataType")
    assert [t.get("name") for t in types] == ["XLDAPR"] and types[0].get("cellMeta") == "1"
    rc = root.findall(f"{MAIN}cellMetadata/{MAIN}bk/{MAIN}rc")
    assert [(r.get("t"), r.get("v")) for r in rc] == [("1", "0")]
    future = root.findall(f"{MAIN}futureMetadata")
    assert [f.get("name") for f in future] == ["XLDAPR"]
    props = future[0].find(f"{MAIN}bk/{MAIN}extLst/{MAIN}ext/{XDA}dynamicArrayProperties")
    assert (props.get("fDynamic"), props.get("fCollapsed")) == ("1", "0")
    # the extension URI of the dynamic-array properties (MS-XLSX; from memory)
    assert future[0].find(f"{MAIN}bk/{MAIN}extLst/{MAIN}ext").get("uri") == "{bdbb8cdc-fa1e-496e-a857-3c3f30c029c3}"


@pytest.mark.parametrize("which", ["dst", "again"])
def test_metadata_part_type_and_relationship_exist_once(books, which):
    # ECMA-376 Part 2 (OPC), the content-types stream and relationship parts (from memory);
    # Part 1, the sheetMetadata relationship of the workbook part.
    m = _members(books[which])
    with zipfile.ZipFile(books[which]) as z:
        names = z.namelist()
    assert names.count("xl/metadata.xml") == 1 and len(names) == len(set(names))
    overrides = [o for o in ET.fromstring(m["[Content_Types].xml"]).findall(f"{CT}Override")
                 if o.get("PartName") == "/xl/metadata.xml"]
    assert [o.get("ContentType") for o in overrides] == [META_TYPE]
    rels = ET.fromstring(m["xl/_rels/workbook.xml.rels"]).findall(f"{RELS}Relationship")
    assert [r.get("Target") for r in rels if r.get("Type") == META_REL] == ["metadata.xml"]
    ids = [r.get("Id") for r in rels]
    assert len(ids) == len(set(ids))


def test_second_run_changes_nothing(books):
    a, b = _members(books["dst"]), _members(books["again"])
    assert a == b


def test_a_foreign_metadata_part_is_refused(books, tmp_path):
    # A metadata part whose first cell-metadata block is not XLDAPR: cm="1" would mean something else.
    foreign = tmp_path / "foreign.xlsx"
    with zipfile.ZipFile(books["dst"]) as z, zipfile.ZipFile(foreign, "w", zipfile.ZIP_DEFLATED) as out:
        for info in z.infolist():
            data = z.read(info.filename)
            if info.filename == "xl/metadata.xml":
                data = data.replace(b'name="XLDAPR" minSupportedVersion', b'name="XLOTHER" minSupportedVersion')
            out.writestr(info.filename, data)
    with pytest.raises(ValueError, match="first block is not a dynamic array"):
        store_values(foreign, tmp_path / "out.xlsx", {}, {(FIRST, "G2"): "G2:H4"})
    assert not (tmp_path / "out.xlsx").exists()


def test_without_spills_no_metadata_is_added(books, tmp_path):
    out = tmp_path / "plain.xlsx"
    store_values(books["src"], out, {(FIRST, "B3"): 1.0})
    m = _members(out)
    assert "xl/metadata.xml" not in m and b"sheetMetadata" not in m["[Content_Types].xml"]
    assert b"cm=" not in m["xl/worksheets/sheet1.xml"]


def test_a_one_cell_spill_is_written_as_one_cell(books, tmp_path):
    # ECMA-376 Part 1, 18.3.1.40 f: ref is an ST_Ref; one cell is written as "D2" (common practice).
    out = tmp_path / "one.xlsx"
    store_values(books["src"], out, {(FIRST, "D2"): 3.0}, {(FIRST, "D2"): "D2:D2"})
    f = _cell(_sheet_xml(out, 1), "D2").find(f"{MAIN}f")
    assert (f.get("t"), f.get("ref")) == ("array", "D2")


# ----------------------------------------------------------------------------- bad input

BAD = [
    ({(FIRST, "B3"): float("nan")}, None, r"nan cannot be stored"),
    ({(FIRST, "B3"): float("inf")}, None, r"inf cannot be stored"),
    ({(FIRST, "B3"): -math.inf}, None, r"-inf cannot be stored"),
    ({(FIRST, "B3"): 10 ** 400}, None, r"too large"),
    ({(FIRST, "A2"): 1.0}, None, r"not formula cells: Prices!A2; write plain values"),
    ({(FIRST, "B3"): 1.0, (FIRST, "Z99"): 1.0, (SECOND, "B1"): 2}, None,
     r"not formula cells: Prices!Z99, Q&A results 2!B1"),
    ({("Nope", "B3"): 1.0}, None, r"no sheet named 'Nope'"),
    ({("prices", "B3"): 1.0}, None, r"did you mean 'Prices'"),
    ({(FIRST, "3B"): 1.0}, None, r"'3B' is not a cell reference"),
    ({(FIRST, "B0"): 1.0}, None, r"'B0' lies outside the sheet"),
    ({(FIRST, "XFE1"): 1.0}, None, r"outside the sheet"),
    ({(FIRST, "B3"): 1.0, (FIRST, "b3"): 2.0}, None, r"names Prices!B3 twice"),
    ({"B3": 1.0}, None, r"keys must be \(sheet title, 'B3'\) pairs"),
    ({(FIRST, "C2"): "bell\x07"}, None, r"character '\\x07'"),
    ({(FIRST, "C2"): "x" * 32768}, None, r"at most 32767"),
    ({}, {(FIRST, "A2"): "A2:A3"}, r"not formula cells: Prices!A2"),
    ({}, {(FIRST, "G2"): "G3:H4"}, r"does not start at its anchor G2"),
    ({}, {(FIRST, "G2"): "G2:F1"}, r"runs backwards"),
    ({}, {(FIRST, "B3"): "B3:B4"}, r"Prices!B4 holds a formula inside the spill range B3:B4"),
    ({}, {("Nope", "G2"): "G2:H4"}, r"dynamic: the workbook has no sheet"),
]


@pytest.mark.parametrize("values, dynamic, match", BAD)
def test_bad_input_raises_and_writes_nothing(books, tmp_path, values, dynamic, match):
    out = tmp_path / "out.xlsx"
    with pytest.raises(ValueError, match=match):
        store_values(books["src"], out, values, dynamic)
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir()] == []  # no temporary file left behind


@pytest.mark.parametrize("value, name", [(object(), "object"), ([[1.0]], "list"), (b"x", "bytes")])
def test_unsupported_type_raises(books, tmp_path, value, name):
    with pytest.raises(ValueError, match=f"cannot store a value of type {name}"):
        store_values(books["src"], tmp_path / "out.xlsx", {(FIRST, "B3"): value})


def test_refuses_to_write_over_its_input(books, tmp_path):
    copy = tmp_path / "book.xlsx"
    shutil.copyfile(books["src"], copy)
    before = _digest(copy)
    with pytest.raises(ValueError, match="refusing to write over the input"):
        store_values(copy, tmp_path / "." / "book.xlsx", {(FIRST, "B3"): 1.0})
    assert _digest(copy) == before


def test_a_file_that_is_not_a_package_is_refused(tmp_path):
    # ECMA-376 Part 2 (OPC): a package is a zip archive.
    fake = tmp_path / "fake.xlsx"
    fake.write_text("price\n100\n")
    with pytest.raises(ValueError, match="not an .xlsx package"):
        store_values(fake, tmp_path / "out.xlsx", {})


def test_error_literals():
    # ECMA-376 Part 1, 18.18.11 ST_CellType e and the error values of 18.17 (from memory), plus
    # #SPILL! and #CALC! that dynamic arrays added (common practice).
    assert ERROR_LITERALS == ("#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A",
                              "#SPILL!", "#CALC!")
    for code in ERROR_LITERALS:
        e = ExcelError(code)
        assert (e.code, str(e), e) == (code, code, ExcelError(code))
    for bad in ("#BAD!", "#n/a", "N/A", "", "ERROR: x"):
        with pytest.raises(ValueError, match="is not an Excel error literal"):
            ExcelError(bad)
    with pytest.raises(AttributeError):
        ExcelError("#N/A").code = "#REF!"


def test_module_exports():
    assert set(xlsxpost.__all__) == {"ERROR_LITERALS", "ExcelError", "check_package", "dynamic_anchors",
                                     "place_values", "store_values"}


# ----------------------------------------------------------------------------- package size and honesty
#
# Zip layout: PKWARE's APPNOTE.TXT (the .ZIP File Format Specification), 4.3.7 local file header,
# 4.3.12 central directory header, 4.3.16 end of central directory record (field offsets from
# memory; _patch_entry checks them by reading the patched file back through zipfile).

MiB = 2**20
SHEET_HEAD = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<worksheet '
              b'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>')
SHEET_TAIL = b"</sheetData></worksheet>"


def _copy_package(src, dst, replace=None, add=None, method=None):
    """Copy a package member by member; ``replace`` maps a member to a function of its bytes or to an
    iterable of byte blocks streamed into the copy, ``add`` maps new members to byte blocks, and
    ``method`` is the compression of every member (else each keeps its own)."""
    replace, add = replace or {}, add or {}
    with zipfile.ZipFile(src) as z, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as out:
        items = [(i.filename, i.compress_type) for i in z.infolist()] + [(n, zipfile.ZIP_DEFLATED) for n in add]
        for name, kind in items:
            info = zipfile.ZipInfo(name, (2020, 1, 1, 0, 0, 0))
            info.compress_type = kind if method is None else method
            how = replace.get(name, add.get(name))
            if how is None or callable(how):
                data = z.read(name)
                out.writestr(info, how(data) if how else data)
            else:
                with out.open(info, "w") as fh:
                    for block in how:
                        fh.write(block)


def _patch_entry(path, name, *, size=None, crc=None):
    """Overwrite the declared unpacked size and CRC-32 of one member, in its central directory entry
    and its local header."""
    data = bytearray(path.read_bytes())
    eocd = data.rfind(b"PK\x05\x06")
    (count,) = struct.unpack_from("<H", data, eocd + 10)
    (pos,) = struct.unpack_from("<I", data, eocd + 16)
    for _ in range(count):
        assert data[pos:pos + 4] == b"PK\x01\x02"
        n, m, k = struct.unpack_from("<HHH", data, pos + 28)
        (local,) = struct.unpack_from("<I", data, pos + 42)
        if data[pos + 46:pos + 46 + n].decode() == name:
            assert data[local:local + 4] == b"PK\x03\x04"
            if crc is not None:
                struct.pack_into("<I", data, pos + 16, crc)
                struct.pack_into("<I", data, local + 14, crc)
            if size is not None:
                struct.pack_into("<I", data, pos + 24, size)
                struct.pack_into("<I", data, local + 22, size)
        pos += 46 + n + m + k
    path.write_bytes(data)
    with zipfile.ZipFile(path) as z:  # the patch landed where zipfile reads it
        info = z.getinfo(name)
        assert (size is None or info.file_size == size) and (crc is None or info.CRC == crc)


def _repeated(total, unit=b"<row><c><v>0</v></c></row>"):
    """``total`` bytes or a little more of one repeated row, a megabyte at a time (the bomb's body)."""
    block = unit * (MiB // len(unit))
    for _ in range(-(-total // len(block))):
        yield block


def _member_digest(path, name):
    h = hashlib.sha256()
    with zipfile.ZipFile(path) as z, z.open(name) as fh:
        while block := fh.read(MiB):
            h.update(block)
    return h.hexdigest()


@contextlib.contextmanager
def _traced():
    """Yields a dict that holds, once the block ends (or raises), the peak bytes Python allocated in
    it; tracemalloc also sees zlib's buffers, which CPython's zlib module allocates through Python's
    allocator (from memory)."""
    seen: dict = {}
    tracemalloc.start()
    try:
        yield seen
    finally:
        seen["peak"] = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()


@pytest.fixture(scope="module")
def bomb(books):
    """A workbook whose first sheet unpacks to 300 MB of one repeated row from well under 1 MB: built
    by streaming, never held in memory."""
    path = books["dir"] / "bomb.xlsx"
    body = [SHEET_HEAD, *_repeated(300 * 10**6), SHEET_TAIL]
    _copy_package(books["src"], path, replace={"xl/worksheets/sheet1.xml": body})
    return path


def test_a_normal_workbook_passes_and_the_limit_is_inclusive(books):
    with zipfile.ZipFile(books["dst"]) as z:
        total = sum(i.file_size for i in z.infolist())
    assert check_package(books["dst"]) == total
    assert check_package(books["dst"], max_inflated=total) == total
    # below a kilobyte apart the sizes would print alike, so they are given in bytes
    with pytest.raises(ValueError, match=rf"^dst.xlsx unpacks to {total:,} bytes \(limit {total - 1:,} bytes\); "
                                         "a workbook that large cannot be recalculated here$"):
        check_package(books["dst"], max_inflated=total - 1)
    assert xlsxpost.MAX_INFLATED == 256 * MiB  # the stated default


def test_a_zip_bomb_is_refused_from_its_directory(bomb):
    with zipfile.ZipFile(bomb) as z:
        packed = bomb.stat().st_size
        total = sum(i.file_size for i in z.infolist())
        sheet = z.getinfo("xl/worksheets/sheet1.xml").file_size
    assert total > 300 * 10**6 and packed < MiB  # the bomb is one, so the check below can fail
    # powers of 1024 and one decimal, as file managers show sizes (common practice); no ".0"
    shown = f"{total / MiB:.1f}".removesuffix(".0") + " MB"
    message = rf"^bomb.xlsx unpacks to {shown} \(limit 256 MB\); a workbook that large cannot be recalculated here$"
    t0 = time.perf_counter()
    with _traced() as mem, pytest.raises(ValueError, match=message):
        check_package(bomb)
    # the directory only: unpacking 300 MB would take seconds, and hold megabytes at least
    assert time.perf_counter() - t0 < 1.0 and mem["peak"] < MiB
    with pytest.raises(RecalcError, match=message):
        Workbook(bomb)
    # the functions that stream refuse it for its packing, with no limit on the total
    shown = f"{sheet / MiB:.1f}".removesuffix(".0") + " MB"
    with pytest.raises(ValueError, match=rf"sheet1.xml unpacks from .* to {shown}, more than 200 times"):
        check_package(bomb, max_inflated=None)
    with pytest.raises(ValueError, match=r"more than 200 times its packed size"):
        store_values(bomb, bomb.with_name("bomb.out.xlsx"), {(FIRST, "B3"): 1.0})
    assert not bomb.with_name("bomb.out.xlsx").exists()
    assert dynamic_anchors(bomb) == set()


@pytest.mark.parametrize("size, refused", [(20 * MiB, True), (9 * MiB, False)])
def test_a_part_packed_over_200_times_is_refused_above_10_mib(books, tmp_path, size, refused):
    path = tmp_path / "tight.xlsx"
    _copy_package(books["src"], path, add={"xl/media/blank.bin": [b"\0" * size]})
    with zipfile.ZipFile(path) as z:
        info = z.getinfo("xl/media/blank.bin")
        assert info.file_size > 200 * info.compress_size  # zeros deflate about 1000:1 (zlib FAQ, from memory)
    if refused:
        with pytest.raises(ValueError, match=r"^tight.xlsx: the part xl/media/blank.bin unpacks from [\d.]+ KB to "
                                             r"20 MB, more than 200 times its packed size"):
            check_package(path)
    else:
        assert check_package(path) == sum(i.file_size for i in zipfile.ZipFile(path).infolist())


def test_a_part_packed_with_another_method_is_refused(books, tmp_path):
    # zipfile unpacks a bzip2 member without bounding its output by the size read (ZipExtFile._read1,
    # Python 3.11), so it is refused; ECMA-376 Part 2 allows stored and deflated parts only (from memory)
    path = tmp_path / "bz.xlsx"
    _copy_package(books["dst"], path, method=zipfile.ZIP_BZIP2)
    assert openpyxl.load_workbook(path)[FIRST]["B3"].value  # readable, so the refusal is a choice
    with pytest.raises(ValueError, match=r"^bz.xlsx: the part .* is packed with bzip2, which an .xlsx"):
        check_package(path)
    assert dynamic_anchors(path) == set()
    with pytest.raises(ValueError, match=r"packed with bzip2"):
        store_values(path, tmp_path / "out.xlsx", {(FIRST, "B3"): 1.0})


def test_check_package_refuses_what_is_not_a_zip(tmp_path):
    fake = tmp_path / "fake.xlsx"
    fake.write_text("price\n100\n")
    with pytest.raises(ValueError, match=r"^fake.xlsx is not a readable .xlsx workbook \(not a zip archive\)$"):
        check_package(fake)
    with pytest.raises(ValueError, match=r"^gone.xlsx cannot be read \(No such file or directory\)$"):
        check_package(tmp_path / "gone.xlsx")


def _liars(data, n):
    """(declared size, CRC-32, the reason given) for a member whose real bytes are ``data``, declaring ``n``."""
    return {
        "declares half, with the CRC of all": (n, zlib.crc32(data), "Bad CRC-32"),
        # read to the declared size only, this one would pass, cut short
        "declares half, with the CRC of that half": (n, zlib.crc32(data[:n]), "Bad CRC-32"),
        # zipfile's own check passes when one byte more is read: the count refuses it
        "declares half, with the CRC of one byte more": (n, zlib.crc32(data[:n + 1]), "it holds more"),
        "declares twice its size": (2 * len(data), zlib.crc32(data), f"it holds {len(data):,} bytes"),
    }


@pytest.mark.parametrize("case", list(_liars(b"xy", 1)))
def test_a_part_that_lies_about_its_size_is_refused(books, tmp_path, case):
    for name in ("xl/styles.xml", "xl/worksheets/sheet1.xml"):  # one copied untouched, one scanned
        path = tmp_path / "liar.xlsx"
        shutil.copyfile(books["dst"], path)
        data = _members(path)[name]
        size, crc, reason = _liars(data, len(data) // 2)[case]
        _patch_entry(path, name, size=size, crc=crc)
        check_package(path, verify=False)  # the directory alone cannot tell
        lie = (rf"^liar.xlsx: the part {name} does not unpack to the .* its zip directory declares "
               rf"\({reason}.*\); the file is damaged or was made to mislead, and is refused$")
        with pytest.raises(ValueError, match=lie):
            check_package(path)
        out = tmp_path / "out.xlsx"
        with pytest.raises(ValueError, match=lie):
            store_values(path, out, {(FIRST, "B3"): 1.0})
        assert not out.exists()
        assert dynamic_anchors(path) == (set() if name.endswith("sheet1.xml") else {(FIRST, "G2"), (SECOND, "C1")})


def test_a_part_holding_more_than_it_declares_is_read_no_further(books, tmp_path):
    # 100 MB behind a directory entry that declares the original sheet's few kilobytes
    path = tmp_path / "liar.xlsx"
    name = "xl/worksheets/sheet1.xml"
    real = _members(books["src"])[name]
    head = real[:real.index(b"</sheetData>")]
    body = [head, *_repeated(100 * 10**6), SHEET_TAIL]
    _copy_package(books["src"], path, replace={name: body})
    _patch_entry(path, name, size=len(real), crc=zlib.crc32(real))
    assert check_package(path, verify=False) < MiB
    # zipfile reading a member whole (as openpyxl reads every part) unpacks all it holds before
    # cutting it to the declared size: the hazard the verification pass of check_package removes
    with _traced() as mem, zipfile.ZipFile(path) as z, pytest.raises(zipfile.BadZipFile, match="Bad CRC-32"):
        z.read(name)
    assert mem["peak"] > 100 * 10**6
    declared = f"{len(real) / 1024:.1f}".removesuffix(".0") + " KB"
    lie = rf"^liar.xlsx: the part {name} does not unpack to the {declared} its zip directory declares \("
    for call in (check_package, lambda p: store_values(p, tmp_path / "out.xlsx", {(FIRST, "B3"): 1.0}),
                 dynamic_anchors, Workbook):
        with _traced() as mem:
            if call is dynamic_anchors:
                assert call(path) == set()
            else:
                with pytest.raises(RecalcError if call is Workbook else ValueError, match=lie):
                    call(path)
        assert mem["peak"] < 4 * MiB, (call, mem)  # read one chunk past the declared size, no further


def test_parts_read_whole_are_bounded(books, tmp_path, monkeypatch):
    monkeypatch.setattr(xlsxpost, "_MAX_WHOLE", 300)
    with pytest.raises(ValueError, match=r"^src.xlsx: the part _rels/.rels unpacks to 534 bytes; a part of this "
                                         r"kind is read whole and may hold at most 300 bytes$"):
        store_values(books["src"], tmp_path / "out.xlsx", {(FIRST, "B3"): 1.0})


@pytest.mark.parametrize("cut, match", [
    (b"</sheetData>", "ends inside its cell table"),
    (b"<sheetData>", r"not formula cells: Prices!B3;"),  # no cell table: no formula cells
])
def test_a_sheet_cut_short_is_refused(books, tmp_path, cut, match):
    path = tmp_path / "short.xlsx"
    name = "xl/worksheets/sheet1.xml"
    _copy_package(books["src"], path, replace={name: lambda data: data[:data.index(cut)]})
    with pytest.raises(ValueError, match=match):
        store_values(path, tmp_path / "out.xlsx", {(FIRST, "B3"): 1.0})
    assert not (tmp_path / "out.xlsx").exists()


@pytest.mark.parametrize("chunk", [1, 2, 7, 64, 1000])
def test_the_result_does_not_depend_on_the_chunk_size(books, tmp_path, monkeypatch, chunk):
    # tags, rows and the closing </sheetData> split across chunks at every position
    monkeypatch.setattr(xlsxpost, "_CHUNK", chunk)
    out = tmp_path / "out.xlsx"
    store_values(books["src"], out, VALUES, DYNAMIC)
    assert _members(out) == _members(books["dst"])
    assert dynamic_anchors(books["dst"]) == {(FIRST, "G2"), (SECOND, "C1")}
    with pytest.raises(ValueError, match=r"Prices!B4 holds a formula inside the spill range B3:B4"):
        store_values(books["src"], out.with_name("x.xlsx"), {}, {(FIRST, "B3"): "B3:B4"})


def test_a_sheet_is_held_a_row_at_a_time(tmp_path, monkeypatch):
    # A row without cells may be written self-closed, <row r="2" ht="20" customHeight="1"/>
    # (ECMA-376 Part 1, 18.3.1.73 row: its cells are optional; section number from memory), as
    # other writers than openpyxl do (common practice).  The blocks are cut where a row starts, so
    # 400 such rows never pile up, while one row larger than the bound is refused.
    built, src, out = tmp_path / "built.xlsx", tmp_path / "rows.xlsx", tmp_path / "out.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    for r in range(1, 400):
        ws.row_dimensions[r].height = 20
    ws["A400"] = "=1+1"
    ws["A401"] = "=" + "+".join(["1"] * 1500)  # one row of about 3 KB
    wb.save(built)
    _copy_package(built, src, replace={"xl/worksheets/sheet1.xml":
                                       lambda d: re.sub(rb"(<row [^>]*?) ?></row>", rb"\1/>", d)})
    raw = _members(src)["xl/worksheets/sheet1.xml"]
    assert raw.count(b"<row ") == 401 and b"</row>" not in raw[:raw.index(b'r="A400"')] and len(raw) > 10_000
    monkeypatch.setattr(xlsxpost, "_CHUNK", 64)
    monkeypatch.setattr(xlsxpost, "_MAX_WHOLE", 4000)  # above the long row, below the empty rows together
    store_values(src, out, {(ws.title, "A400"): 2})
    assert openpyxl.load_workbook(out, data_only=True).active["A400"].value == 2
    monkeypatch.setattr(xlsxpost, "_MAX_WHOLE", 2000)
    with pytest.raises(ValueError, match=r"^sheet 'Sheet' \(xl/worksheets/sheet1.xml\) holds a row of more than 2 KB"):
        store_values(src, out, {(ws.title, "A401"): 2})


BIG = "xl/worksheets/sheet99.xml"
BIG_ROWS = 700_000


@pytest.fixture(scope="module")
def big(books):
    """``dst`` with a third sheet, Big, of 1.4 million numbers (about 67 MiB unpacked, packed about
    five times as ordinary sheets are), its last cell marked as a dynamic-array anchor."""
    path = books["dir"] / "big.xlsx"

    def rows():
        yield SHEET_HEAD
        for start in range(1, BIG_ROWS + 1, 10_000):
            yield "".join(f'<row r="{r}"><c r="A{r}"><v>{r * 0.7071067811865476!r}</v></c>'
                          f'<c r="B{r}" s="1"><v>{r * 7919 % 10007}</v></c></row>'
                          for r in range(start, min(start + 10_000, BIG_ROWS + 1))).encode()
        last = BIG_ROWS + 1
        yield (f'<row r="{last}"><c r="C{last}" cm="1"><f t="array" ref="C{last}">A1</f><v>1</v></c></row>'
               ).encode()
        yield SHEET_TAIL

    rel = ('<Relationship Id="rId99" Type="http://schemas.openxmlformats.org/officeDocument/2006/'
           'relationships/worksheet" Target="worksheets/sheet99.xml"/></Relationships>').encode()
    ct = ('<Override PartName="/xl/worksheets/sheet99.xml" ContentType="application/vnd.openxmlformats-'
          'officedocument.spreadsheetml.worksheet+xml"/></Types>').encode()
    _copy_package(books["dst"], path, add={BIG: rows()}, replace={
        "xl/workbook.xml": lambda d: d.replace(b"</sheets>", b'<sheet name="Big" sheetId="99" r:id="rId99"/></sheets>'),
        "xl/_rels/workbook.xml.rels": lambda d: d.replace(b"</Relationships>", rel),
        "[Content_Types].xml": lambda d: d.replace(b"</Types>", ct)})
    return path


def test_the_big_sheet_is_what_the_memory_checks_need(big):
    with zipfile.ZipFile(big) as z:
        info = z.getinfo(BIG)
    assert info.file_size > 64 * MiB and info.file_size < 10 * info.compress_size


def test_store_values_streams_an_untouched_part(big, tmp_path):
    # The part is copied a chunk at a time: the peak is a few chunks (256 KiB each) and zlib's
    # state (about 256 KiB to deflate and 40 KiB to inflate with the default settings; zconf.h,
    # from memory); 1.6 to 2.5 MiB was measured here.  8 MiB bounds that with room to spare and is
    # an eighth of the part, which a whole read would hold at least once.
    out = tmp_path / "big.out.xlsx"
    with _traced() as mem:
        store_values(big, out, {(FIRST, "B3"): 1.0}, {(FIRST, "G2"): "G2:H4"})
    assert mem["peak"] < 8 * MiB, mem
    with zipfile.ZipFile(big) as a, zipfile.ZipFile(out) as b:
        old, new = a.getinfo(BIG), b.getinfo(BIG)
        assert [i.filename for i in b.infolist()] == [i.filename for i in a.infolist()]
    assert (new.file_size, new.CRC, new.compress_type) == (old.file_size, old.CRC, old.compress_type)
    assert _member_digest(out, BIG) == _member_digest(big, BIG)
    with zipfile.ZipFile(out) as z:  # not through openpyxl, which would load the 1.4 million cells
        assert _cell(ET.fromstring(z.read("xl/worksheets/sheet1.xml")), "B3").findtext(f"{MAIN}v") == "1.0"


def test_a_big_sheet_is_edited_and_scanned_a_few_rows_at_a_time(big, tmp_path):
    last = BIG_ROWS + 1
    with _traced() as mem:
        found = dynamic_anchors(big)
    assert found == {(FIRST, "G2"), (SECOND, "C1"), ("Big", f"C{last}")}  # the last cell of 67 MiB
    assert mem["peak"] < 8 * MiB, mem
    out = tmp_path / "edited.xlsx"
    with _traced() as mem:
        store_values(big, out, {("Big", f"C{last}"): 2.5})
    assert mem["peak"] < 8 * MiB, mem
    with zipfile.ZipFile(out) as z, z.open(BIG) as fh:
        fh.seek(z.getinfo(BIG).file_size - 200)
        tail = fh.read().decode()
    assert f'<c r="C{last}" cm="1"><f t="array" ref="C{last}">A1</f><v>2.5</v></c></row></sheetData>' in tail
    with zipfile.ZipFile(big) as a, zipfile.ZipFile(out) as b:
        assert b.getinfo(BIG).file_size == a.getinfo(BIG).file_size + 2  # only <v>1</v> became <v>2.5</v>


# ----------------------------------------------------------------------------- LibreOffice

SOFFICE = shutil.which("soffice")


@pytest.mark.skipif(SOFFICE is None, reason="LibreOffice (soffice) is not on PATH")
def test_libreoffice_shows_the_stored_numbers(books, tmp_path):
    # LibreOffice converts the first sheet to CSV as it displays it.  A private, fresh profile keeps
    # its default of not recalculating .xlsx files on load, so D2, whose function LibreOffice does
    # not know, shows the stored number.  Only numbers and text are checked: LibreOffice 7.4
    # recomputes on load the formulas whose stored value is a boolean or an error, and all array
    # formulas (observed here, so C3, C5 and the spill G2:H4 are not checked), and trims the
    # spaces around stored text.
    profile = (tmp_path / "profile").as_uri()
    run = subprocess.run([SOFFICE, f"-env:UserInstallation={profile}", "--headless", "--convert-to", "csv",
                          "--outdir", str(tmp_path), str(books["dst"])],
                         capture_output=True, text=True, timeout=180)
    csv_path = tmp_path / "dst.csv"
    assert csv_path.exists(), run.stdout + run.stderr
    with open(csv_path, newline="", encoding="utf-8", errors="replace") as fh:
        rows = list(csv.reader(fh))
    assert [float(rows[i][0]) for i in range(1, 6)] == PRICES
    assert [float(rows[i][1]) for i in range(2, 6)] == pytest.approx(LOGRET, abs=5e-4)  # any number format
    assert float(rows[1][3]) == -12.5
    assert float(rows[1][4]) == 200.0
    assert rows[1][2].strip() == TEXT.strip()
    assert [float(rows[i][5]) for i in range(2, 6)] == pytest.approx(FLOATS[1:5], rel=1e-12)
