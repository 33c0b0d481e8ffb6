"""`recalc`, `refresh`, `template` and `demo` over a generated corpus of bad inputs: every answer is
exit 0, or exit 2 with one line on standard error; never a traceback; the input never changes.

The corpus is made by a seeded generator (so a failure names a reproducible case): damaged
packages (random bytes, truncated and bit-flipped copies of a real workbook, a zip of other
things), workbooks with formulas the engine cannot take or that refer to what is not there,
broken defined names, results no cell can hold, and bad CSVs for refresh.
"""

import hashlib
import random
import zipfile

import openpyxl
import pytest
from openpyxl.workbook.defined_name import DefinedName

from xlfuncs.cli import main

SEED = 20261202


def _workbook(path, cells, names=None, title="Sheet"):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = title
    for i in range(1, 61):
        ws.cell(i, 1, ((i * 7919) % 113 - 56) / 20.0)
    for ref, v in cells.items():
        ws[ref] = v
    for name, text in (names or {}).items():
        wb.defined_names[name] = DefinedName(name, attr_text=text)
    wb.save(path)
    return path


def _books(tmp):
    """(label, path) of bad or odd workbooks."""
    rng = random.Random(SEED)
    good = _workbook(tmp / "good.xlsx", {"C1": "=VOLFIT(A1:A60)"})
    raw = good.read_bytes()
    out = [("good", good)]
    for k in range(6):
        p = tmp / f"trunc{k}.xlsx"
        p.write_bytes(raw[: rng.randrange(10, len(raw) - 10)])
        out.append((f"truncated {k}", p))
    for k in range(6):
        b = bytearray(raw)
        for _ in range(rng.randrange(1, 40)):
            b[rng.randrange(len(b))] = rng.randrange(256)
        p = tmp / f"flip{k}.xlsx"
        p.write_bytes(bytes(b))
        out.append((f"bit-flipped {k}", p))
    for k in range(3):
        p = tmp / f"noise{k}.xlsx"
        p.write_bytes(bytes(rng.randrange(256) for _ in range(rng.randrange(0, 5000))))
        out.append((f"random bytes {k}", p))
    p = tmp / "zip.xlsx"
    with zipfile.ZipFile(p, "w") as z:
        z.writestr("a.txt", "not a workbook")
    out.append(("zip of text", p))
    formulas = {
        "missing sheet": {"C1": "=VOLFIT(Nowhere!A1:A60)"},
        "unknown function": {"C1": "=NOSUCHFUNCTION(A1)"},
        "bad syntax": {"C1": "=VOLFIT(A1:A60"},
        "long text": {"C1": '=REPT("ab",30000)'},
        "control chars": {"C1": '="x"&CHAR(2)', "D1": '=VOLFIT(A1:A60,"GARCH"&CHAR(1))'},
        "huge argument": {"C1": '=VOLFIT(A1:A60,REPT("G",70000))'},
        "self reference": {"C1": "=C1+1"},
        "spill cycle": {"C1": "=VOLFIT(A1:A61)", "A61": "=D5"},
        "blocked spill": {"C1": "=VOLFIT(A1:A60)", "D4": 1},
        "error inputs": {"A5": "#N/A", "C1": "=VOLFIT(A1:A60)"},
        "text inputs": {"A5": "n/a", "C1": "=VOLFIT(A1:A60)", "D1": '=VOLFORECAST(A1:A60,"x",3)'},
        "many errors": {f"C{i}": "=1/0" for i in range(1, 400)},
        "whole column": {"C1": "=VOLFIT(A:A)"},
        "bad horizon": {"C1": "=VOLFIT(A1:A60)", "J1": "=VOLFORECAST(A1:A60,C1#,-3)"},
    }
    for label, cells in formulas.items():
        out.append((label, _workbook(tmp / f"{label.replace(' ', '_')}.xlsx", cells)))
    names = {
        "name to #REF!": {"Rets": "#REF!"},
        "name to a missing sheet": {"Rets": "Gone!$A$1:$A$60"},
        "name chain": {"Rets": "Other", "Other": "Rets"},
        "name formula": {"Rets": "OFFSET(Sheet!$A$1,0,0,60,1)"},
    }
    for label, defs in names.items():
        out.append((label, _workbook(tmp / f"{label.replace(' ', '_').replace('!', '')}.xlsx",
                                     {"C1": "=VOLFIT(Rets)"}, defs)))
    out.append(("quoted sheet", _workbook(tmp / "quoted.xlsx", {"C1": "=VOLFIT('It''s'!A1:A60)"}, title="It's")))
    d = tmp / "folder.xlsx"
    d.mkdir()
    out.append(("a folder", d))
    return out


