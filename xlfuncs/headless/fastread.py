"""Read the cells of a plain .xlsx package without building openpyxl's workbook (the common case, fast).

openpyxl builds a cell object, with its style, for every cell of every sheet: about 8 us a cell
here.  A recalculation needs only each cell's value or formula, so :func:`read_cells` scans the
sheet parts' XML with regular expressions and gives what :class:`~xlfuncs.headless.recalc.Workbook`
reads from openpyxl, value for value: the same number types (``int`` where the stored text has no
point or exponent, as openpyxl casts), shared and inline strings through openpyxl's own readers,
booleans, error codes, and numbers in a date or time format turned into dates and back as openpyxl
and ``recalc._constant`` do.

It answers only packages it reads exactly as openpyxl does and raises :class:`NotPlain` for the
rest, which the caller then loads with openpyxl: shared formulas and data tables, cells or rows
without their reference, chart sheets, the 1904 date system, XML comments or CDATA in a sheet,
prefixed element names, a cell whose value type it does not know.  ``tests/test_fastread.py``
compares both readers on the shipped templates and on generated workbooks.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

from .xlsxpost import _MAIN, _REL_DOC, _Package, _relationships, _resolve, _workbook_part

__all__ = ["NotPlain", "read_cells"]

_WORKSHEET_REL = _REL_DOC + "/worksheet"
_STYLES_REL = _REL_DOC + "/styles"
_STRINGS_REL = _REL_DOC + "/sharedStrings"
_MAX_SHEET = 64 * 2**20  # a larger sheet part goes through openpyxl's streaming reader


class NotPlain(Exception):
    """A package this reader does not read exactly as openpyxl does; load it with openpyxl."""


_ROOT_RE = re.compile(r"<worksheet\b[^>]*\sxmlns\s*=\s*[\"']" + re.escape(_MAIN) + "[\"']")
_CELL_RE = re.compile(r"<c(?=[\s/>])([^>]*?)(?:/>|>(.*?)</c>)", re.S)
_CELL_START_RE = re.compile(r"<c[\s/>]")
_ROW_RE = re.compile(r"<row(?=[\s/>])([^>]*)>")
_R_RE = re.compile(r"""\br\s*=\s*["']\$?([A-Za-z]{1,3})\$?(\d+)["']""")
_ROWR_RE = re.compile(r"""\br\s*=\s*["'](\d+)["']""")
_S_RE = re.compile(r"""\bs\s*=\s*["'](\d+)["']""")
_T_RE = re.compile(r"""\bt\s*=\s*["']([A-Za-z]+)["']""")
_V_RE = re.compile(r"<v(?:\s[^>]*)?>(.*?)</v>|<v(?:\s[^>]*)?/>", re.S)
_F_RE = re.compile(r"<f(?=[\s/>])([^>]*?)(?:/>|>(.*?)</f>)", re.S)
_FATTR_RE = re.compile(r"""([A-Za-z_][\w.:-]*)\s*=\s*(?:"([^"]*)"|'([^']*)')""")
_CM_RE = re.compile(r"(?<![\w:.-])cm\s*=")
_ENTITY_RE = re.compile(r"&(?:#(\d+)|#x([0-9A-Fa-f]+)|(lt|gt|amp|quot|apos));")
_NAMED = {"lt": "<", "gt": ">", "amp": "&", "quot": '"', "apos": "'"}


def _unescape(text: str) -> str:
    if "&" not in text:
        return text

    def one(m):
        if m.group(1):
            return chr(int(m.group(1)))
        if m.group(2):
            return chr(int(m.group(2), 16))
        return _NAMED[m.group(3)]

    return _ENTITY_RE.sub(one, text)


def _col_index(letters: str) -> int:
    n = 0
    for ch in letters.upper():
        n = n * 26 + (ord(ch) - 64)
    return n


def _text(pkg: _Package, part: str) -> str:
    info = pkg.infos[part]
    if info.file_size > _MAX_SHEET:
        raise NotPlain(f"{part} is large")
    return b"".join(pkg.chunks(part)).decode("utf-8")


def read_cells(path) -> dict:
    """{"titles": [...], "names": {(title or None, NAME): text}, "sheets": {title: (cells, arrays,
    max_row, max_col, marked)}} where ``cells`` maps (row, col) to the value openpyxl holds (a
    formula as its text "=...", numbers, strings, booleans, dates), ``arrays`` maps (row, col) to
    the ref of an array formula, and ``marked`` lists the cells that carry cell metadata
    (``cm``).  Raises :class:`NotPlain` where openpyxl must read the package."""
    label = Path(path).name
    try:
        z = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError) as exc:
        raise NotPlain(str(exc)) from None
    with z:
        pkg = _Package(z, label)
        try:
            wb_part = _workbook_part(pkg)
            rels = _relationships(pkg, wb_part)
            root = ET.fromstring(pkg[wb_part])
        except (ValueError, ET.ParseError, KeyError) as exc:
            raise NotPlain(str(exc)) from None
        m = f"{{{_MAIN}}}"
        pr = root.find(f"{m}workbookPr")
        if pr is not None and pr.get("date1904") in ("1", "true"):
            raise NotPlain("1904 date system")
        by_id = {r.get("Id"): r for r in rels}
        sheets = []
        for sh in root.iter(f"{m}sheet"):
            rel = by_id.get(sh.get(f"{{{_REL_DOC}}}id"))
            if rel is None or rel.get("Type") != _WORKSHEET_REL or rel.get("TargetMode") == "External":
                raise NotPlain("a sheet that is not a worksheet")
            part = _resolve(wb_part, rel.get("Target", ""))
            if part not in pkg:
                raise NotPlain(f"missing {part}")
            sheets.append((sh.get("name"), part))
        titles = [t for t, _ in sheets]
        names: dict = {}
        for dn in root.iter(f"{m}definedName"):
            name, text = dn.get("name") or "", dn.text or ""
            local = dn.get("localSheetId")
            if name.startswith("_xlnm") or not text:
                continue
            if local is None:
                names[(None, name.upper())] = text
            else:
                try:
                    names[(titles[int(local)], name.upper())] = text
                except (ValueError, IndexError):
                    raise NotPlain("a name local to no sheet") from None
        strings, dates, deltas = [], set(), set()
        for r in rels:
            part = _resolve(wb_part, r.get("Target", ""))
            if r.get("Type") == _STRINGS_REL and part in pkg:
                strings = _plain_strings(pkg[part])
                if strings is None:
                    from openpyxl.reader.strings import read_string_table

                    with z.open(pkg.infos[part]) as fh:
                        strings = read_string_table(fh)
            elif r.get("Type") == _STYLES_REL and part in pkg:
                data = pkg[part]
                if _general_styles_only(data):
                    continue  # no style shows a date or a time
                from openpyxl.styles.stylesheet import Stylesheet

                sheet_styles = Stylesheet.from_tree(ET.fromstring(data))
                dates, deltas = set(sheet_styles.date_formats), set(sheet_styles.timedelta_formats)
        out = {}
        for title, part in sheets:
            out[title] = _read_sheet(title, _text(pkg, part), strings, dates, deltas)
        return {"titles": titles, "names": names, "sheets": out}


