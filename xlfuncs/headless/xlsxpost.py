"""Store computed values beside the formulas of a saved .xlsx package, and mark dynamic arrays.

openpyxl cannot write a formula together with its cached value: a formula cell comes out as
``<c r="B3"><f>LN(B3/B2)*100</f><v></v></c>``, so openpyxl with ``data_only=True``, a spreadsheet
application that does not recalculate on load, or Excel without the add-in shows nothing.  This
module edits the XML of such a package; every other part is copied unchanged.

=========================  ====================================================================
:func:`store_values`       copy a package, storing each formula's value and marking spilled anchors
:func:`dynamic_anchors`    the cells of a package that carry dynamic-array cell metadata
:func:`check_package`      refuse a package too large, too tightly packed or not a zip, before loading
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

Memory stays small whatever the size of a sheet: sheet parts are read in chunks (a sheet being
edited a few rows at a time), untouched parts are copied chunk by chunk, and only the small
parts that describe the package (relationships, content types, the workbook part, the metadata
part) are read whole, each within ``_MAX_WHOLE``.  Every part is read no further than one byte
past the size its zip directory entry declares, so a part that lies about its size is refused
before it can fill memory.
"""

from __future__ import annotations

import codecs
import copy
import math
import numbers
import os
import posixpath
import re
import tempfile
import zipfile
import zlib
import xml.etree.ElementTree as ET
from itertools import chain, compress, repeat
from operator import eq, is_, itemgetter
from pathlib import Path

__all__ = ["ERROR_LITERALS", "ExcelError", "check_package", "dynamic_anchors", "place_values", "store_values"]

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

#: The most a package may hold once unpacked, in bytes: 256 MiB, the default of
#: :func:`check_package`.  Memory sets it, not disk.  openpyxl holds about ten bytes for each
#: unpacked byte of sheet XML and a recalculation about twenty-five (measured here: 445 MiB to
#: load a sheet of a million cells, 44.6 MB unpacked; 311 MiB to recalculate 200,000 cells,
#: 8.8 MB), so 256 MiB already means several GiB and many minutes.  It still admits the largest
#: workbook this program is for with room to spare: a series filling all 1,048,576 rows of a
#: sheet with its date, level and return formula unpacks to about 140 MB as openpyxl writes it
#: (about 45 bytes a cell, measured), a century of daily data to about 12 MB.
MAX_INFLATED = 256 * 2**20
#: A part over ``_RATIO_FROM`` bytes that unpacks to more than ``_MAX_RATIO`` times its packed size
#: is refused.  Sheet XML packs 5 to 20 times (measured on openpyxl's output and on repetitive
#: sheets: constant formulas, styled blanks, empty rows), deflate can reach about 1,000 times
#: (common practice), and only a file built to exhaust memory comes near that.  Small parts may
#: pack tighter: whatever their ratio, they cannot hurt.
_MAX_RATIO, _RATIO_FROM = 200, 10 * 2**20
#: Parts read whole (relationships, content types, the workbook and metadata parts) are
#: kilobytes in practice; this bounds them.
_MAX_WHOLE = 64 * 2**20
#: Bytes read from a part at a time.
_CHUNK = 256 * 2**10
_METHODS = {zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED}  # ECMA-376 Part 2 allows only these (from memory)
_METHOD_NAMES = {1: "shrink", 6: "implode", 8: "deflate", 9: "deflate64", 12: "bzip2", 14: "LZMA",
                 93: "Zstandard", 95: "XZ", 99: "AES encryption"}  # PKWARE APPNOTE 4.4.5, from memory


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


_CANON_REF_RE = re.compile(r"([A-Z]{1,3})([1-9][0-9]{0,6})")


def _norm_ref(text) -> str:
    m = _CANON_REF_RE.fullmatch(text) if type(text) is str else None
    if m is not None and int(m.group(2)) <= _MAX_ROW and (len(m.group(1)) < 3 or m.group(1) <= "XFD"):
        return text  # already canonical: upper case, no $, no leading zero, inside the sheet
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
    if type(value) is float:  # the common case, as numbers.Real below
        if not math.isfinite(value):
            raise ValueError(f"{where}: {value!r} cannot be stored in a cell; "
                             "store an error such as ExcelError('#NUM!') instead")
        return None, float.__repr__(value)
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


# ----------------------------------------------------------------------------- reading a package
def _size(n: int) -> str:
    """A byte count as a file manager shows it, in powers of 1024: ``1.5 GB``, ``256 MB``, ``820 KB``."""
    for unit, scale in (("GB", 2**30), ("MB", 2**20), ("KB", 2**10)):
        if n >= scale:
            return f"{n / scale:.1f}".removesuffix(".0") + f" {unit}"
    return f"{n} byte" + ("" if n == 1 else "s")


def _sizes(n: int, limit: int) -> tuple[str, str]:
    """``n`` and ``limit`` in words, exact when rounding would show them equal."""
    a, b = _size(n), _size(limit)
    return (a, b) if a != b else (f"{n:,} bytes", f"{limit:,} bytes")


def _check_infos(label: str, infos: list, max_inflated: int | None) -> int:
    """The total unpacked size the zip directory ``infos`` declares; ValueError if it is refused."""
    total = 0
    for info in infos:
        if info.compress_type not in _METHODS:
            method = _METHOD_NAMES.get(info.compress_type, f"method {info.compress_type}")
            raise ValueError(f"{label}: the part {info.filename} is packed with {method}, which an .xlsx "
                             "file does not use; save the workbook again from the spreadsheet application")
        total += info.file_size
    if max_inflated is not None and total > max_inflated:
        size, limit = _sizes(total, max_inflated)
        raise ValueError(f"{label} unpacks to {size} (limit {limit}); a workbook that large cannot be "
                         "recalculated here")
    for info in infos:
        if info.file_size > _RATIO_FROM and info.file_size > _MAX_RATIO * info.compress_size:
            raise ValueError(f"{label}: the part {info.filename} unpacks from {_size(info.compress_size)} to "
                             f"{_size(info.file_size)}, more than {_MAX_RATIO} times its packed size, as "
                             "no real workbook does; the file is refused as damaged or built to exhaust memory")
    return total


