"""Storing formula values beside their formulas in an .xlsx package (xlfuncs.headless.xlsxpost).

Workbooks are built with openpyxl, post-processed, and read back with openpyxl and, where it is
installed, LibreOffice.  The cell contents are round-trip payloads, not model data.  Each check
names the part of the file format it relies on: ECMA-376 Part 1 (SpreadsheetML) and Part 2 (Open
Packaging Conventions), and the MS-XLSX extension for dynamic arrays.  Section numbers marked
"from memory" were not checked against the text.
"""

import csv
import hashlib
import math
import shutil
import subprocess
import zipfile
import xml.etree.ElementTree as ET

import openpyxl
import pytest
from openpyxl.styles import Font
from openpyxl.worksheet.formula import ArrayFormula

from xlfuncs.headless import xlsxpost
from xlfuncs.headless.xlsxpost import ERROR_LITERALS, ExcelError, dynamic_anchors, store_values

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
    assert set(xlsxpost.__all__) == {"ERROR_LITERALS", "ExcelError", "dynamic_anchors", "store_values"}


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
