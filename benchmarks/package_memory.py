"""Package memory: peak memory and time of check_package, dynamic_anchors and store_values on a
sheet of a million cells and on a small file that unpacks to 1.5 GB, for this module (parts
streamed) and for a baseline that reads every part whole, as the module did before; measured side
by side in one run, each call in a fresh process.

    python benchmarks/package_memory.py [--cells 1000000] [--inflate-mb 1536] [--keep DIR]

For each call it prints the wall time, the peak of Python's allocations while the call runs
(tracemalloc, in a second process: tracing slows allocation-heavy code) and the peak resident
memory of the process (ru_maxrss, Linux), with what it held just before the call in brackets
(the interpreter, the libraries and, for store_values, the values to store).  The
baseline is implemented here from the module's own lookups (``_workbook_part``, ``_edit_sheet``
given the whole text as one piece, and so on); before this module checked packages there was no
check_package, so its baseline column is empty.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import re
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
import zipfile
from pathlib import Path

from xlfuncs.headless import xlsxpost as X

SHEET = "Data"
COLUMNS = 10  # date, level, return formula, ..., one more formula: two formulas a row


# ----------------------------------------------------------------------------- the baseline
def naive_dynamic_anchors(path):
    """dynamic_anchors as it was: every part read whole, each sheet decoded whole."""
    found = set()
    with zipfile.ZipFile(path) as z:
        members = {i.filename: z.read(i.filename) for i in z.infolist() if not i.is_dir()}
    wb_part = X._workbook_part(members)
    meta = [X._resolve(wb_part, r.get("Target", "")) for r in X._relationships(members, wb_part)
            if r.get("Type") == X._META_REL]
    if not meta or meta[0] not in members:
        return found
    marks = {str(i) for i in X._dynamic_cm_indices(meta[0], members[meta[0]])}
    if not marks:
        return found
    for title, part in X._sheet_parts(members, wb_part).items():
        xml = members.get(part, b"").decode("utf-8")
        for m in re.finditer(r"<c(?=[\s/>])([^>]*?)/?>", xml):
            attrs = X._attrs(m.group(1))
            if attrs.get("cm") in marks and attrs.get("r"):
                found.add((title, attrs["r"].upper()))
    return found


def naive_store_values(src, dst, values, dynamic):
    """store_values as it was: every part read whole, each edited sheet edited and written whole."""
    src, dst = Path(src), Path(dst)
    encoded = {key: X._encode_value(str(key), v) for key, v in values.items()}
    with zipfile.ZipFile(src) as z:
        members = {i.filename: z.read(i.filename) for i in z.infolist() if not i.is_dir()}
        wb_part = X._workbook_part(members)
        parts = X._sheet_parts(members, wb_part)
        by_sheet = X._check_keys(encoded, "values", parts)
        spills = {sheet: {anchor: X._parse_range(anchor, ref) for anchor, ref in cells.items()}
                  for sheet, cells in X._check_keys(dynamic, "dynamic", parts).items()}
        changed = {}
        for title in sorted(set(by_sheet) | set(spills), key=list(parts).index):
            part, absent = parts[title], set()
            xml = members[part].decode("utf-8")
            new = "".join(X._edit_sheet(title, part, [xml], by_sheet.get(title, {}), spills.get(title, {}), absent))
            changed[part] = new.encode("utf-8")
        wb_xml = members[wb_part].decode("utf-8")
        changed[wb_part] = X._drop_full_calc(wb_xml).encode("utf-8")
        if spills:
            X._ensure_metadata(members, wb_part, changed)
        with zipfile.ZipFile(dst, "w") as out:
            for info in z.infolist():
                entry = zipfile.ZipInfo(info.filename, info.date_time)
                entry.compress_type = info.compress_type
                data = changed.get(info.filename)
                out.writestr(entry, z.read(info.filename) if data is None else data)
            for name, data in changed.items():
                if name not in members:
                    out.writestr(zipfile.ZipInfo(name, (2020, 1, 1, 0, 0, 0)), data)


# ----------------------------------------------------------------------------- the files
def build_cells(path: Path, cells: int) -> int:
    """A workbook of ``cells`` cells (two formulas a row) with one spill anchor marked; its rows."""
    import openpyxl

    rows = cells // COLUMNS
    raw = path.with_name("raw-" + path.name)
    wb = openpyxl.Workbook(write_only=True)
    ws = wb.create_sheet(SHEET)
    rng = random.Random(1)
    ws.append(["date", "level", "return", "a", "b", "c", "d", "e", "f", "g"][:COLUMNS])
    for r in range(2, rows + 2):
        ws.append([40000 + r, 100 + rng.random(), f"=LN(B{r}/B{r - 1})*100", rng.random(), rng.random(),
                   r * 2, r * 3, 1.5, f"=C{r}*2", "x"][:COLUMNS])
    wb.save(raw)
    X.store_values(raw, path, {}, {(SHEET, "C3"): "C3:C3"})  # adds the dynamic-array metadata part
    raw.unlink()
    return rows


def build_inflating(path: Path, megabytes: int) -> None:
    """A workbook whose sheet unpacks to ``megabytes`` MiB of one repeated row, built by streaming."""
    import openpyxl

    raw = path.with_name("raw-" + path.name)
    wb = openpyxl.Workbook()
    wb.active.title = SHEET
    wb.active["A1"] = "=1+1"
    wb.save(raw)
    head = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<worksheet xmlns="'
            b'http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>'
            b'<row r="1"><c r="A1"><f>1+1</f><v></v></c></row>')
    unit = b"<row><c><v>0</v></c></row>"
    block = unit * (2**20 // len(unit))
    with zipfile.ZipFile(raw) as z, zipfile.ZipFile(path, "w") as out:
        for info in z.infolist():
            entry = zipfile.ZipInfo(info.filename, info.date_time)
            entry.compress_type = zipfile.ZIP_DEFLATED
            if info.filename != "xl/worksheets/sheet1.xml":
                out.writestr(entry, z.read(info.filename))
                continue
            with out.open(entry, "w", force_zip64=True) as fh:
                fh.write(head)
                for _ in range(megabytes):
                    fh.write(block)
                fh.write(b"</sheetData></worksheet>")
    raw.unlink()


# ----------------------------------------------------------------------------- one measurement
def measure(impl: str, call: str, path: str, rows: int, trace: bool) -> dict:
    """Run one call in this process; the numbers as a dict."""
    out = Path(path).with_name(f"out-{impl}-{call}.xlsx")
    if call == "store_values":
        if rows:  # every formula of the book gets a value, as a recalculation stores them
            values = {(SHEET, f"{col}{r}"): r * 0.001 for r in range(2, rows + 2) for col in ("C", "I")}
            dynamic = {(SHEET, "C3"): "C3:C3"}
        else:  # the sheet is copied untouched
            values, dynamic = {}, {}
        fn = (naive_store_values if impl == "baseline" else X.store_values)
        args = (path, out, values, dynamic)
    elif call == "dynamic_anchors":
        fn, args = (naive_dynamic_anchors if impl == "baseline" else X.dynamic_anchors), (path,)
    else:
        fn, args = X.check_package, (path,)
    with open("/proc/self/statm") as fh:  # resident pages now (Linux)
        rss_now = int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2**20
    if trace:
        tracemalloc.start()
    t0 = time.perf_counter()
    try:
        result = fn(*args)
        outcome = f"anchors found: {len(result)}" if isinstance(result, set) else "done"
    except ValueError as exc:
        outcome = "refused: " + str(exc)
    seconds = time.perf_counter() - t0
    peak = tracemalloc.get_traced_memory()[1] / 2**20 if trace else None
    if outcome == "anchors found: 0" and impl == "streamed":  # an empty set is also the answer to a refusal
        try:
            X.check_package(path, None, verify=False)
        except ValueError as exc:
            outcome += ", the package refused for its packing: " + str(exc)
    if out.exists():
        out.unlink()
    maxrss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB on Linux
    return {"seconds": seconds, "traced_mib": peak, "maxrss_mib": maxrss, "rss_before_mib": rss_now,
            "outcome": outcome}


def run(impl, call, path, rows, trace):
    cmd = [sys.executable, __file__, "--measure", impl, call, str(path), "--rows", str(rows)]
    cmd += ["--trace"] if trace else []
    done = subprocess.run(cmd, capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=1_000_000)
    ap.add_argument("--inflate-mb", type=int, default=1536)
    ap.add_argument("--keep", type=Path, help="build the files in this folder and keep them")
    ap.add_argument("--measure", nargs=3, metavar=("IMPL", "CALL", "PATH"), help=argparse.SUPPRESS)
    ap.add_argument("--rows", type=int, default=0, help=argparse.SUPPRESS)
    ap.add_argument("--trace", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.measure:
        print(json.dumps(measure(*args.measure, args.rows, args.trace)))
        return
    folder = args.keep or Path(tempfile.mkdtemp(prefix="package-memory-"))
    folder.mkdir(parents=True, exist_ok=True)
    book, bomb = folder / "cells.xlsx", folder / "inflating.xlsx"
    t0 = time.perf_counter()
    rows = build_cells(book, args.cells)
    build_inflating(bomb, args.inflate_mb)
    print(f"files built in {time.perf_counter() - t0:.0f} s, in {folder}")
    print(f"python {sys.version.split()[0]}; time of the call, peak of Python's allocations during it "
          "(tracemalloc), peak resident memory of its process (ru_maxrss) with the resident memory just "
          "before the call in brackets\n")
    width = 40
    print(f"{'file / call':<26}{'baseline: whole parts':>{width}}   {'this module: streamed':>{width}}")
    print(f"{'':<26}" + f"{'time':>9}{'traced':>13}{'max RSS (before)':>18}   " * 2)
    notes = []
    for path, n in ((book, rows), (bomb, 0)):
        with zipfile.ZipFile(path) as z:
            unpacked = sum(i.file_size for i in z.infolist())
        print(f"{path.name}: {path.stat().st_size / 2**20:.1f} MiB packed, {unpacked / 2**20:,.1f} MiB unpacked"
              + (f", {args.cells:,} cells" if n else ""))
        for call in ("check_package", "dynamic_anchors", "store_values"):
            cols = []
            for impl in ("baseline", "streamed"):
                if impl == "baseline" and call == "check_package":
                    cols.append(f"{'(none)':>{width}}")
                    continue
                plain, traced = run(impl, call, path, n, False), run(impl, call, path, n, True)
                rss = f"{plain['maxrss_mib']:,.0f} ({plain['rss_before_mib']:,.0f}) MiB"
                cols.append(f"{plain['seconds']:>8.2f}s{traced['traced_mib']:>9.1f} MiB{rss:>18}")
                if plain["outcome"] != "done" and not (call == "dynamic_anchors" and impl == "baseline"):
                    notes.append(f"  {path.name}, {call}, {impl}: {plain['outcome']}")
            print(f"  {call:<24}{cols[0]}   {cols[1]}")
    print()
    print("\n".join(notes))


if __name__ == "__main__":
    main()
