"""`fit`, `backtest` and `batch` over a generated corpus of bad inputs and bad argument values.

Every answer is exit status 0, or 2 with exactly one line on standard error that starts with
``volcast: ``; never a traceback (an exception escaping ``main`` fails the test), never the
catch-all "internal error" line (each case the corpus found is fixed where it arises), and the input
files are unchanged (SHA-256 before and after).

The corpus comes from a seeded generator (a failure names a reproducible case): empty files, a
header alone, one row, binary noise, NUL bytes, Windows-1252, BOMs, UTF-16, semicolons, tabs,
mixed separators, decimal commas, NaN/inf and text cells, fields over and under the CSV field
bound, very long lines, Unicode and multi-line column names, broken quoting, duplicate and blank
column names, long panels with blank ids or split series, byte-level mutations of a good file and
random token soups; then every option of the three commands with values it must refuse.
"""

import datetime as dt
import hashlib
import math
import random
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from xlfuncs.batch import MAX_FIELD_CHARS
from xlfuncs.cli import main

SEED = 20261203
N = 120  # rows of the good series: small, so that every fit is quick
DAYS = [(dt.date(2001, 1, 1) + dt.timedelta(days=i)).isoformat() for i in range(N)]  # oldest first, one a row


def _good_returns():
    rng = np.random.default_rng(SEED)
    s2, out = 1.0, []
    for z in rng.standard_normal(N):  # a GARCH(1,1)-like path (omega 0.1, alpha 0.1, beta 0.8)
        e = math.sqrt(s2) * z
        out.append(e)
        s2 = 0.1 + 0.1 * e * e + 0.8 * s2
    return out


R = _good_returns()


def _csv(rows, sep=","):
    return "".join(sep.join(str(c) for c in row) + "\n" for row in rows)


def _good_text(sep=","):
    return _csv([["date", "return"]] + [[DAYS[i], f"{x:.6f}"] for i, x in enumerate(R)], sep)


