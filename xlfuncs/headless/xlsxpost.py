"""Store computed values beside the formulas of an .xlsx package, and mark dynamic arrays.

openpyxl writes a formula cell as ``<c r="B3"><f>LN(B3/B2)*100</f><v></v></c>`` with no cached
value, so a spreadsheet application that does not recalculate (or openpyxl with
``data_only=True``) shows nothing.  :func:`store_values` copies the package and, in the sheet
parts only, puts each formula's value in its ``<v>`` with the matching cell type (ECMA-376 Part 1,
18.3.1.4 ``c``; 18.18.11 ``ST_CellType``: ``str`` for a formula's text, ``b``, ``e``).  Anchors
of spilled results get ``cm="1"`` pointing at the dynamic-array cell metadata of the published
MS-XLSX extension (``XLDAPR``, ``xda:dynamicArrayProperties fDynamic="1"``), whose part
``xl/metadata.xml`` is added with its content type and workbook relationship.  Full
recalculation on load is switched off, so a workbook opened without the add-in keeps the stored
values instead of showing ``#NAME?``.
"""

from __future__ import annotations

import math
import re
import zipfile
from html import escape, unescape
from pathlib import Path

__all__ = ["ExcelError", "store_values", "dynamic_anchors"]

_ERRORS = ("#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A", "#SPILL!", "#CALC!")
_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_META_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheetMetadata+xml"
_META_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/sheetMetadata"
_METADATA = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    f'<metadata xmlns="{_MAIN}" xmlns:xda="http://schemas.microsoft.com/office/spreadsheetml/2017/dynamicarray">'
    '<metadataTypes count="1"><metadataType name="XLDAPR" minSupportedVersion="120000" copy="1" pasteAll="1" '
    'pasteValues="1" merge="1" splitFirst="1" rowColShift="1" clearFormats="1" clearComments="1" assign="1" '
    'coerce="1" cellMeta="1"/></metadataTypes>'
    '<futureMetadata name="XLDAPR" count="1"><bk><extLst><ext uri="{bdbb8cdc-fa1e-496e-a857-3c3f30c029c3}">'
    '<xda:dynamicArrayProperties fDynamic="1" fCollapsed="0"/></ext></extLst></bk></futureMetadata>'
    '<cellMetadata count="1"><bk><rc t="1" v="0"/></bk></cellMetadata></metadata>'
)


class ExcelError:
    """An Excel error value to store (t="e")."""

    def __init__(self, code: str):
        if code not in _ERRORS:
            raise ValueError(f"not an Excel error literal: {code!r}")
        self.code = code

    def __repr__(self):
        return f"ExcelError({self.code!r})"


_CELL_RE = re.compile(r"<c\b([^>]*?)(/>|>(.*?)</c>)", re.S)
_ATTR_R = re.compile(r'\br="([A-Z]+[0-9]+)"')


def _sheet_parts(z: zipfile.ZipFile) -> dict:
    wb = z.read("xl/workbook.xml").decode("utf-8")
    rels = z.read("xl/_rels/workbook.xml.rels").decode("utf-8")
    targets = {}
    for m in re.finditer(r"<Relationship\b([^>]*)/?>", rels):
        a = m.group(1)
        rid = re.search(r'\bId="([^"]+)"', a)
        tgt = re.search(r'\bTarget="([^"]+)"', a)
        if rid and tgt:
            t = tgt.group(1)
            t = t.lstrip("/") if t.startswith("/") else "xl/" + t
            targets[rid.group(1)] = t
    out = {}
    for m in re.finditer(r"<sheet\b([^>]*)/>", wb):
        a = m.group(1)
        name = re.search(r'\bname="([^"]*)"', a).group(1)
        rid = re.search(r'\br:id="([^"]+)"', a) or re.search(r'\b\w+:id="([^"]+)"', a)
        out[unescape(name)] = targets[rid.group(1)]
    return out


def _value_xml(value):
    """(type attribute or None, <v> text) for a value."""
    if isinstance(value, ExcelError):
        return "e", value.code
    if isinstance(value, bool):
        return "b", "1" if value else "0"
    if isinstance(value, (int, float)):
        x = float(value)
        if not math.isfinite(x):
            raise ValueError(f"cannot store {value!r} in a cell; use an Excel error such as #NUM!")
        return None, repr(int(value)) if isinstance(value, int) else repr(x)
    if isinstance(value, str):
        return "str", escape(value, quote=False)
    raise ValueError(f"cannot store a value of type {type(value).__name__}")