_SST_ROOT_RE = re.compile(r"<sst\b[^>]*\sxmlns\s*=\s*[\"']" + re.escape(_MAIN) + "[\"']")
_SI_RE = re.compile(r'<si><t(?: xml:space="preserve")?>([^<]*)</t></si>')
_STYLES_ROOT_RE = re.compile(r"<styleSheet\b[^>]*\sxmlns\s*=\s*[\"']" + re.escape(_MAIN) + "[\"']")
_CELLXFS_RE = re.compile(r"<cellXfs\b[^>]*?(?:/>|>(.*?)</cellXfs>)", re.S)
_XF_RE = re.compile(r"<xf\b([^>]*)>")
_NUMFMT_ID_RE = re.compile(r"""\bnumFmtId\s*=\s*["'](\d+)["']""")
_CUSTOM_ZERO_RE = re.compile(r"""<numFmt\b[^>]*\bnumFmtId\s*=\s*["']0+["']""")


def _plain_strings(data: bytes):
    """The shared strings as openpyxl reads them, where each is one plain run (``<si><t>``
    text ``</t></si>``, the form openpyxl and Excel write for unformatted text); None for any
    other table (rich text, phonetic runs, another namespace form, carriage returns, which XML
    reading turns into line feeds), which openpyxl's reader then reads."""
    try:
        xml = data.decode("utf-8")
    except UnicodeDecodeError:
        return None
    if not _SST_ROOT_RE.search(xml[:1000]) or "\r" in xml or "<!--" in xml or "<![CDATA[" in xml:
        return None
    found = _SI_RE.findall(xml)
    if len(found) != xml.count("<si"):
        return None
    # as openpyxl's read_string_table: the text, then "x005F_" removed
    return [_unescape(t).replace("x005F_", "") for t in found]


