"""calib's modules import each other without cycles.

A cycle makes the outcome depend on which module is imported first (a name half-defined when the
other module reads it). The check walks the import statements of every module of the package
(module level and inside functions; annotations under ``if TYPE_CHECKING:`` are never executed and
do not count) and looks for strongly connected components (Tarjan 1972); a ``from package import
module`` counts as an import of that module. Each module of a cycle broken before is also imported
alone in a fresh interpreter.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "calib"


def _modules() -> dict[str, Path]:
    out = {}
    for path in PACKAGE.rglob("*.py"):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        out[".".join(parts[:-1] if parts[-1] == "__init__" else parts)] = path
    return out


def _type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or \
        (isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _imports(name: str, path: Path, modules: dict) -> set[str]:
    """calib modules that ``name`` imports when it runs (TYPE_CHECKING blocks left out)."""
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    found: set[str] = set()

    def visit(node) -> None:
        if isinstance(node, ast.If) and _type_checking(node):
            for child in node.orelse:
                visit(child)
            return
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join(anchor + ([node.module] if node.module else []))
            submodules = [f"{base}.{alias.name}" for alias in node.names if f"{base}.{alias.name}" in modules]
            found.update(submodules)
            if len(submodules) < len(node.names):
                found.add(base)
        for child in ast.iter_child_nodes(node):
            visit(child)

    visit(ast.parse(path.read_text(encoding="utf-8")))
    return {module for module in found if module in modules and module != name}


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm, iterative)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    components = []
    for root in sorted(graph):
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = len(index)
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                component = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    component.append(member)
                    if member == node:
                        break
                if len(component) > 1:
                    components.append(sorted(component))
    return components


def test_the_walk_finds_a_cycle_when_there_is_one():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_no_module_of_calib_is_part_of_an_import_cycle():
    modules = _modules()
    graph = {name: _imports(name, path, modules) for name, path in modules.items()}
    assert "calib.problems.lp" in graph["calib.families.lp_random"]  # the walk sees real imports
    assert _cycles(graph) == []


@pytest.mark.parametrize("module", ["calib.problems.lp", "calib.solvers.highs", "calib.sweep.plugins", "calib.sweep.tasks"])
def test_each_module_once_in_a_cycle_imports_alone(module):
    done = subprocess.run([sys.executable, "-c", f"import {module}"], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
