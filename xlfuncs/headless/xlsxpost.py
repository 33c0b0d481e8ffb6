"""Store computed values beside the formulas of a saved .xlsx package, and mark dynamic arrays.

openpyxl cannot write a formula together with its cached value: a formula cell comes out as
``<c r="B3"><f>LN(B3/B2)*100</f><v></v></c>``, so openpyxl with ``data_only=True``, a spreadsheet
application that does not recalculate on load, or Excel without the add-in shows nothing.  This
module edits the XML of such a package; every other part is copied unchanged.

=========================  ====================================================================
:func:`store_values`       copy a package, storing each formula's value and marking spilled anchors
:func:`dynamic_anchors`    the cells of a package that carry dynamic-array cell metadata
:class:`ExcelError`        an error value to store, such as ``ExcelError("#N/A")``
``ERROR_LITERALS``         the error literals a cell can hold
=========================  ====================================================================

How a value is stored (ECMA-376 Part 1, 18.3.1.4 ``c``, 18.3.1.96 ``v``, 18.18.11 ``ST_CellType``):

=======================  ==========================  ==========================
value                    ``<c>`` type attribute      ``<v>`` text
=======================  ==========================  ==========================
``int``, ``float``       none (a number)             shortest round-trip repr
``str``                  ``t="str"`` (formula text)  the text, XML-escaped
``bool``                 ``t="b"``                   ``1`` or ``0``
:class:`ExcelError`      ``t="e"``                   the literal, ``#N/A``
``None``                 none                        no ``<v>`` at all
=======================  ==========================  ==========================

A spilled result is marked as Excel 365 stores it (the published MS-XLSX extension for dynamic
arrays): the anchor's ``<f>`` is an array formula over the spill range and its ``<c>`` carries
``cm="1"``, the first cell-metadata block, which names ``XLDAPR`` future metadata with
``xda:dynamicArrayProperties fDynamic="1"``.  The part ``xl/metadata.xml`` holding that block is
added once, with its content-type override and its workbook relationship.  ``fullCalcOnLoad`` is
dropped from ``<calcPr>``, so the copy no longer asks to be recomputed on load.

What readers make of the stored values is theirs to decide.  LibreOffice 7.4, with its default of
not recalculating .xlsx files on load, shows stored numbers and text (trimming the spaces around
text) but recomputes array formulas and formulas whose stored value is a boolean or an error, so
a spill of one of our functions shows ``#NAME?`` there (observed).  The ``calcId`` that openpyxl
writes is kept as it is.

>>> ExcelError("#N/A")
ExcelError('#N/A')
>>> str(ExcelError("#DIV/0!"))
'#DIV/0!'

The editing is done on the text of the parts, on the regular, unprefixed XML that openpyxl
writes; parts are read with :mod:`xml.etree.ElementTree` only to look things up, never written
back through it, so no namespace prefix is renamed and nothing else in a part moves.
"""

from __future__ import annotations

import math
import numbers
import os
import posixpath
import re
import tempfile
import zipfile
import xml.etree.ElementTree as ET
from pathlib import Path

__all__ = ["ERROR_LITERALS", "ExcelError", "dynamic_anchors", "store_values"]

#: The error values a cell can hold (ECMA-376 Part 1, 18.18.11 ``e``; #SPILL! and #CALC! are the
#: dynamic-array additions).
ERROR_LITERALS = ("#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A", "#SPILL!", "#CALC!")

_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_XDA = "http://schemas.microsoft.com/office/spreadsheetml/2017/dynamicarray"
_DA_EXT_URI = "{bdbb8cdc-fa1e-496e-a857-3c3f30c029c3}"
_PKG_RELS = "http://schemas.openxmlformats.org/package/2006/relationships"
_CT = "http://schemas.openxmlformats.org/package/2006/content-types"
_REL_DOC = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_OFFICE_DOC = _REL_DOC + "/officeDocument"
_META_REL = _REL_DOC + "/sheetMetadata"
_META_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheetMetadata+xml"

