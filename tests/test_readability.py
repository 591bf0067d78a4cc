"""Functions a reader can hold in view: no function or class body of the source runs longer than
``MAX_LINES`` (a screen or two; common practice, no source). Migrations are generated schema
scripts and are left out. A class counts its own body less its methods, which are counted one
by one, so a class of many short methods passes and a long method does not; a class whose own
body is only declarations (typed fields with their comments, as in the options objects) reads
as a table and is not counted."""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
MAX_LINES = 120


def _own_lines(node: ast.AST) -> int:
    assert isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef | ast.ClassDef)
    total = (node.end_lineno or node.lineno) - node.lineno + 1
    if isinstance(node, ast.ClassDef):
        declarations = True
        for child in node.body:
            if isinstance(child, ast.FunctionDef | ast.AsyncFunctionDef | ast.ClassDef):
                total -= (child.end_lineno or child.lineno) - child.lineno + 1
            elif not isinstance(child, ast.AnnAssign | ast.Assign | ast.Expr | ast.Pass):
                declarations = False
        if declarations:
            return 0
    return total


def longest(root: Path) -> list[tuple[int, str]]:
    """(lines, "file:line name") of every function and class, longest first."""
    found = []
    for folder in ("ingest", "analytics", "api"):
        for path in sorted((root / folder).rglob("*.py")):
            if "migrations" in path.parts:
                continue
            tree = ast.parse(path.read_text(encoding="utf-8"))
            for node in ast.walk(tree):
                if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef | ast.ClassDef):
                    where = f"{path.relative_to(root)}:{node.lineno} {node.name}"
                    found.append((_own_lines(node), where))
    return sorted(found, reverse=True)


def test_no_function_or_class_body_is_longer_than_two_screens() -> None:
    too_long = [f"{n} lines: {where}" for n, where in longest(ROOT) if n > MAX_LINES]
    assert too_long == []


def test_the_check_counts_a_long_function_and_a_long_class_body(tmp_path: Path) -> None:
    body = "\n".join(f"    x{i} = {i}" for i in range(MAX_LINES + 5))
    branchy = "\n".join(f"    if x:\n        y{i} = {i}" for i in range(MAX_LINES))
    (tmp_path / "analytics").mkdir()
    (tmp_path / "analytics" / "long.py").write_text(
        f"def f():\n{body}\n\n\nclass Table:\n{body}\n\n\nclass Busy:\n{branchy}\n",
        encoding="utf-8",
    )
    lines = {where.split()[-1]: n for n, where in longest(tmp_path)}
    assert lines == {"f": MAX_LINES + 6, "Busy": 2 * MAX_LINES + 1, "Table": 0}
