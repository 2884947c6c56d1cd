"""The modules of optimiser/ import each other without a cycle.

The graph is read from the source (every ``import`` and ``from ... import`` of an
``optimiser`` module, at module level or inside a function), and every module is
also imported in a fresh interpreter in a random order: a cycle shows there as an
ImportError or an AttributeError of a half-initialised module.
"""

from __future__ import annotations

import ast
import random
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
PKG = ROOT / "optimiser"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(PKG.rglob("*.py"))}


def _targets(name: str, path: Path, known: set[str]) -> set[str]:
    """The optimiser modules ``name`` imports (explicitly; a submodule's import of
    its own parent package is left out, Python runs that one first anyway)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    is_pkg = path.name == "__init__.py"
    here = name.split(".") if is_pkg else name.split(".")[:-1]
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            bases = [a.name for a in node.names]
            cands = bases
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = ".".join(here[:len(here) - node.level + 1] + ([node.module]
                                                                      if node.module else []))
            else:
                base = node.module or ""
            cands = [base] + [f"{base}.{a.name}" for a in node.names]
        else:
            continue
        for c in cands:
            if c in known and c != name and not name.startswith(c + "."):
                out.add(c)
    return out


def _cycle(graph: dict[str, set[str]]) -> list[str] | None:
    colour: dict[str, int] = {}
    stack: list[str] = []

    def visit(n: str) -> list[str] | None:
        colour[n] = 1
        stack.append(n)
        for m in sorted(graph[n]):
            if colour.get(m) == 1:
                return stack[stack.index(m):] + [m]
            if m not in colour:
                found = visit(m)
                if found:
                    return found
        stack.pop()
        colour[n] = 2
        return None

    for n in sorted(graph):
        if n not in colour:
            found = visit(n)
            if found:
                return found
    return None


def test_the_import_graph_of_optimiser_has_no_cycle():
    mods = _modules()
    graph = {n: _targets(n, p, set(mods)) for n, p in mods.items()}
    assert "optimiser.search.tree" in graph and graph["optimiser.search.tree"]
    assert _cycle(graph) is None, " -> ".join(_cycle(graph))


def test_the_cycle_finder_finds_a_cycle():
    # the check above can fail: a graph with a loop is reported as one
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _cycle({"a": {"b"}, "b": set()}) is None


def test_the_search_package_imports_only_at_module_level():
    # imports inside functions hide cycles and cost a lookup per call
    inner = []
    for path in sorted((PKG / "search").glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                inner += [f"{path.name}:{n.lineno}" for n in ast.walk(node)
                          if isinstance(n, (ast.Import, ast.ImportFrom))]
    assert not inner, inner


def test_every_module_imports_in_a_fresh_interpreter_in_a_random_order():
    names = sorted(_modules())
    for seed in (1, 2, 3):
        order = names[:]
        random.Random(seed).shuffle(order)
        code = "import importlib\nfor n in %r:\n    importlib.import_module(n)\n" % order
        run = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True,
                             text=True, timeout=120)
        assert run.returncode == 0, (order, run.stderr[-2000:])
