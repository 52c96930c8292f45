"""Module and function sizes of the package: the limits DEVELOPERS.md sets.

Prints every module over 600 lines (everything counted) and every function over 60
lines (decorators, signature, body and comments; its own docstring not counted, so that
numpydoc sections never push code over the limit). ``--check`` exits 1 when more modules
than allowed exceed 600 lines or more than five functions exceed 60.

It also counts the public functions whose docstrings lack numpydoc ``Parameters`` or
``Returns`` (``--docs`` lists them).

Usage: ``python scripts/code_size.py [--check] [--docs]``
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "rvkep"
MODULE_LINES = 600
FUNCTION_LINES = 60
MAX_LONG_FUNCTIONS = 5


def _doc_lines(node: ast.FunctionDef | ast.AsyncFunctionDef) -> int:
    """Lines of the function's own docstring (0 without one)."""
    first = node.body[0]
    is_doc = isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant)
    if is_doc and isinstance(first.value.value, str):
        return first.end_lineno - first.lineno + 1
    return 0


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
                length = node.end_lineno - start + 1 - _doc_lines(node)
                if length > FUNCTION_LINES:
                    functions.append((length, f"{name}:{node.lineno} {node.name}"))
    return sorted(modules, reverse=True), sorted(functions, reverse=True)


def _public_names(tree: ast.Module) -> set[str] | None:
    for node in tree.body:
        if isinstance(node, ast.Assign) and any(getattr(t, "id", None) == "__all__"
                                                for t in node.targets):  # fmt: skip
            try:
                return set(ast.literal_eval(node.value))
            except ValueError:
                return None
    return None


def undocumented() -> list[str]:
    """Public module-level functions (in ``__all__`` where a module has one) whose
    docstring lacks a numpydoc ``Parameters`` section (when they take arguments) or a
    ``Returns`` section (when they return a value)."""
    found = []
    for path in sorted(ROOT.rglob("*.py")):
        tree = ast.parse(path.read_text())
        public = _public_names(tree)
        for node in tree.body:
            if not isinstance(node, ast.FunctionDef) or node.name.startswith("_"):
                continue
            if public is not None and node.name not in public:
                continue
            doc = ast.get_docstring(node) or ""
            args = [a for a in node.args.args + node.args.kwonlyargs if a.arg != "self"]
            returns = any(isinstance(n, ast.Return) and n.value is not None
                          for n in ast.walk(node))  # fmt: skip
            if (args and "Parameters\n" not in doc) or (
                returns and "Returns\n" not in doc and "Yields\n" not in doc
            ):
                found.append(f"{path.relative_to(ROOT.parent)}:{node.lineno} {node.name}")
    return found


def main(argv: list[str]) -> int:
    modules, functions = sizes()
    print(f"modules over {MODULE_LINES} lines: {len(modules)}")
    for n, name in modules:
        print(f"  {n:5d}  {name}")
    print(f"functions over {FUNCTION_LINES} lines: {len(functions)}")
    for n, name in functions:
        print(f"  {n:5d}  {name}")
    missing = undocumented()
    print(f"public functions without numpydoc Parameters/Returns: {len(missing)}")
    if "--docs" in argv:
        for name in missing:
            print(f"  {name}")
    if "--check" in argv:
        return int(bool(modules) or len(functions) > MAX_LONG_FUNCTIONS)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
