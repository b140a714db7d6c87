"""Rules the test suite keeps about itself.

Required packages (pyvisa, scikit-rf, psycopg, ...) are dependencies of the project or of its test
extras: a test that skips when one is missing turns a broken install into a green run, so the
suite imports them and fails instead.
"""

from __future__ import annotations

import ast
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
