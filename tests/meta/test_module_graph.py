"""The module graph of qualplan has no import circle, and only the store and planning
build SQL. (The layer contracts themselves are import-linter's: test_layers.py.)"""

from __future__ import annotations

import ast
from pathlib import Path

import grimp

ROOT = Path(__file__).resolve().parents[2] / "qualplan"

#: What a module outside the store and planning may take from SQLAlchemy: the Session
#: type (for annotations), its exceptions (to answer them) and URL parsing (the CLI's
#: --db option). Nothing that builds a statement.
ALLOWED_SQLALCHEMY = {
    ("sqlalchemy.orm", "Session"),
    ("sqlalchemy.exc", "IntegrityError"),
    ("sqlalchemy.exc", "OperationalError"),
    ("sqlalchemy.exc", "DataError"),
    ("sqlalchemy.exc", "StatementError"),
    ("sqlalchemy.orm.exc", "StaleDataError"),
    ("sqlalchemy.engine", "make_url"),
}
SQL_CALLS = {"execute", "scalars", "scalar", "query"}


def _cycles(graph) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan, iterative)."""
    modules = sorted(graph.modules)
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    on_stack: set[str] = set()
    stack: list[str] = []
    out: list[list[str]] = []
    counter = 0
    for root in modules:
        if root in index:
            continue
        work = [(root, iter(sorted(graph.find_modules_directly_imported_by(root))))]
        index[root] = low[root] = counter
        counter += 1
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            for child in children:
                if not child.startswith("qualplan"):
                    continue
                if child not in index:
                    index[child] = low[child] = counter
                    counter += 1
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph.find_modules_directly_imported_by(
                        child)))))
                    break
                if child in on_stack:
                    low[node] = min(low[node], index[child])
            else:
                work.pop()
                if work:
                    parent = work[-1][0]
                    low[parent] = min(low[parent], low[node])
                if low[node] == index[node]:
                    comp = []
                    while True:
                        x = stack.pop()
                        on_stack.discard(x)
                        comp.append(x)
                        if x == node:
                            break
                    if len(comp) > 1:
                        out.append(sorted(comp))
    return out


def test_no_import_circle_inside_qualplan():
    graph = grimp.build_graph("qualplan")
    # A package's __init__ re-exporting its modules is not a circle of use.
    for pkg in [m for m in graph.modules if (ROOT.parent / m.replace(".", "/")).is_dir()]:
        for child in graph.find_modules_directly_imported_by(pkg):
            if child.startswith(pkg + "."):
                graph.remove_import(importer=pkg, imported=child)
    assert _cycles(graph) == []


def test_a_circle_is_found_when_there_is_one():
    # The check above can fail: two modules importing each other form a component.
    graph = grimp.ImportGraph()
    for name in ("qualplan", "qualplan.a", "qualplan.b", "qualplan.c"):
        graph.add_module(name)
    graph.add_import(importer="qualplan.a", imported="qualplan.b")
    graph.add_import(importer="qualplan.b", imported="qualplan.a")
    graph.add_import(importer="qualplan.c", imported="qualplan.a")
    assert _cycles(graph) == [["qualplan.a", "qualplan.b"]]


def _outside_store_and_planning():
    for path in sorted(ROOT.rglob("*.py")):
        rel = path.relative_to(ROOT).parts
        if rel[0] in ("store", "planning"):
            continue
        yield path


def test_only_the_store_and_planning_build_sql():
    offences = []
    for path in _outside_store_and_planning():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                offences += [f"{path}: import {a.name}" for a in node.names
                             if a.name.split(".")[0] == "sqlalchemy"]
            elif isinstance(node, ast.ImportFrom) and (node.module or "").startswith("sqlalchemy"):
                offences += [f"{path}: from {node.module} import {a.name}" for a in node.names
                             if (node.module, a.name) not in ALLOWED_SQLALCHEMY]
            elif (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                  and node.func.attr in SQL_CALLS):
                offences.append(f"{path}:{node.lineno}: .{node.func.attr}(...)")
    assert offences == []
