"""The CSV text reader every command shares: encoding and separator found, one-line refusals.

``read_csv_records`` reads UTF-8 (with or without BOM), UTF-16 with a BOM or Windows-1252, with
the separator (comma, semicolon or tab) taken from the header line; what it cannot read so is a
:class:`PanelError` whose message is one line for the terminal.  A semicolon- or tab-separated file
whose numbers are written with decimal commas (12,5 or 1.234,5: the usual export where the comma is
the decimal mark) is read with those numbers as decimal points, and the records say so
(:attr:`Records.note`); a file that mixes decimal commas and decimal points is refused.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path

from .core.errors import excerpt

__all__ = ["PanelError", "Records", "read_csv_records", "check_row_widths", "decimal_comma_hint", "MAX_FIELD_CHARS",
           "LEVELS_AUTOCORRELATION"]

#: the longest CSV field read (Python's csv module stops at 128 KiB unless told otherwise); a longer
#: field is refused: no number or name is that long, so the file is not a CSV of returns
MAX_FIELD_CHARS = 1 << 20

# Our own rule of thumb for telling price levels from returns (common practice, not a formal test):
# returns have a lag-1 autocorrelation near zero, while a level series wanders like a random walk and
# has one near one.  A column of positive numbers whose lag-1 autocorrelation exceeds 0.8 is taken to
# be levels.  0.8 rather than 0.9 because short random walks fall below 0.9 often (in simulation about
# half of 60-point walks do), while returns this autocorrelated would be most unusual.
LEVELS_AUTOCORRELATION = 0.8  # here, not in batch: the help text reads it


class PanelError(ValueError):
    """A file or argument the run cannot use at all; the message is one line for the terminal."""


class Records(list):
    """[(line number, [cells])] of a CSV file, with ``note``: how its numbers were read when that
    is worth saying (decimal commas read as points), else empty."""

    note = ""


# ---------------------------------------------------------------------------------------------
# CSV text


def _read_text(path: Path) -> str:
    """A text file's content: UTF-8 (with or without BOM), UTF-16 with a BOM, else Windows-1252."""
    if not path.exists():
        raise PanelError(f"{path}: no such file")
    if path.is_dir():
        raise PanelError(f"{path}: is a directory (a folder), not a file")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise PanelError(f"{path}: cannot be read ({exc.strerror or type(exc).__name__})") from None
    if raw[:2] in (b"\xff\xfe", b"\xfe\xff"):
        try:
            return raw.decode("utf-16")
        except UnicodeDecodeError:
            pass
    if b"\x00" in raw:
        raise PanelError(f"{path}: holds NUL bytes, so it is not a CSV text file (save it as CSV UTF-8)")
    for enc in ("utf-8-sig", "cp1252"):
        try:
            return raw.decode(enc)
        except UnicodeDecodeError:
            continue
    raise PanelError(f"{path}: is not text in UTF-8 or Windows-1252; save it as CSV UTF-8")


def _delimiter(text: str) -> str:
    """The separator the header line uses: comma, semicolon or tab (the one it holds most of)."""
    first = next((line for line in text.splitlines() if line.strip()), "")
    counts = {d: first.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=counts.get)
    return best if counts[best] else ","


def read_csv_records(path) -> list:
    """[(line number, [cells])] of the non-blank records of a CSV file, the header first.

    The encoding (UTF-8, UTF-16 with a BOM, Windows-1252) and the separator (comma, semicolon or
    tab, from the header line) are found; cells are stripped of surrounding blanks.  Raises
    :class:`PanelError` with one line when the file cannot be read so.
    """
    path = Path(path)
    text = _read_text(path)
    delim = _delimiter(text)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delim)
    out = []
    csv.field_size_limit(MAX_FIELD_CHARS)
    try:
        for row in reader:
            if any(c.strip() for c in row):
                out.append((reader.line_num, [c.strip() for c in row]))
    except csv.Error as exc:
        line = max(reader.line_num, 1)
        if "field larger than field limit" in str(exc):
            raise PanelError(f"{path} line {line}: a field is longer than {MAX_FIELD_CHARS:,} characters (1 MiB); "
                             "cannot be read as a CSV of numbers") from None
        raise PanelError(f"{path} line {line}: cannot be read as CSV ({excerpt(exc, 80)})") from None
    _check_separators(path, out, delim)
    records = Records(out)
    if delim != "," and _decimal_commas(path, records):
        records.note = "numbers written with decimal commas read as decimal points"
    return records


