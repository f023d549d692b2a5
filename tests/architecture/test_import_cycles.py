"""No import circle between the project's modules.

Only imports that run when a module is loaded count (module level, outside
`if TYPE_CHECKING:`). An import inside a function is allowed only where it breaks a real
circle, and then carries a one-line comment saying why (checked below too).
The graph check is Tarjan's strongly connected components (Tarjan 1972, "Depth-first
search and linear graph algorithms", SIAM J. Comput. 1(2)); a component of more than one
module, or a module importing itself, is a circle.
"""

from __future__ import annotations

import ast
import sys
from collections.abc import Iterator
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
PACKAGES = ("shopfloor", "routing")


def _modules() -> dict[str, Path]:
    found: dict[str, Path] = {}
    for package in PACKAGES:
        for path in sorted((ROOT / package).rglob("*.py")):
            parts = path.relative_to(ROOT).with_suffix("").parts
            if "migrations" in parts:
                continue
            if parts[-1] == "__init__":
                parts = parts[:-1]
            found[".".join(parts)] = path
    return found


def _is_type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"
    )


def _load_time_imports(tree: ast.Module) -> Iterator[ast.Import | ast.ImportFrom]:
    """Imports executed when the module loads: module level, also inside if/try blocks."""
    stack: list[ast.stmt] = list(tree.body)
    while stack:
        node = stack.pop()
        if isinstance(node, ast.Import | ast.ImportFrom):
            yield node
        elif isinstance(node, ast.If) and not _is_type_checking(node):
            stack.extend(node.body + node.orelse)
        elif isinstance(node, ast.Try):
            stack.extend(node.body + node.orelse + node.finalbody)
            for handler in node.handlers:
                stack.extend(handler.body)


def _targets(
    node: ast.Import | ast.ImportFrom, module: str, is_package: bool, known: dict[str, Path]
) -> set[str]:
    """The project modules an import statement loads (the named module and its parents)."""
    names: set[str] = set()
    if isinstance(node, ast.Import):
        bases = [alias.name for alias in node.names]
    else:
        base = node.module or ""
        if node.level:
            anchor = module.split(".") if is_package else module.split(".")[:-1]
            anchor = anchor[: len(anchor) - (node.level - 1)]
            base = ".".join([*anchor, base] if base else anchor)
        bases = [base]
        for alias in node.names:  # `from package import module`
            if f"{base}.{alias.name}" in known:
                names.add(f"{base}.{alias.name}")
    for base in bases:
        parts = base.split(".")
        for i in range(1, len(parts) + 1):  # importing a.b.c runs a, a.b and a.b.c
            if ".".join(parts[:i]) in known:
                names.add(".".join(parts[:i]))
    names.discard(module)
    return names


def import_graph() -> dict[str, set[str]]:
    known = _modules()
    graph: dict[str, set[str]] = {}
    for module, path in known.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        is_package = path.name == "__init__.py"
        edges: set[str] = set()
        for node in _load_time_imports(tree):
            edges |= _targets(node, module, is_package, known)
        # a package's own __init__ runs before any of its modules: not an edge back
        graph[module] = {t for t in edges if not module.startswith(t + ".")}
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan, iterative)."""
    sys.setrecursionlimit(max(sys.getrecursionlimit(), 10_000))
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    on_stack: set[str] = set()
    stack: list[str] = []
    found: list[list[str]] = []
    counter = 0

    def visit(v: str) -> None:
        nonlocal counter
        index[v] = low[v] = counter
        counter += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_the_checker_finds_a_circle() -> None:
    # a -> b -> c -> a is one circle; d hangs off it and is not part of it
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert cycles(graph) == [["a", "b", "c"]]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_circle_between_modules() -> None:
    graph = import_graph()
    assert len(graph) > 100  # the walk found the project
    assert cycles(graph) == []


def test_services_never_import_tasks() -> None:
    """Services reach Celery through quality.outbox (by task name), never a tasks module."""
    offenders = []
    for module, path in _modules().items():
        if ".services" not in module and not module.endswith("services"):
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom):
                names = [node.module or "", *(f"{node.module}.{a.name}" for a in node.names)]
            elif isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            else:
                continue
            if any(n.endswith(".tasks") for n in names):
                offenders.append(f"{module}:{node.lineno}")
    assert offenders == []


def _function_imports() -> Iterator[tuple[str, int, list[str]]]:
    """Every import inside a function, with the source lines of its block."""
    for module, path in _modules().items():
        lines = path.read_text(encoding="utf-8").splitlines()
        tree = ast.parse("\n".join(lines), filename=str(path))
        for fn in ast.walk(tree):
            if not isinstance(fn, ast.FunctionDef | ast.AsyncFunctionDef):
                continue
            for node in ast.walk(fn):
                if isinstance(node, ast.Import | ast.ImportFrom):
                    yield module, node.lineno, lines


def _says_why(lineno: int, lines: list[str]) -> bool:
    """A comment on the import's line, or just above its block of imports."""
    if "#" in lines[lineno - 1]:
        return True
    i = lineno - 2
    while i >= 0 and lines[i].strip().startswith(("import ", "from ")):
        i -= 1
    return i >= 0 and lines[i].strip().startswith("#")


def test_every_import_inside_a_function_says_why() -> None:
    silent = [f"{m}:{n}" for m, n, lines in _function_imports() if not _says_why(n, lines)]
    assert silent == []