def check_package(path: str | Path, max_inflated: int | None = MAX_INFLATED, *, verify: bool = True) -> int:
    """Refuse a package that could not be loaded within memory, before a reader unpacks it whole.

    Raises ValueError, in one line, when ``path`` is not a zip archive, when its parts unpack to
    more than ``max_inflated`` bytes together (256 MiB by default; ``None`` sets no total), when
    a part over 10 MiB unpacks to more than 200 times its packed size, or when a part is packed
    with a method other than deflate or none: all read from the zip directory alone, so a zip
    bomb is refused at once.  Then, unless ``verify`` is false, every part is unpacked a chunk at
    a time and discarded, and one that holds more or less than its directory entry declares, or
    fails its checksum, is refused: a reader that trusts the directory (openpyxl reads each part
    whole) would otherwise unpack all that a lying part holds.  That pass holds a few hundred KiB
    and takes about a second for 256 MiB.  Returns the total unpacked size.
    """
    path = Path(path)
    try:
        z = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, EOFError, ValueError):
        raise ValueError(f"{path.name} is not a readable .xlsx workbook (not a zip archive)") from None
    except OSError as exc:
        raise ValueError(f"{path.name} cannot be read ({exc.strerror or exc})") from None
    with z:
        total = _check_infos(path.name, z.infolist(), max_inflated)
        if verify:
            try:
                for info in z.infolist():
                    for _ in _chunks(z, info, path.name):
                        pass
            except OSError as exc:
                raise ValueError(f"{path.name} cannot be read ({exc.strerror or exc})") from None
    return total


def _damaged(label: str, info: zipfile.ZipInfo, why: str = "") -> ValueError:
    return ValueError(f"{label}: the part {info.filename} does not unpack to the {_size(info.file_size)} its "
                      f"zip directory declares{why}; the file is damaged or was made to mislead, and is refused")


def _chunks(z: zipfile.ZipFile, info: zipfile.ZipInfo, label: str):
    """The unpacked bytes of one part in chunks of up to ``_CHUNK``.

    zipfile stops reading a member at the size its directory entry declares and then checks its
    CRC-32.  The entry is read here as if it declared one byte more, so a part that holds more
    than it declares fails the checksum or yields that byte, and is refused at its end, instead of
    being cut silently; so is a part that holds less.  Reading a chunk at a time matters: zipfile
    unpacks as much as it is asked for before it cuts a member to its declared size.
    """
    probe = copy.copy(info)
    probe.file_size = info.file_size + 1
    got = 0
    try:
        with z.open(probe) as fh:
            while block := fh.read(_CHUNK):
                got += len(block)
                yield block
    except (zipfile.BadZipFile, EOFError, zlib.error, NotImplementedError, RuntimeError) as exc:
        raise _damaged(label, info, f" ({exc})") from None
    if got != info.file_size:
        raise _damaged(label, info, " (it holds more)" if got > info.file_size else f" (it holds {got:,} bytes)")


def _texts(blocks):
    """UTF-8 text, in pieces, of the bytes in ``blocks``."""
    decoder = codecs.getincrementaldecoder("utf-8")()
    for block in blocks:
        text = decoder.decode(block)
        if text:
            yield text
    text = decoder.decode(b"", final=True)
    if text:
        yield text


class _Package:
    """The parts of an open package, by name: ``name in pkg``, ``pkg[name]`` (the whole part, for the
    small parts that describe the package) and ``pkg.chunks(name)`` (for sheets and the rest)."""

    def __init__(self, z: zipfile.ZipFile, label: str):
        self.z, self.label = z, label
        self.infos = {i.filename: i for i in z.infolist() if not i.is_dir()}
        self._whole: dict = {}

    def __contains__(self, name) -> bool:
        return name in self.infos

    def __getitem__(self, name: str) -> bytes:
        if name not in self._whole:
            info = self.infos[name]
            if info.file_size > _MAX_WHOLE:
                raise ValueError(f"{self.label}: the part {name} unpacks to {_size(info.file_size)}; a part of "
                                 f"this kind is read whole and may hold at most {_size(_MAX_WHOLE)}")
            self._whole[name] = b"".join(_chunks(self.z, info, self.label))
        return self._whole[name]

    def chunks(self, name: str):
        return _chunks(self.z, self.infos[name], self.label)


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


def _relationships(members: _Package | dict, part: str) -> list[dict]:
    name = _rels_name(part)
    if name not in members:
        return []
    root = _parse_xml(name, members[name])
    return [dict(r.attrib) for r in root.findall(f"{{{_PKG_RELS}}}Relationship")]


def _workbook_part(members: _Package | dict) -> str:
    for rel in _relationships(members, ""):
        if rel.get("Type") == _OFFICE_DOC and rel.get("TargetMode") != "External":
            part = _resolve("", rel.get("Target", ""))
            if part in members:
                return part
    raise ValueError("the package has no workbook part (no officeDocument relationship in _rels/.rels)")


