"""No import cycles inside service/: every module can be read, and loaded, after its imports.

The graph holds every import a module makes, at the top or inside a function (a deferred
import hides a cycle from the interpreter, not from a reader), resolved to modules:
``from service.core.data import series`` is an edge to ``service.core.data.series``. Imports
under ``if TYPE_CHECKING:`` name types for annotations only and are left out.
"""

from __future__ import annotations

import ast
from pathlib import Path

from tests.test_layers import ROOT

PACKAGE = ROOT.name


def module_name(path: Path) -> str:
    parts = path.relative_to(ROOT.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def edges(source: str, name: str, is_package: bool, known: set[str]) -> set[str]:
    """The modules of ``known`` that the module ``name`` imports."""
    package = name if is_package else name.rpartition(".")[0]
    found: set[str] = set()
    for node in _runtime_nodes(ast.parse(source)):
        targets: list[str] = []
        if isinstance(node, ast.Import):
            targets = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                parts = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join([*parts, base] if base else parts)
            # "from package import module" imports the module; otherwise the names live in base.
            targets = [f"{base}.{a.name}" for a in node.names if f"{base}.{a.name}" in known]
            targets = targets or [base]
        for target in targets:
            while target and target not in known:
                target = target.rpartition(".")[0]
            if target and target != name:
                found.add(target)
    return found


def _runtime_nodes(tree: ast.AST) -> list[ast.AST]:
    """Every node except the bodies of ``if TYPE_CHECKING:`` blocks."""
    found: list[ast.AST] = []
    pending = [tree]
    while pending:
        node = pending.pop()
        found.append(node)
        if isinstance(node, ast.If) and ast.unparse(node.test).endswith("TYPE_CHECKING"):
            pending.extend(node.orelse)
            continue
        pending.extend(ast.iter_child_nodes(node))
    return found


def import_graph(root: Path = ROOT) -> dict[str, set[str]]:
    paths = {module_name(p): p for p in sorted(root.rglob("*.py"))}
    known = set(paths)
    return {
        name: edges(path.read_text(encoding="utf-8"), name, path.name == "__init__.py", known)
        for name, path in paths.items()
    }


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """One cycle per strongly connected component of more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(node: str) -> None:
        index[node] = low[node] = len(index)
        stack.append(node)
        on_stack.add(node)
        for nxt in sorted(graph.get(node, ())):
            if nxt not in index:
                visit(nxt)
                low[node] = min(low[node], low[nxt])
            elif nxt in on_stack:
                low[node] = min(low[node], index[nxt])
        if low[node] == index[node]:
            component = []
            while True:
                top = stack.pop()
                on_stack.discard(top)
                component.append(top)
                if top == node:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for node in sorted(graph):
        if node not in index:
            visit(node)
    return found


def test_no_import_cycles_inside_the_service() -> None:
    found = cycles(import_graph())
    assert not found, "import cycles (each line one group of mutually importing modules):\n" + (
        "\n".join(" <-> ".join(c) for c in found)
    )


def test_the_graph_sees_imports_and_the_check_finds_a_cycle() -> None:
    graph = import_graph()
    assert len(graph) == len(list(ROOT.rglob("*.py")))
    assert "service.runtime.pool" in graph["service.api.dependencies"]
    known = {"p", "p.a", "p.b", "p.c"}
    a = edges("from p import b\n", "p.a", False, known)
    b = edges("def f():\n    from .c import thing\n", "p.b", False, known)
    c = edges("import p.a\n", "p.c", False, known)
    assert (a, b, c) == ({"p.b"}, {"p.c"}, {"p.a"})
    typing_only = "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from p import b\n"
    assert edges(typing_only, "p.a", False, known) == set()
    assert cycles({"p.a": a, "p.b": b, "p.c": c, "p": set()}) == [["p.a", "p.b", "p.c"]]
    assert cycles({"p.a": {"p.b"}, "p.b": set()}) == []