_METADATA_XML = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    f'<metadata xmlns="{_MAIN}" xmlns:xda="{_XDA}">'
    '<metadataTypes count="1"><metadataType name="XLDAPR" minSupportedVersion="120000" copy="1"'
    ' pasteAll="1" pasteValues="1" merge="1" splitFirst="1" rowColShift="1" clearFormats="1"'
    ' clearComments="1" assign="1" coerce="1" cellMeta="1"/></metadataTypes>'
    f'<futureMetadata name="XLDAPR" count="1"><bk><extLst><ext uri="{_DA_EXT_URI}">'
    '<xda:dynamicArrayProperties fDynamic="1" fCollapsed="0"/></ext></extLst></bk></futureMetadata>'
    '<cellMetadata count="1"><bk><rc t="1" v="0"/></bk></cellMetadata>'
    "</metadata>"
).encode("utf-8")

_MAX_TEXT = 32767  # characters a cell's text may hold (Excel's specification limits, from memory)
_MAX_ROW, _MAX_COL = 1048576, 16384


class ExcelError:
    """An Excel error value to store in a formula cell (``t="e"``), e.g. ``ExcelError("#N/A")``."""

    __slots__ = ("_code",)

    def __init__(self, code: str):
        if code not in ERROR_LITERALS:
            raise ValueError(f"{code!r} is not an Excel error literal; use one of {', '.join(ERROR_LITERALS)}")
        object.__setattr__(self, "_code", code)

    @property
    def code(self) -> str:
        """The literal, such as ``#N/A``."""
        return self._code

    def __setattr__(self, name, value):
        raise AttributeError("ExcelError is immutable")

    def __eq__(self, other):
        return isinstance(other, ExcelError) and other.code == self.code

    def __hash__(self):
        return hash((ExcelError, self.code))

    def __reduce__(self):
        return ExcelError, (self.code,)

    def __repr__(self):
        return f"ExcelError({self.code!r})"

    def __str__(self):
        return self.code


# ----------------------------------------------------------------------------- cell references
_REF_RE = re.compile(r"\$?([A-Za-z]{1,3})\$?([0-9]{1,7})")


def _parse_ref(text) -> tuple[int, int]:
    """(row, column) of an A1 reference such as ``B3`` or ``$B$3``; ValueError if it is not one."""
    m = _REF_RE.fullmatch(text) if isinstance(text, str) else None
    if not m:
        raise ValueError(f"{text!r} is not a cell reference such as 'B3'")
    col = 0
    for ch in m.group(1).upper():
        col = col * 26 + ord(ch) - 64
    row = int(m.group(2))
    if not (1 <= row <= _MAX_ROW and 1 <= col <= _MAX_COL):
        raise ValueError(f"{text!r} lies outside the sheet (rows 1 to {_MAX_ROW}, columns A to XFD)")
    return row, col


def _ref_name(row: int, col: int) -> str:
    letters = ""
    while col:
        col, rem = divmod(col - 1, 26)
        letters = chr(65 + rem) + letters
    return f"{letters}{row}"


def _norm_ref(text) -> str:
    return _ref_name(*_parse_ref(text))


def _parse_range(anchor: str, text) -> tuple[str, tuple[int, int, int, int]]:
    """The canonical spill range and its bounds; the range must start at ``anchor``."""
    if not isinstance(text, str):
        raise ValueError(f"the spill range of {anchor} must be text such as '{anchor}:{anchor}', got {text!r}")
    first, sep, last = text.partition(":")
    r1, c1 = _parse_ref(first)
    r2, c2 = _parse_ref(last) if sep else (r1, c1)
    if (r1, c1) != _parse_ref(anchor):
        raise ValueError(f"the spill range {text!r} does not start at its anchor {anchor}")
    if r2 < r1 or c2 < c1:
        raise ValueError(f"the spill range {text!r} runs backwards; give it as top-left:bottom-right")
    ref = _ref_name(r1, c1) if (r1, c1) == (r2, c2) else f"{_ref_name(r1, c1)}:{_ref_name(r2, c2)}"
    return ref, (r1, c1, r2, c2)