def _sheet_parts(members: _Package | dict, wb_part: str) -> dict[str, str]:
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
_SHEET_DATA_OPEN_RE = re.compile(r"<sheetData\b[^>]*?(/?)>")
_SHEET_DATA_CLOSE, _ROW_OPEN = "</sheetData>", "<row"
_CELL_RE = re.compile(r"<c(?=[\s/>])([^>]*?)(?:/>|>(.*?)</c>)", re.S)
_F_RE = re.compile(r"<f(?=[\s/>])([^>]*?)(?:/>|>(.*?)</f>)", re.S)
_V_RE = re.compile(r"<v(?=[\s/>])[^>]*?(?:/>|>.*?</v>)", re.S)
_IS_RE = re.compile(r"<is(?=[\s/>])[^>]*?(?:/>|>.*?</is>)", re.S)
_ROOT_RE = re.compile(r"<worksheet\b[^>]*\sxmlns\s*=\s*[\"']" + re.escape(_MAIN) + "[\"']")


# a formula cell as openpyxl writes it (r, s, t, an ordinary formula, a value), edited without
# the general parser; every part of it captured, so that splitting a block at such cells keeps it all
_PLAIN_F_CELL_RE = re.compile(r'<c r="([A-Z]{1,3}[0-9]{1,7})"(?: s="([0-9]+)")?(?: t="([a-z]+)")?>'
                              r'(<f>[^<]*</f>)(<v>[^<]*</v>|<v\s*/>)?</c>')


_DQ_ATTR_RE = re.compile(r'([A-Za-z_][\w.:-]*)\s*=\s*"([^"]*)"')


def _attrs(text: str) -> dict[str, str]:
    """Attributes in document order, values as written (still escaped)."""
    if "'" not in text:
        # every value double-quoted (as every writer we meet writes them): the pairs in one C-level
        # pass, the same dict as the loop below (a repeated name keeps its first place, last value)
        return dict(_DQ_ATTR_RE.findall(text))
    out = {}
    for m in _ATTR_RE.finditer(text):
        raw = m.group(2) if m.group(2) is not None else m.group(3)
        out[m.group(1)] = raw.replace('"', "&quot;")
    return out


def _attrs_text(attrs: dict[str, str]) -> str:
    return "".join(f' {k}="{v}"' for k, v in attrs.items())


def _sheet_head(texts):
    """(head, match): the sheet's text read from the iterator ``texts`` up to and including the
    opening of its cell table (``match``, of _SHEET_DATA_OPEN_RE), or None with the text read
    when there is none within _MAX_WHOLE characters; the rest stays in ``texts``."""
    head, m = "", None
    for text in texts:
        start = max(0, head.rfind("<"))
        head += text
        m = _SHEET_DATA_OPEN_RE.search(head, start)
        if m or len(head) > _MAX_WHOLE:
            break
    return head, m


def _edit_sheet(title: str, part: str, texts, values: dict, dynamic: dict, absent: set):
    """The sheet XML, in pieces, with ``values`` stored and ``dynamic`` anchors marked.

    ``texts`` is the part's text in pieces; ``values`` maps "B3" to an encoded (type, text) pair,
    ``dynamic`` maps "E2" to (ref, bounds).  The cells not found are added to ``absent`` once the
    pieces are all taken.  The cells are edited a block of whole rows at a time, cut where a row
    starts (a cell lies in its row, so no cell spans two blocks; the cell table holds nothing but
    rows): a few rows are held at once, however large the sheet.
    """
    texts = iter(texts)
    head, m = _sheet_head(texts)
    if not _ROOT_RE.search(head if m is None else head[:m.start()]):
        raise ValueError(f"sheet {title!r} ({part}) is not SpreadsheetML in the unprefixed form openpyxl "
                         "writes; save the workbook with openpyxl first")
    if m is None and len(head) > _MAX_WHOLE:
        raise ValueError(f"sheet {title!r} ({part}) has no cell table in its first {_size(_MAX_WHOLE)}")
    if m is None or m.group(1):
        absent |= set(values) | set(dynamic)
        yield head
        yield from texts
        return
    done: set = set()
    # the first formula cell inside each spill range: anchor -> ((row, order in the sheet), cell)
    inside: dict = {}
    order = 0
    top = min((b[0] for _, b in dynamic.values()), default=0)
    bottom = max((b[2] for _, b in dynamic.values()), default=0)

    def edit(m: re.Match) -> str:
        nonlocal order
        inner = m.group(2)
        fm = _F_RE.search(inner) if inner else None
        if fm is None:
            return m.group(0)
        attrs = _attrs(m.group(1))
        ref = attrs.get("r", "").upper()
        if dynamic and _REF_RE.fullmatch(ref):
            row, col = _parse_ref(ref)
            order += 1
            if top <= row <= bottom:
                for anchor, (spill, (r1, c1, r2, c2)) in dynamic.items():
                    if r1 <= row <= r2 and c1 <= col <= c2:
                        cell = _ref_name(row, col)
                        if cell != anchor and (anchor not in inside or (row, order) < inside[anchor][0]):
                            inside[anchor] = ((row, order), cell)
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

    def edit_plain_cells(block: str):
        # every formula cell of the block in openpyxl's form (as many as "<f" is found; a "<c r="
        # is always a cell's start, text holding no "<") edited as edit() edits it, from the
        # pieces that splitting the block at such cells gives (the text between them, then each
        # cell's reference, style, type, formula and value element): no call per cell
        pieces = _PLAIN_F_CELL_RE.split(block)
        if (len(pieces) - 1) // 6 != block.count("<f"):
            return None
        refs = pieces[1::6]
        encs = list(map(values.get, refs))
        done.update(compress(refs, encs))  # an encoded pair is never empty
        cells = []
        add = cells.append
        for ref, style, kind, f_xml, v_xml, enc in zip(refs, pieces[2::6], pieces[3::6], pieces[4::6],
                                                       pieces[5::6], encs):
            style = "" if style is None else ' s="' + style + '"'
            if enc is None:  # not to be stored: the cell as it was
                kind = "" if kind is None else ' t="' + kind + '"'
                add(f'<c r="{ref}"{style}{kind}>{f_xml}{v_xml or ""}</c>')
            else:
                kind = "" if enc[0] is None else ' t="' + enc[0] + '"'
                add(f'<c r="{ref}"{style}{kind}>{f_xml}</c>' if enc[1] is None else
                    f'<c r="{ref}"{style}{kind}>{f_xml}<v>{enc[1]}</v></c>')
        cells.append("")
        return "".join(chain.from_iterable(zip(pieces[0::6], cells)))

    def edit_rows(block: str) -> str:
        if "<f" not in block:  # only formula cells change
            return block
        if not dynamic:
            out = edit_plain_cells(block)
            if out is not None:
                return out
        return _CELL_RE.sub(edit, block)

    yield head[:m.end()]
    tail = ""
    for block, last in _row_blocks(head[m.end():], texts, title, part):
        if last:
            tail = block
        else:
            yield edit_rows(block)
    for anchor, (spill, _) in dynamic.items():
        if anchor in inside:
            raise ValueError(f"{title}!{inside[anchor][1]} holds a formula inside the spill range {spill} of "
                             f"{title}!{anchor}; the spilled cells must hold plain values")
    absent |= (set(values) | set(dynamic)) - done
    yield tail
    yield from texts