def _rewrite_sheet(xml: str, values: dict, dynamic: dict, sheet: str) -> str:
    pending = set(values)
    anchors = dict(dynamic)

    def fix(m):
        attrs, tail, inner = m.group(1), m.group(2), m.group(3)
        rm = _ATTR_R.search(attrs)
        ref = rm.group(1) if rm else None
        if ref not in pending and ref not in anchors:
            return m.group(0)
        inner = inner or ""
        fm = re.search(r"<f\b[^>]*(?:/>|>.*?</f>)", inner, re.S)
        if not fm:
            raise ValueError(f"{sheet}!{ref} is not a formula cell; write plain values with openpyxl")
        f_xml = fm.group(0)
        attrs = re.sub(r'\s\bt="[^"]*"', "", attrs)
        if ref in anchors:
            spill = anchors.pop(ref)
            f_open = re.match(r"<f\b[^>]*", f_xml).group(0)
            f_open2 = re.sub(r'\s(t|ref)="[^"]*"', "", f_open)
            f_xml = f_open2 + f' t="array" ref="{spill}"' + f_xml[len(f_open):]
            attrs = re.sub(r'\scm="[^"]*"', "", attrs) + ' cm="1"'
        v_xml = ""
        if ref in pending:
            pending.discard(ref)
            value = values[ref]
            if value is not None:
                t, text = _value_xml(value)
                if t:
                    attrs += f' t="{t}"'
                v_xml = f"<v>{text}</v>"
        return f"<c{attrs}>{f_xml}{v_xml}</c>"

    out = _CELL_RE.sub(fix, xml)
    missing = sorted(pending | set(anchors))
    if missing:
        raise ValueError(f"{sheet}: no formula cell at {', '.join(missing[:5])}")
    return out


def store_values(src, dst, values: dict, dynamic: dict | None = None) -> None:
    """Copy the package ``src`` to ``dst`` with formula values stored and dynamic arrays marked.

    ``values`` maps (sheet title, "B3") to a float, int, str, bool, None or ExcelError;
    ``dynamic`` maps (sheet title, "E2") to the spilled range "E2:I20".
    """
    src, dst = Path(src), Path(dst)
    dynamic = dynamic or {}
    with zipfile.ZipFile(src) as z:
        parts = _sheet_parts(z)
        by_part: dict = {}
        for (sheet, ref), v in values.items():
            if sheet not in parts:
                raise ValueError(f"no sheet named {sheet!r} in {src.name}")
            by_part.setdefault(parts[sheet], [sheet, {}, {}])[1][ref] = v
        for (sheet, ref), spill in dynamic.items():
            if sheet not in parts:
                raise ValueError(f"no sheet named {sheet!r} in {src.name}")
            by_part.setdefault(parts[sheet], [sheet, {}, {}])[2][ref] = spill
        names = z.namelist()
        with zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as out:
            for info in z.infolist():
                data = z.read(info.filename)
                if info.filename in by_part:
                    sheet, vals, dyn = by_part[info.filename]
                    data = _rewrite_sheet(data.decode("utf-8"), vals, dyn, sheet).encode("utf-8")
                elif info.filename == "xl/workbook.xml":
                    data = re.sub(rb'\sfullCalcOnLoad="(1|true)"', b"", data)
                elif dynamic and info.filename == "[Content_Types].xml" and b"/xl/metadata.xml" not in data:
                    data = data.replace(
                        b"</Types>",
                        f'<Override PartName="/xl/metadata.xml" ContentType="{_META_TYPE}"/></Types>'.encode())
                elif dynamic and info.filename == "xl/_rels/workbook.xml.rels" and _META_REL.encode() not in data:
                    ids = {int(x) for x in re.findall(rb'Id="rId(\d+)"', data)}
                    rid = f"rId{max(ids, default=0) + 1}"
                    data = data.replace(
                        b"</Relationships>",
                        f'<Relationship Id="{rid}" Type="{_META_REL}" Target="metadata.xml"/></Relationships>'.encode())
                out.writestr(info, data)
            if dynamic and "xl/metadata.xml" not in names:
                out.writestr("xl/metadata.xml", _METADATA)


def dynamic_anchors(path) -> set:
    """(sheet title, "E2") of every cell flagged with cell metadata (a dynamic-array anchor)."""
    found = set()
    try:
        with zipfile.ZipFile(path) as z:
            if "xl/metadata.xml" not in z.namelist():
                return found
            for sheet, part in _sheet_parts(z).items():
                xml = z.read(part).decode("utf-8")
                for m in re.finditer(r"<c\b([^>]*)>", xml):
                    attrs = m.group(1)
                    if re.search(r'\bcm="\d+"', attrs):
                        ref = _ATTR_R.search(attrs)
                        if ref:
                            found.add((sheet, ref.group(1)))
    except (zipfile.BadZipFile, KeyError, OSError):
        return found
    return found
