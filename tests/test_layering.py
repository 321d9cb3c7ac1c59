"""Layers run one way: ``verification`` imports ``lapsolve``, never the reverse.

The check reads our own source with :mod:`ast` (no user input is parsed here).
"""

import ast
from pathlib import Path

import pytest

import lapsolve

PACKAGE = Path(lapsolve.__file__).resolve().parent
MODULES = sorted(PACKAGE.rglob("*.py"))


def imported_names(tree):
    """Absolute module names a module imports, including ``import_module("...")`` calls."""
    names = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names += [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names.append(node.module)
        elif (isinstance(node, ast.Call) and getattr(node.func, "attr", getattr(
                node.func, "id", None)) in ("import_module", "__import__")
              and node.args and isinstance(node.args[0], ast.Constant)
              and isinstance(node.args[0].value, str)):
            names.append(node.args[0].value)
    return names


def test_modules_found():
    names = {p.relative_to(PACKAGE).as_posix() for p in MODULES}
    assert {"solve.py", "problem_file.py", "cli/__init__.py", "cli/solve_cmd.py"} <= names


@pytest.mark.parametrize("path", MODULES, ids=[p.relative_to(PACKAGE).as_posix()
                                                for p in MODULES])
def test_lapsolve_never_imports_verification(path):
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    bad = [n for n in imported_names(tree) if n.split(".")[0] == "verification"]
    assert not bad, f"{path.name} imports {bad}"


def test_detector_sees_each_import_form():
    source = ("import verification.rates\nfrom verification import norms\n"
              "importlib.import_module('verification.cli')\n")
    assert imported_names(ast.parse(source)) == ["verification.rates", "verification",
                                                 "verification.cli"]