# ----------------------------------------------------------------------------- values
_ILLEGAL_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def _xml_text(text: str) -> str:
    """Text escaped for element content; a carriage return survives XML line-end handling."""
    return (text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
            .replace('"', "&quot;").replace("'", "&apos;").replace("\r", "&#13;"))


def _encode_value(where: str, value) -> tuple[str | None, str | None]:
    """(type attribute or None, ``<v>`` text or None) for one value; ValueError if it cannot be stored."""
    if value is None:
        return None, None
    if isinstance(value, ExcelError):
        return "e", value.code
    if isinstance(value, bool) or getattr(getattr(value, "dtype", None), "kind", None) == "b":
        return "b", "1" if value else "0"
    if isinstance(value, numbers.Integral):
        try:
            finite = math.isfinite(float(value))
        except OverflowError:
            finite = False
        if not finite:
            raise ValueError(f"{where}: {value!r} is too large for a cell; a cell holds a double")
        return None, str(int(value))
    if isinstance(value, numbers.Real):
        x = float(value)
        if not math.isfinite(x):
            raise ValueError(f"{where}: {value!r} cannot be stored in a cell; "
                             "store an error such as ExcelError('#NUM!') instead")
        return None, float.__repr__(x)
    if isinstance(value, str):
        bad = _ILLEGAL_XML.search(value)
        if bad:
            raise ValueError(f"{where}: the text holds the character {bad.group()!r} (code "
                             f"{ord(bad.group())}), which an .xlsx file cannot carry")
        if len(value) > _MAX_TEXT:
            raise ValueError(f"{where}: the text is {len(value)} characters long; a cell holds at most {_MAX_TEXT}")
        return "str", _xml_text(value)
    raise ValueError(f"{where}: cannot store a value of type {type(value).__name__}; "
                    "give a number, text, True/False, None or an ExcelError")


# ----------------------------------------------------------------------------- package lookups
def _parse_xml(name: str, data: bytes) -> ET.Element:
    try:
        return ET.fromstring(data)
    except ET.ParseError as exc:
        raise ValueError(f"part {name} of the package is not well-formed XML ({exc})") from None


def _rels_name(part: str) -> str:
    head, tail = posixpath.split(part)
    return posixpath.join(head, "_rels", tail + ".rels")


def _resolve(source_part: str, target: str) -> str:
    """The zip member a relationship target names (ECMA-376 Part 2, part names; from memory)."""
    if target.startswith("/"):
        return posixpath.normpath(target.lstrip("/"))
    return posixpath.normpath(posixpath.join(posixpath.dirname(source_part), target))


def _relationships(members: dict, part: str) -> list[dict]:
    name = _rels_name(part)
    if name not in members:
        return []
    root = _parse_xml(name, members[name])
    return [dict(r.attrib) for r in root.findall(f"{{{_PKG_RELS}}}Relationship")]


def _workbook_part(members: dict) -> str:
    for rel in _relationships(members, ""):
        if rel.get("Type") == _OFFICE_DOC and rel.get("TargetMode") != "External":
            part = _resolve("", rel.get("Target", ""))
            if part in members:
                return part
    raise ValueError("the package has no workbook part (no officeDocument relationship in _rels/.rels)")


def _sheet_parts(members: dict, wb_part: str) -> dict[str, str]:
    """Sheet title -> zip member of its part, through the workbook's r:id relationships."""
    targets = {r.get("Id"): _resolve(wb_part, r.get("Target", "")) for r in _relationships(members, wb_part)
               if r.get("TargetMode") != "External"}
    root = _parse_xml(wb_part, members[wb_part])
    out = {}
    for sheet in root.iter(f"{{{_MAIN}}}sheet"):
        rid = sheet.get(f"{{{_REL_DOC}}}id")
        if rid in targets:
            out[sheet.get("name")] = targets[rid]
    return out