def _general_styles_only(data: bytes) -> bool:
    """Whether every cell style of the styles part has the General number format (id 0, not
    redefined), so that no number reads as a date or a time; False where that is not certain."""
    try:
        xml = data.decode("utf-8")
    except UnicodeDecodeError:
        return False
    if not _STYLES_ROOT_RE.search(xml[:1000]) or "<!--" in xml or "<![CDATA[" in xml or _CUSTOM_ZERO_RE.search(xml):
        return False
    m = _CELLXFS_RE.search(xml)
    if m is None:
        return False
    for xf in _XF_RE.finditer(m.group(1) or ""):
        n = _NUMFMT_ID_RE.search(xf.group(1))
        if n is not None and int(n.group(1)) != 0:
            return False
    return True


def _read_sheet(title, xml: str, strings, dates, deltas):
    head_end = xml.find("<sheetData")
    if head_end < 0 or not _ROOT_RE.search(xml[:head_end]):
        raise NotPlain(f"{title}: not the unprefixed SpreadsheetML")
    end = xml.find("</sheetData>", head_end)
    body = xml[head_end:end if end >= 0 else len(xml)]
    if "<!--" in body or "<![CDATA[" in body or "<f t=\"shared\"" in body or "dataTable" in body:
        raise NotPlain(f"{title}: comments, CDATA, shared formulas or data tables")
    for rm in _ROW_RE.finditer(body):
        if not _ROWR_RE.search(rm.group(1)):
            raise NotPlain(f"{title}: a row without its number")
    quick = _quick_cells(body, strings, dates, deltas)
    if quick is not None:
        return quick
    mixed = _mixed_cells(title, body, strings, dates, deltas)
    if mixed is not None:
        return mixed
    cells, arrays, max_row, max_col, marked, n = _general_cells(title, body, strings, dates, deltas)
    if n != len(_CELL_START_RE.findall(body)):
        raise NotPlain(f"{title}: cells not understood")
    return cells, arrays, max(max_row, 1), max(max_col, 1), marked


def _mixed_cells(title, body: str, strings, dates, deltas):
    """A sheet whose cells are mostly in the quick form, with a few others (an array formula, a
    spill's cell metadata): the quick route for the first, the general loop for the rest; None
    where the quick route declines its part."""
    plain, rest, last = [], [], 0
    for m in _QUICK_RE.finditer(body):
        if m.start() > last:
            rest.append(body[last:m.start()])
        plain.append(m.group(0))
        last = m.end()
    rest.append(body[last:])
    plain, rest = "".join(plain), "".join(rest)
    quick = _quick_cells(plain, strings, dates, deltas)
    if quick is None:
        return None
    cells, _, q_row, q_col, _ = quick
    other, arrays, max_row, max_col, marked, n = _general_cells(title, rest, strings, dates, deltas)
    if n != len(_CELL_START_RE.findall(rest)):
        raise NotPlain(f"{title}: cells not understood")
    cells.update(other)
    return cells, arrays, max(max_row, q_row, 1), max(max_col, q_col, 1), marked


