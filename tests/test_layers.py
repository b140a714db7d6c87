"""The layers of the code, read from the source with ``ast`` (imports inside functions count).

The rules are the project's own (DESIGN.md, "Layers and where they live"): drivers never import
acquire; nothing below the command line imports it; no two modules import each other, directly
or round a loop; modules stay small; only the command line parses arguments or exits.
"""

from __future__ import annotations

import ast
from functools import cache
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGES = ("acquire", "drivers")
#: Largest module, in lines (DEVELOPERS.md, "Conventions": under about 400 lines).
MAX_LINES = 400
#: Modules that make up the command line: the only ones allowed argparse, exit codes and
#: imports of acquire.commands.
COMMAND_LINE = ("acquire.commands", "acquire.cli", "acquire.__main__")


def module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


@cache
def modules() -> dict[str, Path]:
    """Every module of the project's packages, by dotted name (a package by its own name)."""
    found = {}
    for package in PACKAGES:
        for path in sorted((ROOT / package).rglob("*.py")):
            found[module_name(path)] = path
    return found


def is_package(name: str) -> bool:
    return modules()[name].name == "__init__.py"


def resolve(name: str, target: str | None, level: int, importer: str) -> str:
    """The absolute module a (possibly relative) ``from`` import names."""
    if level == 0:
        return target or ""
    base = importer.split(".")
    if not is_package(importer):
        base = base[:-1]
    base = base[: len(base) - (level - 1)]
    return ".".join(base + ([target] if target else []))


def owner(dotted: str) -> str | None:
    """The project module that ``dotted`` is, or the nearest package that holds it."""
    parts = dotted.split(".")
    while parts:
        candidate = ".".join(parts)
        if candidate in modules():
            return candidate
        parts.pop()
    return None


@cache
def imports(name: str) -> tuple[tuple[str, int], ...]:
    """(imported name, line) for every import in the module, anywhere in its body."""
    tree = ast.parse(modules()[name].read_text(encoding="utf-8"))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(alias.name, node.lineno) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = resolve(name, node.module, node.level, name)
            for alias in node.names:
                sub = f"{base}.{alias.name}"
                # `from pkg import name` where name is a submodule imports that submodule.
                found.append((sub if sub in modules() else base, node.lineno))
    return tuple(found)


def project_edges() -> dict[str, set[str]]:
    """Module -> the project modules it imports (a package import is its __init__)."""
    edges: dict[str, set[str]] = {name: set() for name in modules()}
    for name in modules():
        for target, _ in imports(name):
            dest = owner(target)
            if dest is not None and dest != name:
                edges[name].add(dest)
    return edges


def cycles(edges: dict[str, set[str]]) -> list[list[str]]:
    """The import loops: each strongly connected group of modules, as one loop through it.

    Tarjan's algorithm (Tarjan 1972, "Depth-first search and linear graph algorithms", SIAM J.
    Comput. 1(2)), written iteratively; each group is reported as a shortest loop from its first
    module in sorted order, found breadth-first inside the group.
    """
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups: list[list[str]] = []
    counter = 0
    for root in sorted(edges):
        if root in index:
            continue
        work = [(root, iter(sorted(edges[root])))]
        index[root] = low[root] = counter
        counter += 1
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = counter
                    counter += 1
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(edges[child]))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                group = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    group.append(member)
                    if member == node:
                        break
                if len(group) > 1:
                    groups.append(sorted(group))
    return [loop_through(sorted(g), edges) for g in sorted(groups)]


def loop_through(group: list[str], edges: dict[str, set[str]]) -> list[str]:
    """A shortest loop from ``group[0]`` back to itself inside the group."""
    start, inside = group[0], set(group)
    came_from: dict[str, str] = {}
    frontier = [start]
    while frontier:
        following = []
        for node in frontier:
            for child in sorted(edges[node] & inside):
                if child == start:
                    path = [node]
                    while path[-1] != start:
                        path.append(came_from[path[-1]])
                    return [*reversed(path), start]
                if child not in came_from:
                    came_from[child] = node
                    following.append(child)
        frontier = following
    return group


def in_command_line(name: str) -> bool:
    return any(name == c or name.startswith(c + ".") for c in COMMAND_LINE)


def offences(rule) -> list[str]:
    out = []
    for name in sorted(modules()):
        for target, line in imports(name):
            if rule(name, target):
                out.append(f"{modules()[name].relative_to(ROOT)}:{line} imports {target}")
    return list(dict.fromkeys(out))


