"""The planning package's layout rules: one module speaks to the solver library,
imports sit at the top of each module, and the package imports without a
cycle."""

from __future__ import annotations

import ast
import importlib
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).parents[2] / "optimiser" / "planning"
MODULES = sorted(p.stem for p in PACKAGE.glob("*.py") if p.stem != "__init__")


def _imports(tree: ast.AST) -> list[tuple[str, ast.AST]]:
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.extend((a.name, node) for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.append((node.module, node))
    return out


def test_the_package_has_the_modules_it_documents():
    assert {"candidates", "model", "results"} <= set(MODULES)


@pytest.mark.parametrize("name", MODULES)
def test_only_the_model_imports_pulp(name):
    tree = ast.parse((PACKAGE / f"{name}.py").read_text(encoding="utf-8"))
    uses = [m for m, _ in _imports(tree) if m.split(".")[0] == "pulp"]
    assert bool(uses) == (name == "model"), uses


@pytest.mark.parametrize("name", MODULES)
def test_no_imports_inside_functions(name):
    tree = ast.parse((PACKAGE / f"{name}.py").read_text(encoding="utf-8"))
    inner = []
    for fn in ast.walk(tree):
        if isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef)):
            inner.extend(f"{m} (line {n.lineno})" for m, n in _imports(fn)
                         if m.split(".")[0] != "highspy")
    assert not inner, inner


def test_the_package_imports_in_a_fresh_interpreter():
    # an import cycle between its modules fails here (a name asked of a
    # half-initialised module), whatever this test session imported before
    root = str(Path(__file__).parents[2])
    r = subprocess.run([sys.executable, "-c", "import optimiser.planning"],
                       cwd=root, capture_output=True, text=True,
                       env={"PYTHONPATH": root, "PATH": ""})
    assert r.returncode == 0, r.stderr


def test_the_package_re_exports_what_it_lists():
    pkg = importlib.import_module("optimiser.planning")
    missing = [n for n in pkg.__all__ if not hasattr(pkg, n)]
    assert not missing
