"""The package's import graph, built from the source with ``ast``: no cycle, no internal import
of ``polyconv.api``, no import from a lower layer into a higher one.

Layers (DESIGN.md section 1, data flow validate -> plan -> engine -> shape), lowest first; a
module may import its own layer and the ones below.  Imports inside functions count too: a lazy
import is still a dependency.  Cycles: none, neither among module-level imports (they fail at
import time) nor among lazy ones.  Common practice, no source.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "polyconv"

#: Layer of each top-level part of the package (``_atomic`` and ``data`` are leaves).
LAYERS = {"_atomic": 0, "numerics": 0, "engines": 1, "tuning": 2, "pipeline": 3, "algebra": 4,
          "scale": 4, "dist": 5, "cli": 6, "api": 7}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in PACKAGE.rglob("*.py")}


def _imports(name: str, path: Path, known: set[str], lazy: bool = True) -> set[str]:
    """Modules of the package that ``name`` imports (``from x import sub`` counts ``x.sub``);
    with ``lazy=False`` only module-level imports (also under ``if``/``try``, not in functions)."""
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    found = set()
    tree = ast.parse(path.read_text(), str(path))
    nodes = ast.walk(tree) if lazy else _module_level(tree)
    for node in nodes:
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            found.add(target)
            found.update(f"{target}.{alias.name}" for alias in node.names)
    return {m for m in found if m in known and m != name}


def _module_level(tree: ast.Module):
    """Statements run at import: the module body and blocks nested in it, not function bodies."""
    todo = list(tree.body)
    while todo:
        node = todo.pop()
        yield node
        if not isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            todo.extend(c for c in ast.iter_child_nodes(node) if isinstance(c, ast.stmt))
        elif isinstance(node, ast.ClassDef):
            todo.extend(stmt for stmt in node.body
                        if not isinstance(stmt, (ast.FunctionDef, ast.AsyncFunctionDef)))


def _graph(lazy: bool = True) -> dict[str, set[str]]:
    modules = _modules()
    known = set(modules)
    # a package's __init__ is imported with any of its modules: edges to parents are implied,
    # not dependencies of the design, so they are left out
    return {name: {m for m in _imports(name, path, known, lazy) if not name.startswith(m + ".")}
            for name, path in modules.items()}


def _cycles(graph: dict[str, set[str]]) -> list[set[str]]:
    """Strongly connected components with more than one module (Tarjan 1972)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    found: list[set[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = set()
            while True:
                w = stack.pop()
                component.add(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(component)

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def _part(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else ""


def test_graph_sees_the_pipeline():
    graph = _graph()
    assert "polyconv.pipeline.choose" in graph["polyconv.pipeline.prepare"]
    assert "polyconv.engines.registry" in graph["polyconv.pipeline.execute"]


def test_cycle_finder_finds_a_cycle():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [{"a", "b", "c"}]


def test_no_import_cycle_at_import_time():
    assert _cycles(_graph(lazy=False)) == []


def test_no_lazy_import_cycle():
    assert _cycles(_graph()) == []


def test_nothing_inside_imports_api():
    graph = _graph()
    users = sorted(m for m, deps in graph.items() if "polyconv.api" in deps and m != "polyconv")
    assert users == []


def test_no_upward_import():
    graph = _graph()
    upward = []
    for module, deps in graph.items():
        layer = LAYERS.get(_part(module))
        for dep in deps:
            dep_layer = LAYERS.get(_part(dep))
            if layer is not None and dep_layer is not None and dep_layer > layer:
                upward.append(f"{module} -> {dep}")
    assert sorted(upward) == []
