"""Every `volcast ...` line of the README's code blocks runs as written on the shipped example
files (issue 14): in a fresh folder, in the README's order, each exits with status 0."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest

from xlfuncs.cli import EXAMPLE_FILES, main

README = Path(__file__).resolve().parent.parent / "README.md"


def readme_commands() -> list:
    """The argument lists of the `volcast` lines inside fenced code blocks (a leading `$ ` and a
    trailing `# comment` allowed)."""
    commands, fenced = [], False
    for line in README.read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            fenced = not fenced
            continue
        m = re.match(r"(?:\$ )?(volcast(?:\s.*)?)$", line.strip()) if fenced else None
        if m:
            words = shlex.split(m.group(1), comments=True)
            commands.append(words[1:])
    return commands


def _run(argv) -> int:
    try:
        return main(argv)
    except SystemExit as exc:  # --help and --version end through argparse
        return exc.code or 0


def test_the_readme_has_examples_of_every_command():
    used = {argv[0] for argv in readme_commands() if argv}
    assert {"examples", "fit", "backtest", "batch", "template", "refresh", "recalc", "demo"} <= used


def test_every_readme_example_runs_as_written(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    commands = readme_commands()
    assert ["examples", "."] in commands
    # the examples read the copied files: the copy comes before any command that reads one
    first_read = min(i for i, a in enumerate(commands) if any(w in EXAMPLE_FILES for w in a))
    assert commands.index(["examples", "."]) < first_read
    for argv in commands:
        rc = _run(argv)
        out, err = capsys.readouterr()
        assert rc == 0, f"volcast {shlex.join(argv)} exited {rc}: {err.strip()}"
        assert "Traceback" not in err


@pytest.mark.parametrize("name", sorted(EXAMPLE_FILES))
def test_every_example_file_is_shipped_in_demo_data(name):
    assert (README.parent / "demo_data" / name).is_file()
