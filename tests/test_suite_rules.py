"""Rules the test suite keeps about itself.

Required packages (pyvisa, scikit-rf, psycopg, ...) are dependencies of the project or of its test
extras: a test that skips when one is missing turns a broken install into a green run, so the
suite imports them and fails instead.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

TESTS = Path(__file__).parent


def test_no_test_skips_a_missing_package():
    found = []
    for path in sorted(TESTS.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.Attribute) and node.attr == "importorskip":
                found.append(f"{path.relative_to(TESTS)}:{node.lineno}")
    assert not found, "import the package instead of skipping without it: " + ", ".join(found)


def cites_an_issue(text: str) -> list[int]:
    """Lines that give a tracker's issue as the source of a value ("issue 7", "the issue's")."""
    pattern = re.compile(r"\bissue\s*#?\s*\d+|\bthe issue'?s\b", re.IGNORECASE)
    return [n for n, line in enumerate(text.splitlines(), 1) if pattern.search(line)]


def test_the_issue_reader_sees_the_usual_spellings():
    # Written by hand: three citations and two ordinary uses of the word.
    text = "# Issue 7: L within 1 %\nissue #12\nthe issue's goal\nno issue here\nissues a warning\n"
    assert cites_an_issue(text) == [1, 2, 3]


def test_no_test_or_benchmark_cites_an_issue():
    # Tests and benchmarks name the published source of a value, or say "computed" or "from
    # memory"; an issue of the project's tracker is not a source (DEVELOPERS.md, "Tests").
    found = [
        f"{path.relative_to(TESTS.parent)}:{line}"
        for folder in (TESTS, TESTS.parent / "benchmarks")
        for path in sorted(folder.rglob("*.py"))
        if path != Path(__file__)
        for line in cites_an_issue(path.read_text(encoding="utf-8"))
    ]
    assert not found, "name the source, not the issue: " + ", ".join(found)


def test_every_speed_benchmark_is_run_by_run_all_and_prints_its_goals():
    # benchmarks/run_all.py prints every goal in one table: a benchmark it does not list, or one
    # that prints its goal without goals.report (so run_all cannot read it), would be missed.
    import ast

    folder = TESTS.parent / "benchmarks"
    tree = ast.parse((folder / "run_all.py").read_text(encoding="utf-8"))
    listed = next(
        ast.literal_eval(node.value)
        for node in tree.body
        if isinstance(node, ast.Assign) and getattr(node.targets[0], "id", "") == "BENCHMARKS"
    )
    timed = {p.stem for p in folder.glob("bench_*.py")}
    assert set(listed) == timed
    for name in listed:
        text = (folder / f"{name}.py").read_text(encoding="utf-8")
        assert "report(" in text and "--quick" in text, name