def _csvs(tmp):
    rng = random.Random(SEED + 1)
    texts = {
        "empty": b"",
        "header only": b"date,level\n",
        "no header": b"2020-01-31,100\n2020-02-29,101\n",
        "binary": bytes(rng.randrange(256) for _ in range(3000)),
        "nul bytes": b"date,level\n2030-01-31,1\x00\x00\n",
        "huge field": b"date,level\n2030-01-31," + b"9" * 300_000 + b"\n",
        "semicolons": b"date;level\n2030-01-31;101,5\n",
        "tabs": b"date\tlevel\n2030-01-31\t101.5\n",
        "bad date": b"date,level\n31.01.2030,100\n",
        "text level": b"date,level\n2030-01-31,n/a\n",
        "negative": b"date,level\n2030-01-31,-1\n",
        "nan": b"date,level\n2030-01-31,nan\n",
        "short row": b"date,level\n2030-01-31\n",
        "bom": b"\xef\xbb\xbfdate,level\n2030-01-31,100\n",
        "utf16": "date,level\n2030-01-31,100\n".encode("utf-16"),
        "cp1252": "date,level,note\n2030-01-31,100,caf\xe9\n".encode("cp1252"),
        "very long line": b"date,level," + b"x," * 50_000 + b"\n2030-01-31,100\n",
    }
    out = []
    for label, data in texts.items():
        p = tmp / f"{label.replace(' ', '_')}.csv"
        p.write_bytes(data)
        out.append((label, p))
    return out


def _hash(p):
    return hashlib.sha256(p.read_bytes()).hexdigest() if p.is_file() else None


def _run(args, capsys):
    code = main(args)  # an exception escaping main fails the test: a traceback
    captured = capsys.readouterr()
    assert code in (0, 2), (args, code)
    if code == 2:
        assert captured.err.startswith("volcast: ") and captured.err.count("\n") == 1, captured.err
        assert len(captured.err) < 1000, captured.err[:200]
    return code, captured


def test_recalc_over_a_corpus_of_bad_workbooks(tmp_path, capsys):
    books = _books(tmp_path)
    seen = {0: 0, 2: 0}
    for label, path in books:
        before = _hash(path)
        for extra in ([], ["--values-only"]):
            out = tmp_path / "out" / f"{path.stem}{'-v' if extra else ''}.xlsx"
            code, captured = _run(["recalc", str(path), "-o", str(out), *extra], capsys)
            seen[code] += 1
            assert _hash(path) == before, label
            if code == 0:
                openpyxl.load_workbook(out)  # what was written opens
    assert seen[0] >= 10 and seen[2] >= 10, seen  # the corpus holds both kinds


@pytest.fixture(scope="module")
def small_book(tmp_path_factory):
    from xlfuncs.demo import data_file, template_file
    from xlfuncs.headless.refresh import refresh

    d = tmp_path_factory.mktemp("fz")
    rows = data_file().read_text().splitlines()[:61]
    (d / "h.csv").write_text("\n".join(rows) + "\n")
    return refresh(template_file(), d / "h.csv", d / "book.xlsx").out


def test_refresh_over_a_corpus_of_bad_inputs(tmp_path, capsys, small_book):
    csvs = _csvs(tmp_path)
    books = [(label, p) for label, p in _books(tmp_path) if label != "good"][::3]
    before = _hash(small_book)
    for label, csv_path in csvs:
        _run(["refresh", str(small_book), "--data", str(csv_path), "-o", str(tmp_path / "r" / f"{label}.xlsx")], capsys)
        assert _hash(small_book) == before, label
    for label, book in books:
        code, _ = _run(["refresh", str(book), "--data", str(csvs[-1][1]), "-o", str(tmp_path / "rb.xlsx")], capsys)
        assert code == 2, label  # none of these is a workbook made from a template


def test_template_and_demo_answer_bad_places(tmp_path, capsys):
    (tmp_path / "a_file").write_text("x")
    for args in (["template", "weekly", "-o", str(tmp_path / "t.xlsx")],
                 ["template", "monthly", "-o", str(tmp_path / "t.csv")],
                 ["template", "monthly", "-o", str(tmp_path / "a_file" / "t.xlsx")],
                 ["demo", "--out", str(tmp_path / "a_file")]):
        code, _ = _run(args, capsys)
        assert code == 2, args
    assert _run(["template", "daily", "-o", str(tmp_path / "t.xlsx")], capsys)[0] == 0
    assert _run(["template", "daily", "-o", str(tmp_path / "t.xlsx")], capsys)[0] == 2  # exists: not written over
