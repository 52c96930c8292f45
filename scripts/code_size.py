"""Module and function sizes of the package: the limits DEVELOPERS.md sets.

Prints every module over 600 lines and every function over 60 lines (decorators and
docstrings included, as the source shows them). ``--check`` exits 1 when more modules
than allowed exceed 600 lines or more than five functions exceed 60.

Usage: ``python scripts/code_size.py [--check]``
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "rvkep"
MODULE_LINES = 600
FUNCTION_LINES = 60
MAX_LONG_FUNCTIONS = 5


def sizes() -> tuple[list[tuple[int, str]], list[tuple[int, str]]]:
    """(lines, module) over the module limit and (lines, function) over the function
    limit, each sorted longest first."""
    modules, functions = [], []
    for path in sorted(ROOT.rglob("*.py")):
        text = path.read_text()
        name = str(path.relative_to(ROOT.parent))
        n = len(text.splitlines())
        if n > MODULE_LINES:
            modules.append((n, name))
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
                start = min([node.lineno] + [d.lineno for d in node.decorator_list])
                length = node.end_lineno - start + 1
                if length > FUNCTION_LINES:
                    functions.append((length, f"{name}:{node.lineno} {node.name}"))
    return sorted(modules, reverse=True), sorted(functions, reverse=True)


def main(argv: list[str]) -> int:
    modules, functions = sizes()
    print(f"modules over {MODULE_LINES} lines: {len(modules)}")
    for n, name in modules:
        print(f"  {n:5d}  {name}")
    print(f"functions over {FUNCTION_LINES} lines: {len(functions)}")
    for n, name in functions:
        print(f"  {n:5d}  {name}")
    if "--check" in argv:
        return int(bool(modules) or len(functions) > MAX_LONG_FUNCTIONS)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
