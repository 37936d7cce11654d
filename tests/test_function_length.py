"""Every function of geo3d fits on a screen: 80 lines at most, docstring included."""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "geo3d"
MAX_LINES = 80  # the project's rule for function length


def _lengths(source: str) -> list[tuple[str, int]]:
    return [
        (node.name, node.end_lineno - node.lineno + 1)
        for node in ast.walk(ast.parse(source))
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef) and node.end_lineno
    ]


def test_no_function_over_80_lines():
    long = [
        f"{path.relative_to(PACKAGE.parent)}:{name} ({length} lines)"
        for path in sorted(PACKAGE.rglob("*.py"))
        for name, length in _lengths(path.read_text(encoding="utf-8"))
        if length > MAX_LINES
    ]
    assert not long, long


def test_the_length_counts_every_line_of_the_function():
    body = "\n".join(f"    x{i} = {i}" for i in range(MAX_LINES))
    assert _lengths(f"def f():\n{body}\n") == [("f", MAX_LINES + 1)]