def _row_blocks(buf: str, texts, title: str, part: str):
    """(text, last) pairs of a cell table read on from ``buf`` and the pieces ``texts``: blocks of
    whole rows (cut where a row starts, so no cell spans two blocks), then, last, the text from
    </sheetData> on; a few rows are held at once, however large the sheet."""
    scanned = 0  # where </sheetData> and a row start not yet cut at may begin
    while True:
        end = buf.find(_SHEET_DATA_CLOSE, scanned)
        if end >= 0:
            yield buf[:end], False
            yield buf[end:], True
            return
        cut = buf.rfind(_ROW_OPEN, scanned)
        if cut > 0:
            yield buf[:cut], False
            buf = buf[cut:]
        if len(buf) > _MAX_WHOLE:
            raise ValueError(f"sheet {title!r} ({part}) holds a row of more than {_size(_MAX_WHOLE)}, which "
                             "cannot be edited here")
        scanned = max(0, len(buf) - len(_SHEET_DATA_CLOSE) + 1)
        text = next(texts, None)
        if text is None:
            raise ValueError(f"sheet {title!r} ({part}) ends inside its cell table (no </sheetData>); the part "
                             "is damaged")
        buf += text


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


def _ensure_metadata(members: _Package | dict, wb_part: str, changed: dict) -> None:
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


_CANON_LINES_RE = re.compile(r"(?:[A-Z]{1,3}[1-9][0-9]{0,6}\n)+")
_LONG_REF_RE = re.compile(r"[A-Z]{3}|[0-9]{7}")  # a column past XFD or a row past 1,048,576 may hide here


def _canonical_keys(mapping: dict, titles) -> dict | None:
    """What :func:`_check_keys` returns, where every key is a (title, ref) tuple whose ref is
    already canonical (upper case, no $, no leading zero, within two letters and six digits, as a
    recalculation names its cells): the refs of a sheet checked in one pass over their join
    rather than one by one.  None where any key is otherwise: the general loop decides."""
    keys = list(mapping)
    if set(map(type, keys)) != {tuple} or set(map(len, keys)) != {2}:
        return None
    sheets = list(map(itemgetter(0), keys))
    refs = list(map(itemgetter(1), keys))
    order = list(dict.fromkeys(sheets))  # the sheets in the order they first come
    if any(type(sheet) is not str or sheet not in titles for sheet in order):
        return None
    if len(order) == 1:
        out = {order[0]: dict(zip(refs, mapping.values()))}
    else:
        items = list(mapping.values())
        out = {}
        for sheet in order:
            mine = list(map(eq, sheets, repeat(sheet)))
            out[sheet] = dict(zip(compress(refs, mine), compress(items, mine)))
    for cells in out.values():
        if set(map(type, cells)) != {str}:
            return None
        joined = "\n".join(cells) + "\n"
        if _CANON_LINES_RE.fullmatch(joined) is None or _LONG_REF_RE.search(joined):
            return None
    return out


def _check_keys(mapping: dict, name: str, titles: dict) -> dict:
    """{sheet title: {canonical ref: item}} from {(title, ref): item}, with ValueErrors for bad keys."""
    out = _canonical_keys(mapping, titles)
    if out is not None:
        return out
    out = {}
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


def _fast_deflate(entry) -> None:
    """Deflate ``entry`` at level 1 (zipfile's own attribute for it: ``compress_level`` from
    Python 3.13, ``_compresslevel`` before)."""
    for attr in ("compress_level", "_compresslevel"):
        try:
            setattr(entry, attr, 1)
            return
        except AttributeError:
            continue


