"""The package's modules form layers: no import cycles, counting imports inside functions too.

Every ``import`` of a loschmidt module anywhere in a module's source (module level or inside a
function) is an edge of the graph; ``from . import name`` is an edge to the submodule ``name``, or to
the package (``__init__``) when ``name`` is not a submodule. A cycle in that graph fails the test
with the modules named (Tarjan's strongly connected components; Tarjan 1972, SIAM J. Comput. 1, 146).
"""

from __future__ import annotations

import ast
from pathlib import Path

import loschmidt

ROOT = Path(loschmidt.__file__).parent

#: Compiled modules of the package: leaves of the graph.
EXTENSIONS = {"_core"}


def _modules() -> dict[str, Path]:
    return {p.stem: p for p in ROOT.glob("*.py")}


def import_graph() -> dict[str, set[str]]:
    """Module name -> the loschmidt modules it imports (by its source)."""
    mods = _modules()
    graph: dict[str, set[str]] = {name: set() for name in mods}
    for name, path in mods.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
        for node in ast.walk(tree):
            targets: list[str] = []
            if isinstance(node, ast.ImportFrom):
                if node.level == 0 and (node.module or "").split(".")[0] != "loschmidt":
                    continue
                if node.level > 1:
                    continue
                base = (node.module or "") if node.level == 1 else (node.module or "").partition(".")[2]
                if base:
                    targets.append(base.split(".")[0])
                else:
                    targets.extend(a.name if a.name in mods else "__init__" for a in node.names
                                   if a.name not in EXTENSIONS)
            elif isinstance(node, ast.Import):
                for a in node.names:
                    parts = a.name.split(".")
                    if parts[0] == "loschmidt":
                        targets.append(parts[1] if len(parts) > 1 else "__init__")
            for t in targets:
                if t in mods and t != name:
                    graph[name].add(t)
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components with more than one module (each one holds a cycle)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_the_checker_finds_a_cycle() -> None:
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_cycles() -> None:
    found = cycles(import_graph())
    assert not found, f"import cycles between loschmidt modules: {found}"
