"""The xlwings module: exactly the catalogue, thin wrappers, documented arguments.

Off Windows the xlwings decorators only return the function, so the wrappers are plain callables;
the decorators themselves are checked in the module's source.
"""

import ast
import inspect
from pathlib import Path
from unittest import mock

import pytest

pytest.importorskip("xlwings")

from xlfuncs import sheet, udfs  # noqa: E402

from test_package import CATALOGUE  # noqa: E402  (tests/ is on sys.path under pytest)

SOURCE = Path(udfs.__file__).read_text()
TREE = ast.parse(SOURCE)
FUNCS = {node.name: node for node in TREE.body if isinstance(node, ast.FunctionDef)}
RANGE_ARGS = {"returns", "fit", "models", "var", "shocks", "fit_or_model"}


def test_module_exposes_exactly_the_catalogue():
    public = {n for n, obj in vars(udfs).items() if inspect.isfunction(obj) and obj.__module__ == udfs.__name__}
    assert public == CATALOGUE
    assert set(FUNCS) == CATALOGUE


@pytest.mark.parametrize("name", sorted(CATALOGUE))
def test_signature_matches_the_worksheet_function(name):
    assert inspect.signature(getattr(udfs, name)) == inspect.signature(getattr(sheet, name).__wrapped__)


def _decorators(node):
    out = []
    for d in node.decorator_list:
        if isinstance(d, ast.Attribute):
            out.append((d.attr, None, {}))
        elif isinstance(d, ast.Call):
            args = [a.value for a in d.args if isinstance(a, ast.Constant)]
            kw = {k.arg: k.value for k in d.keywords}
            out.append((d.func.attr, args[0] if args else None, kw))
    return out


@pytest.mark.parametrize("name", sorted(CATALOGUE))
def test_decorated_and_documented(name):
    node = FUNCS[name]
    decs = _decorators(node)
    assert decs[0][0] == "func"
    documented = {arg: kw for kind, arg, kw in decs if kind == "arg"}
    params = [a.arg for a in node.args.args]
    assert set(documented) == set(params), "every argument has an @xw.arg with a doc"
    for p, kw in documented.items():
        assert "doc" in kw
        if p in RANGE_ARGS or (name == "VOLCOMPARE" and p == "dist"):
            assert isinstance(kw.get("ndim"), ast.Constant) and kw["ndim"].value == 2, p
    doc = ast.get_docstring(node)
    assert doc and "\n" not in doc.strip() and len(doc) <= 255, "one line for the function wizard"


@pytest.mark.parametrize("name", sorted(CATALOGUE))
def test_wrapper_only_delegates(name):
    node = FUNCS[name]
    body = [s for s in node.body if not (isinstance(s, ast.Expr) and isinstance(s.value, ast.Constant))]
    assert len(body) == 1 and isinstance(body[0], ast.Return), "no logic in the xlwings module"
    params = list(inspect.signature(getattr(udfs, name)).parameters)
    sentinel = object()
    with mock.patch.object(sheet, name, return_value=sentinel) as target:
        args = [f"<{p}>" for p in params]
        assert getattr(udfs, name)(*args) is sentinel
    target.assert_called_once_with(*args)