def _write_zip(pkg: _Package, dst: Path, changed: dict, edited: dict, finish) -> None:
    """Copy every member in order with its compression, replacing changed ones; new ones at the end.

    ``changed`` maps a part to its new bytes; ``edited`` maps a part to a function that turns the
    part's chunks into the chunks of its new content.  Untouched parts are copied a chunk at a
    time.  ``finish()`` runs once everything is written, before the file is renamed into place;
    nothing is left behind when it, or anything else, raises.
    """
    src = pkg.z
    infos = src.infolist()
    names = {i.filename for i in infos}
    like = next((i for i in infos if i.filename.endswith(".xml")), infos[0] if infos else None)
    fd, tmp = tempfile.mkstemp(suffix=".xlsx", prefix=".xlsxpost-", dir=dst.parent)
    os.close(fd)
    try:
        # deflate at level 1 (_fast_deflate): several times faster than the default level on a
        # large sheet, for a slightly larger file (the parts are re-compressed as they are copied)
        with zipfile.ZipFile(tmp, "w", compresslevel=1) as out:
            for info in infos:
                entry = zipfile.ZipInfo(info.filename, info.date_time)
                entry.compress_type = info.compress_type
                entry.external_attr = info.external_attr
                entry.create_system = info.create_system
                entry.comment = info.comment
                _fast_deflate(entry)
                data = changed.get(info.filename)
                edit = edited.get(info.filename)
                if data is None and edit is None and info.file_size == 0:  # empty parts, folders
                    data = b"".join(_chunks(src, info, pkg.label))
                if data is not None:
                    out.writestr(entry, data)
                    continue
                blocks = _chunks(src, info, pkg.label)
                # the size tells zipfile whether the entry needs zip64 fields; an edited sheet may grow
                entry.file_size = info.file_size if edit is None else 2 * info.file_size + 2**20
                with out.open(entry, "w") as fh:
                    for block in (blocks if edit is None else edit(blocks)):
                        fh.write(block)
            for name, data in changed.items():
                if name not in names:
                    new = zipfile.ZipInfo(name, like.date_time if like else (1980, 1, 1, 0, 0, 0))
                    new.compress_type = zipfile.ZIP_DEFLATED
                    new.external_attr = like.external_attr if like else 0o600 << 16
                    out.writestr(new, data)
            out.comment = src.comment
        finish()
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes the file private; give it the usual mode
        os.replace(tmp, dst)
    except BaseException:
        if os.path.exists(tmp):
            os.remove(tmp)
        raise


# ----------------------------------------------------------------------------- public functions
def _open_source(src: Path, dst: Path) -> zipfile.ZipFile:
    """The package ``src`` opened for copying to ``dst`` (never itself), its packing checked; no
    limit on the total unpacked size: sheets are streamed, and the parts read whole are bounded
    one by one.  ValueError for the same file, or a file that is not a zip archive."""
    if dst.resolve() == src.resolve() or (dst.exists() and os.path.samefile(src, dst)):
        raise ValueError(f"{dst}: refusing to write over the input; choose another output path")
    try:
        z = zipfile.ZipFile(src)
    except zipfile.BadZipFile:
        raise ValueError(f"{src.name} is not an .xlsx package (not a zip archive)") from None
    try:
        _check_infos(src.name, z.infolist(), None)
    except BaseException:
        z.close()
        raise
    return z


def _encode_values(values: dict) -> dict:
    """{key: _encode_value(value)}: the finite floats (most values of a recalculation: a column of
    returns) encoded with maps rather than a call per value, the rest one by one."""
    keys, vals = list(values), list(values.values())
    floats = list(map(is_, map(type, vals), repeat(float)))
    fk, fv = list(compress(keys, floats)), list(compress(vals, floats))
    if all(map(math.isfinite, fv)):
        out = dict(zip(fk, zip(repeat(None), map(float.__repr__, fv))))
        rest = [(k, v) for k, v, f in zip(keys, vals, floats) if not f] if len(fk) < len(keys) else []
    else:
        out, rest = {}, list(values.items())
    for key, v in rest:
        where = f"value for {key[0]}!{key[1]}" if isinstance(key, tuple) and len(key) == 2 else f"value for {key!r}"
        out[key] = _encode_value(where, v)
    return out


