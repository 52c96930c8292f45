"""The demo's numbers do not move under a restructuring.

A fresh ``rvkep demo --quick --seed 1`` is compared with the golden results written by
``scripts/make_golden.py`` (the same run, kept in ``tests/data/demo_quick_seed1.json``).
This is a regression check of rvkep against itself, not a check of correctness: the
demo's recovery of its invented truth is tested in ``test_analyze.py``. A change meant to
alter the numbers rewrites the golden file and says why in its commit.
"""

import importlib.util
import json
import math
from pathlib import Path

from rvkep.cli import main

ROOT = Path(__file__).resolve().parents[2]
GOLDEN = ROOT / "tests" / "data" / "demo_quick_seed1.json"


def _scrub():
    script = ROOT / "scripts" / "make_golden.py"
    spec = importlib.util.spec_from_file_location("make_golden", script)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.scrub


def differences(new, old, path="", rtol=1e-9):
    """Paths where two JSON trees differ (floats within ``rtol`` are equal)."""
    if isinstance(old, dict) and isinstance(new, dict):
        found = [f"{path}.{k}: only in one" for k in sorted(set(old) ^ set(new))]
        for key in sorted(set(old) & set(new)):
            found += differences(new[key], old[key], f"{path}.{key}", rtol)
        return found
    if isinstance(old, list) and isinstance(new, list):
        if len(old) != len(new):
            return [f"{path}: {len(new)} items, golden {len(old)}"]
        pairs = enumerate(zip(new, old, strict=True))
        return [d for i, (a, b) in pairs for d in differences(a, b, f"{path}[{i}]", rtol)]
    numbers = (int, float)
    if isinstance(old, numbers) and isinstance(new, numbers) and not isinstance(old, bool):
        if math.isclose(new, old, rel_tol=rtol, abs_tol=1e-12):
            return []
        return [f"{path}: {new!r}, golden {old!r}"]
    return [] if new == old else [f"{path}: {new!r}, golden {old!r}"]


def test_differences_sees_a_change():
    assert differences({"a": [1.0, 2.0]}, {"a": [1.0, 2.0 + 1e-12]}) == []
    assert differences({"a": [1.0, 2.1]}, {"a": [1.0, 2.0]}) == [".a[1]: 2.1, golden 2.0"]
    assert differences({"a": 1, "b": "x"}, {"a": 1}) == [".b: only in one"]


def test_demo_results_equal_the_golden_file(tmp_path):
    out = tmp_path / "demo"
    assert main(["demo", "--quick", "--quiet", "--seed", "1", "--out", str(out)]) == 0
    new = _scrub()(json.loads((out / "results.json").read_text()))
    old = json.loads(GOLDEN.read_text())
    found = differences(new, old)
    assert not found, f"{len(found)} differences, first: " + "; ".join(found[:5])