def _dynamic_cm_indices(name: str, data: bytes) -> set[int]:
    """The one-based ``cm`` values that denote a dynamic array in this metadata part.

    ``cm`` indexes ``cellMetadata`` blocks from 1; a block's ``rc t`` indexes ``metadataTypes``
    from 1 and ``rc v`` the future-metadata blocks of that type from 0 (ECMA-376 Part 1, 18.9
    Metadata; MS-XLSX dynamic-array properties; indexing from memory).
    """
    root = _parse_xml(name, data)
    m = f"{{{_MAIN}}}"
    types = [t.get("name") for t in root.findall(f"{m}metadataTypes/{m}metadataType")]
    future = {f.get("name"): f.findall(f"{m}bk") for f in root.findall(f"{m}futureMetadata")}
    found = set()
    for index, bk in enumerate(root.findall(f"{m}cellMetadata/{m}bk"), start=1):
        for rc in bk.findall(f"{m}rc"):
            try:
                t, v = int(rc.get("t", "")), int(rc.get("v", ""))
            except ValueError:
                continue
            if not (1 <= t <= len(types)) or types[t - 1] != "XLDAPR":
                continue
            blocks = future.get("XLDAPR", [])
            if 0 <= v < len(blocks):
                props = blocks[v].find(f".//{{{_XDA}}}dynamicArrayProperties")
                if props is not None and props.get("fDynamic") in ("1", "true"):
                    found.add(index)
    return found


# ----------------------------------------------------------------------------- sheet editing
_ATTR_RE = re.compile(r"""([A-Za-z_][\w.:-]*)\s*=\s*(?:"([^"]*)"|'([^']*)')""")
_SHEET_DATA_RE = re.compile(r"<sheetData\b[^>]*?(?:/>|>(.*?)</sheetData>)", re.S)
_CELL_RE = re.compile(r"<c(?=[\s/>])([^>]*?)(?:/>|>(.*?)</c>)", re.S)
_F_RE = re.compile(r"<f(?=[\s/>])([^>]*?)(?:/>|>(.*?)</f>)", re.S)
_V_RE = re.compile(r"<v(?=[\s/>])[^>]*?(?:/>|>.*?</v>)", re.S)
_IS_RE = re.compile(r"<is(?=[\s/>])[^>]*?(?:/>|>.*?</is>)", re.S)
_ROOT_RE = re.compile(r"<worksheet\b[^>]*\sxmlns\s*=\s*[\"']" + re.escape(_MAIN) + "[\"']")


def _attrs(text: str) -> dict[str, str]:
    """Attributes in document order, values as written (still escaped)."""
    out = {}
    for m in _ATTR_RE.finditer(text):
        raw = m.group(2) if m.group(2) is not None else m.group(3)
        out[m.group(1)] = raw.replace('"', "&quot;")
    return out


def _attrs_text(attrs: dict[str, str]) -> str:
    return "".join(f' {k}="{v}"' for k, v in attrs.items())