def _general_cells(title, body: str, strings, dates, deltas):
    """(cells, arrays, max_row, max_col, marked, cells read) of ``body`` by the general loop:
    every cell's attributes parsed, any formula, value or inline string."""
    cells, arrays, marked = {}, {}, []
    max_row = max_col = 0
    n = 0
    for cm in _CELL_RE.finditer(body):
        n += 1
        attrs, inner = cm.group(1), cm.group(2)
        rm = _R_RE.search(attrs)
        if rm is None:
            raise NotPlain(f"{title}: a cell without its reference")
        row, col = int(rm.group(2)), _col_index(rm.group(1))
        if row > max_row:
            max_row = row
        if col > max_col:
            max_col = col
        if _CM_RE.search(attrs):
            marked.append((row, col))
        if not inner:
            continue
        tm = _T_RE.search(attrs)
        kind = tm.group(1) if tm else "n"
        if "<f" in inner:
            fm = _F_RE.search(inner)
            if fm is None:
                raise NotPlain(f"{title}: a formula not understood")
            fattrs = {a.group(1): (a.group(2) if a.group(2) is not None else a.group(3))
                      for a in _FATTR_RE.finditer(fm.group(1))}
            ftype = fattrs.get("t", "normal")
            text = "=" + _unescape(fm.group(2) or "")
            if ftype == "array":
                ref = _unescape(fattrs.get("ref", ""))
                if not ref:
                    raise NotPlain(f"{title}: an array formula without its range")
                arrays[(row, col)] = ref
                cells[(row, col)] = text
            elif ftype == "normal":
                if text == "=":
                    raise NotPlain(f"{title}: an empty formula")
                cells[(row, col)] = text
            else:
                raise NotPlain(f"{title}: a {ftype} formula")
            continue
        if kind == "inlineStr":
            if "<is" not in inner:
                continue
            from openpyxl.cell.text import Text

            try:
                node = ET.fromstring(f'<c xmlns="{_MAIN}">{inner}</c>').find(f"{{{_MAIN}}}is")
            except ET.ParseError:
                raise NotPlain(f"{title}: an inline string not understood") from None
            if node is None:
                continue
            value = Text.from_tree(node).content
        else:
            vm = _V_RE.search(inner)
            raw = _unescape(vm.group(1)) if vm and vm.group(1) is not None else None
            if not raw:  # openpyxl: findtext(...) or None
                continue
            if kind == "n":
                try:
                    value = float(raw) if ("." in raw or "E" in raw or "e" in raw) else int(raw)
                except ValueError:
                    raise NotPlain(f"{title}: a number not understood") from None
                sm = _S_RE.search(attrs)
                style = int(sm.group(1)) if sm else 0
                if style in dates:
                    from openpyxl.utils.datetime import from_excel

                    try:
                        value = from_excel(value, timedelta=style in deltas)
                    except (OverflowError, ValueError):
                        value = "#VALUE!"
            elif kind == "s":
                try:
                    value = strings[int(raw)]
                except (ValueError, IndexError):
                    raise NotPlain(f"{title}: a shared string not understood") from None
            elif kind == "b":
                value = bool(int(raw))
            elif kind in ("str", "e"):
                value = raw
            elif kind == "d":
                from openpyxl.utils.datetime import from_ISO8601

                value = from_ISO8601(raw)
            else:
                raise NotPlain(f"{title}: a cell of type {kind}")
        if value is None:
            continue
        cells[(row, col)] = value  # as openpyxl holds it; the caller tells formulas from constants
    return cells, arrays, max_row, max_col, marked, n


# the cells as openpyxl and Excel write them: attributes r, s, t in this order, an ordinary
# formula, a value or an inline string of one run; a sheet with any other cell is read by the
# general loop of _read_sheet
_QUICK_RE = re.compile(
    r'<c r="([A-Z]{1,3})(\d+)"(?: s="(\d+)")?(?: t="([a-zA-Z]+)")?'
    r'(?:\s*/>|>(<f>([^<]*)</f>)?(?:<v>([^<]*)</v>|<v\s*/>)?'
    r'(?:<is><t>([^<]*)</t></is>|<is><t xml:space="preserve">([^<]*)</t></is>)?</c>)'
)
_COLS: dict = {}


def _quick_cells(body: str, strings, dates, deltas):
    found = _QUICK_RE.findall(body)
    # every cell read: as many as start tags, of which there are at most as many as "<c" (counted
    # first, as it is quicker, and equal in a cell table of cells alone)
    if len(found) != body.count("<c") and len(found) != len(_CELL_START_RE.findall(body)):
        return None
    cells = {}
    max_row = max_col = 1
    cols = _COLS
    for letters, row, style, kind, has_f, ftext, v, is1, is2 in found:
        col = cols.get(letters)
        if col is None:
            col = cols[letters] = _col_index(letters)
        row = int(row)
        if row > max_row:
            max_row = row
        if col > max_col:
            max_col = col
        if has_f:
            text = "=" + (_unescape(ftext) if "&" in ftext else ftext)
            if text == "=":
                return None
            cells[(row, col)] = text
        elif kind == "inlineStr":
            text = is1 or is2
            if text or "<is>" in body:  # an empty run: the general loop decides
                if not text:
                    return None
                cells[(row, col)] = _unescape(text)
        elif v:
            raw = _unescape(v) if "&" in v else v
            if kind == "" or kind == "n":
                try:
                    value = float(raw) if ("." in raw or "E" in raw or "e" in raw) else int(raw)
                except ValueError:
                    return None
                if style and int(style) in dates:  # as openpyxl reads a number in a date format
                    from openpyxl.utils.datetime import from_excel

                    try:
                        value = from_excel(value, timedelta=int(style) in deltas)
                    except (OverflowError, ValueError):
                        value = "#VALUE!"
                cells[(row, col)] = value
            elif kind == "s":
                try:
                    cells[(row, col)] = strings[int(raw)]
                except (ValueError, IndexError):
                    return None
            elif kind == "b":
                cells[(row, col)] = bool(int(raw))
            elif kind == "str" or kind == "e":
                cells[(row, col)] = raw
            else:
                return None
    return cells, {}, max_row, max_col, []
