"""The CSV text reader every command shares: encoding and separator found, one-line refusals.

``read_csv_records`` reads UTF-8 (with or without BOM), UTF-16 with a BOM or Windows-1252, with
the separator (comma, semicolon or tab) taken from the header line; what it cannot read so is a
:class:`PanelError` whose message is one line for the terminal.  A semicolon- or tab-separated file
whose numbers are written with decimal commas (12,5 or 1.234,5: the usual export where the comma is
the decimal mark) is read with those numbers as decimal points, and the records say so
(:attr:`Records.note`); a file that mixes decimal commas and decimal points is refused.

Two checks for the commands that fit a file's rows in order: ``check_header_names`` refuses a first
line of numbers (a file without its header line would lose its first observation), and
``check_date_order`` refuses dates newest first, out of order or repeated (the last row is taken as
the latest observation, so a file sorted the other way would be fitted backwards).

``date_spacing`` compares the dates' usual spacing with ``periods`` a year (the rule the workbook
refresh applies), and ``spacing_problem`` words a disagreement for the command line.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path

from .core.errors import excerpt

__all__ = ["PanelError", "Records", "read_csv_records", "check_row_widths", "check_header_names", "check_date_order",
           "day_number", "decimal_comma_hint", "MAX_FIELD_CHARS", "LEVELS_AUTOCORRELATION", "SPACING_RATIO",
           "date_spacing", "spacing_problem"]

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


# ---------------------------------------------------------------------------------------------
# header line and date order


_NUMBER_TEXT = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?%?")
_WHOLE_NUMBER = re.compile(r"\d+")


def day_number(cell) -> float | None:
    """A date cell as a day number (ISO text such as 2026-10-30, or a date value; a time of day as a
    fraction of the day), None when it is not a date."""
    import datetime as dt

    if isinstance(cell, str):
        try:
            cell = dt.datetime.fromisoformat(cell.strip())
        except ValueError:
            return None
    if isinstance(cell, dt.datetime):
        return cell.toordinal() + (cell.hour * 3600 + cell.minute * 60 + cell.second + cell.microsecond / 1e6) / 86400.0
    if isinstance(cell, dt.date):
        return float(cell.toordinal())
    return None


def check_header_names(path, records, whole_numbers_are_names: bool = False) -> None:
    """Refuse a header line whose filled cells all read as numbers or dates: the file has no header
    line, and its first row of data would be taken for column names (and left out).  With
    ``whole_numbers_are_names`` a header of unsigned whole numbers only is accepted (a wide panel's
    series may be named by numeric codes such as 7203)."""
    if not records:
        return
    lineno, header = records[0]
    cells = [c for c in header if c]
    if not cells:
        return

    def numeric(c):
        return bool(_NUMBER_TEXT.fullmatch(c) or _COMMA_NUMBER.fullmatch(c)) or day_number(c) is not None

    if not all(numeric(c) for c in cells):
        return
    if whole_numbers_are_names and all(_WHOLE_NUMBER.fullmatch(c) for c in cells):
        return
    shown = ",".join(excerpt(c, 20) for c in header[:4]) + ("..." if len(header) > 4 else "")
    raise PanelError(f'{path} line {lineno}: the first line holds numbers ("{shown}"), not column names; add a header '
                     "line naming the columns, such as date,return, so the first row is read as data")


def check_date_order(path, dated, what='column "date"') -> None:
    """Refuse dates that are not strictly increasing down the file.

    ``dated`` is [(where, day number, text)] for the rows whose date cell reads as a date, in file
    order (``where`` as "line 5"); ``what`` names the dates in the message.  Dates mostly newest first
    are said so; otherwise the first date not after the one before it is named (repeated or out of
    order).  The commands take the last row as the latest observation, so any of these would fit and
    forecast the series in the wrong order."""
    pairs = [(a, b) for a, b in zip(dated, dated[1:]) if not b[1] > a[1]]
    if not pairs:
        return
    falling = [(a, b) for a, b in pairs if b[1] < a[1]]
    if 2 * len(falling) > len(dated) - 1:
        a, b = falling[0]
        raise PanelError(f"{path}: {what} runs newest first ({a[0]}: {excerpt(a[2])}, {b[0]}: {excerpt(b[2])}); "
                         "sort it oldest first (the last row is read as the latest observation)")
    a, b = pairs[0]
    if b[1] == a[1]:
        raise PanelError(f"{path} {b[0]}: {what} repeats the date {excerpt(b[2])} of {a[0]}; one row per date "
                         "(a row pasted twice?)")
    raise PanelError(f"{path} {b[0]}: {what} is out of order ({excerpt(b[2])} after {excerpt(a[2])} on {a[0]}); "
                     "sort the file oldest first")


#: the dates' usual spacing, over the spacing the fit's periods a year imply, must lie within
#: these bounds (our own rule: daily trading data at 252 a year are 0.69, calendar-daily at 365
#: 1.0, month ends at 12 a year about 1.0; monthly data under a daily setting are 21)
SPACING_RATIO = (0.4, 2.5)


def _median(xs):
    s = sorted(xs)
    m = len(s) // 2
    return s[m] if len(s) % 2 else 0.5 * (s[m - 1] + s[m])


def _days(gap):
    """Days in a gap between dates (a timedelta) or between day numbers (a number)."""
    return gap.days if hasattr(gap, "days") else float(gap)


def date_spacing(dates, periods):
    """(usual, expected, kind) when the usual spacing of ``dates`` (dates, or day numbers) (the median of the days between them)
    disagrees with ``periods`` a year (one every 365.25 / periods days, outside
    :data:`SPACING_RATIO`), else None; None too without ``periods`` or with fewer than 4 dates.
    ``kind`` names the dates' frequency: daily, weekly, monthly, quarterly or yearly."""
    spans = [_days(dates[i] - dates[i - 1]) for i in range(1, len(dates))]
    if not periods or len(spans) < 3:
        return None
    usual = _median(spans)
    expected = 365.25 / periods
    if SPACING_RATIO[0] <= usual / expected <= SPACING_RATIO[1]:
        return None
    kind = "daily" if usual <= 4 else "weekly" if usual <= 10 else "monthly" if usual <= 45 else "quarterly" \
        if usual <= 120 else "yearly"
    return usual, expected, kind


#: periods a year usual for each kind of dates, as suggested in :func:`spacing_problem`
_USUAL_PERIODS = {"daily": 252, "weekly": 52, "monthly": 12, "quarterly": 4, "yearly": 1}


def spacing_problem(path, dates, periods):
    """The one-line refusal of a command whose file's dates disagree with ``periods`` a year
    (:func:`date_spacing`), else None: every figure would be for the wrong horizon."""
    found = date_spacing(dates, periods)
    if found is None:
        return None
    usual, expected, kind = found
    return (f"{path}: the dates are usually {usual:g} day{'s' if usual != 1 else ''} apart ({kind} data), but the "
            f"options say periods={periods:g} a year, one every {expected:.1f} days: every figure would be for the "
            f"wrong horizon; set periods={_USUAL_PERIODS[kind]} for {kind} data, or leave periods out")