_COMMA_NUMBER = re.compile(r"[-+]?(?:\d{1,3}(?:\.\d{3})+|\d+),\d+(?:[eE][-+]?\d+)?")
_POINT_NUMBER = re.compile(r"[-+]?(?:\d+\.\d*|\.\d+)(?:[eE][-+]?\d+)?")


def _decimal_commas(path, records) -> bool:
    """Rewrite the data cells of a semicolon- or tab-separated file that are numbers written with
    a decimal comma (12,5; 1.234,5 with points grouping thousands) as decimal-point numbers, in
    place; True when there were any.  A file that also writes a number with a decimal point alone
    (0.5, or 1.234, which could be either) is refused: which mark is meant cannot be told."""
    first = None
    for lineno, row in records[1:]:
        for cell in row:
            if _COMMA_NUMBER.fullmatch(cell):
                first = (lineno, cell)
                break
        if first:
            break
    if first is None:
        return False
    for lineno, row in records[1:]:
        for cell in row:
            if _POINT_NUMBER.fullmatch(cell):
                raise PanelError(f'{path} line {first[0]}: "{excerpt(first[1])}" is written with a decimal comma but line '
                                 f'{lineno} writes "{excerpt(cell)}" with a decimal point; use one decimal mark '
                                 f"throughout{decimal_comma_hint(first[1])}")
    for _, row in records[1:]:
        for j, cell in enumerate(row):
            if _COMMA_NUMBER.fullmatch(cell):
                row[j] = cell.replace(".", "").replace(",", ".")
    return True


_SEPARATOR_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs"}


def check_row_widths(path, records) -> None:
    """Refuse a data row with more filled fields than the header has columns (its cells would be
    read under the wrong names); blank fields past the header's end (a trailing separator) are fine."""
    if not records:
        return
    width = len(records[0][1])
    for lineno, row in records[1:]:
        if any(row[width:]):
            first = next(c for c in row[width:] if c)
            split = len(row) == width + 1 and re.fullmatch(r"[-+]?\d+", row[width - 1] or "x") and first.isdigit()
            hint = (f"a decimal comma in a comma-separated file? write {row[width - 1]}.{first}, or separate the "
                    "fields with semicolons" if split else "quote a field that holds the separator, or name every column")
            raise PanelError(f"{path} line {lineno}: {len(row)} fields but the header names {width} "
                             f"column{'s' if width != 1 else ''} (\"{excerpt(first)}\" has none); {hint}")


def _check_separators(path, records, delim) -> None:
    """A header separated by one character and data rows by another: refused naming both."""
    if len(records) < 2 or len(records[0][1]) < 2:
        return
    for lineno, row in records[1:]:
        if len(row) == 1:
            others = [d for d in _SEPARATOR_NAMES if d != delim and d in row[0]]
            if others:
                raise PanelError(f"{path} line {lineno}: the header is separated by {_SEPARATOR_NAMES[delim]} but this "
                                 f"line by {_SEPARATOR_NAMES[others[0]]}; use one separator throughout")


_DECIMAL_COMMA = re.compile(r"[-+]?\d{1,3}(\.\d{3})*,\d+|[-+]?\d+,\d+")


def decimal_comma_hint(cell: str) -> str:
    """" (a decimal comma? write 0.5)" when a cell reads as a number written with a decimal comma."""
    if _DECIMAL_COMMA.fullmatch(cell.strip()):
        dotted = cell.strip().replace(".", "").replace(",", ".")
        return f" (a decimal comma? write {excerpt(dotted)})"
    return ""
