"""calib's modules import each other without cycles, and only downwards through the layers.

A cycle makes the outcome depend on which module is imported first (a name half-defined when the
other module reads it). The check walks the import statements of every module of the package
(module level and inside functions; annotations under ``if TYPE_CHECKING:`` are never executed and
do not count) and looks for strongly connected components (Tarjan 1972); a ``from package import
module`` counts as an import of that module. Each module of a cycle broken before is also imported
alone in a fresh interpreter.

The layer check (docs/layers.md) places every module in one layer of :data:`LAYERS`, lowest first,
by the longest dotted prefix listed; a module may import modules of lower layers and of its own
unit (the prefix that placed it). Between two units of one layer an import is allowed only in the
layers marked open (foundation, problems: small modules of one concept, kept acyclic by the cycle
check); the engine and the analysis never import each other, nor families and reduce, nor one
command module another (the modules the commands share, options and searches, sit in the layer
below them and import no command). The failure message lists every forbidden edge.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "calib"

#: (layer, open: its units may import each other, units), lowest layer first (docs/layers.md)
LAYERS = (
    ("foundation", True, ("calib", "calib.checks", "calib.errors", "calib.keys", "calib.wording", "calib.outputs", "calib.metrics",
                          "calib.features", "calib.spec_problems")),
    ("problems", True, ("calib.problems", "calib.theory")),
    ("projectors", False, ("calib.projectors",)),
    ("solvers", False, ("calib.solvers",)),
    ("families and reduce", False, ("calib.families", "calib.reduce")),
    ("instance files", False, ("calib.instance_io",)),
    ("trial", False, ("calib.trial",)),
    ("store", False, ("calib.store",)),
    ("verdicts", False, ("calib.verdicts",)),
    ("engine and analysis", False, ("calib.sweep", "calib.analysis")),
    ("library answers", False, ("calib.atlas",)),
    ("command support", False, ("calib.commands.options", "calib.commands.searches")),
    ("commands", False, ("calib.commands", "calib.commands.*")),
    ("cli", True, ("calib.cli", "calib.__main__")),
)


def _place(module: str) -> tuple[int, str]:
    """(layer index, unit) of ``module``: the longest unit of :data:`LAYERS` that is it or a package
    above it; ``calib.commands.*`` makes each command module a unit of its own."""
    best = None
    for index, (_, _, units) in enumerate(LAYERS):
        for unit in units:
            if unit.endswith(".*"):
                package = unit[:-2]
                if module.startswith(package + "."):
                    candidate = (len(package) + 1, index, package + "." + module[len(package) + 1:].split(".")[0])
                else:
                    continue
            elif module == unit or module.startswith(unit + "."):
                candidate = (len(unit), index, unit)
            else:
                continue
            if best is None or candidate[0] > best[0]:
                best = candidate
    if best is None:
        raise KeyError(f"{module} has no layer: add it to LAYERS in tests/test_import_graph.py and docs/layers.md")
    return best[1], best[2]


def forbidden_edges(graph: dict[str, set[str]]) -> list[str]:
    """Every import of ``graph`` (module -> modules it imports) that the layer order forbids, as text."""
    found = []
    for module in sorted(graph):
        layer, unit = _place(module)
        for imported in sorted(graph[module]):
            other_layer, other_unit = _place(imported)
            upward = other_layer > layer
            sideways = other_layer == layer and other_unit != unit and not LAYERS[layer][1]
            if upward or sideways:
                found.append(f"{module} ({LAYERS[layer][0]}) -> {imported} ({LAYERS[other_layer][0]})")
    return found


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


def test_the_layer_check_finds_an_upward_and_a_sideways_import():
    graph = {"calib.store.database": {"calib.sweep.spec", "calib.errors"}, "calib.sweep.spec": {"calib.analysis.tables"},
             "calib.commands.tables": {"calib.commands.run", "calib.analysis.tables"}, "calib.commands.run": set(),
             "calib.analysis.tables": {"calib.store.database"}, "calib.errors": set()}
    assert forbidden_edges(graph) == [
        "calib.commands.tables (commands) -> calib.commands.run (commands)",
        "calib.store.database (store) -> calib.sweep.spec (engine and analysis)",
        "calib.sweep.spec (engine and analysis) -> calib.analysis.tables (engine and analysis)"]


def test_commands_may_import_their_shared_modules_which_import_no_command():
    graph = {"calib.commands.tables": {"calib.commands.options", "calib.commands.searches"},
             "calib.commands.options": {"calib.analysis.campaign"}, "calib.commands.searches": {"calib.commands.run"},
             "calib.commands.run": {"calib.commands.searches"}, "calib.analysis.campaign": set()}
    assert forbidden_edges(graph) == ["calib.commands.searches (command support) -> calib.commands.run (commands)"]


def test_every_module_of_calib_has_a_layer():
    unplaced = []
    for name in _modules():
        try:
            _place(name)
        except KeyError:
            unplaced.append(name)
    assert unplaced == [], f"modules with no layer in LAYERS: {unplaced}"


def test_no_module_of_calib_imports_from_a_layer_above_it_or_a_walled_sibling():
    modules = _modules()
    graph = {name: _imports(name, path, modules) for name, path in modules.items()}
    assert "calib.store.database" in graph["calib.sweep.runner"]  # the walk sees real imports
    edges = forbidden_edges(graph)
    assert edges == [], f"{len(edges)} forbidden import(s) (docs/layers.md):\n" + "\n".join(edges)


@pytest.mark.parametrize("module", ["calib.problems.lp", "calib.solvers.highs", "calib.sweep.plugins", "calib.sweep.tasks", "calib.store.database", "calib.verdicts.target", "calib.trial"])
def test_each_module_once_in_a_cycle_imports_alone(module):
    done = subprocess.run([sys.executable, "-c", f"import {module}"], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
