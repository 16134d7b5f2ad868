"""The layers above the graph engine stay readable: no function in ``audit/``,
``report/`` or ``bundle/`` runs over 80 lines (a common-practice bound on function
length, no source), so each step of an audit and each section of a page is a function
of its own."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src" / "topoaudit"
LIMIT = 80


def _long_functions(package: str, root: Path = SRC) -> list[str]:
    out = []
    for path in sorted((root / package).rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
                lines = node.end_lineno - node.lineno + 1
                if lines > LIMIT:
                    where = path.relative_to(root).as_posix()
                    out.append(f"{where}:{node.lineno} {node.name} ({lines} lines)")
    return out


@pytest.mark.parametrize("package", ["audit", "report", "bundle"])
def test_no_function_runs_over_80_lines(package):
    assert _long_functions(package) == []


def test_the_check_sees_a_long_function(tmp_path):
    # the control: a function of 81 lines is reported, one of 80 is not
    (tmp_path / "pkg").mkdir()
    for name, n in (("long", LIMIT), ("short", LIMIT - 1)):
        body = "\n".join(f"    x{i} = {i}" for i in range(n))
        (tmp_path / "pkg" / f"{name}.py").write_text(f"def f():\n{body}\n", encoding="utf-8")
    assert _long_functions("pkg", tmp_path) == ["pkg/long.py:1 f (81 lines)"]