def store_values(src: str | Path, dst: str | Path, values: dict, dynamic: dict | None = None, *,
                 constants: dict | None = None, calc_id: int | None = None) -> None:
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
    another type (a list, a date).  Raises it too for a package :func:`check_package` refuses for
    its packing (the total unpacked size is not limited here) and for a part that does not unpack
    to the size its zip directory declares.  Nothing is written when it raises.

    ``constants`` (as :func:`place_values` takes them) and ``calc_id`` are applied in the same
    pass, so the package is copied once.

    Parts are streamed: memory stays at a few MiB whatever the size of the sheets.
    """
    src, dst = Path(src), Path(dst)
    dynamic = dynamic or {}
    encoded = _encode_values(values)
    with _open_source(src, dst) as z:
        pkg = _Package(z, src.name)
        wb_part = _workbook_part(pkg)
        parts = _sheet_parts(pkg, wb_part)
        by_sheet = _check_keys(encoded, "values", parts)
        spills = {sheet: {anchor: _parse_range(anchor, ref) for anchor, ref in cells.items()}
                  for sheet, cells in _check_keys(dynamic, "dynamic", parts).items()}
        encoded_constants = {key: _encode_value(f"value for {key[0]}!{key[1]}", v)
                             for key, v in (constants or {}).items()}
        by_const = {title: {_parse_ref(ref): enc for ref, enc in refs.items()}
                    for title, refs in _check_keys(encoded_constants, "constants", parts).items()}
        titles = sorted(set(by_sheet) | set(spills) | set(by_const), key=list(parts).index)
        for title in titles:
            if parts[title] not in pkg:
                raise ValueError(f"sheet {title!r} names the part {parts[title]}, which the package lacks")
        changed: dict = {}
        wb_xml = pkg[wb_part].decode("utf-8")
        calc = _drop_full_calc(wb_xml)
        if calc_id is not None:
            calc = _with_calc_id(calc, calc_id)
        if calc != wb_xml:
            changed[wb_part] = calc.encode("utf-8")
        if spills:
            _ensure_metadata(pkg, wb_part, changed)

        absent: dict = {title: set() for title in titles}

        def editor(title):
            def edit(blocks):
                part = parts[title]
                texts = _texts(blocks)
                if title in by_sheet or title in spills:
                    texts = _edit_sheet(title, part, texts, by_sheet.get(title, {}), spills.get(title, {}),
                                        absent[title])
                if title in by_const:
                    texts = _place_sheet(title, part, texts, by_const[title])
                for text in texts:
                    yield text.encode("utf-8")
            return edit

        def finish():
            missing = [f"{title}!{ref}" for title in titles for ref in sorted(absent[title], key=_parse_ref)]
            if missing:
                shown = ", ".join(missing[:10]) + (f" and {len(missing) - 10} more" if len(missing) > 10 else "")
                raise ValueError(f"not formula cells: {shown}; write plain values through openpyxl instead")

        _write_zip(pkg, dst, changed, {parts[title]: editor(title) for title in titles}, finish)


_START_C_RE = re.compile(r"<c(?=[\s/>])([^>]*?)/?>")


def _marked_cells(texts, marks: set):
    """The ``r`` of every ``<c>`` start tag whose ``cm`` is in ``marks``, from the part's text in pieces.

    A tag holds no ``<`` (W3C XML 1.0, 3.1: attribute values cannot contain it), so text is
    scanned up to its last ``<``, and only an unfinished tag is carried into the next piece.
    """
    carry = ""
    for text in texts:
        buf = carry + text
        cut = buf.rfind("<")
        if cut >= 0 and buf.find(">", cut) < 0:
            buf, carry = buf[:cut], buf[cut:]
        else:
            carry = ""
        if "cm" in buf:
            for m in _START_C_RE.finditer(buf):
                attrs = _attrs(m.group(1))
                if attrs.get("cm") in marks and attrs.get("r"):
                    yield attrs["r"].upper()


def dynamic_anchors(path: str | Path) -> set[tuple[str, str]]:
    """(sheet title, "E2") of every cell whose cell metadata marks a dynamic-array anchor.

    An unreadable package, or one without dynamic-array metadata, gives an empty set, and so does
    one :func:`check_package` refuses for its packing (its total size is not limited here: the
    sheets are scanned a chunk at a time).
    """
    found: set = set()
    try:
        label = Path(path).name
        with zipfile.ZipFile(path) as z:
            _check_infos(label, z.infolist(), None)
            pkg = _Package(z, label)
            wb_part = _workbook_part(pkg)
            meta = [_resolve(wb_part, r.get("Target", "")) for r in _relationships(pkg, wb_part)
                    if r.get("Type") == _META_REL]
            if not meta or meta[0] not in pkg:
                return found
            marks = {str(i) for i in _dynamic_cm_indices(meta[0], pkg[meta[0]])}
            if not marks:
                return found
            for title, part in _sheet_parts(pkg, wb_part).items():
                if part in pkg:
                    found.update((title, ref) for ref in _marked_cells(_texts(pkg.chunks(part)), marks))
    except (zipfile.BadZipFile, OSError, ValueError, UnicodeDecodeError):
        return set()
    return found


# ----------------------------------------------------------------------------- constant cells
_ROW_ELEM_RE = re.compile(r"<row(?=[\s/>])([^>]*?)(?:/>|>(.*?)</row>)", re.S)
_SPANS_RE = re.compile(r"""\s+spans\s*=\s*(["'])[^"']*\1""")
_FULLCALC_ANY_RE = re.compile(r"""\s+fullCalcOnLoad\s*=\s*(["'])[^"']*\1""")
_CALCID_RE = re.compile(r"""(\scalcId\s*=\s*)(["'])(\d*)\2""")
_DIMENSION_RE = re.compile(r"""(<dimension\b[^>]*?\bref\s*=\s*)(["'])([^"']*)\2""")


def _cell_xml(ref: str, style: str | None, encoded) -> str:
    s = f' s="{style}"' if style is not None else ""
    if encoded is None or encoded[1] is None:
        return f'<c r="{ref}"{s}/>' if s else ""
    kind, text = encoded
    if kind is None:
        return f'<c r="{ref}"{s}><v>{text}</v></c>'
    if kind == "str":
        return f'<c r="{ref}"{s} t="inlineStr"><is><t xml:space="preserve">{text}</t></is></c>'
    return f'<c r="{ref}"{s} t="{kind}"><v>{text}</v></c>'


# a cell's attributes that open with its reference, double-quoted, in canonical form (upper case,
# no $, no leading zero): its column letters
_LEAD_REF_RE = re.compile(r'\s+r="([A-Z]{1,3})[1-9][0-9]{0,6}"(?=\s|$)')
_COLUMNS: dict = {}


def _column_number(letters: str) -> int:
    """The column number of upper-case ``letters`` (A = 1), remembered."""
    col = _COLUMNS.get(letters)
    if col is None:
        col = 0
        for ch in letters:
            col = col * 26 + ord(ch) - 64
        if len(_COLUMNS) < 20_000:
            _COLUMNS[letters] = col
    return col


def _merge_row(title: str, row: int, attrs: str, inner: str | None, cells: dict) -> str:
    """A row element with ``cells`` ({col: encoded}) set: an existing cell keeps its style."""
    parts = []
    pos = 0
    inner = inner or ""
    for m in _CELL_RE.finditer(inner):
        if inner[pos:m.start()].strip():
            raise ValueError(f"sheet {title!r}: row {row} holds more than cells")
        head = m.group(1)
        fast = _LEAD_REF_RE.match(head)  # r first, as writers put it: the column without the full parse
        col = _column_number(fast.group(1)) if fast is not None else 0
        if not 0 < col <= _MAX_COL:  # no such reference, or beyond XFD: the full parse words it
            ref = _attrs(head).get("r")
            if not ref:
                raise ValueError(f"sheet {title!r}: a cell of row {row} has no reference")
            col = _parse_ref(ref)[1]
        if col in cells:
            parts.append((col, _cell_xml(_ref_name(row, col), _attrs(head).get("s"), cells[col])))
        else:
            parts.append((col, m.group(0)))
        pos = m.end()
    if inner[pos:].strip():
        raise ValueError(f"sheet {title!r}: row {row} holds more than cells")
    have = {c for c, _ in parts}
    parts += [(c, _cell_xml(_ref_name(row, c), None, e)) for c, e in cells.items() if c not in have]
    parts.sort(key=lambda p: p[0])
    return f"<row{_SPANS_RE.sub('', attrs)}>{''.join(x for _, x in parts)}</row>"


def _place_sheet(title: str, part: str, texts, cells: dict):
    """The sheet XML, in pieces, with the constant ``cells`` ({(row, col): encoded}) set or added."""
    texts = iter(texts)
    head, m = _sheet_head(texts)
    if m is None or not _ROOT_RE.search(head[:m.start()]):
        raise ValueError(f"sheet {title!r} ({part}) is not SpreadsheetML in the unprefixed form")
    by_row: dict = {}
    for (r, c), enc in cells.items():
        by_row.setdefault(r, {})[c] = enc
    pending = sorted(by_row)
    if cells:
        r1, c1 = min(r for r, _ in cells), min(c for _, c in cells)
        r2, c2 = max(r for r, _ in cells), max(c for _, c in cells)
        pre = head[:m.start()]
        dm = _DIMENSION_RE.search(pre)
        if dm:
            try:
                old = dm.group(3).split(":")
                a, b = _parse_ref(old[0]), _parse_ref(old[-1])
                r1, c1, r2, c2 = min(r1, a[0]), min(c1, a[1]), max(r2, b[0]), max(c2, b[1])
            except ValueError:
                pass
            ref = f"{_ref_name(r1, c1)}:{_ref_name(r2, c2)}"
            pre = pre[:dm.start()] + f"{dm.group(1)}{dm.group(2)}{ref}{dm.group(2)}" + pre[dm.end():]
            head = pre + head[m.start():]
            m = _SHEET_DATA_OPEN_RE.search(head, len(pre))

    def new_rows(upto):
        out = []
        while pending and (upto is None or pending[0] < upto):
            r = pending.pop(0)
            out.append(_merge_row(title, r, f' r="{r}"', "", by_row[r]))
        return "".join(out)

    def edit_rows(block: str) -> str:
        if not pending:
            return block
        out, pos = [], 0
        for rm in _ROW_ELEM_RE.finditer(block):
            out.append(block[pos:rm.start()])
            a = _attrs(rm.group(1))
            try:
                r = int(a.get("r", ""))
            except ValueError:
                raise ValueError(f"sheet {title!r}: a row without its number") from None
            out.append(new_rows(r))
            if pending and pending[0] == r:
                pending.pop(0)
                out.append(_merge_row(title, r, rm.group(1), rm.group(2), by_row[r]))
            else:
                out.append(rm.group(0))
            pos = rm.end()
        out.append(block[pos:])
        return "".join(out)

    if m.group(1):  # <sheetData/>
        yield head[:m.start()] + "<sheetData>" + new_rows(None) + "</sheetData>" + head[m.end():]
        yield from texts
        return
    yield head[:m.end()]
    tail = ""
    for block, last in _row_blocks(head[m.end():], texts, title, part):
        if last:
            tail = block
        else:
            yield edit_rows(block)
    yield new_rows(None)
    yield tail
    yield from texts


def _with_calc_id(xml: str, at_least: int) -> str:
    """The workbook part with ``<calcPr calcId>`` at least ``at_least`` (added where missing) and
    ``fullCalcOnLoad="0"`` said outright, as openpyxl writes it (a reader such as openpyxl takes
    an absent attribute as true, the file format as false)."""
    m = _CALCPR_RE.search(xml)
    if m:
        tag = _FULLCALC_ANY_RE.sub("", m.group(0))
        tag = re.sub(r"\s*/?>$", lambda e: ' fullCalcOnLoad="0"' + e.group(0).strip().rjust(len(e.group(0).strip())), tag)
        cm = _CALCID_RE.search(tag)
        if cm:
            value = max(int(cm.group(3) or 0), at_least)
            tag = tag[:cm.start()] + f'{cm.group(1)}{cm.group(2)}{value}{cm.group(2)}' + tag[cm.end():]
        else:
            tag = tag.replace("<calcPr", f'<calcPr calcId="{at_least}"', 1)
        return xml[:m.start()] + tag + xml[m.end():]
    for after in ("</definedNames>", "</sheets>"):
        at = xml.find(after)
        if at >= 0:
            if after == "</sheets>" and ("<externalReferences" in xml or "<functionGroups" in xml):
                break
            at += len(after)
            return xml[:at] + f'<calcPr calcId="{at_least}" fullCalcOnLoad="0"/>' + xml[at:]
    raise ValueError("the workbook part has no place for its calculation properties")


def place_values(src: str | Path, dst: str | Path, cells: dict, calc_id: int | None = None) -> None:
    """Copy the package ``src`` to ``dst`` with the constant ``cells`` ({(sheet title, "B3"):
    value}) set, added where the sheet lacks them (an existing cell keeps its style), and the
    workbook's ``calcId`` raised to ``calc_id``.  Values are stored as :func:`store_values` stores
    them, text as an inline string.  Every other part is copied unchanged.  Raises ValueError for
    a value that cannot be stored or a part that cannot be edited; nothing is written then."""
    store_values(src, dst, {}, constants=cells, calc_id=calc_id)


# ----------------------------------------------------------------------------- the values copy
_STYLES_REL = _REL_DOC + "/styles"
_CALC_CHAIN_REL = _REL_DOC + "/calcChain"
_CELL_CM_RE = re.compile(r"""\s+cm\s*=\s*(["'])[^"']*\1""")
_BOOL_CELL_RE = re.compile(r"""<c(?=\s)([^>]*?\st\s*=\s*["']b["'][^>]*?)/?>""")
_S_ATTR_RE = re.compile(r"""\ss\s*=\s*["'](\d+)["']""")


def _number_formats(pkg: _Package, wb_part: str) -> list:
    """The number-format code of each cell format (``cellXfs``, by the index a cell's ``s`` names),
    None for a built-in format (ECMA-376 Part 1, 18.8.30: a package need not list them, and none
    shows a boolean as TRUE/FALSE); [] for a package without a styles part."""
    rel = next((r for r in _relationships(pkg, wb_part) if r.get("Type") == _STYLES_REL
                and r.get("TargetMode") != "External"), None)
    if rel is None:
        return []
    part = _resolve(wb_part, rel.get("Target", ""))
    if part not in pkg:
        return []
    root = _parse_xml(part, pkg[part])
    m = f"{{{_MAIN}}}"
    codes = {nf.get("numFmtId"): nf.get("formatCode") for nf in root.iter(f"{m}numFmt")}
    xfs = root.find(f"{m}cellXfs")
    return [] if xfs is None else [codes.get(xf.get("numFmtId", "0")) for xf in xfs.findall(f"{m}xf")]


def strip_formulas(src: str | Path, dst: str | Path, bool_format: str) -> None:
    """Copy the package ``src`` to ``dst`` with every formula taken out of its cell and the value
    stored with it kept (a values copy): a formula's text result becomes an inline string, a
    spill's cell metadata (``cm``) goes with its formula, and ``fullCalcOnLoad`` is dropped.
    Every other part (styles, charts, names, print setup) is copied unchanged, byte for byte.

    It gives the cells the values and formats that loading ``src`` with openpyxl's
    ``data_only=True`` and saving it gives, with every boolean shown in ``bool_format``; where
    that needs a part edited here (a boolean cell whose number format is not ``bool_format``, a
    calculation chain that would name cells without formulas, a sheet not in the unprefixed form
    openpyxl writes) it raises ValueError and writes nothing, and the caller takes the openpyxl
    route."""
    src, dst = Path(src), Path(dst)
    with _open_source(src, dst) as z:
        pkg = _Package(z, src.name)
        wb_part = _workbook_part(pkg)
        if any(r.get("Type") == _CALC_CHAIN_REL for r in _relationships(pkg, wb_part)):
            raise ValueError(f"{src.name} has a calculation chain")
        parts = _sheet_parts(pkg, wb_part)
        for title, part in parts.items():
            if part not in pkg:
                raise ValueError(f"sheet {title!r} names the part {part}, which the package lacks")
        formats = _number_formats(pkg, wb_part)
        bool_styles: set = set()
        changed: dict = {}
        wb_xml = pkg[wb_part].decode("utf-8")
        calc = _drop_full_calc(wb_xml)
        if calc != wb_xml:
            changed[wb_part] = calc.encode("utf-8")

        def cell(m: re.Match) -> str:
            attrs, inner = m.group(1), m.group(2)
            if inner is None or "<f" not in inner:
                return m.group(0)
            attrs = _CELL_CM_RE.sub("", attrs)
            inner = _F_RE.sub("", inner)
            kind = _attrs(attrs).get("t")
            if kind == "str":  # a formula's text: an inline string once the formula is gone
                v = _V_RE.search(inner)
                text = None
                if v is not None:
                    vm = re.fullmatch(r"<v(?:\s[^>]*)?>(.*)</v>", v.group(0), re.S)
                    text = vm.group(1) if vm else None
                attrs = re.sub(r"""\st\s*=\s*["']str["']""", "", attrs)
                if text:
                    attrs = _attrs_text(_with_type(_attrs(attrs), "inlineStr"))
                    return f'<c{attrs}><is><t xml:space="preserve">{text}</t></is></c>'
                return f"<c{attrs}/>"
            if not inner.strip():
                if kind is not None:  # a type without a value says nothing
                    attrs = re.sub(r"""\st\s*=\s*["'][a-zA-Z]*["']""", "", attrs)
                return f"<c{attrs}/>"
            return f"<c{attrs}>{inner}</c>"

        def edit_sheet(title):
            def edit(blocks):
                part = parts[title]
                texts = _texts(blocks)
                head, m = _sheet_head(texts)
                if not _ROOT_RE.search(head if m is None else head[:m.start()]):
                    raise ValueError(f"sheet {title!r} ({part}) is not SpreadsheetML in the unprefixed form")
                if m is None or m.group(1):
                    yield head.encode("utf-8")
                    for text in texts:
                        yield text.encode("utf-8")
                    return
                yield head[:m.end()].encode("utf-8")
                for block, last in _row_blocks(head[m.end():], texts, title, part):
                    if not last:
                        if 't="b"' in block or "t='b'" in block:
                            for b in _BOOL_CELL_RE.finditer(block):
                                sm = _S_ATTR_RE.search(b.group(1))
                                bool_styles.add(int(sm.group(1)) if sm else 0)
                        if "<f" in block:
                            block = _CELL_RE.sub(cell, block)
                    yield block.encode("utf-8")
                for text in texts:
                    yield text.encode("utf-8")
            return edit

        def finish():
            off = sorted(s for s in bool_styles if s >= len(formats) or formats[s] != bool_format)
            if off:
                raise ValueError(f"boolean cells in the cell format(s) {off[:5]}, which do not show TRUE/FALSE")

        _write_zip(pkg, dst, changed, {part: edit_sheet(title) for title, part in parts.items()}, finish)