def test_the_import_reader_sees_every_kind_of_import(tmp_path):
    # Computed by hand from the source of acquire/commands/sweep.py: its top-level import of
    # acquire.commands.options and its import of acquire.sweep inside run().
    seen = {target for target, _ in imports("acquire.commands.sweep")}
    assert "acquire.commands.options" in seen
    assert "acquire.sweep" in seen
    # `from acquire.compensation import ...` names a package: it imports the package __init__.
    assert owner("acquire.compensation.ReferenceSet") == "acquire.compensation"
    assert owner("numpy") is None


def test_the_loop_finder_finds_loops_and_only_loops():
    # Graphs drawn by hand: a -> b -> c -> a is one loop, d -> e is none, f <-> g is another.
    edges = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"e"}, "e": set(), "f": {"g"}, "g": {"f"}}
    assert cycles(edges) == [["a", "b", "c", "a"], ["f", "g", "f"]]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_drivers_never_import_acquire():
    found = offences(
        lambda name, target: name.startswith("drivers") and target.split(".")[0] == "acquire"
    )
    assert not found, "drivers/ must not import acquire/:\n" + "\n".join(found)


def test_only_the_command_line_imports_the_commands():
    found = offences(
        lambda name, target: (
            name.startswith("acquire")
            and not in_command_line(name)
            and (target == "acquire.commands" or target.startswith("acquire.commands."))
        )
    )
    assert not found, "library code imports the command line:\n" + "\n".join(found)


def test_only_the_command_line_parses_arguments():
    found = offences(
        lambda name, target: target.split(".")[0] == "argparse" and not in_command_line(name)
    )
    assert not found, "argparse outside acquire/commands and acquire/cli.py:\n" + "\n".join(found)


def test_only_the_command_line_exits():
    found = []
    for name, path in sorted(modules().items()):
        if in_command_line(name):
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            call = node.func if isinstance(node, ast.Call) else None
            exits = (
                isinstance(call, ast.Attribute)
                and call.attr == "exit"
                and isinstance(call.value, ast.Name)
                and call.value.id == "sys"
            ) or (isinstance(node, ast.Name) and node.id == "SystemExit")
            if exits:
                found.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    assert not found, "exit codes outside the command line:\n" + "\n".join(found)


def test_no_import_cycles():
    edges = project_edges()
    loops = cycles(edges)
    lines = []
    for loop in loops:
        group = set(loop)
        inside = [f"{a} -> {b}" for a in sorted(group) for b in sorted(edges[a] & group)]
        lines.append(f"{' -> '.join(loop)}   (imports among them: {'; '.join(inside)})")
    assert not loops, f"{len(loops)} import cycle(s):\n" + "\n".join(lines)


@pytest.mark.parametrize("name", sorted(modules()))
def test_modules_stay_small(name):
    lines = len(modules()[name].read_text(encoding="utf-8").splitlines())
    assert lines <= MAX_LINES, f"{modules()[name].relative_to(ROOT)} has {lines} lines"


def dynamic_imports(source: str) -> list[int]:
    """Lines that import by a computed name (``importlib.import_module``, ``__import__``)."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if not isinstance(node, ast.Call):
            continue
        call = node.func
        if (isinstance(call, ast.Attribute) and call.attr == "import_module") or (
            isinstance(call, ast.Name) and call.id in ("import_module", "__import__")
        ):
            found.append(node.lineno)
    return found


def test_the_dynamic_import_reader_sees_both_spellings():
    # Written by hand: three calls that import by a name the reader cannot follow.
    source = (
        "import importlib\nfrom importlib import import_module\n"
        "importlib.import_module('x')\nimport_module('y')\n__import__('z')\n"
    )
    assert dynamic_imports(source) == [3, 4, 5]


def test_only_the_dispatcher_imports_by_a_computed_name():
    # The layer rules above read import statements; an import by a computed name would slip
    # past them, so only the dispatcher (which loads one module per subcommand) may use one.
    found = [
        f"{path.relative_to(ROOT)}:{line}"
        for name, path in sorted(modules().items())
        if name != "acquire.cli"
        for line in dynamic_imports(path.read_text(encoding="utf-8"))
    ]
    assert not found, "imports by a computed name outside acquire/cli.py:\n" + "\n".join(found)
