"""No god functions in the core: every function of the core layers stays under ~80 lines.

Counted from the first statement after the docstring to the end of the function (AST), so
documentation never counts against a function. The core is the layers that hold the numerics
and their composition (see tests/test_layers.py); edges (formats, io, plot, cli, the service)
are outside this rule but follow it too where they can.
"""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CORE_PACKAGES = {"geo", "physics", "fem", "model", "analyses"}
MAX_LINES = 80


def function_lengths(source: str):
    """(name, first line, length in lines without the docstring) of every function."""
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            first = node.body[0]
            has_doc = (isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant)
                       and isinstance(first.value.value, str))
            start = first.end_lineno + 1 if has_doc and len(node.body) > 1 else node.lineno
            yield node.name, node.lineno, node.end_lineno - start + 1


def core_files():
    pkg = ROOT / "stressmap"
    for path in sorted(pkg.rglob("*.py")):
        parts = path.relative_to(pkg).parts
        if len(parts) == 1 or parts[0] in CORE_PACKAGES:
            yield path


def test_no_core_function_exceeds_the_limit():
    long = [f"{path.relative_to(ROOT)}:{line} {name} ({n} lines)"
            for path in core_files()
            for name, line, n in function_lengths(path.read_text(encoding="utf-8"))
            if n > MAX_LINES]
    assert not long, f"core functions over {MAX_LINES} lines:\n" + "\n".join(long)


def test_the_counter_sees_a_long_function():
    body = "\n".join(f"    x{i} = {i}" for i in range(MAX_LINES + 1))
    source = f'def f():\n    """Doc."""\n{body}\n'
    assert [n for _, _, n in function_lengths(source)] == [MAX_LINES + 1]
