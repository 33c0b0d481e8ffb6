"""The package's public surface and the direction of its imports (DESIGN.md layers)."""

import doctest
import importlib
import subprocess
import sys

import pytest

import xlfuncs

# DESIGN.md's worksheet function catalogue, as far as it is built
CATALOGUE = {"VOLFIT", "VOLSERIES", "VOLFORECAST", "VOLLOGLIK", "VOLTESTS", "VOLRISK", "VOLCOMPARE",
             "VOLCOVERAGE", "VOLSIM", "VOLNEWS", "VOLBACKTEST", "VOLSTABILITY", "VOLDM"}


def test_top_level_exports_the_worksheet_functions():
    assert set(xlfuncs.__all__) == CATALOGUE
    for name in xlfuncs.__all__:
        assert callable(getattr(xlfuncs, name))


def test_core_loads_no_spreadsheet_library():
    code = ("import sys, xlfuncs.core; bad = [m for m in ('xlwings', 'openpyxl') "
            "if m in sys.modules]; print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == ""


def test_sheet_layer_needs_no_xlwings():
    code = "import sys, xlfuncs; print('xlwings' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == "False"


@pytest.mark.parametrize("module", ["xlfuncs.core.spec", "xlfuncs.core.distributions", "xlfuncs.sheet.functions"])
def test_docstring_examples(module):
    mod = importlib.import_module(module)
    result = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0


def test_every_subpackage_is_shipped():
    """pyproject.toml lists the packages a plain `pip install .` ships; a subpackage missing there
    imports from a checkout (as the tests do) but not from an installed copy."""
    import re
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent
    listed = set(re.search(r"^packages = \[(.*?)\]", (root / "pyproject.toml").read_text(), re.M | re.S)
                 .group(1).replace('"', "").replace(" ", "").split(","))
    found = {".".join(p.parent.relative_to(root).parts) for p in (root / "xlfuncs").rglob("__init__.py")}
    assert found <= listed, sorted(found - listed)
