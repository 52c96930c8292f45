"""The size limits DEVELOPERS.md sets hold: no module over 600 lines and at most five
functions over 60 (``scripts/code_size.py --check``; common practice, no source)."""

import importlib.util
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _script():
    spec = importlib.util.spec_from_file_location("code_size", ROOT / "scripts" / "code_size.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_no_module_over_the_limit_and_few_long_functions():
    modules, functions = _script().sizes()
    assert modules == [], f"modules over 600 lines: {modules}"
    assert len(functions) <= 5, f"{len(functions)} functions over 60 lines: {functions}"


def test_every_public_function_has_numpydoc_sections():
    missing = _script().undocumented()
    assert missing == [], missing[:10]


def test_the_docstring_scan_sees_a_missing_section(tmp_path, monkeypatch):
    module = _script()
    (tmp_path / "m.py").write_text(
        'def f(x):\n    """Doc.\n\n    Parameters\n    ----------\n    x : int\n        X.\n'
        '    """\n    return x\n\n\ndef g():\n    """Doc."""\n'
    )
    monkeypatch.setattr(module, "ROOT", tmp_path)
    assert [n.split("/")[-1] for n in module.undocumented()] == ["m.py:1 f"]


def test_the_count_sees_a_long_function(tmp_path, monkeypatch):
    module = _script()
    (tmp_path / "long.py").write_text("def f():\n" + "    x = 1\n" * 70)
    monkeypatch.setattr(module, "ROOT", tmp_path)
    modules, functions = module.sizes()
    assert modules == []
    assert [(n, name.split("/")[-1]) for n, name in functions] == [(71, "long.py:1 f")]
