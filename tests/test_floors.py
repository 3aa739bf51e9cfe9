"""The rule of the floors, read from the source: an import only ever points down.

Floors, lowest first:
  errors, config                      settings and the exception tree
  checking, scattering, readers,
  proofs                              pure: values in, values out; no database, clock or terminal
  register                            the only package that imports SQLAlchemy (and Alembic)
  stocktake, labels                   work built on the register's API
  cli, counter, service               faces: they only call the floors below

Every import counts, including imports inside functions and under ``TYPE_CHECKING``: a
lazy import is still a dependency, and a circle through one is still a circle.
"""

from __future__ import annotations

import ast
from importlib import resources
from pathlib import Path

import pytest

PACKAGE_ROOT = Path(str(resources.files("issuer")))

DATABASE_LIBRARIES = {"sqlalchemy", "alembic", "psycopg", "psycopg2"}
TERMINAL_LIBRARIES = {"typer", "click", "rich", "textual"}
WEB_LIBRARIES = {"starlette", "fastapi", "uvicorn", "litestar"}

PURE = {"checking", "scattering", "readers", "proofs"}
FACES = {"cli", "counter", "service"}
MIDDLE = {"stocktake", "labels"}

# What each floor must never import: libraries by top-level name, issuer parts by first part.
FORBIDDEN: dict[str, tuple[set[str], set[str]]] = {
    "pure": (DATABASE_LIBRARIES | TERMINAL_LIBRARIES | WEB_LIBRARIES, {"register", "config"} | MIDDLE | FACES),
    "base": (DATABASE_LIBRARIES | TERMINAL_LIBRARIES | WEB_LIBRARIES, {"register"} | PURE | MIDDLE | FACES),
    "register": (TERMINAL_LIBRARIES | WEB_LIBRARIES, MIDDLE | FACES),
    "middle": (DATABASE_LIBRARIES | TERMINAL_LIBRARIES | WEB_LIBRARIES, FACES),
    "face": (DATABASE_LIBRARIES, set()),
}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE_ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _sources() -> dict[str, Path]:
    found = {}
    for path in PACKAGE_ROOT.rglob("*.py"):
        # migrations and bundled config ship inside the package but are not code floors
        relative = path.relative_to(PACKAGE_ROOT).parts
        if relative[0] in {"migrations", "bundled_config"}:
            continue
        found[_module_name(path)] = path
    return found


SOURCES = _sources()


def _imports(module: str, path: Path) -> set[str]:
    """Every module name this file imports, resolved to our modules where it names one."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    is_package = path.name == "__init__.py"
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = module.split(".")
                anchor = anchor[: len(anchor) - node.level + (1 if is_package else 0)]
                base = ".".join([*anchor, base] if base else anchor)
            names.add(base)
            for alias in node.names:
                candidate = f"{base}.{alias.name}"
                if candidate in SOURCES:
                    names.add(candidate)
    return names


GRAPH = {module: _imports(module, path) for module, path in SOURCES.items()}


def _floor(module: str) -> str:
    parts = module.split(".")
    part = parts[1] if len(parts) > 1 else ""
    if part in PURE:
        return "pure"
    if part in {"errors", "config", "limits", "outputs", ""}:
        return "base"
    if part == "register":
        return "register"
    if part in MIDDLE:
        return "middle"
    if part in FACES or part == "__main__":
        return "face"
    raise AssertionError(f"{module} sits on no floor: add its folder to tests/test_floors.py")


def test_every_module_sits_on_a_floor() -> None:
    assert len(SOURCES) > 40
    for module in SOURCES:
        _floor(module)


@pytest.mark.parametrize("module", sorted(SOURCES))
def test_imports_point_down(module: str) -> None:
    libraries, parts = FORBIDDEN[_floor(module)]
    wrong = []
    for name in sorted(GRAPH[module]):
        top = name.split(".")
        if top[0] in libraries:
            wrong.append(name)
        elif top[0] == "issuer" and len(top) > 1 and top[1] in parts:
            wrong.append(name)
    assert not wrong, f"{module} ({_floor(module)} floor) imports {wrong}"


def test_the_rule_catches_an_upward_import() -> None:
    # the checker itself must see a violation when one is there
    libraries, parts = FORBIDDEN["pure"]
    assert "sqlalchemy" in libraries and "register" in parts
    assert "sqlalchemy" not in FORBIDDEN["register"][0]


def _cycles() -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan)."""
    edges = {m: sorted(n for n in names if n in SOURCES and n != m) for m, names in GRAPH.items()}
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    counter = 0

    def visit(start: str) -> None:
        nonlocal counter
        work = [(start, iter(edges[start]))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            advanced = False
            for child in children:
                if child not in index:
                    index[child] = low[child] = counter
                    counter += 1
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(edges[child])))
                    advanced = True
                    break
                if child in on_stack:
                    low[node] = min(low[node], index[child])
            if advanced:
                continue
            work.pop()
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[node])
            if low[node] == index[node]:
                component = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    component.append(member)
                    if member == node:
                        break
                if len(component) > 1:
                    found.append(sorted(component))

    for module in sorted(edges):
        if module not in index:
            visit(module)
    return found


def test_no_two_modules_import_each_other() -> None:
    assert _cycles() == []
