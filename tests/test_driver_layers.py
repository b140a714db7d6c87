"""The drivers package's layers: no import cycle (lazy imports count), protocol below meaning.

Computed: the import graph is read from the source with Python's own ``ast`` module, every
``import`` statement counted wherever it stands (a function-level import that closes a circle
is still a circle).
"""

from __future__ import annotations

import ast
from pathlib import Path

import drivers

ROOT = Path(drivers.__file__).resolve().parent


def _module_name(path: Path) -> str:
    parts = path.relative_to(ROOT.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _absolute(importer: str, path: Path, module: str | None, level: int) -> str:
    """The absolute name a ``from`` import names (``from . import x`` inside drivers too)."""
    if level == 0:
        return module or ""
    base = importer.split(".")
    if path.name != "__init__.py":
        base = base[:-1]
    base = base[: len(base) - (level - 1)]
    return ".".join(base + ([module] if module else []))


def import_graph() -> dict[str, set[str]]:
    """Which ``drivers`` modules each ``drivers`` module imports, anywhere in its source."""
    modules = {_module_name(p): p for p in ROOT.rglob("*.py")}
    graph: dict[str, set[str]] = {name: set() for name in modules}
    for name, path in modules.items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                base = _absolute(name, path, node.module, node.level)
                # ``from package import module`` imports the module (the package is a folder).
                subs = [f"{base}.{a.name}" for a in node.names]
                targets = [s for s in subs if s in modules] or [base]
            graph[name] |= {t for t in targets if t in modules and t != name}
    return graph


def find_cycle(graph: dict[str, set[str]]) -> list[str]:
    """One import circle as a list of modules, or [] (depth-first search, three colours)."""
    colour = dict.fromkeys(graph, 0)
    stack: list[str] = []

    def visit(node: str) -> list[str]:
        colour[node] = 1
        stack.append(node)
        for nxt in sorted(graph[node]):
            if colour[nxt] == 1:
                return stack[stack.index(nxt) :] + [nxt]
            if colour[nxt] == 0 and (found := visit(nxt)):
                return found
        stack.pop()
        colour[node] = 2
        return []

    for node in sorted(graph):
        if colour[node] == 0 and (found := visit(node)):
            return found
    return []


def test_the_cycle_finder_sees_a_lazy_circle():
    assert find_cycle({"a": {"b"}, "b": {"a"}}) == ["a", "b", "a"]
    assert find_cycle({"a": {"b"}, "b": set()}) == []


def test_no_import_cycle_in_drivers():
    assert find_cycle(import_graph()) == []


def test_scpi_knows_nothing_of_readings_or_dialects():
    imported = import_graph()["drivers.scpi"]
    assert not imported & {"drivers.readings", "drivers.dialect", "drivers.meter"}


def test_no_module_over_400_lines():
    long = {p.name: n for p in ROOT.rglob("*.py") if (n := len(p.read_text().splitlines())) > 400}
    assert long == {}


def test_relative_imports_count(tmp_path, monkeypatch):
    # Drawn by hand: a package whose two modules import each other with ``from . import``,
    # one of them inside a function; the reader must see the circle.
    package = tmp_path / "drivers"
    (package / "inner").mkdir(parents=True)
    (package / "__init__.py").write_text("")
    (package / "inner" / "__init__.py").write_text("")
    (package / "a.py").write_text("from . import b\n")
    (package / "b.py").write_text("def f():\n    from .inner import c\n")
    (package / "inner" / "c.py").write_text("from ..a import thing\n")
    monkeypatch.setitem(globals(), "ROOT", package)
    graph = import_graph()
    assert graph["drivers.a"] == {"drivers.b"}
    assert graph["drivers.b"] == {"drivers.inner.c"}
    assert graph["drivers.inner.c"] == {"drivers.a"}
    assert find_cycle(graph) == ["drivers.a", "drivers.b", "drivers.inner.c", "drivers.a"]
