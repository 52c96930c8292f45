"""Write the demo's golden results: ``tests/data/demo_quick_seed1.json``.

``rvkep demo --quick --seed 1`` is deterministic on one machine; the golden file is its
results.json without what changes from run to run (timings, paths, the version), with the
machine that made it under ``_machine``. The test ``tests/outputs/test_golden.py`` compares
a fresh run with it: to 1e-9 on the same kind of machine; elsewhere (another processor's
rounding moves the best fit by about 1e-7 and then the chains apart) the choices, counts and
strings exactly, the best fit to 1e-4 and the posterior summaries within their errors.
Rewrite the file only when a change is meant to alter the numbers, and say in the commit
why they changed.

Usage: ``python scripts/make_golden.py``
"""

from __future__ import annotations

import json
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GOLDEN = ROOT / "tests" / "data" / "demo_quick_seed1.json"
COMMAND = ["demo", "--quick", "--quiet", "--seed", "1"]


def scrub(results: dict) -> dict:
    """The parts of a results.json that the same run on the same machine repeats."""
    out = json.loads(json.dumps(results))
    for key in ("rvkep_version", "timings"):
        out.pop(key, None)
    out.get("sampler", {}).pop("seconds", None)
    prov = out.get("provenance", {})
    prov.pop("command", None)
    prov.get("options", {}).pop("out", None)
    for item in prov.get("inputs", []):
        item["file"] = Path(item["file"]).name
    return out


def machine() -> dict:
    """What decides the rounding of a run: processor, its flags, numpy and numba."""
    import hashlib
    import platform

    import numba
    import numpy

    cpu, flags = platform.processor(), ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            key, _, value = line.partition(":")
            if key.strip() == "model name" and not cpu:
                cpu = value.strip()
            if key.strip() == "flags":
                flags = value.strip()
                break
    except OSError:
        pass
    return {
        "arch": platform.machine(),
        "cpu": cpu,
        "cpu_flags_sha256": hashlib.sha256(flags.encode()).hexdigest()[:16],
        "numpy": numpy.__version__,
        "numba": numba.__version__,
    }


def main() -> int:
    from rvkep.cli import main as rvkep_main

    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "demo"
        code = rvkep_main([*COMMAND, "--out", str(out)])
        if code != 0:
            print(f"rvkep demo failed with exit status {code}", file=sys.stderr)
            return 1
        results = json.loads((out / "results.json").read_text())
    golden = scrub(results) | {"_machine": machine()}
    GOLDEN.write_text(json.dumps(golden, indent=1, sort_keys=True) + "\n")
    print(f"wrote {GOLDEN.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