def _edit_sheet(title: str, part: str, xml: str, values: dict, dynamic: dict) -> tuple[str, set]:
    """The sheet XML with ``values`` stored and ``dynamic`` anchors marked; also the cells not found.

    ``values`` maps "B3" to an encoded (type, text) pair; ``dynamic`` maps "E2" to (ref, bounds).
    """
    if not _ROOT_RE.search(xml):
        raise ValueError(f"sheet {title!r} ({part}) is not SpreadsheetML in the unprefixed form openpyxl "
                         "writes; save the workbook with openpyxl first")
    data = _SHEET_DATA_RE.search(xml)
    if data is None or data.group(1) is None:
        return xml, set(values) | set(dynamic)
    done: set = set()
    formula_cells: list = []

    def edit(m: re.Match) -> str:
        inner = m.group(2)
        fm = _F_RE.search(inner) if inner else None
        attrs = _attrs(m.group(1))
        ref = attrs.get("r", "").upper()
        if fm is None:
            return m.group(0)
        formula_cells.append(ref)
        if ref not in values and ref not in dynamic:
            return m.group(0)
        done.add(ref)
        f_xml = fm.group(0)
        rest = inner[:fm.start()] + inner[fm.end():]
        if ref in dynamic:
            f_attrs = _attrs(fm.group(1))
            kind = f_attrs.get("t", "normal")
            if kind not in ("normal", "array"):
                raise ValueError(f"{title}!{ref} holds a {kind} formula; only an ordinary or array formula "
                                 "can anchor a dynamic array")
            f_attrs.pop("t", None)
            f_attrs.pop("ref", None)
            f_attrs = {"t": "array", "ref": dynamic[ref][0], **f_attrs}
            body = fm.group(2)
            f_xml = f"<f{_attrs_text(f_attrs)}/>" if body is None else f"<f{_attrs_text(f_attrs)}>{body}</f>"
            attrs["cm"] = "1"
        v_xml = ""
        if ref in values:
            rest = _IS_RE.sub("", _V_RE.sub("", rest))
            kind, text = values[ref]
            attrs.pop("t", None)
            if kind is not None:
                attrs = _with_type(attrs, kind)
            if text is not None:
                v_xml = f"<v>{text}</v>"
        else:
            existing = _V_RE.search(rest)
            if existing:
                rest = rest[:existing.start()] + rest[existing.end():]
                v_xml = existing.group(0)
        return f"<c{_attrs_text(attrs)}>{f_xml}{v_xml}{rest}</c>"

    body = _CELL_RE.sub(edit, data.group(1))
    if dynamic:
        by_row: dict = {}
        for cell in formula_cells:
            if _REF_RE.fullmatch(cell):
                row, col = _parse_ref(cell)
                by_row.setdefault(row, []).append(col)
        for anchor, (ref, (r1, c1, r2, c2)) in dynamic.items():
            for row in range(r1, r2 + 1) if r2 - r1 < len(by_row) else sorted(by_row):
                if not r1 <= row <= r2:
                    continue
                for col in by_row.get(row, ()):
                    cell = _ref_name(row, col)
                    if c1 <= col <= c2 and cell != anchor:
                        raise ValueError(f"{title}!{cell} holds a formula inside the spill range {ref} of "
                                         f"{title}!{anchor}; the spilled cells must hold plain values")
    start, end = data.span(1)
    return xml[:start] + body + xml[end:], (set(values) | set(dynamic)) - done


def _with_type(attrs: dict, kind: str) -> dict:
    """Attributes with ``t`` placed after ``r`` and ``s``, where the schema lists it."""
    out = {}
    placed = False
    for k, v in attrs.items():
        if not placed and k not in ("r", "s"):
            out["t"] = kind
            placed = True
        out[k] = v
    if not placed:
        out["t"] = kind
    return out


# ----------------------------------------------------------------------------- package parts
_CALCPR_RE = re.compile(r"<calcPr\b[^>]*>")
_FULLCALC_RE = re.compile(r"""\s+fullCalcOnLoad\s*=\s*(["'])(?:1|true)\1""")


def _drop_full_calc(xml: str) -> str:
    return _CALCPR_RE.sub(lambda m: _FULLCALC_RE.sub("", m.group(0)), xml)


def _insert_before_close(name: str, xml: str, tag: str, element: str) -> str:
    close = f"</{tag}>"
    at = xml.rfind(close)
    if at < 0:
        raise ValueError(f"part {name} has no closing </{tag}> to add to")
    return xml[:at] + element + xml[at:]