def _corpus(tmp: Path) -> list:
    """(label, path) of generated inputs; CSV text and bytes, a few Parquet files, odd paths."""
    rng = random.Random(SEED)
    good = _good_text()
    files = {}

    def put(label, data, suffix=".csv"):
        p = tmp / f"c{len(files):03d}{suffix}"
        if isinstance(data, str):
            data = data.encode("utf-8")
        p.write_bytes(data)
        files[label] = p

    put("good", good)
    put("empty", b"")
    put("only blanks", "\n\n  \n")
    put("only header", "date,return\n")
    put("one row", "date,return\n2001-01-01,0.5\n")
    put("two rows", "date,return\n2001-01-01,0.5\n2001-01-02,-0.5\n")
    for k in range(4):
        put(f"binary {k}", bytes(rng.randrange(256) for _ in range(rng.randrange(1, 4000))))
    put("NUL inside", good[:200] + "\x00\x00" + good[200:])
    put("cp1252", good.replace("return", "rendement café").encode("cp1252"))
    put("cp1252 cells", ("date,return,note\n" + "".join(f"d{i},{x:.5f},prix \u20ac\n" for i, x in enumerate(R)))
        .encode("cp1252"))
    put("undecodable", b"date,return\n" + b"d1,\x81\x8d\x8f\n" * 5)
    put("utf-8 BOM", b"\xef\xbb\xbf" + good.encode())
    put("utf-16 BOM", good.encode("utf-16"))
    put("utf-16 no BOM", good.encode("utf-16-le"))
    put("semicolons", _good_text(";"))
    put("tabs", _good_text("\t"))
    put("mixed separators", "date;return\n" + "".join(f"d{i},{x:.4f}\n" for i, x in enumerate(R)))
    put("decimal comma semicolons", "date;return\n" + "".join(f"d{i};{x:.4f}\n".replace(".", ",") for i, x in enumerate(R)))
    put("decimal comma commas", "date,return\n" + "".join(f"d{i},{x:.4f}\n".replace(".", ",") for i, x in enumerate(R)))
    for word in ("nan", "NaN", "inf", "-inf", "Infinity", "1e400", "n/a", "#N/A", "TRUE", "\u2014", "1.2.3"):
        lines = good.splitlines()
        k = rng.randrange(5, N)
        lines[k] = f"{lines[k].split(',')[0]},{word}"  # the row's own date kept
        put(f"cell {word}", "\n".join(lines) + "\n")
    put("blank inside", good.replace(f"{R[50]:.6f}", "", 1))
    put("field 200 KB", "level\n" + "1" * 200_000 + "\n2\n")
    put("field 200 KB text", "date,return\n" + "d0," + "x" * 200_000 + "\n" + good.split("\n", 1)[1])
    put("field over bound", "level\n" + "1" * (MAX_FIELD_CHARS + 10) + "\n2\n")
    put("long line", _csv([[f"c{j}" for j in range(5000)]] + [[f"{rng.gauss(0, 1):.3f}" for _ in range(5000)]
                                                             for _ in range(3)]))
    put("long header name", "x" * 100_000 + ",return\n" + "".join(f"a,{x:.5f}\n" for x in R))
    put("unicode names", _csv([["\u65e5\u4ed8", "\u0627\u0644\u0639\u0627\u0626\u062f", "e\u0301\U0001F600"]]
                              + [[f"d{i}", f"{x:.5f}", f"{-x:.5f}"] for i, x in enumerate(R)]))
    put("newline in name", '"da\nte","ret\r\nurn"\n' + "".join(f"d{i},{x:.5f}\n" for i, x in enumerate(R)))
    put("multi-line cells", "date,return\n" + "".join(f'"d\n{i}",{x:.5f}\n' for i, x in enumerate(R)))
    put("unterminated quote", 'date,return\n"d1,0.5\nd2,0.3\n' + good.split("\n", 1)[1])
    put("control chars", "date,return\n" + "".join(f"d{i}\x07,{x:.5f}\x1b\n" for i, x in enumerate(R)))
    put("duplicate names", _csv([["date", "a", "a"]] + [[f"d{i}", f"{x:.5f}", f"{-x:.5f}"] for i, x in enumerate(R)]))
    put("blank name", _csv([["date", "", "b"]] + [[f"d{i}", f"{x:.5f}", f"{-x:.5f}"] for i, x in enumerate(R)]))
    put("longer rows", _csv([["date", "return"]] + [[f"d{i}", f"{x:.5f}", "extra"] for i, x in enumerate(R)]))
    put("ragged rows", _csv([["date", "a", "b"]] + [[f"d{i}", f"{x:.5f}"][: 1 + i % 2] for i, x in enumerate(R)]))
    put("trailing separators", _csv([["date", "return", ""]] + [[f"d{i}", f"{x:.6f}", ""] for i, x in enumerate(R)]))
    put("constant", _csv([["return"]] + [["0.5"]] * N))
    put("levels", _csv([["level"]] + [[f"{100 * math.exp(sum(R[:i + 1]) / 100):.4f}"] for i in range(N)]))
    put("huge numbers", _csv([["return"]] + [[f"{x * 1e300:.6g}"] for x in R]))
    put("tiny numbers", _csv([["return"]] + [[f"{x * 1e-300:.6g}"] for x in R]))
    put("integers", _csv([["return"]] + [[str(int(round(10 * x)))] for x in R]))
    put("long panel", _csv([["date", "sid", "ret"]] + [[DAYS[i % 60], "AB"[i // 60], f"{x:.5f}"]
                                                        for i, x in enumerate(R)]))
    put("long panel blank id", _csv([["date", "sid", "ret"]] + [[f"d{i}", "" if i == 7 else "A", f"{x:.5f}"]
                                                                 for i, x in enumerate(R)]))
    put("long panel split", _csv([["sid", "ret"]] + [["A" if i < 40 or i >= 80 else "B", f"{x:.5f}"]
                                                     for i, x in enumerate(R)]))
    put("long panel repeated dates", _csv([["date", "sid", "ret"]] + [[f"2001-01-{1 + i % 20:02d}", "A", f"{x:.5f}"]
                                                                       for i, x in enumerate(R)]))
    for k in range(12):  # byte-level mutations of the good file
        b = bytearray(good.encode())
        for _ in range(rng.randrange(1, 30)):
            op, at = rng.randrange(3), rng.randrange(len(b))
            if op == 0:
                b[at] = rng.randrange(256)
            elif op == 1:
                del b[at]
            else:
                b.insert(at, rng.choice(b",;\t\"\n\r-.eE\xe9"))
        put(f"mutation {k}", bytes(b))
    tokens = ["0.5", "-1.25", "", " ", "nan", "inf", "x", '"', '""', ",", ";", "\t", "\n", "\r\n", "1e308", "-0",
              "\u00e9", "#N/A", "1,5", "date", "return", "\x07", "TRUE", "\ufeff"]
    for k in range(12):  # random token soups
        put(f"soup {k}", "".join(rng.choice(tokens) for _ in range(rng.randrange(1, 600))))
    wide = pd.DataFrame({"date": DAYS, "a": R, "b": [-x for x in R]})
    for label, df in (("parquet good", wide),
                      ("parquet text cells", wide.assign(b=["n/a" if i == 9 else f"{x}" for i, x in enumerate(R)])),
                      ("parquet inf", wide.assign(a=[math.inf if i == 9 else x for i, x in enumerate(R)])),
                      ("parquet bools", wide.assign(b=[i % 2 == 0 for i in range(N)])),
                      ("parquet long", wide.melt(id_vars="date", var_name="sid", value_name="ret"))):
        p = tmp / f"c{len(files):03d}.parquet"
        df.to_parquet(p, index=False)
        files[label] = p
    put("parquet garbage", bytes(rng.randrange(256) for _ in range(500)), ".parquet")
    files["missing file"] = tmp / "no_such_file.csv"
    (tmp / "a_folder.csv").mkdir()
    files["folder"] = tmp / "a_folder.csv"
    return list(files.items())


def _digest(paths) -> dict:
    out = {}
    for p in paths:
        p = Path(p)
        out[str(p)] = hashlib.sha256(p.read_bytes()).hexdigest() if p.is_file() else None
    return out


def _check(argv, inputs, capsys, label):
    before = _digest(inputs)
    rc = main([str(a) for a in argv])  # an exception escaping main fails the test here
    out, err = capsys.readouterr()
    assert _digest(inputs) == before, f"{label}: an input file changed"
    assert rc in (0, 2), f"{label}: exit {rc}"
    assert "Traceback" not in err and "Traceback" not in out, f"{label}: {err}"
    assert "internal error" not in err, f"{label}: {err}"
    lines = err.splitlines()
    if rc == 2:
        assert len(lines) == 1, f"{label}: {err!r}"
        assert lines[0].startswith("volcast: "), f"{label}: {err!r}"
        assert len(lines[0]) <= 1100, f"{label}: a reason of {len(lines[0])} characters"
    else:
        assert all(line.startswith("volcast: ") for line in lines), f"{label}: {err!r}"
    return rc, lines[0] if lines else ""


def _argument_cases(good: Path, tmp: Path) -> list:
    """(label, argv, inputs) of every option of the three commands with values to refuse or take."""
    out = tmp / "out.csv"
    g = str(good)
    cases = []
    for model in ("", "GARCH(1,1,1)", "FOO", "X" * 5000, "EGARCH(13,1)", "GARCH(1,1)\x00", "ARMA(0,0)-GARCH(0,1)",
                  "((((", "-", "\u00e9garch"):
        cases.append((f"fit --model {model[:20]!r}", ["fit", g, "--model", model], [good]))
        cases.append((f"batch --model {model[:20]!r}", ["batch", g, "--model", model, "-o", out, "--workers", "1"],
                      [good]))
    for dist in ("", "cauchy", "t" * 3000, "\n"):
        cases.append((f"fit --dist {dist[:20]!r}", ["fit", g, "--dist", dist], [good]))
        cases.append((f"batch --dist {dist[:20]!r}", ["batch", g, "--dist", dist, "-o", out, "--workers", "1"], [good]))
    for opts in ("nu=abc", "se=white", ";;;", "=", "x" * 10000, "nu=8", "omega=-1", "missing=skip", "target=yes",
                 "mu=nan", "paths=5"):
        cases.append((f"fit --options {opts[:20]!r}", ["fit", g, "--options", opts], [good]))
        cases.append((f"backtest --options {opts[:20]!r}", ["backtest", g, "--window", "100", "--refit", "10",
                                                            "--options", opts], [good]))
        cases.append((f"batch --options {opts[:20]!r}", ["batch", g, "--options", opts, "-o", out, "--workers", "1"],
                      [good]))
    for col in ("0", "999", "\u00b2", "", " return ", "date", "nope", "-1", "x" * 3000):
        cases.append((f"fit --column {col[:20]!r}", ["fit", g, "--column", col], [good]))
    for window in ("0", "-1", "1", "5", "119", "120", "1000000000", "abc", "1.5"):
        cases.append((f"backtest --window {window}", ["backtest", g, "--window", window, "--refit", "10"], [good]))
    for level in ("2", "1", "0", "0.5", "nan", "-1", "inf", "x"):
        cases.append((f"backtest --level {level}", ["backtest", g, "--window", "100", "--refit", "10", "--level", level],
                      [good]))
        cases.append((f"batch --level {level}", ["batch", g, "--level", level, "-o", out, "--workers", "1"], [good]))
    for refit in ("0", "-5", "1000000", "x"):
        cases.append((f"backtest --refit {refit}", ["backtest", g, "--window", "100", "--refit", refit], [good]))
    cases.append(("backtest --scheme odd", ["backtest", g, "--window", "100", "--scheme", "odd"], [good]))
    (tmp / "png_folder.png").mkdir(exist_ok=True)
    for png in (g, tmp / "png_folder.png", tmp / "chart.xyz", tmp / "nowhere" / "c.png", good / "c.png"):
        cases.append((f"backtest --png {Path(png).name}", ["backtest", g, "--window", "100", "--refit", "20", "--png", png],
                      [good]))
    for horizon in ("0", "-1", "601", "1000000", "1.5", "x"):
        cases.append((f"batch --horizon {horizon}", ["batch", g, "--horizon", horizon, "-o", out, "--workers", "1"],
                      [good]))
    for workers in ("0", "-1", "1000000", "x"):
        cases.append((f"batch --workers {workers}", ["batch", g, "--workers", workers, "-o", out], [good]))
    for o in (g, tmp / "." / good.name, tmp, good / "x.csv", tmp / "nowhere" / "x.csv", tmp / "out.xlsx",
              tmp / "out.parquet"):
        cases.append((f"batch -o {o}", ["batch", g, "-o", o, "--workers", "1"], [good]))
    for extra in (["--id", "date"], ["--value", "return"], ["--id", "", "--value", "return"],
                  ["--id", "date", "--value", "date"], ["--id", "nope", "--value", "return"],
                  ["--id", "date", "--value", "return"], ["--levels", "--as-returns"], ["--levels"], ["--skip-bad"]):
        cases.append((f"batch {' '.join(extra)}", ["batch", g, *extra, "-o", out, "--workers", "1"], [good]))
    cases.append(("no command", [], []))
    cases.append(("unknown flag", ["fit", g, "--bogus"], [good]))
    return cases


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("fuzz")
    return tmp, _corpus(tmp)


def test_files_through_fit_backtest_and_batch(corpus, capsys):
    tmp, files = corpus
    out = tmp / "out.csv"
    cases = 0
    for label, path in files:
        for argv in (["fit", path], ["fit", path, "--levels"],
                     ["backtest", path, "--window", "100", "--refit", "10"],
                     ["batch", path, "-o", out, "--workers", "1"], ["batch", path, "-o", out, "--workers", "1",
                                                                    "--skip-bad", "--as-returns"]):
            _check(argv, [path], capsys, f"{label}: {argv[0]}")
            cases += 1
        if "panel" in label:
            _check(["batch", path, "--id", "sid", "--value", "ret", "-o", out, "--workers", "1"], [path], capsys,
                   f"{label}: long batch")
            cases += 1
    assert cases >= 400


def test_argument_values(corpus, capsys):
    tmp, files = corpus
    good = dict(files)["good"]
    cases = _argument_cases(good, tmp)
    assert len(cases) >= 100
    for label, argv, inputs in cases:
        _check(argv, inputs, capsys, label)


def test_what_the_corpus_must_answer(corpus, capsys):
    """A few of the generated cases, with the answer each must give."""
    tmp, files = corpus
    f = dict(files)
    out = tmp / "out2.csv"
    expect = [
        (["fit", f["good"]], 0, ""),
        (["fit", f["cp1252"], "--model", "ARCH(1)"], 0, ""),
        (["fit", f["utf-8 BOM"], "--model", "ARCH(1)"], 0, ""),
        (["fit", f["utf-16 BOM"], "--model", "ARCH(1)"], 0, ""),
        (["fit", f["semicolons"], "--model", "ARCH(1)"], 0, ""),
        (["fit", f["tabs"], "--model", "ARCH(1)"], 0, ""),
        (["fit", f["decimal comma semicolons"]], 0, ""),  # read: the semicolons leave the comma to decimals
        (["fit", f["decimal comma commas"]], 2, "a decimal comma in a comma-separated file?"),
        (["fit", f["field over bound"]], 2, "longer than 1,048,576 characters"),
        (["fit", f["field 200 KB"], "--column", "level"], 2, "is not a finite number"),
        (["fit", f["binary 0"]], 2, ""),
        (["fit", f["NUL inside"]], 2, "NUL bytes"),
        (["fit", f["empty"]], 2, "needs a header row"),
        (["fit", f["folder"]], 2, "is a directory"),
        (["fit", f["missing file"]], 2, "no such file"),
        (["fit", f["cell n/a"]], 2, '"n/a" in column "return" is not a number'),
        (["fit", f["cell inf"]], 2, "is not a finite number"),
        (["batch", f["duplicate names"], "-o", out, "--workers", "1"], 2, 'more than one column "a"'),
        (["batch", f["blank name"], "-o", out, "--workers", "1"], 2, "column 2 holds data but has no name"),
        (["batch", f["long panel blank id"], "--id", "sid", "--value", "ret", "-o", out], 2, "is blank"),
        (["batch", f["long panel split"], "--id", "sid", "--value", "ret", "-o", out], 2, '"A" comes in 2 separate'),
        (["batch", f["long panel repeated dates"], "--id", "sid", "--value", "ret", "-o", out], 2, "has the date of"),
        (["batch", f["good"], "-o", f["good"]], 2, "is the input file"),
    ]
    for argv, rc, text in expect:
        got, line = _check(argv, [p for p in argv[1:2]], capsys, str(argv))
        assert got == rc, (argv, line)
        assert text in line, (argv, line)


@pytest.mark.parametrize("label", ["cp1252", "utf-8 BOM", "utf-16 BOM", "semicolons", "tabs", "trailing separators"])
def test_encodings_and_separators_fit_the_same_numbers(corpus, capsys, label):
    f = dict(corpus[1])
    assert main(["fit", str(f["good"]), "--model", "ARCH(1)"]) == 0
    good = capsys.readouterr().out.splitlines()
    assert main(["fit", str(f[label]), "--model", "ARCH(1)"]) == 0
    other = capsys.readouterr().out.splitlines()
    assert other[0].endswith(f"{f[label].name}: {N} returns")
    assert other[1:] == good[1:]  # the same table, to every printed digit


def test_a_reader_that_stops_early_is_not_an_error():
    """`volcast fit FILE | head -2`: the pipe closes before the table is printed (common shell use)."""
    import subprocess
    import sys
    from pathlib import Path

    data = Path(__file__).resolve().parent.parent / "demo_data" / "demo_returns.csv"
    proc = subprocess.Popen([sys.executable, "-c", "import sys; from xlfuncs.cli import main; sys.exit(main())",
                             "fit", str(data)], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # before the table is written
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 0 and "internal error" not in err and "Traceback" not in err, err
