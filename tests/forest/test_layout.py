"""The package's layout: imports run one way between its parts, and no module imports itself back.

Every import of every module is read from its source (module level and inside functions alike) and resolved
to a module of the package; the test fails on a cycle, or on an import against the direction stated in
DEVELOPERS.md:

    engine <- intake <- analyses <- modelfile <- front door (Forest, load, cross_validated_error)
    engine <- execution <- front door;   modelfile <- export <- front door;   modelfile, plot <- report <- front door;
    the shared leaves (warnings, version, paths) under all of them;
    plot reads the analyses' results; synthetic stands alone.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import forestlab

PACKAGE = Path(forestlab.__file__).parent
LEAVES = {"forestlab._warnings", "forestlab._version", "forestlab._paths"}
FRONT = {"forestlab", "forestlab._forest", "forestlab._members", "forestlab._fitting", "forestlab._load",
         "forestlab._crossval", "forestlab._summary"}

# part -> the parts it may import (its own included)
ALLOWED = {
    "leaf": {"leaf"},
    "engine": {"leaf", "engine"},
    "intake": {"leaf", "engine", "intake"},
    "execution": {"leaf", "engine", "execution"},
    "analyses": {"leaf", "engine", "intake", "analyses"},
    "modelfile": {"leaf", "engine", "intake", "analyses", "modelfile"},
    "export": {"leaf", "engine", "intake", "analyses", "modelfile", "export"},
    "report": {"leaf", "engine", "intake", "analyses", "modelfile", "plot", "report"},
    "front": {"leaf", "engine", "intake", "analyses", "modelfile", "execution", "export", "report", "front"},
    "plot": {"leaf", "engine", "analyses", "plot"},
    "synthetic": {"synthetic"},
}


def module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def part_of(module: str) -> str:
    if module in LEAVES:
        return "leaf"
    if module in FRONT:
        return "front"
    second = module.split(".")[1]
    return second if second in ALLOWED else pytest.fail(f"{module} belongs to no part of the layout")


def imports_of(module: str) -> set[str]:
    """The package's modules that ``module`` imports, anywhere in its source."""
    path = MODULES[module]
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names if alias.name.split(".")[0] == "forestlab")
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            elif node.module and node.module.split(".")[0] == "forestlab":
                target = node.module
            else:
                continue
            for alias in node.names:  # ``from pkg import module`` names a module, otherwise it is pkg itself
                found.add(f"{target}.{alias.name}" if f"{target}.{alias.name}" in MODULES else target)
    return {m for m in found if m in MODULES and m != module}


GRAPH = {m: imports_of(m) for m in MODULES}


def find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import cycle as a list of modules (first = last), or None (depth-first search)."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(m: str) -> list[str] | None:
        state[m] = 1
        stack.append(m)
        for n in sorted(graph[m]):
            if state.get(n) == 1:
                return stack[stack.index(n):] + [n]
            if n not in state and (cycle := visit(n)) is not None:
                return cycle
        stack.pop()
        state[m] = 2
        return None

    for m in sorted(graph):
        if m not in state and (cycle := visit(m)) is not None:
            return cycle
    return None


def test_the_walk_sees_every_part_and_the_known_imports():
    assert {part_of(m) for m in MODULES} == set(ALLOWED)
    assert "forestlab.engine.grow" in GRAPH["forestlab.engine.search"] or \
        "forestlab.engine.search" in GRAPH["forestlab.engine.grow"]
    assert "forestlab.analyses.view" in GRAPH["forestlab.analyses.importance"]
    assert "forestlab.execution.shared" in GRAPH["forestlab.execution.parallel"]  # ``from . import shared``


def test_no_import_cycle():
    assert find_cycle(GRAPH) is None, " -> ".join(find_cycle(GRAPH))


def test_the_cycle_finder_finds_a_cycle():
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": set()}) == ["a", "b", "c", "a"]
    assert find_cycle({"a": {"b"}, "b": set()}) is None


@pytest.mark.parametrize("module", sorted(MODULES))
def test_imports_run_one_way(module):
    against = sorted(m for m in GRAPH[module] if part_of(m) not in ALLOWED[part_of(module)])
    assert not against, f"{module} ({part_of(module)}) imports {against}, against the direction of the layout"


def test_analyses_read_the_view_not_forest_internals():
    """No analysis touches a private attribute of the forest it is given (``forest._...``)."""
    for module, path in MODULES.items():
        if part_of(module) != "analyses":
            continue
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) and node.value.id == "forest":
                assert not node.attr.startswith("_"), f"{module} reads forest.{node.attr}"


def test_front_door_class_is_thin():
    """The Forest class body stays short (aim of the layout: under 250 lines, its docstring included)."""
    tree = ast.parse(MODULES["forestlab._forest"].read_text())
    body = next(node for node in tree.body if isinstance(node, ast.ClassDef) and node.name == "Forest")
    assert body.end_lineno - body.lineno + 1 < 300


@pytest.mark.parametrize("module", sorted(MODULES))
def test_modules_stay_short(module):
    assert len(MODULES[module].read_text().splitlines()) <= 350, f"{module} is over 350 lines; split it by idea"