def _ensure_metadata(members: dict, wb_part: str, changed: dict) -> None:
    """Add the dynamic-array metadata part, its content type and its relationship where missing."""
    rels_name = _rels_name(wb_part)
    if rels_name not in members:
        raise ValueError(f"the package has no {rels_name}")
    rels = _relationships(members, wb_part)
    meta = [r for r in rels if r.get("Type") == _META_REL]
    if len(meta) > 1:
        raise ValueError(f"{rels_name} names {len(meta)} metadata parts; a workbook has at most one")
    if meta:
        part = _resolve(wb_part, meta[0].get("Target", ""))
    else:
        part = posixpath.join(posixpath.dirname(wb_part), "metadata.xml")
        ids = {r.get("Id") for r in rels}
        n = 1 + max((int(i[3:]) for i in ids if i and re.fullmatch(r"rId\d+", i)), default=0)
        while f"rId{n}" in ids:
            n += 1
        target = posixpath.relpath(part, posixpath.dirname(wb_part) or ".")
        element = f'<Relationship Id="rId{n}" Type="{_META_REL}" Target="{target}"/>'
        changed[rels_name] = _insert_before_close(
            rels_name, members[rels_name].decode("utf-8"), "Relationships", element).encode("utf-8")

    if part in members:
        if 1 not in _dynamic_cm_indices(part, members[part]):
            raise ValueError(f"the package already holds cell metadata ({part}) whose first block is not a "
                             "dynamic array, so cm=\"1\" cannot mark one; store values in a copy openpyxl "
                             "has just saved")
    else:
        changed[part] = _METADATA_XML

    ct_name = "[Content_Types].xml"
    if ct_name not in members:
        raise ValueError("the package has no [Content_Types].xml")
    ct = _parse_xml(ct_name, members[ct_name])
    overrides = [o for o in ct.findall(f"{{{_CT}}}Override")
                 if o.get("PartName", "").lower() == "/" + part.lower()]
    if any(o.get("ContentType") != _META_TYPE for o in overrides):
        raise ValueError(f"[Content_Types].xml gives /{part} a content type other than {_META_TYPE}")
    if not overrides:
        element = f'<Override PartName="/{part}" ContentType="{_META_TYPE}"/>'
        changed[ct_name] = _insert_before_close(
            ct_name, members[ct_name].decode("utf-8"), "Types", element).encode("utf-8")


def _check_keys(mapping: dict, name: str, titles: dict) -> dict:
    """{sheet title: {canonical ref: item}} from {(title, ref): item}, with ValueErrors for bad keys."""
    out: dict = {}
    for key, item in mapping.items():
        if not (isinstance(key, tuple) and len(key) == 2 and isinstance(key[0], str)):
            raise ValueError(f"{name} keys must be (sheet title, 'B3') pairs, got {key!r}")
        sheet, ref = key
        if sheet not in titles:
            near = [t for t in titles if t.lower() == sheet.lower()]
            hint = f"; did you mean {near[0]!r}?" if near else f"; the sheets are {', '.join(map(repr, titles))}"
            raise ValueError(f"{name}: the workbook has no sheet named {sheet!r}{hint}")
        cell = _norm_ref(ref)
        if cell in out.setdefault(sheet, {}):
            raise ValueError(f"{name} names {sheet}!{cell} twice")
        out[sheet][cell] = item
    return out


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _write_zip(src: zipfile.ZipFile, dst: Path, changed: dict) -> None:
    """Copy every member in order with its compression, replacing changed ones; new ones at the end."""
    infos = src.infolist()
    names = {i.filename for i in infos}
    like = next((i for i in infos if i.filename.endswith(".xml")), infos[0] if infos else None)
    fd, tmp = tempfile.mkstemp(suffix=".xlsx", prefix=".xlsxpost-", dir=dst.parent)
    os.close(fd)
    try:
        with zipfile.ZipFile(tmp, "w") as out:
            for info in infos:
                copy = zipfile.ZipInfo(info.filename, info.date_time)
                copy.compress_type = info.compress_type
                copy.external_attr = info.external_attr
                copy.create_system = info.create_system
                copy.comment = info.comment
                data = changed.get(info.filename)
                out.writestr(copy, src.read(info.filename) if data is None else data)
            for name, data in changed.items():
                if name not in names:
                    new = zipfile.ZipInfo(name, like.date_time if like else (1980, 1, 1, 0, 0, 0))
                    new.compress_type = zipfile.ZIP_DEFLATED
                    new.external_attr = like.external_attr if like else 0o600 << 16
                    out.writestr(new, data)
            out.comment = src.comment
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes the file private; give it the usual mode
        os.replace(tmp, dst)
    except BaseException:
        if os.path.exists(tmp):
            os.remove(tmp)
        raise


