"""The command line explains itself (issue 14): every option of every command has a help text
that shows its default (or says it is required), `volcast --version` prints the version, and a
bare `volcast` prints the help and exits 0."""

from __future__ import annotations

import argparse
import subprocess
import sys

import pytest

import xlfuncs
from xlfuncs.cli import build_parser, main


def _subparsers():
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return parser, sub.choices


def _options():
    _, commands = _subparsers()
    for name, p in commands.items():
        for action in p._actions:
            if isinstance(action, argparse._HelpAction):
                continue
            yield name, p, action


@pytest.mark.parametrize("command,action", [(c, a) for c, _, a in _options()],
                         ids=[f"{c} {a.option_strings[-1] if a.option_strings else a.dest}" for c, _, a in _options()])
def test_every_option_has_help_and_shows_its_default(command, action):
    text = action.help
    assert text and len(text) > 10, f"{command} {action.dest}: no help"
    if not action.option_strings:  # a positional argument: required, or a shown default
        assert action.nargs != "?" or "(default:" in text
        return
    if action.required:
        assert "required" in text, f"{command} {action.dest}: required but its help does not say so"
    else:
        assert "default:" in text, f"{command} {action.dest}: the help shows no default"


@pytest.mark.parametrize("command,option", [("backtest", "--level"), ("backtest", "--scheme"), ("backtest", "--refit"),
                                            ("batch", "--horizon"), ("batch", "--level"), ("fit", "--model"),
                                            ("fit", "--dist")])
def test_the_shown_default_is_the_default_used(command, option, capsys):
    """The help text of an option with a default shows that very value (argparse's %(default)s)."""
    _, commands = _subparsers()
    p = commands[command]
    action = next(a for a in p._actions if option in a.option_strings)
    with pytest.raises(SystemExit) as exc:
        main([command, "--help"])
    assert exc.value.code == 0
    help_text = " ".join(capsys.readouterr().out.split())
    assert f"(default: {action.default})" in help_text


def test_version(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    out = capsys.readouterr().out.strip()
    try:
        from importlib.metadata import version

        expected = version("volcast")
    except Exception:  # noqa: BLE001 - a source checkout without the distribution installed
        expected = xlfuncs.__version__
    assert out == f"volcast {expected}"


def test_bare_volcast_prints_the_help_and_exits_0(capsys):
    """A bare command asks what it can do: the help on standard output, exit status 0, nothing on
    standard error (common practice of command-line tools)."""
    assert main([]) == 0
    out, err = capsys.readouterr()
    assert err == ""
    assert out.startswith("usage: volcast")
    _, commands = _subparsers()
    for name in commands:
        assert f"    {name}" in out


def test_bare_volcast_as_a_process():
    done = subprocess.run([sys.executable, "-m", "xlfuncs.cli"], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0 and done.stdout.startswith("usage: volcast") and "Traceback" not in done.stderr


def test_examples_copies_the_files_and_refuses_to_write_over_them(tmp_path, capsys):
    from xlfuncs.cli import EXAMPLE_FILES

    assert main(["examples", str(tmp_path / "ex")]) == 0
    assert sorted(p.name for p in (tmp_path / "ex").iterdir()) == sorted(EXAMPLE_FILES)
    capsys.readouterr()
    assert main(["examples", str(tmp_path / "ex")]) == 2
    err = capsys.readouterr().err
    assert len(err.splitlines()) == 1 and "--force" in err
    assert main(["examples", str(tmp_path / "ex"), "--force"]) == 0
    (tmp_path / "afile").write_text("x")
    assert main(["examples", str(tmp_path / "afile")]) == 2


def test_the_help_imports_no_numerical_library():
    """`volcast --help` (and the parser every command builds) stays light: no NumPy, no batch module
    with its process pools, no package metadata; each command imports what it runs.  The measured
    cost is in benchmarks/issue12_table.py (start-up row), not here."""
    code = ("import sys; from xlfuncs.cli import build_parser; build_parser().format_help(); "
            "print(','.join(m for m in ('numpy', 'scipy', 'pandas', 'xlfuncs.batch', 'importlib.metadata') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == ""


def test_version_is_the_installed_distributions():
    from importlib.metadata import version

    done = subprocess.run([sys.executable, "-m", "xlfuncs.cli", "--version"], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0 and done.stdout.strip() == f"volcast {version('volcast')}"