# ----------------------------------------------------------------------------- public functions
def store_values(src: str | Path, dst: str | Path, values: dict, dynamic: dict | None = None) -> None:
    """Copy the package ``src`` to ``dst`` with each formula's value stored beside it.

    ``values`` maps (sheet title, "B3") of a formula cell to its value: a float or int, a str, a
    bool, ``None`` (no stored value) or an :class:`ExcelError`.  ``dynamic`` maps (sheet title,
    "E2") of the anchor of a spilled result to its spill range "E2:I20"; the anchor becomes an
    array formula over that range marked as a dynamic array.  ``fullCalcOnLoad`` is removed from
    the workbook's calculation properties.  ``src`` is never changed; ``dst`` is written through a
    temporary file beside it and renamed into place.

    Raises ValueError for a value that cannot be stored (nan, infinities), an unknown sheet, a bad
    reference, a cell that holds no formula (write plain values with openpyxl instead), or a
    spill range that does not start at its anchor or covers another formula, and for a value of
    another type (a list, a date).  Nothing is written when it raises.
    """
    src, dst = Path(src), Path(dst)
    if dst.resolve() == src.resolve() or (dst.exists() and os.path.samefile(src, dst)):
        raise ValueError(f"{dst}: refusing to write over the input; choose another output path")
    dynamic = dynamic or {}
    encoded = {key: _encode_value(f"value for {key[0]}!{key[1]}" if isinstance(key, tuple) and len(key) == 2
                                  else f"value for {key!r}", v)
               for key, v in values.items()}
    try:
        z = zipfile.ZipFile(src)
    except zipfile.BadZipFile:
        raise ValueError(f"{src.name} is not an .xlsx package (not a zip archive)") from None
    with z:
        members = {i.filename: z.read(i.filename) for i in z.infolist() if not i.is_dir()}
        wb_part = _workbook_part(members)
        parts = _sheet_parts(members, wb_part)
        by_sheet = _check_keys(encoded, "values", parts)
        spills = {sheet: {anchor: _parse_range(anchor, ref) for anchor, ref in cells.items()}
                  for sheet, cells in _check_keys(dynamic, "dynamic", parts).items()}
        changed: dict = {}
        missing = []
        for title in sorted(set(by_sheet) | set(spills), key=list(parts).index):
            part = parts[title]
            if part not in members:
                raise ValueError(f"sheet {title!r} names the part {part}, which the package lacks")
            xml = members[part].decode("utf-8")
            new, absent = _edit_sheet(title, part, xml, by_sheet.get(title, {}), spills.get(title, {}))
            missing += [f"{title}!{ref}" for ref in sorted(absent, key=_parse_ref)]
            changed[part] = new.encode("utf-8")
        if missing:
            shown = ", ".join(missing[:10]) + (f" and {len(missing) - 10} more" if len(missing) > 10 else "")
            raise ValueError(f"not formula cells: {shown}; write plain values through openpyxl instead")
        wb_xml = members[wb_part].decode("utf-8")
        calc = _drop_full_calc(wb_xml)
        if calc != wb_xml:
            changed[wb_part] = calc.encode("utf-8")
        if spills:
            _ensure_metadata(members, wb_part, changed)
        _write_zip(z, dst, changed)


def dynamic_anchors(path: str | Path) -> set[tuple[str, str]]:
    """(sheet title, "E2") of every cell whose cell metadata marks a dynamic-array anchor.

    An unreadable package, or one without dynamic-array metadata, gives an empty set.
    """
    found: set = set()
    try:
        with zipfile.ZipFile(path) as z:
            members = {i.filename: z.read(i.filename) for i in z.infolist() if not i.is_dir()}
        wb_part = _workbook_part(members)
        meta = [_resolve(wb_part, r.get("Target", "")) for r in _relationships(members, wb_part)
                if r.get("Type") == _META_REL]
        if not meta or meta[0] not in members:
            return found
        marks = {str(i) for i in _dynamic_cm_indices(meta[0], members[meta[0]])}
        if not marks:
            return found
        for title, part in _sheet_parts(members, wb_part).items():
            xml = members.get(part, b"").decode("utf-8")
            for m in re.finditer(r"<c(?=[\s/>])([^>]*?)/?>", xml):
                attrs = _attrs(m.group(1))
                if attrs.get("cm") in marks and attrs.get("r"):
                    found.add((title, attrs["r"].upper()))
    except (zipfile.BadZipFile, OSError, ValueError, UnicodeDecodeError):
        return set()
    return found
